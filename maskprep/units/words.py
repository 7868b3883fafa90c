"""Words learnt from the corpus itself (``--words cohesion``), for scripts without spaces.

`learn_words` counts the character n-grams (n = 1..4) inside runs of CJK or
Thai characters of (the first `sample_chars` characters of) a corpus, scores
every n-gram of 2+ characters with the PMI of `maskprep.units.cohesion`
(minimum over its segmentations, nats) and keeps those seen at least
`min_count` times with a score of at least `min_score` as the word
vocabulary, best first, at most `top`.

The runs are then cut into these words by
`maskprep.tokenizer.lexicon.segment_with_lexicon` (the pmi strategy's
dynamic programme over characters).

Characters outside the Basic Multilingual Plane are left to the tokenizer's
words (keys pack four 16-bit characters into 64 bits).
"""

from __future__ import annotations

from typing import Any, Sequence

import numpy as np

from ..errors import MaskprepError
from ..wording import name_files
from ..tokenizer.words import OTHER, WordsConfig, code_points, script_classes, words_option

__all__ = ["learn_words", "resolve_words", "MAX_LEN"]

MAX_LEN = 4          # longest learnt word, in characters
_U64 = np.uint64


def resolve_words(definition: Any, corpus: Sequence[str], *, corpus_options: Any = None,
                  quiet: bool = False) -> WordsConfig:
    """The `WordsConfig` of a ``--words`` value (``cohesion`` first learns words from `corpus`)."""
    if isinstance(definition, WordsConfig):
        return definition
    if str(definition or "tokenizer").strip().lower() == "cohesion":
        from ..encoded.format import is_encoded_dir

        if any(is_encoded_dir(c) for c in corpus):
            raise MaskprepError(
                "--words cohesion: learns its words from the raw text; give the corpus files "
                "rather than an encoded directory"
            )
        return learn_words(corpus, corpus_options=corpus_options, quiet=quiet)
    return words_option(definition)


def _script_chars(codes: np.ndarray) -> np.ndarray:
    return (script_classes(codes) != OTHER) & (codes < 0x10000)


def learn_words(
    corpus: Sequence[str],
    *,
    corpus_options: Any = None,
    sample_chars: int = 50_000_000,
    min_count: int = 5,
    min_score: float = 2.0,
    top: int = 200_000,
    quiet: bool = False,
) -> WordsConfig:
    """Learn a word vocabulary from character n-gram cohesion: ``learn_words(["zh.txt"])``.

    Deterministic: the same corpus and options give the same words (the first
    `sample_chars` characters in corpus order are read).
    """
    from ..corpus.reader import CorpusOptions, iter_corpus, resolve_inputs
    from ..progress import Progress
    from .cohesion import score_ngrams

    files = resolve_inputs(list(corpus))
    tables: list[dict[int, tuple[np.ndarray, np.ndarray]]] = []
    pending: list[str] = []
    pending_chars = seen = 0
    with Progress(
        "learn words", total=float(sample_chars), unit="characters", quiet=quiet
    ) as progress:
        for text in iter_corpus([str(f) for f in files], corpus_options or CorpusOptions()):
            pending.append(text)
            pending_chars += len(text)
            if pending_chars >= 1 << 20:
                tables.append(_count_chars("\n".join(pending)))
                progress.advance(pending_chars)
                seen += pending_chars
                pending, pending_chars = [], 0
                if seen >= sample_chars:
                    break
                if len(tables) >= 8:
                    tables = [_merge(tables)]
        if pending:
            tables.append(_count_chars("\n".join(pending)))
            progress.advance(pending_chars)
    counts = _merge(tables) if tables else {}
    if 1 not in counts or len(counts[1][0]) == 0:
        raise MaskprepError(
            f"--words cohesion: {name_files(corpus)} has no CJK or Thai characters "
            "to learn words from; use --words tokenizer"
        )
    N = int(counts[1][1].sum())
    index = {k: (_unpack(counts[k][0], k), counts[k][1]) for k in counts}
    words: list[tuple[float, int, str]] = []
    for n in range(2, MAX_LEN + 1):
        if n not in counts:
            continue
        keys, c = index[n]
        keep = c >= min_count
        if not keep.any():
            continue
        keys, c = keys[keep], c[keep]
        score = score_ngrams("pmi", n=n, keys=keys, counts=c,
                             tables={k: index[k] for k in range(1, n)}, N=N)
        good = np.flatnonzero(score >= min_score)
        texts = _texts(keys[good])
        words.extend(zip((-score[good]).tolist(), (-c[good]).tolist(), texts))
    words.sort()
    words = words[:top]
    return WordsConfig("cohesion", lexicon=tuple(w for _s, _c, w in words),
                       scores=tuple(round(-s, 6) for s, _c, _w in words))


def _count_chars(text: str) -> dict[int, tuple[np.ndarray, np.ndarray]]:
    """Character n-gram counts inside script runs: {n: (packed keys uint64, counts int64)}."""
    codes = code_points(text)
    ok = _script_chars(codes)
    c = codes.astype(_U64)
    # characters left in the run from each position
    idx = np.arange(len(ok) + 1, dtype=np.int64)
    stop = np.where(np.append(ok, False), len(ok) + 1, idx)
    left = np.minimum.accumulate(stop[::-1])[::-1][:-1] - idx[:-1]
    out = {}
    packed = np.zeros(len(c), _U64)
    for n in range(1, MAX_LEN + 1):
        if len(c) < n:
            break
        packed = packed[: len(c) - n + 1] << _U64(16) | c[n - 1:] if n > 1 else c.copy()
        sel = left[: len(packed)] >= n
        keys, cnt = np.unique(packed[sel], return_counts=True)
        out[n] = (keys, cnt.astype(np.int64))
    return out


def _merge(
    tables: list[dict[int, tuple[np.ndarray, np.ndarray]]],
) -> dict[int, tuple[np.ndarray, np.ndarray]]:
    out = {}
    for n in sorted({n for t in tables for n in t}):
        keys = np.concatenate([t[n][0] for t in tables if n in t])
        cnt = np.concatenate([t[n][1] for t in tables if n in t])
        uniq, inv = np.unique(keys, return_inverse=True)
        out[n] = (uniq, np.bincount(inv, weights=cnt, minlength=len(uniq)).astype(np.int64))
    return out


def _unpack(packed: np.ndarray, n: int) -> np.ndarray:
    """Packed keys (16 bits per character, first character highest) -> (m, n) uint64 code points."""
    cols = [(packed >> _U64(16 * (n - 1 - i))) & _U64(0xFFFF) for i in range(n)]
    return np.stack(cols, axis=1).astype(_U64)


def _texts(keys: np.ndarray) -> list[str]:
    if len(keys) == 0:
        return []
    arr = np.ascontiguousarray(keys.astype(np.uint32))
    flat = arr.tobytes().decode("utf-32-le")
    n = keys.shape[1]
    return [flat[i:i + n] for i in range(0, len(flat), n)]

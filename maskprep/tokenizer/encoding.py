"""Load and save tokenizers and encode documents into flat numpy arrays.

`load_tokenizer` reads any `tokenizer.json` of the `tokenizers` library and
finds its special tokens (padding, unknown, sequence start, separator, mask);
`save_tokenizer` writes one back. `encode_documents` runs the library's
parallel batch encoder and returns an `EncodedBatch`.

Words come from the tokenizer's own pre-tokenization (`Encoding.word_ids`),
never from guessing at strings, so grouping is right for continuation
prefixes (WordPiece `##`), byte-level space markers (`Ġ`) and metaspace
markers (`▁`) alike. One exception, exact by construction: for a WordPiece
model behind the BERT pre-tokenizer, a token starts a word exactly when it
does not carry the continuation prefix (`TokenizerInfo.word_start_table`),
so such tokenizers run the library's faster encoder, which keeps no word ids
or offsets. Each distinct word is decoded once per process to its canonical
text, which gives its kind (word / punctuation / whitespace) and its 64-bit
content key (see `maskprep.tokenizer.grouping`).

It does not train tokenizers (see train.py), pack sequences or add special
tokens (see packing.py).
"""

from __future__ import annotations

import copy
import dataclasses
import hashlib
import itertools
import json
import os
from pathlib import Path
from typing import Any, Iterable, Iterator

import numpy as np

from ..errors import MaskprepError
from ..execute import ENCODE_AHEAD_ENV, default_workers
from .grouping import (
    PUNCT,
    SPACE,
    SPECIAL,
    WORD,
    EncodedBatch,
    WordGroups,
    WordType,
    WordTypeCache,
    group_tokens,
    starts_from_word_ids,
    unique_rows,
)
from .spec import find_roles, model_max_length, word_start_table
from .words import WordsConfig, word_ids_by_offsets

__all__ = [
    "WORD",
    "PUNCT",
    "SPACE",
    "SPECIAL",
    "EncodedBatch",
    "WordGroups",
    "WordType",
    "TokenizerInfo",
    "encode_documents",
    "encode_grouped",
    "encode_stream",
    "set_encode_ahead",
    "group_words",
    "unique_rows",
    "tally_literal_specials",
    "tally_special_ids",
    "warn_literal_specials",
    "load_tokenizer",
    "tokenizer_from_json",
    "shared_tokenizer",
    "save_tokenizer",
]

class TokenizerInfo:
    """A loaded tokenizer with its special tokens, hash and word-type cache.

    >>> info = load_tokenizer("tokenizer.json")  # doctest: +SKIP
    >>> info.mask_id  # doctest: +SKIP
    4
    """

    def __init__(self, tokenizer: Any, *, name: str = "tokenizer",
                 path: str | None = None) -> None:
        self.tokenizer = tokenizer
        self.name = name
        self.path = path
        self.json = tokenizer.to_str()
        spec = json.loads(self.json)
        # Hash a canonical form: key order in the library's JSON is not stable across save/load.
        canonical = json.dumps(spec, sort_keys=True, ensure_ascii=False, separators=(",", ":"))
        self.hash = hashlib.sha256(canonical.encode("utf-8")).hexdigest()
        self.vocab_size = tokenizer.get_vocab_size(with_added_tokens=True)
        self.roles = find_roles(tokenizer, spec)
        added = list(tokenizer.get_added_tokens_decoder().values())
        ids = [tokenizer.token_to_id(t.content) for t in added if t.special]
        self.special_ids = np.array(
            sorted(
                {i for i in ids if i is not None}
                | {v for v in self.roles.values() if v is not None}
            ),
            dtype=np.int32,
        )
        self.max_length = model_max_length(spec)
        self.types = WordTypeCache(self.vocab_size, self.special_ids, self.canonical_texts)
        self._starts: np.ndarray | None = word_start_table(tokenizer, spec, added)

    # Roles -------------------------------------------------------------
    @property
    def pad_id(self) -> int | None:
        return self.roles.get("pad")

    @property
    def unk_id(self) -> int | None:
        return self.roles.get("unk")

    @property
    def cls_id(self) -> int | None:
        return self.roles.get("cls")

    @property
    def sep_id(self) -> int | None:
        return self.roles.get("sep")

    @property
    def mask_id(self) -> int | None:
        return self.roles.get("mask")

    def require_mask(self) -> int:
        if self.mask_id is None:
            raise MaskprepError(
                f"{self.name}: tokenizer has no mask token; add one as a special token "
                "(e.g. tok.add_special_tokens(['[MASK]']) with the tokenizers library, then save) "
                "or train one with maskprep train-tokenizer")
        return self.mask_id

    def normal_ids(self) -> np.ndarray:
        """All non-special token ids (candidates for random replacement)."""
        ids = np.arange(self.vocab_size, dtype=np.int32)
        return ids[~np.isin(ids, self.special_ids)]

    def describe(self) -> dict[str, Any]:
        return {"name": self.name, "hash": self.hash, "vocab_size": self.vocab_size,
                "special_tokens": {r: (self.tokenizer.id_to_token(i) if i is not None else None)
                                   for r, i in self.roles.items()}}

    @property
    def word_start_table(self) -> np.ndarray | None:
        """Bool [vocab]: does this token start a word? None unless that is exact for the tokenizer.

        Exact for a WordPiece model behind the BERT pre-tokenizer whose continuation prefix
        has two or more characters and starts with ASCII punctuation (which that
        pre-tokenizer cuts off as a word of its own, so no word starts with the prefix),
        when no added token starts with the prefix: the model writes the prefix on every
        token of a word but the first, and a word it cannot split is one unknown token.
        """
        return self._starts

    # Encoding ------------------------------------------------------------
    def encode(self, texts: list[str]) -> EncodedBatch:
        """Encode documents: ``info.encode(["A first text.", "Another."])``."""
        return encode_documents(self, texts)

    def word_type(self, key_row: bytes, ids: list[int]) -> WordType:
        t = self.types.entries.get(key_row)
        if t is None:
            t = self.types.add([key_row], [ids])[0]
        return t

    def word_types(self) -> list[WordType]:
        """The word forms decoded so far in this process (a bounded cache: it may miss some)."""
        return list(self.types.entries.values())

    @property
    def _types(self) -> dict[bytes, WordType]:
        return self.types.entries

    @property
    def word_type_count(self) -> int:
        """How many word forms the cache holds; it only grows, until the cache is cleared."""
        return len(self.types)

    def newest_word_types(self, count: int) -> Iterator[WordType]:
        """The `count` word forms added to the cache last, newest first (one step per form)."""
        return self.types.newest(count)

    def canonical_texts(self, id_lists: list[list[int]], *, joined: bool = False) -> list[str]:
        """The canonical text of words given as token ids: decoded, whitespace stripped.

        `joined` (words of a segmenter): all whitespace is removed, since such a
        word never holds any, while decoders may put spaces between its tokens
        (WordPiece writes a space between two CJK characters).
        """
        texts = self.tokenizer.decode_batch(id_lists, skip_special_tokens=False)
        if joined:
            return ["".join(t.split()) for t in texts]
        return [t.strip() for t in texts]


def encode_documents(
    info: TokenizerInfo, texts: list[str], words: WordsConfig | None = None
) -> EncodedBatch:
    """Encode a batch of documents with the tokenizer's parallel batch API.

    `words` chooses the word definition (default: the tokenizer's own words).

    >>> b = encode_documents(info, ["New words, old words."])  # doctest: +SKIP
    >>> b.num_words  # doctest: +SKIP
    5
    """
    return _from_encodings(info, _run(info, texts, words), texts, words)[0]


def set_encode_ahead(enabled: bool) -> None:
    """Turn the look-ahead thread of `encode_stream` on or off for this process.

    Off in pool and Dask workers (`execute` says so through the environment variable
    ``MASKPREP_ENCODE_AHEAD=0``), where other processes already keep every core busy:
    there the helper thread only adds contention (measured with
    ``scripts/bench_workers.py``: about 8% more CPU and 3x the system time).
    """
    os.environ[ENCODE_AHEAD_ENV] = "1" if enabled else "0"


def encode_stream(info: TokenizerInfo, batches: Iterable[list[str]],
                  words: WordsConfig | None = None, *, stats: Any = None) -> Iterator[EncodedBatch]:
    """Encode batches of documents, encoding the next batch while this one is grouped.

    `words` chooses the word definition (default: the tokenizer's own words).

    The tokenizer releases the GIL while it encodes, so one batch of look-ahead
    in a helper thread overlaps its work with the numpy grouping here (unless
    `set_encode_ahead(False)`, or this process may use only one core).

    With `stats` (a `ReadStats`), literal special-token strings met in the text
    ("[MASK]" written in a document, which the tokenizer reads as the special
    token) are counted by string in ``stats.literal_specials``.

    >>> sum(b.num_words for b in encode_stream(info, iter_batches(task)))  # doctest: +SKIP
    120345
    """
    for batch, _ in encode_grouped(info, batches, words):
        if stats is not None:
            tally_literal_specials(info, batch, stats.literal_specials)
        yield batch


def encode_grouped(info: TokenizerInfo, batches: Iterable[list[str]],
                   words: WordsConfig | None = None
                   ) -> Iterator[tuple[EncodedBatch, WordGroups]]:
    """`encode_stream` that also yields each batch's distinct words (`WordGroups`)."""
    from concurrent.futures import ThreadPoolExecutor

    it = iter(batches)
    if os.environ.get(ENCODE_AHEAD_ENV) == "0" or default_workers() < 2:
        for texts in it:
            yield _from_encodings(info, _run(info, texts, words), texts, words)
        return
    with ThreadPoolExecutor(max_workers=1) as pool:
        first = next(it, None)
        if first is None:
            return
        pending, pending_texts = pool.submit(_run, info, first, words), first
        for texts in it:
            encs, done_texts = pending.result(), pending_texts
            pending, pending_texts = pool.submit(_run, info, texts, words), texts
            yield _from_encodings(info, encs, done_texts, words)
        yield _from_encodings(info, pending.result(), pending_texts, words)


def tally_literal_specials(info: TokenizerInfo, batch: EncodedBatch,
                           into: dict[str, int]) -> None:
    """Add the batch's special-token words to `into`.

    All are literal: no special tokens are added when encoding.
    """
    special = batch.word_kinds == SPECIAL
    if special.any():
        tally_special_ids(info, batch.ids[batch.word_offsets[:-1][special]], into)


def tally_special_ids(info: TokenizerInfo, ids: np.ndarray, into: dict[str, int]) -> None:
    """Add special-token words, given by their token ids (one per word), to `into` by string."""
    uniq, counts = np.unique(ids, return_counts=True)
    for i, n in zip(uniq.tolist(), counts.tolist()):
        s = info.tokenizer.id_to_token(int(i))
        into[s] = into.get(s, 0) + int(n)


_WARNED: set[tuple[str, ...]] = set()


def warn_literal_specials(info: TokenizerInfo, counts: dict[str, int], corpus: str) -> None:
    """One line on stderr if the corpus text held special-token strings.

    Once per process for the same special tokens (a pipeline reads the corpus several times).
    """
    if not counts:
        return
    key = tuple(
        sorted(t.content for t in info.tokenizer.get_added_tokens_decoder().values() if t.special)
    )
    if key in _WARNED:
        return
    _WARNED.add(key)
    import sys

    total = sum(counts.values())
    each = ", ".join(
        f"{s} x{n:,}" for s, n in sorted(counts.items(), key=lambda kv: (-kv[1], kv[0]))
    )
    sys.stderr.write(
        f"warning: {corpus}: the text holds {total:,} literal special-token "
        f"string{'' if total == 1 else 's'} ({each}); tokenizer {info.name} reads each as its "
        "special token (never counted or masked as a word). Remove or escape them in the corpus "
        "if they are meant as text.\n"
    )
    sys.stderr.flush()


def _fast(info: TokenizerInfo, words: WordsConfig | None) -> bool:
    """Can word starts come from the token ids alone (no word ids, no offsets)?"""
    return info.word_start_table is not None and (words is None or words.is_tokenizer)


def _run(info: TokenizerInfo, texts: list[str], words: WordsConfig | None) -> list[Any]:
    """The library's encodings of `texts` (no offsets or word ids where they are not needed)."""
    if _fast(info, words):
        encs = info.tokenizer.encode_batch_fast(texts, add_special_tokens=False)
    else:
        encs = info.tokenizer.encode_batch(texts, add_special_tokens=False)
    return list(encs)


def _from_encodings(info: TokenizerInfo, encs: list[Any], texts: list[str] | None = None,
                    words: WordsConfig | None = None) -> tuple[EncodedBatch, WordGroups]:
    lens = np.fromiter(map(len, encs), dtype=np.int64, count=len(encs))
    total = int(lens.sum())
    ids = np.fromiter(
        itertools.chain.from_iterable(e.ids for e in encs), dtype=np.int32, count=total
    )
    tok_doc = np.zeros(len(encs) + 1, dtype=np.int64)
    np.cumsum(lens, out=tok_doc[1:])
    if _fast(info, words):
        table = info.word_start_table
        assert table is not None
        return group_tokens(info.types, ids, table[ids], tok_doc)
    try:
        wid = np.fromiter(
            itertools.chain.from_iterable(e.word_ids for e in encs), dtype=np.int64, count=total
        )
    except TypeError:  # special tokens inside the text have no word id
        wid = np.array([-1 if w is None else w for e in encs for w in e.word_ids], dtype=np.int64)
    if words is None or words.is_tokenizer:
        return group_tokens(info.types, ids, starts_from_word_ids(wid), tok_doc)
    if texts is None:
        raise ValueError("word definitions other than the tokenizer's need the documents' texts")
    offsets = np.fromiter(
        itertools.chain.from_iterable(itertools.chain.from_iterable(e.offsets for e in encs)),
        dtype=np.int64,
        count=2 * total,
    ).reshape(total, 2)
    wid, crossing = word_ids_by_offsets(texts, offsets, tok_doc, wid, words)
    batch, groups = group_tokens(info.types, ids, starts_from_word_ids(wid), tok_doc, joined=True)
    return dataclasses.replace(batch, crossing_tokens=crossing), groups


def group_words(info: TokenizerInfo, ids: np.ndarray, word_ids: np.ndarray,
                token_doc_offsets: np.ndarray, *, joined: bool = False) -> EncodedBatch:
    """Group tokens into words from per-document word ids (-1: none); look up word types.

    See `maskprep.tokenizer.grouping.group_tokens`. `joined`: words of a segmenter.
    """
    starts = starts_from_word_ids(word_ids)
    return group_tokens(info.types, ids, starts, token_doc_offsets, joined=joined)[0]


# ---------------------------------------------------------------- loading

def load_tokenizer(path: str | Path, *, name: str | None = None) -> TokenizerInfo:
    """Load a `tokenizer.json`: ``info = load_tokenizer("tokenizer.json")``."""
    from tokenizers import Tokenizer

    p = Path(path)
    if not p.exists():
        raise MaskprepError(f"{path}: tokenizer file not found")
    if p.is_dir():
        if (p / "tokenizer.json").is_file():
            p = p / "tokenizer.json"
        else:
            raise MaskprepError(f"{path}: is a directory without a tokenizer.json")
    try:
        raw = p.read_text(encoding="utf-8")
        json.loads(raw)
    except UnicodeDecodeError:
        raise MaskprepError(f"{path}: not a tokenizer.json (not UTF-8 text)") from None
    except json.JSONDecodeError as exc:
        raise MaskprepError(
            f"{path}: not a valid tokenizer.json (bad JSON at line {exc.lineno}: {exc.msg})"
        ) from None
    except OSError as exc:
        raise MaskprepError(f"{path}: cannot read tokenizer ({exc.strerror or exc})") from None
    spec = json.loads(raw)
    if not isinstance(spec, dict) or not isinstance(spec.get("model"), dict):
        kind = (
            type(spec).__name__ if not isinstance(spec, dict) else "an object without a 'model' key"
        )
        from .checks import json_kind

        hint = json_kind(spec)
        raise MaskprepError(
            f"{path}: valid JSON but not a tokenizer.json ({kind}{hint}); give the "
            "tokenizer.json written by maskprep train-tokenizer or the tokenizers library"
        )
    try:
        tok = Tokenizer.from_str(raw)
    except Exception as exc:
        msg = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        raise MaskprepError(f"{path}: not a valid tokenizer.json ({msg})") from None
    from .checks import check_unknown_token

    check_unknown_token(spec, path)
    if name is None:
        name = p.parent.name if p.name == "tokenizer.json" and p.parent.name else p.stem
    return TokenizerInfo(tok, name=name, path=str(p))


# Tokenizers this process has parsed, by their JSON: parsing one costs about 10 ms, which a
# stage of many small tasks (a directory of small files) would otherwise pay in every task.
_PARSED: dict[str, TokenizerInfo] = {}


def tokenizer_from_json(text: str, *, name: str = "tokenizer") -> TokenizerInfo:
    """Rebuild a `TokenizerInfo` from its JSON (used to ship tokenizers to workers).

    Each call returns its own object with an empty word-type cache; the parsed tokenizer
    underneath is shared within the process (nothing here changes a loaded tokenizer).
    """
    proto = _PARSED.get(text)
    if proto is None:
        from tokenizers import Tokenizer

        if len(_PARSED) >= 4:
            _PARSED.clear()
        proto = _PARSED[text] = TokenizerInfo(Tokenizer.from_str(text))
    info = copy.copy(proto)
    info.name = name
    info.types = WordTypeCache(info.vocab_size, info.special_ids, info.canonical_texts)
    return info


# One TokenizerInfo per process and tokenizer, for tasks that may share its word-type cache.
_SHARED: dict[tuple[str, str], TokenizerInfo] = {}


def shared_tokenizer(text: str, *, name: str = "tokenizer") -> TokenizerInfo:
    """The same `TokenizerInfo` for every task of this process that ships this JSON and name.

    For tasks whose output does not depend on what the word-type cache held before (encode,
    mask, compare, count on an encoded directory); a task that reads the word texts it added
    needs its own, from `tokenizer_from_json`.
    """
    key = (text, name)
    info = _SHARED.get(key)
    if info is None:
        if len(_SHARED) >= 4:
            _SHARED.clear()
        info = _SHARED[key] = tokenizer_from_json(text, name=name)
    return info


def save_tokenizer(info: TokenizerInfo, path: str | Path) -> None:
    """Write a tokenizer.json atomically."""
    from .._files import atomic_write_text

    atomic_write_text(Path(path), info.json)

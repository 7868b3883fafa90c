"""The unit vocabulary: cohesive multi-word units chosen from exact n-gram counts.

``build_units`` reads a counts directory written by ``maskprep count``, scores
every n-gram of length >= 2 with a measure from ``maskprep.units.cohesion``, keeps
the n-grams that cohere, ranks them best first and returns a
``UnitVocabulary``.

Which n-grams are kept:

- only lengths >= 2, up to ``max_n`` (default: the longest counted);
- only n-grams counted at least ``min_count`` times (default: the counts'
  own ``--min-count``; smaller values are refused, those counts were pruned);
- only n-grams whose words attract: score > 0 for ``pmi``, ``pmi-naive``,
  ``npmi`` and ``t``; for ``llr``, which is unsigned, the n-gram must be more
  frequent than independence predicts on every binary split. N-grams that are
  rarer than chance never become units, however large their score;
- no n-gram that begins or ends with one of the corpus's ``edge_words`` most
  frequent words, and no fragment (an n-gram of which one n-gram a word longer
  holds at least ``fragment_share`` of the occurrences); see ``filters.py``.
  Both are on by default for every measure; 0 turns each off;
- the default measure is ``llr``: a significance measure, so an n-gram seen
  ``min_count`` times ranks below one seen often with the same strength,
  instead of the ties at ln(N / min_count) that ``pmi`` gives rare names. With
  the two filters it gave the best WordNet precision of every measure on real
  text (README, "Choosing units"; ``scripts/unit_precision.py``);
- ranking: score descending, then count descending, then text ascending (by
  UTF-8 bytes), so the order is fully deterministic;
- ``per_length`` (e.g. ``"2:0.5,3:0.3,4:0.1,5:0.1"``) splits ``top`` into
  per-length quotas (largest-remainder rounding). A length with fewer
  candidates than its quota passes the unused places to the other listed
  lengths in proportion to their shares. Lengths not listed get no units.
  Without it, all lengths compete in one ranking.

The options and their checks are in ``maskprep.units.options``, the reading
and checking of the counts directory in ``maskprep.units.countsdir``. It does
not write or read units files, nor list units for the terminal (see
``maskprep.units.files``); nor does it segment sequences into units (that is
the ``pmi`` masking strategy, which consumes ``UnitVocabulary.by_length()``).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property
from pathlib import Path
from typing import Any, Mapping, Union

import numpy as np

from .cohesion import Measure, NgramIndex, score_ngrams, score_with_split_pmi
from .countsdir import check_sha256, counts_meta, counts_tokenizer, read_ngrams
from .filters import DEFAULT_EDGE_WORDS, DEFAULT_FRAGMENT_SHARE, edge_ok, frequent_words, \
    indexed_fragment_shares
from .options import DEFAULT_MEASURE, DEFAULT_TOP, OPTION_HELP, UnitOptions, check_options, \
    parse_per_length, quotas
from .retarget import unit_token_ids, word_splitting
from .._arrow import arrow_array, arrow_strings, numpy_of
from ..errors import MaskprepError
from ..progress import Progress

__all__ = [
    "UnitVocabulary",
    "UnitOptions",
    "build_units",
    "parse_per_length",
    "DEFAULT_TOP",
    "DEFAULT_MEASURE",
    "OPTION_HELP",
]


@dataclass(frozen=True, eq=False)
class UnitVocabulary:
    """Ranked units, best first; arrays are aligned (unit i is row i).

    >>> from maskprep.units.files import read_units
    >>> vocab = read_units("units.parquet")  # doctest: +SKIP
    >>> vocab.text[0], vocab.n[0], vocab.by_length()[2][0].shape  # doctest: +SKIP
    ('new york', 2, (812, 2))
    """

    text: tuple[str, ...]
    n: np.ndarray  # int64 (m,)
    count: np.ndarray  # int64 (m,)
    score: np.ndarray  # float64 (m,)
    token_ids: tuple[np.ndarray, ...]  # int32 arrays, the unit as it appears after another word
    word_keys: tuple[np.ndarray, ...]  # uint64 arrays of length n[i]
    measure: Measure
    options: Mapping[str, Any] = field(default_factory=dict)
    tokenizer_hash: str = ""
    source: Mapping[str, Any] = field(default_factory=dict)  # N, corpus fingerprint, counts options
    word_splitting: Mapping[str, Any] = field(default_factory=dict)  # see retarget.word_splitting

    def __len__(self) -> int:
        return len(self.text)

    def by_length(self) -> dict[int, tuple[np.ndarray, np.ndarray]]:
        """``{n: (word keys (m_n, n) uint64, scores (m_n,) float64)}``, rows in rank order.

        >>> keys, scores = vocab.by_length()[3]  # doctest: +SKIP
        """
        return self._by_length

    @cached_property
    def _by_length(self) -> dict[int, tuple[np.ndarray, np.ndarray]]:
        n = np.asarray(self.n, dtype=np.int64)
        if len(n) == 0:
            return {}
        flat = np.concatenate(self.word_keys).astype(np.uint64)
        offsets = np.concatenate([[0], np.cumsum(n)])
        out: dict[int, tuple[np.ndarray, np.ndarray]] = {}
        for length in np.unique(n).tolist():
            idx = np.flatnonzero(n == length)
            keys = flat[offsets[idx][:, None] + np.arange(length)]
            out[int(length)] = (keys, np.asarray(self.score, np.float64)[idx])
        return out


# ------------------------------------------------------------------ build

def build_units(
    counts_dir: Union[str, Path],
    *,
    measure: Union[Measure, str] = DEFAULT_MEASURE,
    top: int = DEFAULT_TOP,
    min_count: int | None = None,
    per_length: Union[str, Mapping[int, float], None] = None,
    max_n: int | None = None,
    edge_words: int = DEFAULT_EDGE_WORDS,
    fragment_share: float = DEFAULT_FRAGMENT_SHARE,
    quiet: bool = False,
) -> UnitVocabulary:
    """Choose the `top` most cohesive n-grams (n >= 2) of a counts directory, best first.

    counts_dir: directory written by ``maskprep count``.
    measure: llr (default) | pmi | pmi-naive | npmi | t (see ``Measure.description`` for
        each range).
    top: number of units to keep at most (>= 1).
    min_count: keep only n-grams counted at least this often; default and minimum: the
        counts' own min_count.
    per_length: shares of `top` per length, e.g. ``"2:0.5,3:0.3,4:0.1,5:0.1"`` (must add up
        to 1; unused places flow to the other listed lengths); default: one joint ranking.
    max_n: longest unit, 2..the counts' max_n; default: the counts' max_n.
    edge_words: no unit begins or ends with one of the corpus's this many most frequent
        words (0: no such filter).
    fragment_share: drop an n-gram when one n-gram a word longer holds at least this share
        of its occurrences (0: keep fragments).
    quiet: no progress lines on stderr.

    >>> vocab = build_units("counts/", measure="pmi", top=1000)  # doctest: +SKIP
    """
    import pyarrow as pa

    counts_dir = Path(counts_dir)
    meta = counts_meta(counts_dir)
    check_sha256(counts_dir, meta)
    options = check_options(meta, measure=measure, top=top, min_count=min_count,
                            per_length=per_length, max_n=max_n, edge_words=edge_words,
                            fragment_share=fragment_share)
    tok = counts_tokenizer(counts_dir, meta["tokenizer_hash"])
    lengths = (
        [n for n, _ in options.per_length]
        if options.per_length
        else list(range(2, options.max_n + 1))
    )
    N = int(meta["N"])
    last = min(max(lengths) + (1 if options.fragment_share > 0 else 0), int(meta["max_n"]))
    index: NgramIndex | None = None
    edge_keys, edge_list = np.zeros(0, np.uint64), list[str]()
    pending: dict[int, _Scored] = {}
    candidates: dict[int, tuple[np.ndarray, Any]] = {}  # n -> (keys, arrow table sorted best first)
    dropped = {"edge": 0, "fragment": 0}
    with Progress("units", total=last, unit="lengths", quiet=quiet) as progress:
        for k in range(1, last + 1):
            # the texts of longer n-grams are their words' texts joined by one space (the counts
            # format), so only the chosen ones are made, from the words' texts (see _joined)
            keys, counts, text = read_ngrams(counts_dir, k, with_text=k == 1)
            if k == 1:
                if int(counts.sum()) > N:
                    raise MaskprepError(
                        f"{counts_dir / 'ngrams-1.parquet'}: word counts add up to more than "
                        f"N={N} from counts.json; re-run maskprep count"
                    )
                if options.edge_words > 0:
                    edge_keys, edge_list = frequent_words(
                        keys, counts, text.to_pylist(), options.edge_words
                    )
            try:  # every length read is indexed: scoring and fragments read parts from it
                index = (
                    NgramIndex.build({1: (keys, counts)})
                    if index is None
                    else index.add(keys, counts)
                )
            except MaskprepError as exc:
                raise MaskprepError(f"{counts_dir / f'ngrams-{k}.parquet'}: {exc}") from None
            if k == 1:  # the words' texts by their id in the index, for _joined
                words = text.combine_chunks().take(arrow_array(np.argsort(index.row_ids[0])))
            if k - 1 in pending:  # the fragments of length k - 1 need these k-grams
                scored = pending.pop(k - 1)
                candidates[k - 1] = _finish(options, scored, index, words, dropped)
            if k in lengths:
                pending[k] = _score_length(
                    options, counts_dir, k, keys, counts, index, N, edge_keys, dropped
                )
            progress.advance(1)
    # the longest counted length: no longer n-grams to compare with
    for k, scored in pending.items():
        assert index is not None  # every length read was indexed
        candidates[k] = _finish(options, scored, index, words, dropped)
    chosen = _ranked(_select(options, candidates))
    texts: list[str] = chosen.column("text").cast(pa.string()).to_pylist()
    n_arr = numpy_of(chosen.column("n")).astype(np.int64)
    rows = numpy_of(chosen.column("row"))
    word_keys = tuple(candidates[int(L)][0][r] for L, r in zip(n_arr.tolist(), rows.tolist()))
    source = {
        "N": N,
        "corpus_fingerprint": meta["corpus_fingerprint"],
        "counts_min_count": meta["min_count"],
        "counts_max_n": meta["max_n"],
        "counts_format_version": meta["format_version"],
        "edge_word_list": edge_list,
        "dropped_edge": dropped["edge"],
        "dropped_fragment": dropped["fragment"],
    }
    if "words" in meta:
        source["words"] = meta["words"]
    return UnitVocabulary(
        text=tuple(texts), n=n_arr,
        count=numpy_of(chosen.column("count")).astype(np.int64),
        score=numpy_of(chosen.column("score")).astype(np.float64),
        token_ids=unit_token_ids(tok, texts), word_keys=word_keys, measure=options.measure,
        options=options.to_json(), tokenizer_hash=meta["tokenizer_hash"], source=source,
        word_splitting=word_splitting(tok.to_str()))


@dataclass(frozen=True, eq=False)
class _Scored:
    """The attracting candidates of one length, scored, before the fragment filter and top cut."""

    n: int
    keys: np.ndarray
    ids: np.ndarray  # their ids in the NgramIndex
    counts: np.ndarray
    score: np.ndarray


def _score_length(
    options: UnitOptions,
    counts_dir: Path,
    n: int,
    keys: np.ndarray,
    counts: np.ndarray,
    index: NgramIndex,
    N: int,
    edge_keys: np.ndarray,
    dropped: dict[str, int],
) -> _Scored:
    idx = np.flatnonzero(counts >= options.min_count)
    if len(idx) < len(counts):  # (no copies when every n-gram is kept, the default)
        keys, counts = keys[idx], counts[idx]
    ids = index.row_ids[n - 1][idx]
    parts = (index.prefix[n - 1][ids], index.suffix[n - 1][ids])
    try:
        if options.measure.positive_means_cohesive:
            score = score_ngrams(options.measure, n=n, keys=keys, counts=counts, tables=index, N=N,
                                 parts=parts)
            ok = score > 0
        else:
            score, split = score_with_split_pmi(
                options.measure, n=n, keys=keys, counts=counts, tables=index, N=N, parts=parts
            )
            ok = split > 0
    except MaskprepError as exc:
        raise MaskprepError(f"{counts_dir / f'ngrams-{n}.parquet'}: {exc}") from None
    ok &= np.isfinite(score)
    edges = edge_ok(keys, edge_keys)
    dropped["edge"] += int((ok & ~edges).sum())
    sel = np.flatnonzero(ok & edges)
    return _Scored(n, keys[sel], ids[sel], counts[sel], score[sel])


def _finish(
    options: UnitOptions,
    s: _Scored,
    index: NgramIndex,
    words: Any,
    dropped: dict[str, int],
) -> tuple[np.ndarray, Any]:
    """Drop fragments (when the index holds the (n+1)-grams), keep the best `top` and their
    ties, rank; `words` are the words' texts by their id in the index."""
    import pyarrow as pa

    score, counts = s.score, s.counts
    sel = np.arange(len(counts))
    if options.fragment_share > 0 and index.max_k > s.n:
        whole = indexed_fragment_shares(index, s.n, s.ids, counts) < options.fragment_share
        dropped["fragment"] += int((~whole).sum())
        sel = sel[whole]
    if (
        len(sel) > options.top
    ):  # at most `top` of one length can be chosen: keep those and their ties
        best = sel[np.lexsort((-counts[sel], -score[sel]))[options.top - 1]]
        sel = sel[
            (score[sel] > score[best])
            | ((score[sel] == score[best]) & (counts[sel] >= counts[best]))
        ]
    table = pa.table({
        "text": _joined(index, words, s.keys[sel]),
        "n": arrow_array(np.full(len(sel), s.n, dtype=np.int64)),
        "count": arrow_array(counts[sel]),
        "score": arrow_array(score[sel]),
        "row": arrow_array(np.arange(len(sel), dtype=np.int64)),
    })
    return s.keys[sel], _ranked(table)


def _joined(index: NgramIndex, words: Any, keys: np.ndarray) -> Any:
    """The texts of n-grams (rows of word keys): their words' texts joined by one space, as
    ``maskprep count`` writes them; `words` are the texts by word id in `index`."""
    import pyarrow as pa
    import pyarrow.compute as pc

    m, n = keys.shape
    flat = words.take(arrow_array(index.word_ids(keys).ravel()))
    lists = pa.LargeListArray.from_arrays(
        arrow_array(np.arange(0, m * n + 1, n, dtype=np.int64)), flat
    )
    return pc.binary_join(lists, arrow_strings([" "])[0])


def _select(options: UnitOptions, candidates: Mapping[int, tuple[np.ndarray, Any]]) -> Any:
    import pyarrow as pa

    if options.per_length is None:
        return _ranked(pa.concat_tables([candidates[n][1] for n in sorted(candidates)])).slice(
            0, options.top
        )
    shares = dict(options.per_length)
    take = quotas(options.top, shares, {n: candidates[n][1].num_rows for n in shares})
    return pa.concat_tables([candidates[n][1].slice(0, take[n]) for n in sorted(shares)])


def _ranked(table: Any) -> Any:
    """Rows best first: score descending, count descending, text ascending (UTF-8 bytes)."""
    import pyarrow.compute as pc

    keys = [("score", "descending"), ("count", "descending"), ("text", "ascending")]
    return table.take(pc.sort_indices(table, sort_keys=keys))

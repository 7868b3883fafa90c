"""Cohesion scores of word n-grams, vectorised over every n-gram of one length.

Given exact counts (from ``maskprep count``), this module scores how strongly
the words of each n-gram belong together. Probabilities divide by N, the number
of counted word positions, for every n: ``p(g) = count(g) / N``.

Measures (``Measure``):

- ``pmi``: the minimum, over every segmentation of the n-gram into two or more
  contiguous parts, of ``log p(g) - sum log p(part)`` (PMI-Masking, Levine et
  al. 2021). An n-gram scores high only if no way of cutting it explains its
  frequency. Natural log (nats); range (-inf, -log p(g)]; positive means the
  n-gram is more frequent than every segmentation predicts.
- ``pmi-naive``: ``log p(g) - sum log p(word)`` (nats). For n = 2 it equals
  ``pmi``; for n > 2 it grows with n and rewards n-grams that merely contain a
  strong pair.
- ``npmi``: normalised PMI (Bouma 2009), ``pmi / -log p(g)``. For n = 2 this is
  Bouma's definition exactly. For n > 2 we normalise the segmentation ``pmi``
  above (not the naive one), which keeps the range [-1, 1] for every n: -1 in
  the limit of words that never occur together, 0 under independence of the
  weakest segmentation, 1 when the words occur only together.
- ``llr``: Dunning's log-likelihood ratio G^2 (Dunning 1993) on the 2x2
  contingency table of the two parts, with unigram counts as marginals and N as
  the table total (as in Manning & Schuetze 1999, ch. 5). For n > 2, the
  minimum over the n - 1 binary splits (left part vs right part as the two
  "words"): the weakest split. Range [0, inf); it is unsigned, so it is large
  for strong negative association too. A negative bottom-right cell (only in
  degenerate corpora where the parts cover more than N positions) is clamped
  to 0.
- ``t``: the t score of Church et al. 1991 as in Manning & Schuetze ch. 5:
  ``(c/N - p(left) p(right)) / sqrt((c/N) / N)``, i.e. ``(x - mu) / sqrt(s^2/N)``
  with ``s^2 ~ x``. For n > 2, the minimum over binary splits. Range
  (-inf, sqrt(c)); positive means more frequent than independence predicts.

Sub-n-gram counts are found by exact sorted-key lookup (``NgramIndex`` and
``CountTable``, in ``maskprep.units.lookup``). A part that is missing from its
table, or counted less often than the n-gram containing it, means the counts
are corrupt and raises ``MaskprepError``; it is never treated as zero.

This module does not read files or choose units; see ``maskprep.units.select``.
"""

from __future__ import annotations

import enum
from typing import Mapping, Union

import numpy as np

from .lookup import CountTable, NgramIndex, TableLike, as_index
from ..errors import MaskprepError

__all__ = [
    "Measure",
    "CountTable",
    "NgramIndex",
    "score_ngrams",
    "score_with_split_pmi",
    "binary_split_pmi",
    "MAX_N",
]

MAX_N = 8
"""Longest n-gram this module scores (segmentations of n words: 2**(n-1) - 1)."""

_CHUNK_ROWS = 1 << 19


class Measure(str, enum.Enum):
    """A cohesion measure: ``Measure.parse("pmi") is Measure.PMI``."""

    PMI = "pmi"
    PMI_NAIVE = "pmi-naive"
    NPMI = "npmi"
    LLR = "llr"
    T = "t"

    @classmethod
    def parse(cls, value: Union[str, "Measure"], *, option: str = "--measure") -> "Measure":
        """Return the measure named `value`: ``Measure.parse("llr")`` -> ``Measure.LLR``."""
        if isinstance(value, Measure):
            return value
        try:
            return cls(str(value).strip().lower())
        except ValueError:
            choices = ", ".join(m.value for m in cls)
            raise MaskprepError(
                f"{option}: unknown measure {value!r}; choose one of {choices}"
            ) from None

    @property
    def range_text(self) -> str:
        """The range of the score, for help text: ``Measure.NPMI.range_text`` -> ``"[-1, 1]"``."""
        return _RANGES[self]

    @property
    def description(self) -> str:
        """One line for help text, including the range."""
        return f"{self.value}: {_DESCRIPTIONS[self]}; range {self.range_text}"

    @property
    def positive_means_cohesive(self) -> bool:
        """True for measures whose sign says whether the words attract (all but llr)."""
        return self is not Measure.LLR


_RANGES = {
    Measure.PMI: "(-inf, -ln p(g)] nats",
    Measure.PMI_NAIVE: "(-inf, -(n-1) ln p(g)] nats",
    Measure.NPMI: "[-1, 1]",
    Measure.LLR: "[0, inf)",
    Measure.T: "(-inf, sqrt(count))",
}
_DESCRIPTIONS = {
    Measure.PMI: "min over segmentations into 2+ parts of ln p(g) - sum ln p(part) "
    "(Levine et al. 2021)",
    Measure.PMI_NAIVE: "ln p(g) - sum of ln p(word)",
    Measure.NPMI: "pmi / -ln p(g) (Bouma 2009)",
    Measure.LLR: "Dunning's log-likelihood ratio, weakest binary split (Dunning 1993)",
    Measure.T: "t score, weakest binary split (Church et al. 1991)",
}


def score_ngrams(measure: Union[Measure, str], *, n: int, keys: np.ndarray, counts: np.ndarray,
                 tables: Union[NgramIndex, Mapping[int, TableLike]], N: int,
                 parts: tuple[np.ndarray, np.ndarray] | None = None) -> np.ndarray:
    """Score every n-gram (rows of `keys`, (m, n) uint64) by `measure`; float64 (m,).

    `tables` is an `NgramIndex` of the k-grams for k = 1..n-1, or a mapping
    ``{k: (keys_k, counts_k)}`` (or ``CountTable``) to build one from; `N` is the
    number of counted word positions; `parts` as for `score_with_split_pmi`.

    >>> t1 = (np.array([[1], [2]], np.uint64), np.array([42, 20]))
    >>> s = score_ngrams("pmi", n=2, keys=np.array([[1, 2]], np.uint64), counts=np.array([20]),
    ...                  tables={1: t1}, N=14_307_668)
    >>> round(float(s[0] / np.log(2)), 2)
    18.38
    """
    return _run((Measure.parse(measure),), n=n, keys=keys, counts=counts, tables=tables, N=N,
                parts=parts)[0]


def score_with_split_pmi(
    measure: Union[Measure, str],
    *,
    n: int,
    keys: np.ndarray,
    counts: np.ndarray,
    tables: Union[NgramIndex, Mapping[int, TableLike]],
    N: int,
    parts: tuple[np.ndarray, np.ndarray] | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """``(score_ngrams(...), binary_split_pmi(...))`` in one pass over the parts.

    `parts` (optional, with an `NgramIndex`): the (n-1)-gram ids of each row's first and last
    n - 1 words, e.g. ``(ix.prefix[n - 1][ids], ix.suffix[n - 1][ids])``, saving their lookup.

    >>> scores, split = score_with_split_pmi(
    ...     "llr", n=2, keys=k, counts=c, tables=t, N=n)  # doctest: +SKIP
    """
    out = _run((Measure.parse(measure), None), n=n, keys=keys, counts=counts, tables=tables, N=N,
               parts=parts)
    return out[0], out[1]


def binary_split_pmi(*, n: int, keys: np.ndarray, counts: np.ndarray,
                     tables: Union[NgramIndex, Mapping[int, TableLike]], N: int) -> np.ndarray:
    """Min over the n - 1 binary splits of ln p(g) - ln p(left) - ln p(right), nats.

    Positive exactly where the n-gram is more frequent than independence of
    its two parts predicts on every binary split (the sign of ``t`` and of a
    signed ``llr``). ``binary_split_pmi(n=2, ...)`` equals ``pmi`` for bigrams.
    """
    return _run((None,), n=n, keys=keys, counts=counts, tables=tables, N=N)[0]


def _run(kinds: tuple[Measure | None, ...], *, n: int, keys: np.ndarray, counts: np.ndarray,
         tables: Union[NgramIndex, Mapping[int, TableLike]], N: int,
         parts: tuple[np.ndarray, np.ndarray] | None = None) -> list[np.ndarray]:
    """Each measure of `kinds` (None: binary-split pmi), finding the parts once per chunk.

    `parts`: the (n-1)-gram ids of each row's first and last n - 1 words, when the caller
    knows them (``NgramIndex.prefix`` / ``suffix`` of indexed n-grams); else they are looked up.
    """
    keys, counts = _check_inputs(n=n, keys=keys, counts=counts, N=N)
    index = as_index(tables, n)
    out = [np.empty(len(counts), dtype=np.float64) for _ in kinds]
    for start in range(0, len(counts), _CHUNK_ROWS):
        stop = min(start + _CHUNK_ROWS, len(counts))
        if parts is None:
            pre, suf = index.parts(keys[start:stop])
        else:
            pre, suf = parts[0][start:stop], parts[1][start:stop]
        spans = _span_counts(counts[start:stop], pre, suf, index, n)
        for kind, dest in zip(kinds, out):
            dest[start:stop] = (
                _split_pmi(spans, n, N) if kind is None else _score_chunk(kind, n, spans, N)
            )
    return out


def _split_pmi(spans: Mapping[tuple[int, int], np.ndarray], n: int, N: int) -> np.ndarray:
    c = spans[(0, n)]
    best = np.full(len(c), np.inf)
    for s in range(1, n):
        best = np.minimum(
            best, np.log(c) - np.log(spans[(0, s)]) - np.log(spans[(s, n)]) + np.log(float(N))
        )
    return best


def _check_inputs(
    *, n: int, keys: np.ndarray, counts: np.ndarray, N: int
) -> tuple[np.ndarray, np.ndarray]:
    if not 2 <= int(n) <= MAX_N:
        raise MaskprepError(f"n-gram length {n} cannot be scored; lengths 2..{MAX_N} are supported")
    keys = np.ascontiguousarray(keys, dtype=np.uint64)
    counts = np.ascontiguousarray(counts, dtype=np.int64)
    if keys.ndim != 2 or keys.shape[1] != n or counts.shape != (keys.shape[0],):
        raise MaskprepError(f"expected keys of shape (m, {n}) and counts of shape (m,), "
                            f"got {keys.shape} and {counts.shape}")
    if int(N) < 1:
        raise MaskprepError(f"N (number of counted word positions) must be >= 1, got {N}")
    if len(counts) and (counts.min() < 1 or counts.max() > int(N)):
        raise MaskprepError(
            f"corrupt counts: {n}-gram counts must lie in 1..N={N}, "
            f"found {int(counts.min())}..{int(counts.max())}; re-run maskprep count"
        )
    return keys, counts


def _span_counts(counts: np.ndarray, pre: np.ndarray, suf: np.ndarray, index: NgramIndex, n: int
                 ) -> dict[tuple[int, int], np.ndarray]:
    """Counts (float64) of every sub-span [i, j) of every row; the whole span included.

    `pre` and `suf` are the (n-1)-gram ids of the rows' first and last n - 1 words; every
    shorter span lies inside one of them and is read through ``NgramIndex.span_ids``.
    """
    spans: dict[tuple[int, int], np.ndarray] = {(0, n): counts.astype(np.float64)}
    for i in range(n):
        for j in range(i + 1, n + 1):
            if (i, j) == (0, n):
                continue
            if j < n:
                ids = index.span_ids(n - 1, pre, i, j)
            else:
                ids = index.span_ids(n - 1, suf, i - 1, n - 1)
            c = index.counts[j - i - 1][ids]
            if (c < counts).any():
                raise MaskprepError(
                    f"corrupt counts: a {j - i}-gram is counted less often than a {n}-gram "
                    "that contains it; re-run maskprep count"
                )
            spans[(i, j)] = c.astype(np.float64)
    return spans


def _score_chunk(
    measure: Measure, n: int, spans: Mapping[tuple[int, int], np.ndarray], N: int
) -> np.ndarray:
    log_n = np.log(float(N))
    if measure in (Measure.LLR, Measure.T):
        c = spans[(0, n)]
        lowest = np.full(len(c), np.inf)
        for s in range(1, n):
            f = _llr if measure is Measure.LLR else _t_score
            lowest = np.minimum(lowest, f(c, spans[(0, s)], spans[(s, n)], float(N)))
        return lowest
    logp = {span: np.log(c) - log_n for span, c in spans.items()}
    if measure is Measure.PMI_NAIVE:
        return logp[(0, n)] - sum(logp[(i, i + 1)] for i in range(n))
    # best[(i, j)]: max over segmentations of [i, j) into 1+ parts of sum log p(part).
    best: dict[tuple[int, int], np.ndarray] = {}
    for length in range(1, n):
        for i in range(n - length + 1):
            j = i + length
            b = logp[(i, j)]
            for s in range(i + 1, j):
                b = np.maximum(b, best[(i, s)] + best[(s, j)])
            best[(i, j)] = b
    split = best[(0, 1)] + best[(1, n)]
    for s in range(2, n):
        split = np.maximum(split, best[(0, s)] + best[(s, n)])
    pmi = logp[(0, n)] - split
    if measure is Measure.PMI:
        return pmi
    denom = -logp[(0, n)]
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(denom > 0, pmi / np.where(denom > 0, denom, 1.0), 1.0)


def _llr(c12: np.ndarray, c1: np.ndarray, c2: np.ndarray, N: float) -> np.ndarray:
    """Dunning's G^2 = 2 sum O ln(O / E) over the 2x2 table (0 ln 0 = 0)."""
    o11 = c12
    o12 = c1 - c12
    o21 = c2 - c12
    o22 = np.maximum(N - c1 - c2 + c12, 0.0)
    total = o11 + o12 + o21 + o22
    row1, row2 = o11 + o12, o21 + o22
    col1, col2 = o11 + o21, o12 + o22
    g = np.zeros_like(c12)
    for o, r, k in ((o11, row1, col1), (o12, row1, col2), (o21, row2, col1), (o22, row2, col2)):
        e = r * k / total
        # o ln(o / e) where o > 0; elsewhere o = 0 and the ratio stays 1, so the term is 0
        ratio = np.divide(o, e, out=np.ones_like(o), where=o > 0)
        g += o * np.log(ratio, out=ratio)
    return 2.0 * g


def _t_score(c12: np.ndarray, c1: np.ndarray, c2: np.ndarray, N: float) -> np.ndarray:
    """(c12/N - p1 p2) / sqrt(c12/N / N) = (c12 - c1 c2 / N) / sqrt(c12)."""
    return (c12 - c1 * c2 / N) / np.sqrt(c12)

"""Two filters on unit candidates, both derived from the counts themselves.

Cohesion scores alone rank badly on real text: frequency-weighted measures
(llr, t) are led by pairs of function words (*of the*, *can be*), and every
measure keeps fragments of longer recurring phrases (*guido van* beside *guido
van rossum*, *retained solely until* inside one boilerplate sentence). Before
units are ranked, ``maskprep.units.select`` applies:

- **Edge words.** A unit may not begin or end with one of the corpus's
  ``k`` most frequent words (``edge_words``; they may appear inside a unit, as
  in *point of view*). The list comes from the 1-gram counts, so it suits any
  language and any tokenizer; it is the corpus's own stop-word list. Frequent-
  word edges are the classic noise of collocation lists (Justeson & Katz 1995
  keep only noun-phrase patterns for the same reason; keeping connector words
  inside phrases but off their edges is common practice in phrase finders).
- **Fragments.** An n-gram is dropped when one n-gram a word longer (one more
  word on the left or on the right) holds at least ``share`` of its
  occurrences (``fragment_share``): it is then mostly a piece of that longer
  unit, which competes on its own. This is the nested-term correction of
  C-value term extraction (Frantzi, Ananiadou & Mima 2000) in its simplest
  form, one extension at a time. Longer n-grams are known only down to the
  count's ``--min-count``, so an extension rarer than that is not seen; the
  rule is exact whenever ``share * count >= min_count``.

Both are vectorised over every candidate of one length.
"""

from __future__ import annotations

import numpy as np

from .cohesion import CountTable, NgramIndex

__all__ = [
    "frequent_words",
    "edge_ok",
    "fragment_shares",
    "indexed_fragment_shares",
    "DEFAULT_EDGE_WORDS",
    "DEFAULT_FRAGMENT_SHARE",
]

DEFAULT_EDGE_WORDS = 30
"""Default number of most frequent words barred from unit edges (0: no filter)."""
DEFAULT_FRAGMENT_SHARE = 0.75
"""Default share of occurrences inside one longer n-gram that makes an n-gram a fragment
(0: no filter)."""


def frequent_words(
    keys: np.ndarray, counts: np.ndarray, texts: list[str], k: int
) -> tuple[np.ndarray, list[str]]:
    """The `k` most frequent words: (sorted uint64 keys, texts most frequent first).

    Ties in count are broken by text (UTF-8 byte order), so the list is
    deterministic. Hand-worked: counts the=9, of=7, a=7, cat=2 and k=2 give
    *the* (9) and then *a* before *of* (both 7; "a" < "of"):

    >>> keys = np.array([[1], [2], [3], [4]], np.uint64)
    >>> frequent_words(keys, np.array([9, 7, 7, 2]), ["the", "of", "a", "cat"], 2)
    (array([1, 3], dtype=uint64), ['the', 'a'])
    >>> frequent_words(keys, np.array([9, 7, 7, 2]), ["the", "of", "a", "cat"], 0)[1]
    []
    """
    keys = np.asarray(keys, np.uint64).reshape(len(counts), -1)[:, 0]
    counts = np.asarray(counts, np.int64)
    if k <= 0 or len(counts) == 0:
        return np.zeros(0, np.uint64), []
    k = min(k, len(counts))
    kth = np.partition(counts, len(counts) - k)[len(counts) - k]  # the k-th largest count
    near = np.flatnonzero(counts >= kth).tolist()  # k words plus those tied with the k-th
    order = sorted(near, key=lambda i: (-int(counts[i]), texts[i].encode("utf-8")))[:k]
    return np.sort(keys[order]), [texts[i] for i in order]


def edge_ok(keys: np.ndarray, edge_keys: np.ndarray) -> np.ndarray:
    """bool (m,): neither the first nor the last word of each row is an edge word.

    Hand-worked, with edge words {1 (the), 2 (of)}: *point of view* (5 2 6) keeps
    *of* inside and passes; *of the* (2 1) and *the cat* (1 7) do not:

    >>> rows = np.array([[5, 2, 6], [2, 1, 9], [1, 7, 8]], np.uint64)
    >>> edge_ok(rows, np.array([1, 2], np.uint64)).tolist()
    [True, False, False]
    """
    keys = np.asarray(keys, np.uint64)
    if len(edge_keys) == 0 or keys.shape[0] == 0:
        return np.ones(keys.shape[0], bool)
    return ~(np.isin(keys[:, 0], edge_keys) | np.isin(keys[:, -1], edge_keys))


def fragment_shares(
    keys: np.ndarray, counts: np.ndarray, longer_keys: np.ndarray, longer_counts: np.ndarray
) -> np.ndarray:
    """float (m,): the largest share of each n-gram's occurrences inside one (n+1)-gram.

    `keys`/`counts` are the n-grams (m, n); `longer_keys`/`longer_counts` are the
    counted (n+1)-grams. An (n+1)-gram extends an n-gram on the right when its
    first n words are that n-gram, on the left when its last n words are.

    Hand-worked: *guido van* is counted 64 times and *guido van rossum* 64 times,
    share 64 / 64 = 1.0; *new york* 100 times, *new york city* 30 and *in new
    york* 45 times, share max(30, 45) / 100 = 0.45; *ice cream* has no longer
    n-gram counted, share 0:

    >>> g, v, r, n, y, c, i, ic, cr = (np.uint64(x) for x in range(1, 10))
    >>> longer = np.array([[g, v, r], [n, y, c], [i, n, y]])
    >>> fragment_shares(np.array([[g, v], [n, y], [ic, cr]]), np.array([64, 100, 12]),
    ...                 longer, np.array([64, 30, 45])).tolist()
    [1.0, 0.45, 0.0]
    """
    keys = np.asarray(keys, np.uint64)
    counts = np.asarray(counts, np.float64)
    best = np.zeros(len(counts), np.float64)
    longer_keys = np.asarray(longer_keys, np.uint64)
    if len(counts) == 0 or longer_keys.shape[0] == 0:
        return best
    table = CountTable.build(keys, np.arange(len(counts)), name="unit candidates")
    longer = np.asarray(longer_counts, np.float64)
    for part in (longer_keys[:, :-1], longer_keys[:, 1:]):
        rows = table.find(np.ascontiguousarray(part))
        hit = rows >= 0
        np.maximum.at(best, rows[hit], longer[hit])
    return best / counts


def indexed_fragment_shares(
    index: NgramIndex, n: int, ids: np.ndarray, counts: np.ndarray
) -> np.ndarray:
    """`fragment_shares` of n-grams held in `index` (their `ids`), against every (n+1)-gram of it.

    The index knows the n-gram ids of each (n+1)-gram's first and last n words, so no key is
    searched: each (n+1)-gram count goes to its two n-gram parts, and each n-gram keeps the
    largest it receives.
    """
    best = np.zeros(len(index.counts[n - 1]), np.float64)
    longer = index.counts[n].astype(np.float64)
    for part in (index.prefix[n], index.suffix[n]):
        np.maximum.at(best, part, longer)
    return best[ids] / np.asarray(counts, np.float64)

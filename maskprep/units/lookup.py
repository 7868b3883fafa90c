"""Exact lookup of the counts of sub-n-grams, vectorised: the tables the measures read.

``NgramIndex`` gives every k-gram of lengths 1..K a dense id (its rank among
sorted ``prefix id * V + last word id`` codes), so finding a part of an
n-gram costs one ``searchsorted`` per word; it also keeps, for every k-gram,
the ids of its first and its last k - 1 words, so the parts of an indexed
n-gram are found once, when its length is added, and every part's count is
then read by plain array indexing. ``CountTable`` is the stand-alone
lookup of one table (dense per-column codes from ``np.unique``). Nothing is
looked up with a Python dict or a loop per n-gram. A part that is missing from
its table means the counts are corrupt and raises ``MaskprepError``; it is
never treated as zero. The measures themselves are in ``maskprep.units.cohesion``.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Mapping, Union

import numpy as np

from ..errors import MaskprepError
from ..wording import plural

__all__ = ["CountTable", "NgramIndex", "TableLike", "as_index"]


@dataclass(frozen=True, eq=False)
class CountTable:
    """Counts of distinct k-grams with an exact vectorised key index.

    >>> t = CountTable.build(np.array([[7, 1], [3, 9]], np.uint64), np.array([5, 2]))
    >>> t.counts_of(np.array([[3, 9], [7, 1]], np.uint64)).tolist()
    [2, 5]
    """

    keys: np.ndarray  # (m, k) uint64, rows distinct, any order
    counts: np.ndarray  # (m,) int64
    _columns: tuple[np.ndarray, ...] = field(repr=False)  # sorted distinct values per column
    # sorted distinct packed codes, per column >= 1
    _levels: tuple[np.ndarray, ...] = field(repr=False)
    _row_of_code: np.ndarray = field(repr=False)

    @property
    def k(self) -> int:
        return int(self.keys.shape[1])

    def __len__(self) -> int:
        return int(self.keys.shape[0])

    @classmethod
    def build(cls, keys: np.ndarray, counts: np.ndarray, *, name: str = "table") -> "CountTable":
        """Index `keys` (m, k) uint64 with their `counts`; duplicate rows raise."""
        keys = np.ascontiguousarray(keys, dtype=np.uint64)
        if keys.ndim != 2 or keys.shape[1] < 1:
            raise MaskprepError(
                f"{name}: keys must be a 2-D (rows, k) array, got shape {keys.shape}"
            )
        counts = np.ascontiguousarray(counts, dtype=np.int64)
        if counts.shape != (keys.shape[0],):
            raise MaskprepError(f"{name}: {keys.shape[0]} key rows but {counts.shape} counts")
        columns: list[np.ndarray] = []
        levels: list[np.ndarray] = []
        code = np.zeros(0, np.uint64)
        for j in range(keys.shape[1]):
            values, inverse = np.unique(keys[:, j], return_inverse=True)
            columns.append(values)
            rank = inverse.astype(np.uint64).ravel()
            if j == 0:
                code = rank
            else:
                # code < m and len(values) <= m, so the product fits for m < 2**32.
                packed = code * np.uint64(len(values)) + rank
                level, code = np.unique(packed, return_inverse=True)
                code = code.astype(np.uint64).ravel()
                levels.append(level)
        n_codes = len(levels[-1]) if levels else len(columns[0])
        if n_codes != keys.shape[0]:
            raise MaskprepError(f"{name}: {keys.shape[0] - n_codes} duplicate key rows; "
                                "the counts are corrupt (re-run maskprep count)")
        row_of_code = np.empty(keys.shape[0], np.int64)
        row_of_code[code.astype(np.int64)] = np.arange(keys.shape[0], dtype=np.int64)
        return cls(keys, counts, tuple(columns), tuple(levels), row_of_code)

    def find(self, query: np.ndarray) -> np.ndarray:
        """Row index of each query row (q, k) uint64 in this table, -1 where absent."""
        query = np.asarray(query, dtype=np.uint64)
        if query.ndim != 2 or query.shape[1] != self.k:
            raise MaskprepError(f"query rows must have {self.k} columns, got shape {query.shape}")
        found = np.ones(query.shape[0], dtype=bool)
        code = np.zeros(query.shape[0], np.uint64)
        for j, values in enumerate(self._columns):
            rank, ok = _search(values, query[:, j])
            found &= ok
            if j == 0:
                code = rank.astype(np.uint64)
            else:
                packed = code * np.uint64(len(values)) + rank.astype(np.uint64)
                c, ok = _search(self._levels[j - 1], packed)
                found &= ok
                code = c.astype(np.uint64)
        rows = np.full(query.shape[0], -1, dtype=np.int64)
        rows[found] = self._row_of_code[code[found].astype(np.int64)]
        return rows

    def counts_of(self, query: np.ndarray, *, what: str = "part") -> np.ndarray:
        """Counts of the query rows; any absent row raises `MaskprepError` (corrupt counts)."""
        rows = self.find(query)
        missing = rows < 0
        if missing.any():
            raise _missing(self.k, int(missing.sum()), what)
        return self.counts[rows]


def _search(values: np.ndarray, q: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Position of each `q` in sorted `values` and whether it is there. Large
    tables are searched with sorted queries (cache friendly, several times faster)."""
    if len(values) > _CACHE_ENTRIES and len(q) > _CACHE_ENTRIES:
        order = np.argsort(q)
        pos = np.empty(len(q), dtype=np.int64)
        pos[order] = np.searchsorted(values, q[order])
    else:
        pos = np.searchsorted(values, q)
    clipped = np.minimum(pos, max(len(values) - 1, 0))
    ok = (pos < len(values)) & (values[clipped] == q) if len(values) else np.zeros(len(q), bool)
    return clipped, ok


_CACHE_ENTRIES = 1 << 17


def _missing(k: int, count: int, what: str = "part") -> MaskprepError:
    return MaskprepError(
        f"corrupt counts: {plural(count, what)} of length {k} {'is' if count == 1 else 'are'} "
        f"missing from the {k}-gram counts although a longer n-gram containing them was kept; "
        "re-run maskprep count with one --min-count for every n"
    )


@dataclass(frozen=True, eq=False)
class NgramIndex:
    """Dense ids of the k-grams of every length 1..K, for fast exact part lookup.

    A k-gram's id is its rank among ``prefix_id * V + last_word_id`` codes
    (V = number of distinct words), so finding a part costs one sorted search
    per added word, not one per key column. Each k-gram (k >= 2) also keeps
    the ids of its first and of its last k - 1 words (``prefix``, ``suffix``),
    so the count of any contiguous part of an indexed k-gram is a few array
    reads, with no search at all (``span_ids``).

    >>> ix = NgramIndex.build({1: (np.array([[5], [9]], np.uint64), np.array([3, 4])),
    ...                        2: (np.array([[9, 5]], np.uint64), np.array([2]))})
    >>> ix.counts_of(np.array([[9, 5]], np.uint64)).tolist()
    [2]
    """

    words: np.ndarray  # sorted distinct word keys (V,)
    # codes[k - 1]: sorted codes of the k-grams (k >= 2); codes[0] unused
    codes: tuple[np.ndarray, ...]
    counts: tuple[np.ndarray, ...]  # counts[k - 1][id]: count of the k-gram with that id
    # prefix[k - 1][id], suffix[k - 1][id]: (k-1)-gram ids of its first and last k - 1 words
    # (k >= 2; index 0 unused)
    prefix: tuple[np.ndarray, ...] = field(default=(), repr=False)
    suffix: tuple[np.ndarray, ...] = field(default=(), repr=False)
    # row_ids[k - 1][r]: the id of row r of the k-gram table as it was given to build or add
    row_ids: tuple[np.ndarray, ...] = field(default=(), repr=False)

    @property
    def max_k(self) -> int:
        return len(self.counts)

    @classmethod
    def build(cls, tables: Mapping[int, "TableLike"]) -> "NgramIndex":
        """Index tables ``{k: (keys (m, k) uint64, counts (m,))}`` for k = 1..K (all present)."""
        if not tables:
            empty = (np.zeros(0, np.int64),)
            return cls(np.zeros(0, np.uint64), (np.zeros(0, np.uint64),), empty, empty, empty,
                       empty)
        arrays = {k: _as_arrays(tables, k) for k in range(1, max(tables) + 1)}
        keys1, counts1 = arrays[1]
        order = np.argsort(keys1[:, 0])  # distinct keys (checked below): one order
        words = keys1[order, 0]
        if len(words) > 1 and (words[1:] == words[:-1]).any():
            raise MaskprepError(
                "1-gram table: duplicate word keys; the counts are corrupt (re-run maskprep count)"
            )
        none = np.zeros(0, np.int64)
        index = cls(words, (words,), (counts1[order],), (none,), (none,), (_inverse(order),))
        for k in range(2, len(arrays) + 1):
            index = index.add(*arrays[k])
        return index

    def add(self, keys: np.ndarray, counts: np.ndarray) -> "NgramIndex":
        """A new index with the next length (k = max_k + 1) added.

        ``ix = ix.add(keys_k, counts_k)``; ``ix.row_ids[k - 1]`` gives the id of each row.
        """
        k = self.max_k + 1
        keys = _key_rows(keys, counts, k)
        v = np.uint64(max(len(self.words), 1))
        if len(self.counts[-1]) * float(v) >= 2.0 ** 64:
            raise MaskprepError(
                f"{k}-gram table too large to index ({len(self.counts[-1])} x {int(v)} codes)"
            )
        pre, suf, last = self._parts(keys)
        code = pre.astype(np.uint64) * v + last.astype(np.uint64)
        order = np.argsort(code)  # codes are distinct (checked below), so any sort gives one order
        code = code[order]
        if len(code) > 1 and (code[1:] == code[:-1]).any():
            raise MaskprepError(
                f"{k}-gram table: duplicate key rows; the counts are corrupt "
                "(re-run maskprep count)"
            )
        return NgramIndex(
            self.words,
            self.codes + (code,),
            self.counts + (np.asarray(counts, np.int64)[order],),
            self.prefix + (pre[order],),
            self.suffix + (suf[order],),
            self.row_ids + (_inverse(order),),
        )

    def word_ids(self, keys: np.ndarray) -> np.ndarray:
        """Ids (int64, same shape) of word keys; a word not in the 1-gram table raises."""
        import pyarrow.compute as pc

        from .._arrow import arrow_array, numpy_of

        flat = np.ascontiguousarray(keys, np.uint64).ravel()
        # a hash lookup (Arrow's) is several times faster here than a sorted search
        pos = pc.index_in(arrow_array(flat), value_set=arrow_array(self.words))
        if pos.null_count:
            raise _missing(1, pos.null_count)
        return numpy_of(pos, np.int64).reshape(np.shape(keys))

    def extend(self, k: int, prefix_ids: np.ndarray, last_word_ids: np.ndarray) -> np.ndarray:
        """Ids of the k-grams made of a (k-1)-gram id and a word id; an absent k-gram raises."""
        if k > self.max_k:
            raise MaskprepError(
                f"the {k}-gram counts are needed to score longer n-grams but were not given"
            )
        code = prefix_ids.astype(np.uint64) * np.uint64(len(self.words)) + last_word_ids.astype(
            np.uint64
        )
        pos, ok = _search(self.codes[k - 1], code)
        if not ok.all():
            raise _missing(k, int((~ok).sum()))
        return pos

    def prefix_ids(self, wid: np.ndarray) -> np.ndarray:
        """Id of each row of word ids (m, k) as a k-gram."""
        ids = wid[:, 0]
        for j in range(1, wid.shape[1]):
            ids = self.extend(j + 1, ids, wid[:, j])
        return ids

    def parts(self, keys: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(k-1)-gram ids of the first and of the last k - 1 words of k-gram rows (m, k)."""
        pre, suf, _ = self._parts(np.asarray(keys, np.uint64))
        return pre, suf

    def _parts(self, keys: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """`parts` and the id of each row's last word; an absent part raises."""
        k = keys.shape[1]
        if k - 1 > self.max_k:
            raise MaskprepError(
                f"the {k - 1}-gram counts are needed to score longer n-grams but were not given"
            )
        wid = self.word_ids(keys)
        if k == 2:
            return wid[:, 0], wid[:, 1], wid[:, 1]
        pre = self.prefix_ids(wid[:, : k - 1])
        # the last k - 1 words: the prefix's own last k - 2 words, then the last word
        suf = self.extend(k - 1, self.suffix[k - 2][pre], wid[:, k - 1])
        return pre, suf, wid[:, k - 1]

    def span_ids(self, k: int, ids: np.ndarray, start: int, stop: int) -> np.ndarray:
        """Ids of words [start, stop) of the indexed k-grams `ids`, as (stop - start)-grams."""
        for length in range(k, stop, -1):  # drop words on the right, then on the left
            ids = self.prefix[length - 1][ids]
        for length in range(stop, stop - start, -1):
            ids = self.suffix[length - 1][ids]
        return ids

    def counts_of(self, keys: np.ndarray) -> np.ndarray:
        """Counts of the k-grams given as word keys (m, k); absent rows raise."""
        keys = np.asarray(keys, np.uint64)
        return self.counts[keys.shape[1] - 1][self.prefix_ids(self.word_ids(keys))]


def _inverse(order: np.ndarray) -> np.ndarray:
    out = np.empty(len(order), np.int64)
    out[order] = np.arange(len(order), dtype=np.int64)
    return out


TableLike = Union[CountTable, tuple]


def _as_arrays(tables: Mapping[int, TableLike], k: int) -> tuple[np.ndarray, np.ndarray]:
    if k not in tables:
        raise MaskprepError(
            f"the {k}-gram counts are needed to score longer n-grams but were not given"
        )
    t = tables[k]
    keys, counts = (t.keys, t.counts) if isinstance(t, CountTable) else t
    return _key_rows(keys, counts, k), np.asarray(counts, np.int64)


def _key_rows(keys: np.ndarray, counts: np.ndarray, k: int) -> np.ndarray:
    keys = np.asarray(keys, np.uint64)
    if keys.size == 0 and len(counts) == 0:
        return keys.reshape(0, k)
    if keys.ndim != 2 or keys.shape != (len(counts), k):
        raise MaskprepError(
            f"the {k}-gram table needs keys of shape ({len(counts)}, {k}), got {keys.shape}"
        )
    return keys


def as_index(tables: Union[NgramIndex, Mapping[int, TableLike]], n: int) -> NgramIndex:
    if isinstance(tables, NgramIndex):
        if tables.max_k < n - 1:
            raise MaskprepError(f"the {tables.max_k + 1}-gram counts are needed to score {n}-grams "
                                "but were not given")
        return tables
    return NgramIndex.build(
        {k: tables[k] for k in range(1, n) if k in tables} or {1: _as_arrays(tables, 1)}
    )

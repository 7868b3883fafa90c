"""Numpy kernels of exact n-gram counting: count a block, fingerprint, reduce equal rows.

All vectorised (no Python loop per word or per n-gram):

- `count_block`: all n-grams (n = 1..max_n) of a block of word runs, counted
  exactly, level by level, with plain integer sorts;
- `fingerprint`: an order-sensitive 64-bit mix of a row of word keys, which
  fixes each n-gram's bucket (its "key range") and its canonical order;
- `reduce_rows`: merge equal rows of a (rows, n + 1) table of word keys and
  counts, exactly: rows are grouped by fingerprint and then compared word by
  word, so two different n-grams are never merged, whatever the hash does
  (`reduce_table`: the same for the row-major tables read back from runs).

Tables are uint64 arrays of shape (m, n + 1): columns 0..n-1 are word keys,
column n is the count. The canonical order of distinct rows is (fingerprint,
then word keys); it depends only on the set of rows, never on batch sizes,
spills or workers, which is what makes outputs byte-identical.

It does not touch files (spill.py writes and merges the sorted runs).
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "FINE_BITS",
    "FINE_BUCKETS",
    "COARSE_BITS",
    "COARSE_BUCKETS",
    "fingerprint",
    "reduce_rows",
    "reduce_table",
    "count_block",
    "count_windows",
    "fine_bucket",
]

FINE_BITS = 12                  # fine buckets: the key ranges merges are planned over
FINE_BUCKETS = 1 << FINE_BITS
COARSE_BITS = 6                 # coarse buckets: in-memory partitions of the spill buffer
COARSE_BUCKETS = 1 << COARSE_BITS

_SEED = np.uint64(0x9E3779B97F4A7C15)
_MUL1 = np.uint64(0xFF51AFD7ED558CCD)
_MUL2 = np.uint64(0xC4CEB9FE1A85EC53)
_S33 = np.uint64(33)
_S29 = np.uint64(29)


def fingerprint(columns: np.ndarray) -> np.ndarray:
    """Order-sensitive 64-bit mix of n-grams given as columns (n, m) of word keys, uint64 [m].

    >>> f = fingerprint(np.array([[1, 2], [2, 1]], dtype=np.uint64)); bool(f[0] != f[1])
    True
    """
    h = np.full(columns.shape[1], _SEED, dtype=np.uint64)
    for col in columns:  # loop over the <= 8 columns, vectorised over rows
        h ^= col
        h *= _MUL1
    return _finish(h)


def _row_fingerprints(table: np.ndarray, n: int, step: int = 1 << 15) -> np.ndarray:
    """`fingerprint` of the rows of a row-major (m, n + 1) table, in slices of `step` rows.

    Each column pass over a slice stays in cache; over the whole table every
    pass would read all of its memory again (measured about twice as slow).
    """
    m = table.shape[0]
    out = np.empty(m, np.uint64)
    for s in range(0, m, step):
        out[s:s + step] = fingerprint(table[s:s + step, :n].T)
    return out


def _bits(x: int) -> int:
    return max(1, int(x).bit_length())


def _differs(cols: list[np.ndarray]) -> np.ndarray:
    """bool [m-1]: row i+1 differs from row i in some column."""
    out = cols[0][1:] != cols[0][:-1]
    for c in cols[1:]:
        out |= c[1:] != c[:-1]
    return out


def reduce_rows(columns: np.ndarray, counts: np.ndarray, *, fp: np.ndarray | None = None,
                index_bits: int | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Merge equal n-grams; return a (distinct, n+1) table (keys, summed count) and its
    fingerprints.

    `columns` (n, m) uint64 word keys (any strides), `counts` (m,) uint64,
    `fp` their fingerprints if known. Output rows are in canonical order
    (fingerprint, then keys). `index_bits` only exists so tests can force
    fingerprint-prefix collisions.

    >>> reduce_rows(np.array([[5, 7, 5]], np.uint64), np.array([1, 2, 3], np.uint64))[0][:,
    ...     1].tolist() in ([4, 2], [2, 4])
    True
    """
    n, m = columns.shape
    if m == 0:
        return np.zeros((0, n + 1), np.uint64), np.zeros(0, np.uint64)
    if fp is None:
        fp = fingerprint(columns)
    ib = index_bits if index_bits is not None else _bits(m - 1)
    if ib < _bits(m - 1):
        raise ValueError("index_bits too small for the table")
    table = np.empty((m, n + 1), np.uint64)
    for j, col in enumerate(columns):
        table[:, j] = col
    table[:, n] = counts
    fast = _reduce_sorted(table, fp, n, ib)
    if fast is not None:
        return fast
    # Different n-grams share a fingerprint prefix: order those groups by
    # (full fingerprint, keys) so equal rows are adjacent and the order is canonical.
    order, same = _sorted_prefixes(fp, ib)
    cols = [np.take(col, order) for col in columns]
    c = np.take(counts, order)
    differ = np.zeros(m - 1, bool)
    for col in cols:
        differ |= col[1:] != col[:-1]
    pairs = np.flatnonzero(same)
    equal = ~differ[pairs]
    f = fp[order]
    group = np.concatenate(([0], np.cumsum(~same)))
    pos = np.flatnonzero(np.isin(group, np.unique(group[1:][pairs[~equal]])))
    perm = pos[np.lexsort([col[pos] for col in cols[::-1]] + [f[pos], group[pos]])]
    for arr in cols + [c, f]:
        arr[pos] = arr[perm]
    starts = np.flatnonzero(np.concatenate(([True], _differs(cols))))
    return _table(cols, c, starts, n), f[starts]


def reduce_table(table: np.ndarray, n: int, *, index_bits: int | None = None) -> np.ndarray:
    """`reduce_rows` for a row-major (m, n + 1) table of keys and counts, as read from runs.

    Returns the reduced table in canonical order. `index_bits` only exists so
    tests can force prefix clashes.

    >>> reduce_table(np.array([[5, 1], [7, 2], [5, 3]], np.uint64), 1)[:, 1].tolist() in ([4, 2],
    ...     [2, 4])
    True
    """
    m = table.shape[0]
    if m == 0:
        return np.zeros((0, n + 1), np.uint64)
    fp = _row_fingerprints(table, n)
    ib = index_bits if index_bits is not None else _bits(m - 1)
    if ib < _bits(m - 1):
        raise ValueError("index_bits too small for the table")
    fast = _reduce_sorted(table, fp, n, ib)
    if fast is not None:
        return fast[0]
    return reduce_rows(table[:, :n].T, table[:, n], fp=fp, index_bits=index_bits)[0]


def _sorted_prefixes(fp: np.ndarray, ib: int) -> tuple[np.ndarray, np.ndarray]:
    """Row order by fingerprint prefix (top 64 - ib bits), and whether each row's prefix equals the
    next's.

    The row index is packed into the low `ib` bits, so a plain (SIMD) sort of
    uint64 gives the permutation, much faster than argsort.
    """
    low = np.uint64((1 << ib) - 1)
    packed = (fp & ~low) | np.arange(len(fp), dtype=np.uint64)
    packed.sort()
    prefix = packed >> np.uint64(ib)
    return (packed & low).astype(np.intp), prefix[1:] == prefix[:-1]


def _reduce_sorted(
    table: np.ndarray, fp: np.ndarray, n: int, ib: int
) -> tuple[np.ndarray, np.ndarray] | None:
    """Reduce a row-major (m, n + 1) table when every equal-prefix group is one n-gram; None if two
    differ.

    Whole rows are gathered into sorted order (one cache line each, about
    twice as fast as n + 1 column gathers) and neighbours with equal prefixes
    are compared word by word in place; sums are differences of a running sum
    (faster than reduceat on many small groups).
    """
    m = table.shape[0]
    order, same = _sorted_prefixes(fp, ib)
    srt = np.take(table, order, axis=0)
    if not same.any():  # all distinct
        return srt, fp[order]
    differ = srt[1:, 0] != srt[:-1, 0]
    for j in range(1, n):
        differ |= srt[1:, j] != srt[:-1, j]
    if (same & differ).any():
        return None
    starts = np.flatnonzero(np.concatenate(([True], ~same)))
    out = np.take(srt, starts, axis=0)
    run = np.cumsum(srt[:, n])
    ends = np.empty(len(starts), np.intp)
    ends[:-1] = starts[1:] - 1
    ends[-1] = m - 1
    sums = np.take(run, ends)
    sums[1:] -= run[ends[:-1]]
    out[:, n] = sums
    return out, fp[order[starts]]


def _table(cols: list[np.ndarray], counts: np.ndarray, starts: np.ndarray, n: int) -> np.ndarray:
    """(groups, n + 1) table: the first row of each group of sorted rows (`starts`) and its summed
    count."""
    m = len(counts)
    out = np.empty((len(starts), n + 1), np.uint64)
    for j, col in enumerate(cols):
        # clip: indices are in range; no buffered copy
        np.take(col, starts, out=out[:, j], mode="clip")
    run = np.cumsum(counts)
    ends = np.append(starts[1:], m) - 1
    out[:, n] = run[ends]
    out[1:, n] -= run[ends[:-1]]
    return out


def _dense_ids(wk: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Ids 0..V-1 of word keys in key order, and the V distinct keys (sorted)."""
    m = len(wk)
    ib = _bits(m - 1)
    low = np.uint64((1 << ib) - 1)
    packed = (wk & ~low) | np.arange(m, dtype=np.uint64)
    packed.sort()
    order = (packed & low).astype(np.intp)
    sk = wk[order]
    if m > 1 and bool((sk[1:] < sk[:-1]).any()):
        # two keys share their top bits (rare): exact fallback
        uniq, inverse = np.unique(wk, return_inverse=True)
        return inverse.astype(np.uint64).ravel(), uniq
    step = np.empty(m, np.uint64)
    step[0] = 0
    np.not_equal(sk[1:], sk[:-1], out=step[1:], casting="unsafe")
    ids = np.empty(m, np.uint64)
    ids[order] = np.cumsum(step)
    first = np.flatnonzero(np.concatenate(([True], step[1:] != 0)))
    return ids, sk[first]


def count_block(wk: np.ndarray, rem: np.ndarray, max_n: int) -> list[tuple[np.ndarray, ...]]:
    """Count every n-gram (n = 1..max_n) of a block of word runs, grouped by coarse bucket.

    `wk` uint64 [M]: keys of counted words, runs back to back; `rem` int64 [M]:
    words left in the run from each position (>= 1). Returns, for each n,
    (key columns (n, D_n), counts (D_n,), fingerprints (D_n,), coarse offsets
    [COARSE_BUCKETS + 1]), rows grouped by bucket. Rows are distinct n-grams
    up to the first level that is nearly all distinct; from there on each
    occurrence is its own row (count 1), left for the spill reduce to merge.

    >>> [t[1].tolist() for t in count_block(np.array([4, 4, 4], np.uint64), np.array([3, 2, 1]), 2)]
    [[3], [2]]
    """
    # Performance: a block (<= 2**16 words by default) stays in cache. Words get dense ids (b
    # bits); unigrams are a bincount. Level n refines level n-1: only positions that start an
    # n-gram (>= n words left in the run) take part, each keyed by (rank of its (n-1)-gram, id of
    # its n-th word) packed into one uint64 beside the position index, so numpy's SIMD sort of
    # plain integers yields the permutation (no argsort) and the new dense ranks. Once a level is
    # nearly all distinct, longer n-grams skip the grouping (the spill reduce merges equal rows
    # anyway). Fingerprints roll along with the levels (one xor-multiply per position), so each
    # distinct n-gram's bucket is known before its keys are gathered, and keys are gathered once,
    # already in bucket order, column by column (contiguous 1-D gathers). Work per level is linear
    # in the positions still valid, which shrink with n, and does not depend on how many n-grams
    # are distinct. Tables stay column-major until written.
    M = len(wk)
    out: list[tuple[np.ndarray, ...]] = []
    if M == 0:
        return [
            _grouped(np.zeros((n, 0), np.uint64), np.zeros(0, np.uint64), np.zeros(0, np.uint64))
            for n in range(1, max_n + 1)
        ]
    ids, uniq = _dense_ids(wk)
    V = len(uniq)
    out.append(
        _grouped(
            uniq.reshape(1, -1),
            np.bincount(ids.astype(np.intp), minlength=V).astype(np.uint64),
            fingerprint(uniq.reshape(1, -1)),
        )
    )
    b = np.uint64(_bits(V - 1))
    padded = np.zeros(M + max_n, np.uint64)
    padded[:M] = wk
    pos = np.arange(M, dtype=np.intp)
    rank, rank_bits = ids, int(b)
    roll = (wk ^ _SEED) * _MUL1          # un-finalised fingerprint of the 1-gram at each position
    grouping = True
    for n in range(2, max_n + 1):
        keep = np.flatnonzero(rem[pos] >= n)
        pos, roll = pos[keep], roll[keep]
        m = len(pos)
        if m == 0:
            out.extend(
                _grouped(
                    np.zeros((k, 0), np.uint64), np.zeros(0, np.uint64), np.zeros(0, np.uint64)
                )
                for k in range(n, max_n + 1)
            )
            break
        last = pos + (n - 1)
        roll ^= padded[last]
        roll *= _MUL1
        if grouping:
            first, counts, rank, rank_bits = _group_level(
                rank[keep], ids[last], int(b), rank_bits, n < max_n
            )
            # nearly all distinct: grouping the longer n-grams of this block would not pay
            # (the spill reduce merges equal rows anyway), so they are emitted one per
            # position from now on
            grouping = len(first) < 0.85 * m
            fp = _finish(roll[first])
            at_first = pos[first]
        else:
            counts = np.ones(m, np.uint64)
            fp = _finish(roll)
            at_first = pos
        bucket = (fp >> np.uint64(64 - COARSE_BITS)).astype(np.uint8)
        by_bucket = np.argsort(bucket, kind="stable")
        at = at_first[by_bucket]
        keys = np.empty((n, len(at)), np.uint64)
        for k in range(n):
            np.take(padded, at, out=keys[k], mode="clip")
            at += 1
        out.append((keys, counts[by_bucket], fp[by_bucket], _offsets(bucket)))
    return out


def _group_level(prev: np.ndarray, last: np.ndarray, b: int, rank_bits: int,
                 want_rank: bool) -> tuple[np.ndarray, np.ndarray, np.ndarray, int]:
    """Group positions by (rank of their (n-1)-gram, id of their n-th word).

    Returns (first member of each group, group sizes, rank of each position's
    n-gram (if wanted), bits of the largest rank).
    """
    m = len(prev)
    code = (prev << np.uint64(b)) | last
    ib = _bits(m - 1)
    if rank_bits + b + ib <= 64:
        srt = (code << np.uint64(ib)) | np.arange(m, dtype=np.uint64)
        srt.sort()
        order = (srt & np.uint64((1 << ib) - 1)).astype(np.intp)
        sorted_code = srt >> np.uint64(ib)
    else:  # very long runs only: exact but slower
        order = np.argsort(code, kind="stable")
        sorted_code = code[order]
    step = np.empty(m, np.uint64)
    step[0] = 0
    np.not_equal(sorted_code[1:], sorted_code[:-1], out=step[1:], casting="unsafe")
    starts = np.flatnonzero(np.concatenate(([True], step[1:] != 0)))
    counts = np.diff(np.append(starts, m)).astype(np.uint64)
    rank = prev
    if want_rank:
        rank = np.empty(m, np.uint64)
        rank[order] = np.cumsum(step)
    return order[starts], counts, rank, _bits(len(starts) - 1)


def _finish(h: np.ndarray) -> np.ndarray:
    h = h ^ (h >> _S33)
    h *= _MUL2
    h ^= h >> _S29
    return h


def _offsets(bucket: np.ndarray) -> np.ndarray:
    offsets = np.zeros(COARSE_BUCKETS + 1, np.int64)
    np.cumsum(np.bincount(bucket, minlength=COARSE_BUCKETS), out=offsets[1:])
    return offsets


def _grouped(keys: np.ndarray, counts: np.ndarray, fp: np.ndarray) -> tuple[np.ndarray, ...]:
    bucket = (fp >> np.uint64(64 - COARSE_BITS)).astype(np.uint8)
    order = np.argsort(bucket, kind="stable")
    return keys[:, order], counts[order], fp[order], _offsets(bucket)


def count_windows(
    wk: np.ndarray, rem: np.ndarray, max_n: int
) -> list[tuple[np.ndarray, np.ndarray]]:
    """(keys (D_n, n) rows, counts (D_n,)) of the distinct n-grams of a block, for n = 1..max_n.

    >>> [c.tolist() for _,
    ...     c in count_windows(np.array([4, 4, 4], np.uint64), np.array([3, 2, 1]), 2)]
    [[3], [2]]
    """
    out = []
    for keys, counts, fp, _ in count_block(wk, rem, max_n):
        table, _ = reduce_rows(keys, counts, fp=fp)
        out.append((table[:, :-1], table[:, -1]))
    return out


def fine_bucket(fp: np.ndarray) -> np.ndarray:
    """Fine bucket (key range) of each fingerprint: its top FINE_BITS bits."""
    return (fp >> np.uint64(64 - FINE_BITS)).astype(np.int64)

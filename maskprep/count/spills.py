"""The sorted runs of n-gram counts spilled to disk, and their merge by key range.

Spill runs are plain `.npy` files (readable with ``np.load``) of uint64 rows
(n word keys, then the count; see `maskprep.count.kernels`), written block
by block by `SpillWriter`; every run is sorted canonically, so the rows of one
fine bucket (top `FINE_BITS` bits of the fingerprint) are one contiguous slice.

`merge_partition` (a task function) sums the runs of one key range of one n,
in groups of consecutive fine buckets small enough to stay in cache, prunes
by min_count and writes the kept rows, still in canonical order.

It does not read corpora, tokenize, count blocks (ngram_kernels.py) or decide
when to spill (ngrams.py).
"""

from __future__ import annotations

import errno
import os
import struct
import zlib
from dataclasses import dataclass
from pathlib import Path
from typing import BinaryIO

import numpy as np

from .._checks import sum_by_key
from ..errors import MaskprepError
from .kernels import FINE_BUCKETS, reduce_table

_HEADER_BYTES = 128             # fixed .npy header size, so the shape can be patched at the end
_U64 = np.dtype("<u8")


# ---------------------------------------------------------------- run files

def write_block(fh: BinaryIO, block: np.ndarray) -> memoryview:
    """Append the bytes of a uint64 block to an open spill file (the one place spills write);
    returns those bytes."""
    data = np.ascontiguousarray(block, dtype=_U64).data.cast("B")
    fh.write(data)
    return data


def _npy_header(rows: int, cols: int) -> bytes:
    text = "{'descr': '<u8', 'fortran_order': False, 'shape': (%d, %d), }" % (rows, cols)
    body = text.ljust(_HEADER_BYTES - 10 - 1) + "\n"
    return b"\x93NUMPY\x01\x00" + struct.pack("<H", len(body)) + body.encode("latin1")


HEADER_BYTES = _HEADER_BYTES


class SpillWriter:
    """Stream a (rows, cols) uint64 `.npy` file block by block.

    >>> with SpillWriter(Path("run.npy"), 3) as w:  # doctest: +SKIP
    ...     w.write(np.zeros((2, 3), np.uint64))
    """

    def __init__(self, path: Path, cols: int) -> None:
        self.path = path
        self.cols = cols
        self.rows = 0
        self._fh: BinaryIO | None = open(path, "wb")
        self._fh.write(_npy_header(0, cols))
        self._body_crc = 0
        # once closed: the file's CRC-32 as `maskprep._files.file_crc32(path, head=HEADER_BYTES)`
        # gives it, computed from the bytes in memory
        self.crc32: int | None = None

    def write(self, block: np.ndarray) -> None:
        if block.shape[0] == 0:
            return
        assert self._fh is not None and block.shape[1] == self.cols
        self._body_crc = zlib.crc32(write_block(self._fh, block), self._body_crc)
        self.rows += block.shape[0]

    def close(self) -> None:
        if self._fh is None:
            return
        fh, self._fh = self._fh, None
        try:
            fh.seek(0)
            header = _npy_header(self.rows, self.cols)
            fh.write(header)
            self.crc32 = zlib.crc32(header, self._body_crc)
        finally:
            fh.close()

    def abort(self) -> None:
        if self._fh is not None:
            self._fh.close()
            self._fh = None
        try:
            os.unlink(self.path)
        except OSError:
            pass

    def __enter__(self) -> "SpillWriter":
        return self

    def __exit__(self, exc_type: object, *rest: object) -> None:
        if exc_type is None:
            self.close()
        else:
            self.abort()


def read_rows(path: str | Path, cols: int, start: int, stop: int) -> np.ndarray:
    """Rows [start, stop) of a run file, read into memory (no mapping, so RSS stays bounded).

    >>> read_rows("run.npy", 3, 0, 2).shape  # doctest: +SKIP
    (2, 3)
    """
    count = max(0, stop - start)
    if count == 0:
        return np.zeros((0, cols), np.uint64)
    with open(path, "rb") as fh:
        fh.seek(_HEADER_BYTES + start * cols * 8)
        data = np.fromfile(fh, dtype=_U64, count=count * cols)
    if data.size != count * cols:
        raise OSError(f"{path}: spill file is truncated")
    return data.reshape(count, cols)



# ---------------------------------------------------------------- runs and their merge

@dataclass(frozen=True)
class SpillFile:
    """One sorted spill run of one n: its file, rows and fine-bucket offsets [FINE_BUCKETS + 1]."""

    path: str
    n: int
    rows: int
    offsets: np.ndarray
    crc32: int | None = None  # of the file as written (see SpillWriter.crc32; None: not known)


@dataclass(frozen=True)
class PartitionResult:
    """One merged key range of one n: kept rows written to `path`, and figures before pruning."""

    n: int
    path: str
    kept: int
    distinct: int
    total: int
    hist_values: np.ndarray
    hist_rows: np.ndarray


@dataclass(frozen=True)
class MergeJob:
    """Arguments of one `merge_partition` task."""

    n: int
    sources: list[tuple[str, np.ndarray]]  # (run path, its offsets for fine buckets b0..b1)
    min_count: int
    group_rows: int
    out_path: str


def disk_error(exc: OSError, where: Path, doing: str) -> MaskprepError:
    if exc.errno in (errno.ENOSPC, errno.EDQUOT):
        return MaskprepError(
            f"{where}: no space left on device while {doing}; free disk space, write "
            "COUNTS_DIR (-o) on a larger disk, or raise --memory so fewer runs are spilled; "
            "finished tasks are kept in COUNTS_DIR/.maskprep-count for --resume (delete it to "
            "free their space)"
        )
    return MaskprepError(f"{where}: cannot write while {doing} ({exc.strerror or exc})")


# ---------------------------------------------------------------- merging one key range

def merge_partition(job: MergeJob) -> PartitionResult:
    """Task function: sum the runs of one key range of one n exactly, prune, write kept rows.

    >>> merge_partition(MergeJob(2, [("t0-r0000-n2.npy", offsets)], 10, 1 << 18,  # doctest: +SKIP
    ...     "kept.npy"))
    """
    n = job.n
    per_bucket = np.zeros(0, np.int64)
    for k, (_, off) in enumerate(job.sources):
        per_bucket = np.diff(off) if k == 0 else per_bucket + np.diff(off)
    # greedy groups of consecutive buckets of at most group_rows rows (at least one bucket)
    groups: list[tuple[int, int]] = []
    start, acc = 0, 0
    for b, bucket_rows in enumerate(per_bucket.tolist()):
        if acc and acc + bucket_rows > job.group_rows:
            groups.append((start, b))
            start, acc = b, 0
        acc += bucket_rows
    if acc:
        groups.append((start, len(per_bucket)))
    distinct = total = 0
    hist_v: list[np.ndarray] = []
    hist_r: list[np.ndarray] = []
    try:
        with SpillWriter(Path(job.out_path), n + 1) as writer:
            for s0, s1 in groups:
                parts = [
                    read_rows(path, n + 1, int(off[s0]), int(off[s1]))
                    for path, off in job.sources
                    if off[s1] > off[s0]
                ]
                if len(parts) == 1:  # one run: already distinct and in canonical order
                    out = parts[0]
                else:
                    table = np.concatenate(parts)
                    del parts
                    out = reduce_table(table, n)
                    del table
                counts = out[:, n]
                distinct += len(out)
                total += int(counts.sum())
                kept = out[counts >= np.uint64(job.min_count)]
                writer.write(kept)
                v, r = np.unique(kept[:, n], return_counts=True)
                hist_v.append(v)
                hist_r.append(r)
            kept_rows = writer.rows
    except OSError as exc:
        raise disk_error(exc, Path(job.out_path).parent, "merging spilled runs") from None
    values, rows = merge_hist(hist_v, hist_r)
    return PartitionResult(n, job.out_path, kept_rows, distinct, total, values, rows)


def merge_hist(values: list[np.ndarray], rows: list[np.ndarray]) -> tuple[np.ndarray, np.ndarray]:
    if not values:
        return np.zeros(0, np.uint64), np.zeros(0, np.int64)
    v, counts = sum_by_key(np.concatenate(values), np.concatenate(rows))
    return v, counts


def plan_merges(runs: list[SpillFile], n: int, parts: int, min_count: int, group_rows: int,
                 spill_dir: Path) -> list[MergeJob]:
    """Split the fine buckets of one n into `parts` ranges of about equal rows."""
    if not runs:
        return []
    per_bucket = sum(np.diff(r.offsets) for r in runs)
    cum = np.cumsum(per_bucket)
    total = int(cum[-1])
    parts = max(1, min(parts, -(-total // 65536)))
    cuts = np.searchsorted(cum, [total * k // parts for k in range(1, parts)], side="right")
    edges = np.unique(np.concatenate(([0], cuts, [FINE_BUCKETS]))).tolist()
    jobs = []
    for p, (b0, b1) in enumerate(zip(edges[:-1], edges[1:])):
        sources = [
            (r.path, r.offsets[b0 : b1 + 1].copy()) for r in runs if r.offsets[b1] > r.offsets[b0]
        ]
        jobs.append(
            MergeJob(n, sources, min_count, group_rows, str(spill_dir / f"kept-n{n}-p{p:04d}.npy"))
        )
    return jobs

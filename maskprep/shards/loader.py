"""Training batches from a shards directory: shuffled, split by rank and worker, resumable.

``ShardLoader("shards/", batch_size=32)`` yields dicts of numpy arrays of one
fixed shape: ``input_ids`` and ``labels`` int32 (batch_size, seq_len),
``attention_mask`` int8 (batch_size, seq_len), ``sequence_id`` uint64 and
``copy`` int16 (batch_size,). Only the last batch of a rank may be shorter,
and only when ``drop_last`` is False. ``--dynamic`` shards are masked on the
fly with the run's sampler (`ShardSet.mask` with ``epoch=``): in epoch e a
row of copy c gets the mask of copy ``c + e x copies``, so epoch 0 gives
exactly the static rows and every later epoch a fresh mask; ``mask=False``
yields the stored ``input_ids`` and ``unit_ids`` instead.

The order of an epoch is a pure function of (seed, epoch) and the options
(no clock, no process ids), built in four steps:

1. *pieces*: the record batches of Arrow files (1,024 rows) and row groups of
   Parquet files (8,192 rows); with ``shuffle`` their order is a permutation
   drawn from (seed, epoch), else the manifest order. Laid end to end they
   form the epoch's stream of all N rows;
2. *ranks*: rank r takes the rows ``[r*N // world_size, (r+1)*N // world_size)``
   of the stream, so rank sizes differ by at most one row and every row
   belongs to exactly one rank. With ``drop_last`` every rank yields the same
   number of full batches, ``(N // world_size) // batch_size`` (what
   data-parallel training needs); the rows past that, fewer than
   ``world_size x (batch_size + 1)``, are skipped in that epoch (other rows
   in other epochs when shuffling);
3. *windows*: the rows of each worker (step 4) are cut into windows of
   ``window_rows`` rows (``buffer_rows`` rounded down to whole batches, at
   least one batch); with ``shuffle`` the rows of a window are permuted, by
   hashes of (seed, epoch, stream position). That window is the shuffle buffer;
4. *workers*: the rank's batches are split into ``num_workers`` contiguous
   runs (sizes differ by one batch at most, the last worker has the most),
   one per data-loader worker; each worker reads its run window by window
   and cuts it into batches. The rank's order of batches is the workers' batches taken in
   turn (worker 0, 1, ..., 0, 1, ...; a worker that has run out is passed
   over), which is the order a PyTorch DataLoader delivers from an iterable
   dataset with that many workers. Iterating a loader in one process with
   ``num_workers=W`` gives that same order. After a restore in mid-epoch the
   worker copies take turns from the worker whose turn was next, so a
   restarted DataLoader (which asks worker 0 first) goes on in the same order.

**Memory.** The shuffle buffer is one window: ``window_rows x row_bytes``
bytes of numpy arrays, where ``row_bytes = 9 x seq_len + 10`` (4 + 4 + 1 bytes
per token for ``input_ids``, ``labels`` or ``unit_ids`` and ``attention_mask``;
8 + 2 per row for ``sequence_id`` and ``copy``); `ShardLoader.buffer_bytes`
gives the figure. Batches are views of the window, except the last batch of
each window, which is copied, so that the window's arrays are free again when
the next window is built; they are then reused (no new allocation, no page
faults). If the caller still holds a view of them, a new window is allocated
instead and the held batch stays intact. Peak heap: one window, the batches
the caller holds (for dynamic shards also the two masked arrays of each
batch), about 40 bytes a row while a window's permutation is drawn, and the
metadata of the open files (at most 64 are kept open). Arrow files are
memory-mapped, so their pages sit in the OS page cache, not in the heap;
Parquet row groups (up to 8,192 rows) are decoded by pyarrow in its own memory
pool: the one in use and the next, decoded ahead in a thread. Iterating in one
process with ``num_workers=W`` holds W windows; each real worker process holds
its own one.

**Resuming.** ``state()`` is a small JSON-able dict: the epoch, the batches
this rank has delivered in it, and the options the order depends on.
``restore(state)`` on a loader made with the same options (any rank) makes
the next batch the one after them; a finished epoch moves the loader to the
next epoch with position 0. With worker processes the main process does not
see the iteration: pass the training loop's own count, ``state(batches=n)``.

Every row is gathered with numpy (`argsort` of hashes, one scatter per piece
and column); there is no Python loop per row or per token.

This module does not write or check shards.
"""

from __future__ import annotations

import hashlib
import sys
from pathlib import Path
from typing import Any, Iterator, Mapping

import numpy as np

from ..errors import MaskprepError
from ..masking.strategies import _absorb_int, absorb
from .pieces import PieceFiles
from .read import ShardSet
from .write import COPY_DTYPE

__all__ = ["ShardLoader", "DEFAULT_BUFFER_ROWS"]

DEFAULT_BUFFER_ROWS = 16384
_TAG_PIECES = 0x4C4F_4144_0001  # random streams of the loader, apart from the sampler's tags
_TAG_ROWS = 0x4C4F_4144_0002
_STATE_KEYS = (
    "seed",
    "shuffle",
    "batch_size",
    "buffer_rows",
    "world_size",
    "num_workers",
    "drop_last",
    "rows",
    "shards",
)


def _whole(name: str, value: Any, low: int, high: int | None = None) -> int:
    if (
        isinstance(value, bool)
        or not isinstance(value, (int, np.integer))
        or value < low
        or (high is not None and value > high)
    ):
        span = f"from {low} to {high}" if high is not None else f">= {low}"
        raise MaskprepError(f"ShardLoader: {name} must be a whole number {span}, got {value!r}")
    return int(value)


def _keys(seed: int, epoch: int, tag: int, positions: np.ndarray) -> np.ndarray:
    key = _absorb_int(_absorb_int(_absorb_int(0, seed), epoch), tag)
    return absorb(key, positions.astype(np.uint64))


class ShardLoader:
    """Shuffled, rank- and worker-split, resumable batches of a shards directory.

    >>> loader = ShardLoader("shards/", batch_size=32, rank=0, world_size=2)  # doctest: +SKIP
    >>> for batch in loader:  # one epoch; the next pass is the next epoch  # doctest: +SKIP
    ...     step(batch["input_ids"], batch["labels"], batch["attention_mask"])
    """

    def __init__(
        self,
        shards: str | Path | ShardSet,
        *,
        batch_size: int,
        shuffle: bool = True,
        seed: int = 0,
        epoch: int = 0,
        rank: int = 0,
        world_size: int = 1,
        num_workers: int = 1,
        worker: int | None = None,
        drop_last: bool = False,
        buffer_rows: int = DEFAULT_BUFFER_ROWS,
        mask: bool = True,
    ) -> None:
        self.shards = shards if isinstance(shards, ShardSet) else ShardSet(shards)
        self.batch_size = _whole("batch_size", batch_size, 1)
        self.seed = _whole("seed", seed, 0, (1 << 64) - 1)
        self.world_size = _whole("world_size", world_size, 1)
        self.rank = _whole("rank", rank, 0, self.world_size - 1)
        self.num_workers = _whole("num_workers", num_workers, 1)
        self.worker = None if worker is None else _whole("worker", worker, 0, self.num_workers - 1)
        self.buffer_rows = _whole("buffer_rows", buffer_rows, 1)
        self.shuffle, self.drop_last, self.mask = bool(shuffle), bool(drop_last), bool(mask)
        self.epoch = _whole("epoch", epoch, 0)
        self.batches = 0  # batches of this rank delivered in this epoch
        self.seq_len = int(self.shards.options["seq_len"])
        self.window_rows = self.batch_size * max(1, self.buffer_rows // self.batch_size)
        self._files = PieceFiles(self.shards, self.columns)
        self._pool: list[dict[str, np.ndarray]] = []  # window arrays, reused when unviewed

    # ------------------------------------------------------------ sizes and memory

    @property
    def columns(self) -> tuple[str, ...]:
        """Column names as stored (the batches of dynamic shards masked here have ``labels``)."""
        second = "unit_ids" if self.shards.dynamic else "labels"
        return ("input_ids", second, "attention_mask", "sequence_id", "copy")

    @property
    def row_bytes(self) -> int:
        """Bytes of one row in the shuffle buffer: 9 x seq_len + 10."""
        return 9 * self.seq_len + 8 + np.dtype(COPY_DTYPE).itemsize

    @property
    def buffer_bytes(self) -> int:
        """Bytes of the shuffle buffer (one window of rows), as stated in the module docs."""
        return self.window_rows * self.row_bytes

    def rank_rows(self) -> int:
        """Rows of this rank in every epoch (before ``drop_last``)."""
        n, r, w = len(self.shards), self.rank, self.world_size
        return (r + 1) * n // w - r * n // w

    def __len__(self) -> int:
        """Batches this rank yields per epoch (the same in every epoch)."""
        if self.drop_last:
            return (len(self.shards) // self.world_size) // self.batch_size
        return -(-self.rank_rows() // self.batch_size)

    # ------------------------------------------------------------ position

    def set_epoch(self, epoch: int) -> None:
        """Go to the start of `epoch`; the current epoch keeps its position (a restored loader
        resumes)."""
        epoch = _whole("epoch", epoch, 0)
        if epoch != self.epoch:
            self.epoch, self.batches = epoch, 0

    def _fingerprint(self) -> str:
        digests = "".join(s.sha256 for s in self.shards.manifest.shards)
        return hashlib.sha256(digests.encode()).hexdigest()[:16]

    def state(self, *, batches: int | None = None) -> dict[str, Any]:
        """The position as a JSON-able dict: ``{"epoch": 2, "batches": 57, ...}``.

        `batches` overrides the count this loader saw (use the training loop's count
        when worker processes did the iterating).
        """
        n = self.batches if batches is None else _whole("batches", batches, 0)
        out: dict[str, Any] = {"format": "maskprep-loader", "epoch": self.epoch, "batches": n}
        out.update({k: getattr(self, k) for k in _STATE_KEYS[:-2]})
        out.update(rows=len(self.shards), shards=self._fingerprint())
        return out

    def restore(self, state: Mapping[str, Any]) -> None:
        """Continue from `state` (from `state()` of a loader with the same options, any rank)."""
        if not isinstance(state, Mapping) or state.get("format") != "maskprep-loader":
            raise MaskprepError(
                "ShardLoader.restore: not a loader state (use ShardLoader.state())"
            )
        mine = self.state()
        wrong = [
            f"{k}: {state.get(k)!r} in the state, {mine[k]!r} here"
            for k in _STATE_KEYS
            if state.get(k) != mine[k]
        ]
        if wrong:
            raise MaskprepError(
                "ShardLoader.restore: the state belongs to another order ("
                + "; ".join(wrong)
                + "); make the loader with the same options "
                "over the same shards"
            )
        self.epoch = _whole("state epoch", state.get("epoch"), 0)
        self.batches = _whole("state batches", state.get("batches"), 0)

    def for_worker(self, worker: int, num_workers: int | None = None) -> "ShardLoader":
        """A copy that yields only the batches of data-loader worker `worker` (of `num_workers`).

        Call it inside the worker (e.g. from ``torch.utils.data.get_worker_info()``);
        the copy keeps this loader's epoch and position and does not advance them.
        """
        if num_workers is not None and num_workers != self.num_workers:
            raise MaskprepError(
                f"ShardLoader.for_worker: {num_workers} workers here, but the loader "
                f"was made with num_workers={self.num_workers}; pass the same number"
            )
        other = ShardLoader(
            self.shards,
            batch_size=self.batch_size,
            shuffle=self.shuffle,
            seed=self.seed,
            epoch=self.epoch,
            rank=self.rank,
            world_size=self.world_size,
            num_workers=self.num_workers,
            worker=worker,
            drop_last=self.drop_last,
            buffer_rows=self.buffer_rows,
            mask=self.mask,
        )
        other.batches = self.batches
        return other

    def __getstate__(self) -> dict[str, Any]:  # pickled to a worker: no window arrays
        return {**self.__dict__, "_pool": []}

    # ------------------------------------------------------------ the plan of an epoch

    def pieces(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(shard index, piece index in the file, rows) of every piece, in manifest order."""
        return self._files.pieces()

    def _windows(self, epoch: int) -> tuple[np.ndarray, np.ndarray, list[np.ndarray]]:
        """Piece order and stream starts, and each worker's windows [start, end) of this rank."""
        _, _, rows = self.pieces()
        order = np.arange(len(rows))
        if self.shuffle and len(rows):
            order = np.argsort(_keys(self.seed, epoch, _TAG_PIECES, order), kind="stable")
        starts = np.concatenate([[0], np.cumsum(rows[order])])
        n, r, w = int(starts[-1]), self.rank, self.world_size
        first = r * n // w
        end = first + (len(self) * self.batch_size if self.drop_last else (r + 1) * n // w - first)
        nb, nk, bs = len(self), self.num_workers, self.batch_size
        split = []
        for k in range(
            nk
        ):  # worker k: batches [k nb // nk, (k+1) nb // nk); the last has the most
            lo, hi = first + k * nb // nk * bs, min(end, first + (k + 1) * nb // nk * bs)
            edges = np.append(np.arange(lo, hi, self.window_rows), hi)
            split.append(np.stack([edges[:-1], edges[1:]], axis=1))
        return order, starts, split

    @staticmethod
    def _turns(counts: np.ndarray) -> np.ndarray:
        """Worker of each rank-level batch: workers in turn, those run out passed over."""
        rounds = (
            np.concatenate([np.arange(c) for c in counts]) if len(counts) else np.zeros(0, int)
        )
        who = np.repeat(np.arange(len(counts)), counts)
        return who[np.lexsort((who, rounds))]

    def _window(
        self, epoch: int, order: np.ndarray, starts: np.ndarray, lo: int, hi: int, until: int
    ) -> dict[str, np.ndarray]:
        """Rows [lo, hi) of the epoch's stream, permuted within the window when shuffling
        (`until`: the end of this worker's rows, so reading ahead stops there)."""
        files, parts, _ = self.pieces()
        n = hi - lo
        inv = None
        if self.shuffle:  # row lo + i goes to place inv[i] of the window: a random permutation
            inv = np.argsort(_keys(self.seed, epoch, _TAG_ROWS, np.arange(lo, hi)), kind="stable")
        out: dict[str, np.ndarray] | None = None
        j = int(np.searchsorted(starts, lo, side="right")) - 1
        while j < len(order) and starts[j] < hi:
            a, b = max(lo, int(starts[j])), min(hi, int(starts[j + 1]))
            if b > a:
                nxt = j + 1 if j + 1 < len(order) and starts[j + 1] < until else None
                piece = self._files.piece(
                    int(files[order[j]]),
                    int(parts[order[j]]),
                    None if nxt is None else (int(files[order[nxt]]), int(parts[order[nxt]])),
                )
                if out is None:
                    out = {k: v[:n] for k, v in self._buffers(piece).items()}
                src = slice(a - int(starts[j]), b - int(starts[j]))
                dst = inv[a - lo : b - lo] if inv is not None else slice(a - lo, b - lo)
                for k, v in piece.items():
                    out[k][dst] = v[src]
            j += 1
        assert out is not None
        return out

    def _buffers(self, piece: Mapping[str, np.ndarray]) -> dict[str, np.ndarray]:
        """Arrays of window_rows rows for a window: a pooled set that nothing refers to any more
        (no batch handed out is a view of it), else a new one, kept for later windows."""
        for buf in self._pool:
            # references: the pool's dict and getrefcount's argument; a live batch view adds one
            if all(sys.getrefcount(buf[k]) <= 2 for k in buf):
                return buf
        buf = {
            k: np.empty((self.window_rows,) + v.shape[1:], dtype=v.dtype) for k, v in piece.items()
        }
        if len(self._pool) < self.num_workers:  # one set per worker stream in this process
            self._pool.append(buf)
        return buf

    def _worker_batches(
        self, epoch: int, order: np.ndarray, starts: np.ndarray, windows: np.ndarray, skip: int
    ) -> Iterator[dict[str, np.ndarray]]:
        """The batches of one worker's windows, after skipping `skip` of them."""
        bs = self.batch_size
        per = -(-(windows[:, 1] - windows[:, 0]) // bs)
        first = np.cumsum(per) - per
        for w in range(len(windows)):
            if first[w] + per[w] <= skip:
                continue
            lo, hi = int(windows[w, 0]), int(windows[w, 1])
            data = self._window(epoch, order, starts, lo, hi, int(windows[-1, 1]))
            for k in range(max(0, skip - int(first[w])), int(per[w])):
                last = k == per[w] - 1
                batch = {
                    name: (v[k * bs : (k + 1) * bs].copy() if last else v[k * bs : (k + 1) * bs])
                    for name, v in data.items()
                }
                yield self._finish(batch, epoch)
            del data

    def _finish(self, batch: dict[str, np.ndarray], epoch: int) -> dict[str, np.ndarray]:
        if not (self.shards.dynamic and self.mask):
            return batch
        ids, labels = self.shards.mask(batch, epoch=epoch)
        return {
            "input_ids": ids,
            "labels": labels,
            "attention_mask": batch["attention_mask"],
            "sequence_id": batch["sequence_id"],
            "copy": batch["copy"],
        }

    def __iter__(self) -> Iterator[dict[str, np.ndarray]]:
        """The rest of the current epoch; in one process, finishing it moves to the next epoch."""
        epoch = self.epoch
        order, starts, split = self._windows(epoch)
        bs = self.batch_size
        counts = np.array(
            [int((-(-(w[:, 1] - w[:, 0]) // bs)).sum()) for w in split], dtype=np.int64
        )
        turns = self._turns(counts)
        done = min(self.batches, len(turns))
        skips = np.bincount(turns[:done], minlength=self.num_workers)
        if self.worker is not None:  # a copy inside a data-loader worker: its own share only
            # A restarted DataLoader asks worker 0 first; it takes the part of the worker whose
            # turn is next (the others follow in the same cycle): the order goes on as before.
            role = (
                (int(turns[done]) + self.worker) % self.num_workers
                if done < len(turns)
                else self.worker
            )
            yield from self._worker_batches(epoch, order, starts, split[role], int(skips[role]))
            return
        streams = [
            self._worker_batches(epoch, order, starts, split[k], int(skips[k]))
            for k in range(self.num_workers)
        ]
        if self.num_workers == 1:
            for batch in streams[0]:
                self.batches += 1
                yield batch
        else:
            for k in turns[done:].tolist():
                batch = next(streams[k])
                self.batches += 1
                yield batch
        if self.epoch == epoch:
            self.epoch, self.batches = epoch + 1, 0

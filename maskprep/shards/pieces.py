"""Random access to the pieces of a shards directory, for `maskprep.shards.loader`.

A *piece* is one record batch of an Arrow file (1,024 rows) or one row group of
a Parquet file (8,192 rows), the last of a file shorter: the writer cuts files
so, hence the pieces follow from the manifest; each is checked when read.
Arrow files are memory-mapped, so a piece's columns are numpy views of the
mapped file (kept while the file is open); Parquet row groups are decoded by
pyarrow, the next one ahead in a thread (pyarrow releases the GIL while
decoding). At most 64 files are kept open. Pickling (to a data-loader worker)
drops the open files.

This module does not order, shuffle or batch rows.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from ..errors import MaskprepError
from .read import ShardSet
from .shardfile import ARROW_BATCH_ROWS, COPY_DTYPE, PARQUET_GROUP_ROWS

__all__ = ["PieceFiles"]

_OPEN_FILES = 64


class PieceFiles:
    """The pieces of a `ShardSet`: ``PieceFiles(ss, columns).piece(file_index, part)``."""

    def __init__(self, shards: ShardSet, columns: tuple[str, ...]) -> None:
        self.shards, self.columns = shards, columns
        self.seq_len = int(shards.options["seq_len"])
        self.arrow = shards.options["format"] == "arrow"
        self._pieces: tuple[np.ndarray, np.ndarray, np.ndarray] | None = None
        self._readers: dict[int, Any] = {}
        self._views: dict[tuple[int, int], dict[str, np.ndarray]] = {}  # Arrow pieces as numpy
        self._group: tuple[tuple[int, int], dict[str, np.ndarray]] | None = None
        self._ahead: tuple[tuple[int, int], Any] | None = None  # the row group being decoded
        self._thread: Any = None

    def __getstate__(self) -> dict[str, Any]:
        return {
            **self.__dict__,
            "_readers": {},
            "_views": {},
            "_group": None,
            "_ahead": None,
            "_thread": None,
        }

    def pieces(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(shard index, piece index in the file, rows) of every piece, in manifest order."""
        if self._pieces is None:
            size = ARROW_BATCH_ROWS if self.arrow else PARQUET_GROUP_ROWS
            rows = np.array([s.rows for s in self.shards.manifest.shards], dtype=np.int64)
            count = -(-rows // size)
            files = np.repeat(np.arange(len(rows)), count)
            parts = np.arange(len(files)) - np.repeat(np.cumsum(count) - count, count)
            self._pieces = (files, parts, np.minimum(size, rows[files] - parts * size))
        return self._pieces

    def reader(self, i: int) -> Any:
        import pyarrow as pa

        if i not in self._readers:
            if len(self._readers) >= _OPEN_FILES:
                gone = next(iter(self._readers))
                self._views = {k: v for k, v in self._views.items() if k[0] != gone}
                self._readers.pop(gone)
            path = self.shards.files[i]
            if not path.is_file():
                raise MaskprepError(f"{path}: shard listed in the manifest is missing")
            try:
                if self.arrow:
                    self._readers[i] = pa.ipc.open_file(pa.memory_map(str(path)))
                else:
                    import pyarrow.parquet as pq

                    self._readers[i] = pq.ParquetFile(str(path))
            except (pa.ArrowException, OSError) as exc:
                raise MaskprepError(
                    f"{path}: unreadable shard ({exc}); run maskprep verify"
                ) from None
        return self._readers[i]

    def read(self, i: int, part: int) -> Any:
        """One record batch (Arrow, a view of the mapped file) or decoded row group (Parquet)."""
        reader = self.reader(i)
        if self.arrow:
            return reader.get_batch(part) if part < reader.num_record_batches else None
        return reader.read_row_group(part) if part < reader.num_row_groups else None

    def piece(
        self, i: int, part: int, ahead: tuple[int, int] | None = None
    ) -> dict[str, np.ndarray]:
        """The columns of one piece as numpy; with Parquet, the row group `ahead` is decoded
        meanwhile in a thread (pyarrow releases the GIL), as pyarrow's own readers read ahead."""
        import pyarrow as pa

        if self._group is not None and self._group[0] == (i, part):
            return self._group[1]
        if (i, part) in self._views:  # Arrow: views of the mapped file, kept while it is open
            return self._views[(i, part)]
        self._group = None  # free the previous row group before decoding the next
        pending, self._ahead = self._ahead, None
        data = pending[1].result() if pending is not None else None  # never two reads at once
        if pending is None or pending[0] != (i, part):
            data = self.read(i, part)
        if ahead is not None and not self.arrow:
            if self._thread is None:
                from concurrent.futures import ThreadPoolExecutor

                self._thread = ThreadPoolExecutor(
                    max_workers=1, thread_name_prefix="maskprep-loader"
                )
            self.reader(ahead[0])  # opened here, so the cache of open files is only touched here
            self._ahead = (ahead, self._thread.submit(self.read, *ahead))
        files, _, rows = self.pieces()
        want = int(rows[np.searchsorted(files, i) + part])
        if data is None or data.num_rows != want:
            raise MaskprepError(
                f"{self.shards.files[i]}: piece {part} holds "
                f"{'no rows' if data is None else f'{data.num_rows} rows'}, not the {want} "
                "the manifest implies; run maskprep verify"
            )
        out: dict[str, np.ndarray] = {}
        for name in self.columns:
            if name not in data.schema.names:  # format version 1: no copy column
                fill = self.shards.manifest.shards[i].copy
                out[name] = np.full(data.num_rows, fill, dtype=COPY_DTYPE)
                continue
            col = data.column(name)
            if isinstance(col, pa.ChunkedArray):
                col = col.combine_chunks()
            if pa.types.is_list(col.type):
                out[name] = col.flatten().to_numpy().reshape(len(col), self.seq_len)
            else:
                out[name] = col.to_numpy()
        if not self.arrow:
            self._group = ((i, part), out)
        else:
            self._views[(i, part)] = out
        return out

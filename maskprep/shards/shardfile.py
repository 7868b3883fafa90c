"""One shard file: packed rows as Arrow IPC or Parquet, buffered into files of --shard-rows rows.

The file layout is fixed so that files are byte-identical whatever the number of
workers: Arrow files hold record batches of `ARROW_BATCH_ROWS` rows, Parquet
files (zstd) row groups of `PARQUET_GROUP_ROWS` rows; 2-D columns become
``list<...>`` columns of equal-length lists, and the schema metadata (key
``maskprep``) is JSON with sorted keys. `maskprep.shards.write` decides what goes
in the rows; `maskprep.shards.pieces` reads the same batches back.
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any, Mapping

import numpy as np

from .._arrow import arrow_array
from .._files import atomic_path, file_sha256
from .layout import METADATA_KEY, ShardRecord, shard_name

__all__ = ["ARROW_BATCH_ROWS", "PARQUET_GROUP_ROWS", "COPY_DTYPE", "ShardWriter", "list_column",
           "write_file"]

ARROW_BATCH_ROWS = 1024
PARQUET_GROUP_ROWS = 8192
COPY_DTYPE = np.int16  # --copies is at most 1000


def list_column(values: np.ndarray) -> Any:
    """A 2-D array (rows x length) as an Arrow list column of equal-length lists."""
    import pyarrow as pa

    n, L = values.shape
    offsets = arrow_array(np.arange(0, (n + 1) * L, L, dtype=np.int32))
    return pa.ListArray.from_arrays(offsets, arrow_array(np.ascontiguousarray(values).ravel()))


def write_file(
    path: Path, columns: Mapping[str, np.ndarray], *, fmt: str, metadata: Mapping[str, Any]
) -> None:
    """Write `columns` to `path` (atomically) as one Arrow IPC or Parquet file."""
    import pyarrow as pa

    arrays = [list_column(v) if v.ndim == 2 else arrow_array(v) for v in columns.values()]
    meta = {METADATA_KEY: json.dumps(metadata, sort_keys=True).encode("utf-8")}
    schema = pa.schema(
        [pa.field(k, a.type, nullable=False) for k, a in zip(columns, arrays)], metadata=meta
    )
    table = pa.Table.from_arrays(arrays, schema=schema)
    with atomic_path(path) as tmp:
        if fmt == "arrow":
            with pa.OSFile(str(tmp), "wb") as sink, pa.ipc.new_file(sink, schema) as writer:
                writer.write_table(table, max_chunksize=ARROW_BATCH_ROWS)
        else:
            import pyarrow.parquet as pq

            pq.write_table(table, str(tmp), row_group_size=PARQUET_GROUP_ROWS, compression="zstd")


class ShardWriter:
    """Buffers rows of one (task, copy) and writes files of exactly `shard_rows` rows.

    The last file may be short. Columns whose name starts with ``_`` are per-row
    figures for the file's record (``_maskable``, ``_targets``), not written.
    """

    def __init__(
        self, out: Path, *, task: int, copy: int, shard_rows: int, fmt: str,
        metadata: Mapping[str, Any],
    ) -> None:
        self.out, self.task, self.copy = out, task, copy
        self.shard_rows, self.fmt = shard_rows, fmt
        self.metadata = {**metadata, "task": task, "copy": copy}
        self.pending: list[dict[str, np.ndarray]] = []
        self.rows = 0
        self.records: list[ShardRecord] = []

    def add(self, columns: dict[str, np.ndarray]) -> None:
        self.pending.append(columns)
        self.rows += len(columns["sequence_id"])
        while self.rows >= self.shard_rows:
            self._flush(self.shard_rows)

    def close(self) -> list[ShardRecord]:
        if self.rows:
            self._flush(self.rows)
        return self.records

    def _flush(self, n: int) -> None:
        cols = {k: np.concatenate([p[k] for p in self.pending]) for k in self.pending[0]}
        head = {k: v[:n] for k, v in cols.items() if not k.startswith("_")}
        rest = {k: v[n:] for k, v in cols.items()}
        self.pending = [rest] if len(rest["sequence_id"]) else []
        self.rows -= n
        name = shard_name(self.task, self.copy, len(self.records), self.fmt)
        path = self.out / name
        write_file(path, head, fmt=self.fmt, metadata=self.metadata)
        self.records.append(ShardRecord(
            file=name, task=self.task, copy=self.copy, part=len(self.records), rows=n,
            tokens=int(head["attention_mask"].sum(dtype=np.int64)),
            maskable=int(cols["_maskable"][:n].sum()), targets=int(cols["_targets"][:n].sum()),
            bytes=path.stat().st_size, sha256=file_sha256(path)))

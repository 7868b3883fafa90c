"""Documents of Parquet and Arrow IPC files: one text column, read by row group or record batch.

Compressed tables (`.gz`, `.zst`) need random access, so they are decompressed to a temporary
file first, removed afterwards.
"""

from __future__ import annotations

import gzip
import os
import zlib
from typing import Any, Iterator

from ..errors import MaskprepError
from .compressed import open_binary as _open_binary
from .types import CorpusOptions, CorpusTask, ReadStats

__all__ = ["iter_table_documents"]

def _check_column(path: str, names: list[str], column: str) -> None:
    if column not in names:
        raise MaskprepError(
            f"{path}: no column {column!r} (columns: {', '.join(names) or 'none'}); "
            "choose one with --text-column")


def iter_table_documents(
    task: CorpusTask, options: CorpusOptions, stats: ReadStats
) -> Iterator[str]:
    import pyarrow as pa
    import pyarrow.parquet as pq

    column = options.text_column
    tmp_path = None
    path = task.path
    try:
        if task.compression is not None:
            # Parquet and Arrow files need random access: decompress to a temporary file.
            import tempfile

            fd, tmp_path = tempfile.mkstemp(suffix="." + task.fmt, prefix=".maskprep-")
            with os.fdopen(fd, "wb") as out, _open_binary(task.path, task.compression) as src:
                while chunk := src.read(1 << 22):
                    out.write(chunk)
            path = tmp_path
        if task.fmt == "parquet":
            try:
                pf = pq.ParquetFile(path)
            except Exception as exc:
                raise MaskprepError(f"{task.path}: not a readable Parquet file ({exc})") from None
            _check_column(task.path, pf.schema_arrow.names, column)
            end = pf.num_row_groups if task.end < 0 else task.end
            for g in range(task.start, end):
                col = pf.read_row_group(g, columns=[column]).column(0)
                yield from _column_texts(task, col, stats)
        else:
            try:
                reader = pa.ipc.open_file(path)
                batches = (reader.get_batch(i) for i in range(reader.num_record_batches))
                names = reader.schema.names
            except pa.ArrowInvalid:
                try:
                    stream = pa.ipc.open_stream(path)
                except Exception as exc:
                    raise MaskprepError(
                        f"{task.path}: not a readable Arrow IPC file ({exc})"
                    ) from None
                batches = iter(stream)
                names = stream.schema.names
            _check_column(task.path, names, column)
            for batch in batches:
                yield from _column_texts(task, batch.column(names.index(column)), stats)
    except (EOFError, gzip.BadGzipFile, zlib.error) as exc:
        raise MaskprepError(
            f"{task.path}: compressed file is truncated or corrupt ({exc})"
        ) from None
    finally:
        if tmp_path is not None:
            os.unlink(tmp_path)


def _column_texts(task: CorpusTask, col: Any, stats: ReadStats) -> Iterator[str]:
    import pyarrow as pa

    ctype = col.type
    if pa.types.is_dictionary(ctype) and (pa.types.is_string(ctype.value_type)
                                          or pa.types.is_large_string(ctype.value_type)):
        col = col.cast(ctype.value_type)  # dictionary-encoded strings
    if not (pa.types.is_string(col.type) or pa.types.is_large_string(col.type)):
        raise MaskprepError(f"{task.path}: column is {col.type}, expected strings")
    for value in col.to_pylist():
        if value is None:
            value = ""
        stats.bytes_read += len(value)
        yield value

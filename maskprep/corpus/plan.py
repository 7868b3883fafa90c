"""Split corpus files into tasks, weigh them and fingerprint the corpus.

A task is a whole file, a byte range aligned to line boundaries (uncompressed text with one
document per line) or a range of Parquet row groups. The split depends only on the files and
`chunk_bytes` (by default chosen from the corpus size, `task_size`), never on the number of
workers, and tasks are numbered in corpus order.
"""

from __future__ import annotations

import hashlib
import json
import os
from pathlib import Path

from ..errors import MaskprepError
from .discover import detect_format
from .types import TEXT_FORMATS, CorpusOptions, CorpusTask

__all__ = ["task_size", "chunk_for", "plan_tasks", "task_weights", "corpus_fingerprint",
           "MIN_TASK_BYTES", "MAX_TASK_BYTES", "TASKS_WANTED"]

MIN_TASK_BYTES = 1 << 20
MAX_TASK_BYTES = 64 << 20
TASKS_WANTED = 32


def task_size(files: list[Path], options: CorpusOptions = CorpusOptions()) -> int:
    """Bytes per task: `options.chunk_bytes`, or else `chunk_for` the corpus's bytes on disk.

    The split depends on the files only, never on the number of workers.

    >>> task_size([]) >> 20
    1
    """
    if options.chunk_bytes is not None:
        return options.chunk_bytes
    return chunk_for(sum(os.path.getsize(f) for f in files))


def chunk_for(total: float) -> int:
    """The power of two nearest below 1/32 of `total` bytes, from 1 MiB to 64 MiB, so a corpus
    makes enough tasks to keep every core busy to the end.

    >>> chunk_for(0) >> 20, chunk_for(320 << 20) >> 20, chunk_for(1e12) >> 20
    (1, 8, 64)
    """
    size = MIN_TASK_BYTES
    while size * 2 <= min(total / TASKS_WANTED, MAX_TASK_BYTES):
        size *= 2
    return size


def plan_tasks(files: list[Path], options: CorpusOptions = CorpusOptions()) -> list[CorpusTask]:
    """Split corpus files into tasks, in corpus order, independent of worker count.

    >>> [t.describe() for t in plan_tasks(resolve_inputs(["a.txt"]))]  # doctest: +SKIP
    ['a.txt']
    """
    tasks: list[CorpusTask] = []
    chunk = task_size(files, options)
    for f in files:
        fmt, comp = detect_format(f)  # type: ignore[misc]
        path = str(f)
        if fmt in TEXT_FORMATS and comp is None and options.doc_sep == "line":
            size = os.path.getsize(path)
            if size == 0:
                tasks.append(CorpusTask(len(tasks), path, fmt, comp))
                continue
            for start in range(0, size, chunk):
                end = min(start + chunk, size)
                tasks.append(CorpusTask(len(tasks), path, fmt, comp, start, end))
        elif fmt == "parquet" and comp is None:
            groups = _parquet_row_groups(path)
            per = max(1, _groups_per_task(path, groups, chunk))
            if groups == 0:
                tasks.append(CorpusTask(len(tasks), path, fmt, comp))
            for g in range(0, groups, per):
                tasks.append(CorpusTask(len(tasks), path, fmt, comp, g, min(g + per, groups)))
        else:
            tasks.append(CorpusTask(len(tasks), path, fmt, comp))
    return tasks


def task_weights(tasks: list[CorpusTask]) -> list[float]:
    """Bytes on disk of each task (a share of its file when the task is a part of one).

    >>> task_weights([])
    []
    """
    per_file: dict[str, int] = {}
    for t in tasks:
        per_file[t.path] = per_file.get(t.path, 0) + 1
    out = []
    for t in tasks:
        if t.pick is not None and t.pick.ranges:  # a sample's byte ranges: what it reads
            out.append(float(sum(e - s for s, e in t.pick.ranges)))
        elif t.fmt in TEXT_FORMATS and t.compression is None and t.end >= 0:
            out.append(float(t.end - t.start))
        else:
            out.append(os.path.getsize(t.path) / per_file[t.path])
    return out


def corpus_fingerprint(files: list[Path], options: CorpusOptions = CorpusOptions()) -> str:
    """A sha256 over file names, sizes and contents, and the reading options.

    >>> len(corpus_fingerprint([]))
    64
    """
    h = hashlib.sha256()
    h.update(json.dumps([options.doc_sep, options.text_field, options.text_column]).encode())
    for f in files:
        h.update(f.name.encode() + b"\0" + str(os.path.getsize(f)).encode() + b"\0")
        with open(f, "rb") as fh:
            while chunk := fh.read(1 << 22):
                h.update(chunk)
    return h.hexdigest()


def _parquet_row_groups(path: str) -> int:
    import pyarrow.parquet as pq

    try:
        return pq.ParquetFile(path).num_row_groups
    except Exception as exc:
        raise MaskprepError(f"{path}: not a readable Parquet file ({exc})") from None


def _groups_per_task(path: str, groups: int, chunk_bytes: int) -> int:
    if groups == 0:
        return 1
    size = os.path.getsize(path)
    return max(1, int(groups * chunk_bytes / max(size, 1)))

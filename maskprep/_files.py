"""Atomic, fsynced file writes; sha256 and JSON helpers.

Every output of maskprep is first written under a temporary name in the same
directory, flushed to disk and renamed into place when complete, so an
interrupted run never leaves a file that looks finished. This module is the
one place that does it (and the one place that calls ``fsync`` and
``os.replace``); it does not know about any file format.
"""

from __future__ import annotations

import contextlib
import hashlib
import json
import os
import tempfile
from pathlib import Path
from typing import Any, Iterator

__all__ = ["atomic_path", "atomic_write_bytes", "atomic_write_text", "atomic_write_json",
           "fsync_file", "fsynced_write_text", "replace", "file_sha256", "read_json"]


@contextlib.contextmanager
def atomic_path(path: str | Path) -> Iterator[Path]:
    """Yield a temporary path beside `path`; on success flush it to disk and rename it to `path`.

    >>> with atomic_path("out.bin") as tmp:  # doctest: +SKIP
    ...     tmp.write_bytes(b"...")
    """
    path = Path(path)
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    except OSError as exc:
        exc.filename = str(path)  # name the output, not a temporary name
        raise
    os.close(fd)
    tmp_path = Path(tmp)
    os.chmod(tmp_path, 0o666 & ~_umask())  # mkstemp makes 0600; outputs get the usual permissions
    try:
        yield tmp_path
        fsync_file(tmp_path)
        os.replace(tmp_path, path)
    except BaseException as exc:
        with contextlib.suppress(OSError):
            tmp_path.unlink()
        if isinstance(exc, OSError) and exc.filename in (None, str(tmp_path)):
            exc.filename = str(path)  # e.g. a writer library's "no space left" names no file
        raise


_UMASK: list[int] = []


def _umask() -> int:
    if not _UMASK:  # read once: os.umask can only be read by setting it
        mask = os.umask(0o022)
        os.umask(mask)
        _UMASK.append(mask)
    return _UMASK[0]


def fsync_file(path: str | Path) -> None:
    """Flush a written file's data to disk: ``fsync_file("out/.maskprep/t0-words.arrow")``."""
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def atomic_write_bytes(path: str | Path, data: bytes) -> None:
    """Write bytes atomically: ``atomic_write_bytes("a.bin", b"x")``."""
    with atomic_path(path) as tmp:
        with open(tmp, "wb") as fh:
            fh.write(data)


def atomic_write_text(path: str | Path, text: str) -> None:
    """Write UTF-8 text atomically: ``atomic_write_text("a.txt", "hi")``."""
    atomic_write_bytes(path, text.encode("utf-8"))


def atomic_write_json(path: str | Path, obj: Any) -> None:
    """Write JSON (sorted keys, indented, trailing newline) atomically."""
    atomic_write_text(path, json.dumps(obj, indent=2, sort_keys=True, ensure_ascii=False) + "\n")


def fsynced_write_text(path: str | Path, text: str) -> None:
    """Write text to a staging file and flush it to disk (renamed into place later: `replace`)."""
    with open(path, "w", encoding="utf-8") as fh:
        fh.write(text)
        fh.flush()
        os.fsync(fh.fileno())


def replace(src: str | Path, dst: str | Path) -> None:
    """Rename a finished, flushed file into place (atomic on one filesystem)."""
    os.replace(src, dst)


def file_sha256(path: str | Path) -> str:
    """Hex sha256 of a file's bytes: ``file_sha256("counts/ngrams-1.parquet")``."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        while chunk := fh.read(1 << 22):
            h.update(chunk)
    return h.hexdigest()


def file_crc32(path: str | Path, *, head: int = 0) -> int:
    """zlib CRC-32 of a file's bytes after the first `head`, then of those `head` bytes (so a
    writer that patches a fixed-size header last can compute it as it writes).

    ``file_crc32("run.npy", head=128)``; with ``head=0`` the plain CRC-32 of the file.
    """
    import zlib

    with open(path, "rb") as fh:
        first = fh.read(head)
        crc = 0
        while chunk := fh.read(1 << 22):
            crc = zlib.crc32(chunk, crc)
    return zlib.crc32(first, crc)


def read_json(path: str | Path, *, what: str = "file") -> Any:
    """Read a JSON file; a missing or broken file raises `MaskprepError` naming it."""
    from .errors import MaskprepError

    p = Path(path)
    if not p.is_file():
        raise MaskprepError(f"{p}: {what} not found")
    try:
        return json.loads(p.read_text(encoding="utf-8"))
    except (UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise MaskprepError(f"{p}: {what} is not valid JSON ({exc})") from None

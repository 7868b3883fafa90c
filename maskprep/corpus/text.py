"""Documents of text files: lines or blank-line separated paragraphs, decoded as UTF-8.

Text files (`.txt`, `.jsonl`, compressed or not) are read line by line, a task's byte range at a
time; a line longer than a piece comes in pieces (`corpus.pieces`). Invalid UTF-8 is replaced
(U+FFFD) and counted, or with ``strict=True`` reported with file, line and byte offset.
"""

from __future__ import annotations

import codecs
import gzip
import json
import sys
import threading
import zlib
from dataclasses import dataclass
from typing import Iterator

from ..errors import MaskprepError
from .compressed import open_binary as _open_binary
from .pieces import PIECE_BYTES, Continued, line_pieces, text_pieces
from .types import CorpusOptions, CorpusTask, ReadStats

__all__ = ["iter_text_documents"]


def _raw_lines(task: CorpusTask, piece: int | None = None) -> Iterator[tuple[int, bytes, bool]]:
    """Yield (byte offset, line bytes without newline, last piece of its line?) for a task; with
    `piece`, a line longer than that comes in pieces (`corpus.pieces`)."""
    try:
        with _open_binary(task.path, task.compression) as fh:
            pos = 0
            if task.start > 0:
                fh.seek(task.start - 1)
                prev = fh.read(1)
                pos = task.start
                while prev != b"\n":  # the line begun before `start` belongs to the task before
                    skipped = fh.readline(1 << 20)  # in steps: a line may be of any length
                    pos += len(skipped)
                    prev = skipped[-1:] if skipped else b"\n"
            while task.end < 0 or pos < task.end:
                line = fh.readline() if piece is None else fh.readline(piece + 1)
                if not line:
                    break
                start = pos
                if piece is not None and len(line) > piece and not line.endswith(b"\n"):
                    consumed = 0
                    for off, part, last, read in line_pieces(line, fh.readline, piece):
                        consumed = read
                        yield start + off, part, last
                    pos += consumed
                    continue
                pos += len(line)
                yield (
                    start,
                    line.rstrip(b"\r\n") if line.endswith(b"\n") else line.rstrip(b"\r"),
                    True,
                )
    except EOFError as exc:
        if task.compression == "zstd":
            raise MaskprepError(f"{task.path}: not a valid or complete zstd file ({exc})") from None
        raise MaskprepError(
            f"{task.path}: compressed file is truncated ({exc}); re-create or re-download it"
        ) from None
    except (gzip.BadGzipFile, zlib.error) as exc:
        raise MaskprepError(f"{task.path}: not a valid gzip file ({exc})") from None
    except OSError as exc:
        if (
            "zstd" in type(exc).__module__.lower()
            or "zstd" in str(exc).lower()
            or task.compression == "zstd"
        ):
            raise MaskprepError(f"{task.path}: not a valid or complete zstd file ({exc})") from None
        raise MaskprepError(f"{task.path}: cannot read ({exc.strerror or exc})") from None
    except Exception as exc:  # zstandard.ZstdError is not an OSError
        if type(exc).__name__ == "ZstdError":
            raise MaskprepError(f"{task.path}: not a valid or complete zstd file ({exc})") from None
        raise


def _line_number(task: CorpusTask, offset: int) -> int:
    """1-based line number of the line starting at `offset` (only computed for error messages)."""
    n = 1
    with _open_binary(task.path, task.compression) as fh:
        remaining = offset
        while remaining > 0:
            chunk = fh.read(min(remaining, 1 << 20))
            if not chunk:
                break
            n += chunk.count(b"\n")
            remaining -= len(chunk)
    return n


_BOMS = {b"\xff\xfe\x00\x00": "UTF-32", b"\x00\x00\xfe\xff": "UTF-32", b"\xff\xfe": "UTF-16",
         b"\xfe\xff": "UTF-16"}
_replaced = threading.local()


def _count_replaced(exc: UnicodeError) -> tuple[str, int]:
    """The 'replace' error handler (same output), counting the replaced bytes."""
    assert isinstance(exc, UnicodeDecodeError)
    _replaced.bytes = getattr(_replaced, "bytes", 0) + (exc.end - exc.start)
    return "\ufffd", exc.end


codecs.register_error("maskprep-count-replace", _count_replaced)


@dataclass
class _Replaced:
    """Invalid bytes replaced in one task: how many, and where the first was."""

    bytes: int = 0
    lines: int = 0
    first: int = -1  # byte offset in the file

    def warn(self, task: CorpusTask) -> None:
        if not self.bytes:
            return
        line = _line_number(task, self.first) if self.first >= 0 else 0
        sys.stderr.write(
            f"warning: {task.describe()}: {self.bytes:,} invalid UTF-8 byte(s) replaced with "
            f"U+FFFD in {self.lines:,} line(s), the first at line {line:,} (byte {self.first:,}); "
            "pass --strict to stop on them instead\n"
        )


def _decode(task: CorpusTask, offset: int, raw: bytes, options: CorpusOptions, stats: ReadStats,
            replaced: _Replaced | None = None) -> str:
    try:
        return raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        if offset == 0 and task.start == 0:
            for bom, name in _BOMS.items():
                if raw.startswith(bom):
                    raise MaskprepError(
                        f"{task.path}: the file is {name} (it starts with a byte-order mark); "
                        "convert it to UTF-8, e.g. iconv -f " + name + " -t UTF-8"
                    ) from None
        if options.strict:
            line = _line_number(task, offset)
            raise MaskprepError(
                f"{task.path}:{line}: invalid UTF-8 at byte offset {offset + exc.start} "
                f"(byte 0x{raw[exc.start]:02x}); fix the file or drop --strict to replace invalid "
                "bytes"
            ) from None
        stats.invalid_utf8 += 1
        _replaced.bytes = 0
        text = raw.decode("utf-8", errors="maskprep-count-replace")
        if replaced is not None:
            replaced.bytes += _replaced.bytes
            replaced.lines += 1
            if replaced.first < 0:
                replaced.first = offset + exc.start
        return text


def iter_text_documents(
    task: CorpusTask, options: CorpusOptions, stats: ReadStats
) -> Iterator[str]:
    replaced = _Replaced()
    try:
        yield from _text_documents(task, options, stats, replaced)
    finally:
        replaced.warn(task)


def _text_documents(task: CorpusTask, options: CorpusOptions, stats: ReadStats,
                    replaced: _Replaced) -> Iterator[str]:
    if task.fmt == "txt" and options.doc_sep == "line":
        more = False  # the previous piece's line goes on
        for offset, raw, last in _raw_lines(task, PIECE_BYTES):
            stats.bytes_read += len(raw) + (1 if last else 0)
            text = _decode(task, offset, raw, options, stats, replaced)
            yield Continued(text) if more else text
            more = not last
    elif task.fmt == "txt":
        yield from _paragraphs(task, options, stats, replaced)
    else:
        field_name = options.text_field
        for offset, raw, _ in _raw_lines(task):
            stats.bytes_read += len(raw) + 1
            if not raw.strip():
                continue
            text = _decode(task, offset, raw, options, stats, replaced)
            try:
                obj = json.loads(text)
            except json.JSONDecodeError as exc:
                line = _line_number(task, offset)
                raise MaskprepError(
                    f"{task.path}:{line}: not valid JSON ({exc.msg} at column {exc.colno})"
                ) from None
            if not isinstance(obj, dict) or field_name not in obj:
                line = _line_number(task, offset)
                have = ", ".join(sorted(obj)) if isinstance(obj, dict) else type(obj).__name__
                raise MaskprepError(
                    f"{task.path}:{line}: no field {field_name!r} (has: {have}); "
                    "choose the field with --text-field")
            value = obj[field_name]
            if value is None:
                value = ""
            if not isinstance(value, str):
                line = _line_number(task, offset)
                raise MaskprepError(
                    f"{task.path}:{line}: field {field_name!r} is {type(value).__name__}, expected "
                    "a string"
                )
            yield value


def _paragraphs(task: CorpusTask, options: CorpusOptions, stats: ReadStats,
                replaced: _Replaced) -> Iterator[str]:
    """Blank-line separated documents; a long one in pieces (`corpus.pieces`), cut as it grows.

    A line longer than a piece (read in pieces) is never a blank line."""
    para: list[str] = []
    size, started, cont = 0, False, False  # bytes held; a piece went out; the last line goes on
    for offset, raw, last in _raw_lines(task, PIECE_BYTES):
        stats.bytes_read += len(raw) + (1 if last else 0)
        text = _decode(task, offset, raw, options, stats, replaced)
        if cont:
            para[-1] += text
        elif text.strip() or not last:
            para.append(text)
        elif para:
            yield from _pieces([text_pieces("\n".join(para))], started)
            para, size, started = [], 0, False
        cont = not last
        size += len(raw) + 1
        if size > 2 * PIECE_BYTES:  # hold at most a few pieces: cut off those that are certain
            *done, rest = text_pieces("\n".join(para))
            yield from _pieces([done], started)
            started = started or bool(done)
            para, size = [rest], len(rest.encode("utf-8", "surrogatepass"))
    if para:
        yield from _pieces([text_pieces("\n".join(para))], started)


def _pieces(groups: list[list[str]], started: bool) -> Iterator[str]:
    """The pieces of one document, all but its first marked `Continued`."""
    for pieces in groups:
        for p in pieces:
            yield Continued(p) if started else p
            started = True

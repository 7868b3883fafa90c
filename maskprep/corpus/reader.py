"""Stream documents from corpus files.

Reads `.txt` (one document per line, or blank-line separated paragraphs),
`.jsonl` (a text field per line) and `.parquet` / `.arrow` (a text column),
each optionally compressed as `.gz` or `.zst`; inputs may be files,
directories (searched recursively) or glob patterns. Nothing is loaded whole:
text files are read line by line, Parquet by row group, Arrow by record batch.

Inputs are split into `CorpusTask`s (a whole file, a byte range aligned to line
boundaries, or a range of row groups) so that later stages can work on them in
parallel. The split depends only on the files and `chunk_bytes` (by default
chosen from the corpus size, `task_size`), never on the
number of workers, and tasks are numbered in corpus order.

What it does not do: tokenize, deduplicate or clean text. Invalid UTF-8 is
replaced (U+FFFD) and counted, or with ``strict=True`` reported with file, line
and byte offset. Empty documents are skipped and counted.
"""

from __future__ import annotations

import codecs
import gzip
import hashlib
import json
import os
import sys
import threading
import zlib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Iterator

from ..errors import MaskprepError
from .compressed import open_binary as _open_binary
from .discover import detect_format, resolve_inputs
from .pieces import PIECE_BYTES, Continued, line_pieces, text_pieces

TEXT_FORMATS = ("txt", "jsonl")
TABLE_FORMATS = ("parquet", "arrow")


@dataclass(frozen=True)
class CorpusOptions:
    """How to read corpus files.

    >>> CorpusOptions(doc_sep="blank").doc_sep
    'blank'
    """

    doc_sep: str = "line"          # "line": one document per line; "blank": blank-line separated
    text_field: str = "text"       # JSONL field holding the text
    text_column: str = "text"      # Parquet / Arrow column holding the text
    strict: bool = False           # invalid UTF-8 is an error instead of being replaced
    chunk_bytes: int | None = None  # task size (see `task_size`); None: chosen from the corpus size

    def __post_init__(self) -> None:
        if self.doc_sep not in ("line", "blank"):
            raise MaskprepError(f"--doc-sep: expected 'line' or 'blank', got {self.doc_sep!r}")
        if self.chunk_bytes is not None and self.chunk_bytes < 1024:
            raise MaskprepError(
                f"chunk size {self.chunk_bytes} bytes is too small; use at least 1024"
            )


@dataclass(frozen=True)
class CorpusTask:
    """One unit of reading work: a file, or a part of one.

    `start`/`end` are byte offsets for uncompressed text files (the task owns
    the lines that begin in [start, end)), row-group indices for Parquet and
    record-batch indices for Arrow; `end = -1` means "to the end".
    """

    index: int
    path: str
    fmt: str
    compression: str | None
    start: int = 0
    end: int = -1

    def describe(self) -> str:
        if self.start == 0 and self.end == -1:
            return self.path
        unit = (
            "bytes"
            if self.fmt in TEXT_FORMATS
            else ("row groups" if self.fmt == "parquet" else "batches")
        )
        return f"{self.path} ({unit} {self.start}-{self.end})"


@dataclass
class ReadStats:
    """Counts gathered while reading; add them up across tasks with `merge`."""

    documents: int = 0
    empty_skipped: int = 0
    invalid_utf8: int = 0   # documents (lines) in which invalid bytes were replaced
    bytes_read: int = 0
    # literal special-token strings of the text ("[MASK]") that the tokenizer read as special
    # tokens, by string; filled by `encode_stream(..., stats=)`
    literal_specials: dict[str, int] = field(default_factory=dict)

    def merge(self, other: "ReadStats") -> None:
        self.documents += other.documents
        self.empty_skipped += other.empty_skipped
        self.invalid_utf8 += other.invalid_utf8
        self.bytes_read += other.bytes_read
        for s, n in other.literal_specials.items():
            self.literal_specials[s] = self.literal_specials.get(s, 0) + n

    def to_dict(self) -> dict[str, Any]:
        return {"documents": self.documents, "empty_skipped": self.empty_skipped,
                "invalid_utf8_replaced": self.invalid_utf8, "bytes_read": self.bytes_read,
                "literal_special_tokens": dict(sorted(self.literal_specials.items()))}

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> "ReadStats":
        return cls(
            int(d["documents"]),
            int(d["empty_skipped"]),
            int(d["invalid_utf8_replaced"]),
            int(d["bytes_read"]),
            {str(k): int(v) for k, v in d.get("literal_special_tokens", {}).items()},
        )


MIN_TASK_BYTES = 1 << 20
MAX_TASK_BYTES = 64 << 20
TASKS_WANTED = 32


def task_size(files: list[Path], options: CorpusOptions = CorpusOptions()) -> int:
    """Bytes per task: `options.chunk_bytes`, or else the power of two nearest below 1/32 of the corpus's
    bytes on disk, from 1 MiB to 64 MiB, so a corpus makes enough tasks to keep every core busy to the end
    (the split depends on the files only, never on the number of workers).

    >>> task_size([]) >> 20
    1
    """
    if options.chunk_bytes is not None:
        return options.chunk_bytes
    total = sum(os.path.getsize(f) for f in files)
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
        if t.fmt in TEXT_FORMATS and t.compression is None and t.end >= 0:
            out.append(float(t.end - t.start))
        else:
            out.append(os.path.getsize(t.path) / per_file[t.path])
    return out


def iter_documents(task: CorpusTask, options: CorpusOptions = CorpusOptions(),
                   stats: ReadStats | None = None) -> Iterator[str]:
    """Yield the non-empty documents of one task, in file order.

    >>> list(iter_documents(plan_tasks([Path("a.txt")])[0]))  # doctest: +SKIP
    ['first document', 'second document']
    """
    stats = stats if stats is not None else ReadStats()
    if task.fmt == "txt":  # text files come in pieces already
        source = _iter_text_documents(task, options, stats)
    else:
        whole = _iter_text_documents(task, options, stats) if task.fmt in TEXT_FORMATS else \
            _iter_table_documents(task, options, stats)
        source = (Continued(p) if i else p for doc in whole for i, p in enumerate(text_pieces(doc)))
    cut = 0
    for doc in source:
        if isinstance(doc, Continued):  # a later piece of a long document: not counted again
            cut += 1
            if doc.strip():
                yield str(doc)
        elif doc.strip():
            stats.documents += 1
            yield doc
        else:
            stats.empty_skipped += 1
    if cut:
        sys.stderr.write(
            f"note: {task.describe()}: documents longer than {PIECE_BYTES:,} bytes were cut into "
            f"{cut:,} more piece(s) of at most that size; each piece is treated as a document "
            "(n-grams do not span a cut, packing separates the pieces)\n"
        )


def iter_batches(
    task: CorpusTask,
    options: CorpusOptions = CorpusOptions(),
    stats: ReadStats | None = None,
    *,
    batch_chars: int = 1 << 20,
) -> Iterator[list[str]]:
    """Yield lists of documents of about `batch_chars` characters in total.

    >>> sum(len(b) for b in iter_batches(task))  # doctest: +SKIP
    1000
    """
    batch: list[str] = []
    size = 0
    for doc in iter_documents(task, options, stats):
        batch.append(doc)
        size += len(doc)
        if size >= batch_chars:
            yield batch
            batch, size = [], 0
    if batch:
        yield batch


def iter_corpus(inputs: list[str] | tuple[str, ...], options: CorpusOptions = CorpusOptions(),
                stats: ReadStats | None = None) -> Iterator[str]:
    """All documents of a corpus, in order: ``for text in iter_corpus(["data/"]): ...``."""
    for task in plan_tasks(resolve_inputs(inputs), options):
        yield from iter_documents(task, options, stats)


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


# ---------------------------------------------------------------- text files

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
                f"(byte 0x{raw[exc.start]:02x}); fix the file or drop --strict to replace invalid bytes"
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


def _iter_text_documents(
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
                    f"{task.path}:{line}: field {field_name!r} is {type(value).__name__}, expected a string"
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


# ---------------------------------------------------------------- tables

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


def _check_column(path: str, names: list[str], column: str) -> None:
    if column not in names:
        raise MaskprepError(
            f"{path}: no column {column!r} (columns: {', '.join(names) or 'none'}); "
            "choose one with --text-column")


def _iter_table_documents(
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


def _column_texts(task: CorpusTask, col: object, stats: ReadStats) -> Iterator[str]:
    import pyarrow as pa

    ctype = col.type  # type: ignore[attr-defined]
    if pa.types.is_dictionary(ctype) and (pa.types.is_string(ctype.value_type)
                                          or pa.types.is_large_string(ctype.value_type)):
        col = col.cast(ctype.value_type)  # type: ignore[attr-defined]  # dictionary-encoded strings
    if not (pa.types.is_string(col.type) or pa.types.is_large_string(col.type)):  # type: ignore[attr-defined]
        raise MaskprepError(f"{task.path}: column is {col.type}, expected strings")  # type: ignore[attr-defined]
    for value in col.to_pylist():  # type: ignore[attr-defined]
        if value is None:
            value = ""
        stats.bytes_read += len(value)
        yield value

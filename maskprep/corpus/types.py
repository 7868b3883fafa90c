"""The corpus's leaf types: how to read files, one task of reading work, and what reading counted.

`CorpusOptions` holds the reading options, `CorpusTask` a file or a part of one (`Pick`: the
documents a sampled task keeps, see `corpus.sample`), `ReadStats` the counts gathered while
reading. They import nothing else of the package but its error type.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from ..errors import MaskprepError

__all__ = ["TEXT_FORMATS", "TABLE_FORMATS", "CorpusOptions", "Pick", "CorpusTask", "ReadStats"]

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
class Pick:
    """Which documents of a task a sample keeps (`corpus.sample` makes them).

    With `ranges`, the task reads only those byte ranges of its file and keeps every document
    (line) that begins in one of them. Without, it reads the whole task and keeps each document
    with probability `share`, by a coin drawn from (`seed`, `stream`, the task's start, the
    document's position in the task). `weight` is the task's bytes on disk, for the estimate of
    the bytes on disk that a coin sample stands for.
    """

    ranges: tuple[tuple[int, int], ...] = ()
    share: float = 1.0
    seed: int = 0
    stream: int = 0
    weight: float = 0.0


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
    pick: Pick | None = None  # a sample's documents only (None: every document)

    def describe(self) -> str:
        if self.pick is not None and self.pick.ranges:
            n = len(self.pick.ranges)
            ranges = f"{n} byte range{'s' * (n != 1)}"
            return f"{self.path} (sample: {ranges} in {self.start}-{self.end})"
        if self.pick is not None:
            return f"{self.path} (sample: each document with probability {self.pick.share:.4g})"
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
    # a sample only (`corpus.sample`): UTF-8 bytes of the kept documents' text, and the bytes on
    # disk they stand for (exact for byte ranges, estimated for a coin per document)
    sample_text_bytes: int = 0
    sample_disk_bytes: int = 0

    def merge(self, other: "ReadStats") -> None:
        self.documents += other.documents
        self.empty_skipped += other.empty_skipped
        self.invalid_utf8 += other.invalid_utf8
        self.bytes_read += other.bytes_read
        self.sample_text_bytes += other.sample_text_bytes
        self.sample_disk_bytes += other.sample_disk_bytes
        for s, n in other.literal_specials.items():
            self.literal_specials[s] = self.literal_specials.get(s, 0) + n

    def to_dict(self) -> dict[str, Any]:
        """The counts as JSON; the sample's two keys only when a sample was read."""
        out = {"documents": self.documents, "empty_skipped": self.empty_skipped,
               "invalid_utf8_replaced": self.invalid_utf8, "bytes_read": self.bytes_read,
               "literal_special_tokens": dict(sorted(self.literal_specials.items()))}
        if self.sample_text_bytes or self.sample_disk_bytes:
            out["sample_text_bytes"] = self.sample_text_bytes
            out["sample_disk_bytes"] = self.sample_disk_bytes
        return out

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> "ReadStats":
        return cls(
            int(d["documents"]),
            int(d["empty_skipped"]),
            int(d["invalid_utf8_replaced"]),
            int(d["bytes_read"]),
            {str(k): int(v) for k, v in d.get("literal_special_tokens", {}).items()},
            int(d.get("sample_text_bytes", 0)),
            int(d.get("sample_disk_bytes", 0)),
        )

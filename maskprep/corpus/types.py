"""The corpus's leaf types: how to read files, one task of reading work, and what reading counted.

`CorpusOptions` holds the reading options, `CorpusTask` a file or a part of one, `ReadStats`
the counts gathered while reading. They import nothing else of the package but its error type.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from ..errors import MaskprepError

__all__ = ["TEXT_FORMATS", "TABLE_FORMATS", "CorpusOptions", "CorpusTask", "ReadStats"]

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

"""The leaf types of counting: its options (`CountConfig`), what a task leaves behind, the summary.

Shared by the task (task.py), the resume records (resume.py) and the driver, so none of
them imports another for a type. It counts nothing.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from pathlib import Path

from .._checks import is_whole
from ..errors import MaskprepError
from ..tokenizer.words import WordsConfig, words_option
from .spills import SpillFile

__all__ = ["CountConfig", "TaskCounts", "CountSummary", "parse_memory", "COUNTS_FORMAT_VERSION",
           "MAX_N", "MIN_TASK_MEMORY", "TASK_BYTES", "ENCODED_TASK_BYTES", "SMALL_FILES_BYTES",
           "POOL_ROWS"]

COUNTS_FORMAT_VERSION = 1
MAX_N = 8
MIN_TASK_MEMORY = 4 << 20       # below this a task cannot hold a batch and a buffer at once
TASK_BYTES = 8 << 20            # text files are split into tasks of about this size
# an encoded directory's tasks are counted in groups of about this much text: fewer spilled rows
# and files than one count task each, and still several tasks per worker
ENCODED_TASK_BYTES = 4 << 20
# small files read whole, each its own task of the corpus, are counted in groups of about this
# much text (1 MiB: a few spilled runs per group; the word types of a directory of 16 KB files
# decoded and spilled 64 times less often than one file at a time, and enough groups to share)
SMALL_FILES_BYTES = 1 << 20
POOL_ROWS = 8_000_000  # merges / writes smaller than this run in the driver unless the pool is
# already running (starting one costs ~1-2 s)
_UNITS = {"": 1, "b": 1, "k": 1 << 10, "m": 1 << 20, "g": 1 << 30, "t": 1 << 40,
          "kib": 1 << 10, "mib": 1 << 20, "gib": 1 << 30, "tib": 1 << 40,
          "kb": 10 ** 3, "mb": 10 ** 6, "gb": 10 ** 9, "tb": 10 ** 12}


def parse_memory(text: str | int, *, option: str = "--memory") -> int:
    """Bytes from "1GiB", "512MiB", "2G" (K/M/G/T and KiB.. are powers of 1024; KB/MB/GB of 1000) or
    an int.

    >>> parse_memory("512MiB"), parse_memory("2G"), parse_memory("10MB")
    (536870912, 2147483648, 10000000)
    """
    if is_whole(text):
        value = int(text)
    else:
        m = re.fullmatch(r"\s*(\d+(?:\.\d*)?|\.\d+)\s*([a-zA-Z]*)\s*", str(text))
        unit = m.group(2).lower() if m else None
        if m is None or unit not in _UNITS:
            raise MaskprepError(
                f"{option}: cannot read {text!r} as a size; write e.g. 1GiB, 512MiB, 2G or a "
                "number of bytes"
            )
        value = int(float(m.group(1)) * _UNITS[unit])
    if value < MIN_TASK_MEMORY:
        raise MaskprepError(f"{option}: {text} is too small to make progress; the minimum is "
                            f"{MIN_TASK_MEMORY >> 20} MiB per worker")
    return value


@dataclass(frozen=True)
class CountConfig:
    """What to count: ``CountConfig(max_n=5, min_count=10, memory="1GiB")``.

    `batch_chars` (characters per encoded batch) defaults to a size derived
    from the memory share; results never depend on it.
    """

    max_n: int = 5
    min_count: int = 10
    memory: str | int = "1GiB"
    batch_chars: int | None = None
    words: WordsConfig = WordsConfig()

    def __post_init__(self) -> None:
        if not isinstance(self.max_n, int) or not 1 <= self.max_n <= MAX_N:
            raise MaskprepError(f"--max-n: expected 1 to {MAX_N}, got {self.max_n}")
        if not isinstance(self.min_count, int) or self.min_count < 1:
            raise MaskprepError(f"--min-count: expected a whole number >= 1, got {self.min_count}")
        if self.batch_chars is not None and self.batch_chars < 1:
            raise MaskprepError(f"batch_chars: expected a positive number, got {self.batch_chars}")
        parse_memory(self.memory)
        if not isinstance(self.words, WordsConfig):
            object.__setattr__(self, "words", words_option(self.words))

    @property
    def memory_bytes(self) -> int:
        return parse_memory(self.memory)


@dataclass(frozen=True)
class TaskCounts:
    """What one counting task left behind (runs and its word list) and its totals per n."""

    task_index: int
    runs: list[SpillFile]
    totals: list[int]
    words_path: str
    words: int
    flushes: int
    documents: int
    # special-token strings in the text
    literal_specials: dict[str, int] = field(default_factory=dict)


@dataclass(frozen=True)
class CountSummary:
    """Figures of a finished count, as written to counts.json."""

    output: Path
    N: int
    max_n: int
    min_count: int
    totals: dict[int, int]
    distinct: dict[int, int]
    kept: dict[int, int]
    documents: int
    spill_runs: int
    tasks: int
    seconds: float
    files: list[str] = field(default_factory=list)

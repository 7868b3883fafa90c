"""Choose a seeded sample of a corpus: a share or a size on disk, spread over the files by size.

`--sample` of `audit` and `train-tokenizer` asks for a share of the corpus (``10%``, ``0.1``)
or a size on disk (``200MB``, ``1GiB``; K/M/G/T and KiB..TiB are powers of 1024, KB..TB powers
of 1000). Every file gives the same share of its bytes on disk, so the sample is spread over
the files in proportion to their size; it holds whole documents only.

How documents are chosen depends on the file:

- uncompressed text with one document per line (`.txt`, `.jsonl`): the file is cut into
  blocks (1/1024 of the file, from 4 KiB to 1 MiB); blocks are taken in a seeded random order
  until the file's share of bytes is reached (the last one in part), and every document that
  begins in a chosen block is kept whole. Only the chosen blocks are read (and the end of the
  last document of each), so a 10 GB corpus sampled at 1% reads about 100 MB. Every document
  has the same chance to be kept, whatever its length.
- every other file (compressed, ``--doc-sep blank``, Parquet, Arrow) is read in full and each
  document is kept with probability share, by a seeded coin: a hash of the seed, the file's
  position in the corpus and the document's position in its task. The bytes on disk such a
  sample stands for are estimated from the share of the text it kept.

The same files, reading options, sample and seed give the same documents whatever the number
of workers; another seed gives others. What a sample held (documents, bytes of text, share of
the corpus's bytes on disk) is counted while reading (`ReadStats.sample_text_bytes`,
`sample_disk_bytes`) and put in words by `SampleDraw.summary` and `describe_sample`.
"""

from __future__ import annotations

import dataclasses
import os
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Sequence

import numpy as np

from ..errors import MaskprepError
from ..wording import plural
from .discover import detect_format
from .plan import chunk_for, plan_tasks, task_size, task_weights
from .types import TEXT_FORMATS, CorpusOptions, CorpusTask, Pick, ReadStats

__all__ = [
    "SampleSpec",
    "SampleDraw",
    "draw_sample",
    "choose_ranges",
    "keeps_document",
    "describe_sample",
]

MIN_BLOCK = 4 << 10
MAX_BLOCK = 1 << 20
BLOCKS_WANTED = 1024  # blocks per file, within MIN_BLOCK..MAX_BLOCK
_SIZES = {"b": 1, "k": 1 << 10, "m": 1 << 20, "g": 1 << 30, "t": 1 << 40,
          "kib": 1 << 10, "mib": 1 << 20, "gib": 1 << 30, "tib": 1 << 40,
          "kb": 10 ** 3, "mb": 10 ** 6, "gb": 10 ** 9, "tb": 10 ** 12}
_M64 = (1 << 64) - 1
_COIN, _BLOCK = 0x636F696E, 0x626C6F63  # tags: the two uses never share a random stream


@dataclass(frozen=True)
class SampleSpec:
    """What `--sample` asked for: ``SampleSpec.parse("10%", seed=3).share`` is 0.1.

    Exactly one of `share` (0 < share <= 1) and `size` (bytes on disk, >= 1) is set.
    """

    share: float | None = None
    size: int | None = None
    seed: int = 0
    text: str = ""
    option: str = "--sample"

    def __post_init__(self) -> None:
        if (self.share is None) == (self.size is None):
            raise MaskprepError(f"{self.option}: give either a share or a size")
        if self.share is not None and not 0 < self.share <= 1:
            raise MaskprepError(
                f"{self.option} {self.text or self.share}: a share must be more than 0 and at "
                "most 1 (100%)"
            )
        if self.size is not None and self.size < 1:
            raise MaskprepError(f"{self.option} {self.text or self.size}: a size must be >= 1 byte")
        if isinstance(self.seed, bool) or not isinstance(self.seed, int) or self.seed < 0:
            raise MaskprepError(f"seed: expected a whole number >= 0, got {self.seed!r}")

    @classmethod
    def parse(cls, text: str | float, seed: int = 0, option: str = "--sample") -> "SampleSpec":
        """A share ("10%", "0.1", 0.25) or a size on disk ("200MB", "1GiB", "64k").

        >>> SampleSpec.parse("10%").share, SampleSpec.parse("0.5").share
        (0.1, 0.5)
        >>> SampleSpec.parse("200MB").size, SampleSpec.parse("1GiB").size
        (200000000, 1073741824)
        """
        raw = str(text).strip()
        m = re.fullmatch(r"([-+]?(?:\d+(?:\.\d*)?|\.\d+)(?:e[-+]?\d+)?)\s*(%|[a-zA-Z]*)", raw)
        hint = "write a share (10% or 0.1) or a size on disk (200MB, 1GiB)"
        if isinstance(text, bool) or m is None:
            raise MaskprepError(f"{option}: cannot read {raw!r}; {hint}")
        value, unit = float(m.group(1)), m.group(2).lower()
        if value <= 0:
            raise MaskprepError(f"{option} {raw}: must be more than 0; {hint}")
        if unit == "%":
            if value > 100:
                raise MaskprepError(f"{option} {raw}: more than the whole corpus (at most 100%)")
            return cls(share=value / 100, seed=seed, text=raw, option=option)
        if unit:
            if unit not in _SIZES:
                raise MaskprepError(f"{option}: unknown unit {m.group(2)!r} in {raw!r}; {hint}")
            size = int(value * _SIZES[unit])
            if size < 1:
                raise MaskprepError(f"{option} {raw}: less than one byte; {hint}")
            return cls(size=size, seed=seed, text=raw, option=option)
        if value > 1:
            raise MaskprepError(
                f"{option} {raw}: a plain number is a share from 0 to 1 (e.g. 0.1); write "
                f"{raw}% for a percentage or {raw}MB for a size"
            )
        return cls(share=value, seed=seed, text=raw, option=option)


def _mix(x: int) -> int:
    """The splitmix64 finaliser: a well-spread 64-bit hash of a 64-bit number."""
    x = (x + 0x9E3779B97F4A7C15) & _M64
    x = ((x ^ (x >> 30)) * 0xBF58476D1CE4E5B9) & _M64
    x = ((x ^ (x >> 27)) * 0x94D049BB133111EB) & _M64
    return x ^ (x >> 31)


def _hash(*parts: int) -> int:
    h = 0
    for p in parts:
        h = _mix(h ^ (p & _M64))
    return h


def _mix_array(x: np.ndarray) -> np.ndarray:
    """`_mix` of every element of a uint64 array (wrapping arithmetic, vectorised)."""
    with np.errstate(over="ignore"):
        x = x + np.uint64(0x9E3779B97F4A7C15)
        x = (x ^ (x >> np.uint64(30))) * np.uint64(0xBF58476D1CE4E5B9)
        x = (x ^ (x >> np.uint64(27))) * np.uint64(0x94D049BB133111EB)
    return x ^ (x >> np.uint64(31))


def keeps_document(pick: Pick, task_start: int, ordinal: int) -> bool:
    """The seeded coin of one document: kept with probability ``pick.share``.

    >>> keeps_document(Pick(share=1.0), 0, 5), keeps_document(Pick(share=1e-30), 0, 5)
    (True, False)
    """
    u = _hash(_COIN, pick.seed, pick.stream, task_start, ordinal)
    return u < pick.share * 2.0**64


def choose_ranges(size: int, share: float, seed: int, stream: int) -> list[tuple[int, int]]:
    """The byte ranges of a file of `size` bytes that hold its share, in file order.

    Blocks are taken in a seeded order until ``share * size`` bytes are reached, the last in
    part; adjacent ranges are joined.

    >>> choose_ranges(100_000, 1.0, 0, 0)
    [(0, 100000)]
    >>> sum(e - s for s, e in choose_ranges(1_000_000, 0.25, 7, 2))
    250000
    """
    if size <= 0:
        return []
    block = min(MAX_BLOCK, max(MIN_BLOCK, size // BLOCKS_WANTED))
    n = -(-size // block)
    starts = np.arange(n, dtype=np.int64) * block
    lens = np.minimum(block, size - starts)
    salt = np.uint64(_hash(_BLOCK, seed, stream))
    order = np.argsort(_mix_array(np.arange(n, dtype=np.uint64) ^ salt), kind="stable")
    cum = np.cumsum(lens[order])
    target = share * size
    full = int(np.searchsorted(cum, target, side="right"))
    chosen = [(int(starts[i]), int(starts[i] + lens[i])) for i in order[:full].tolist()]
    rest = int(round(target - (int(cum[full - 1]) if full else 0)))
    if full < n and rest >= 1:
        i = int(order[full])
        chosen.append((int(starts[i]), int(starts[i]) + rest))
    merged: list[tuple[int, int]] = []
    for s, e in sorted(chosen):
        if merged and merged[-1][1] == s:
            merged[-1] = (merged[-1][0], e)
        else:
            merged.append((s, e))
    return merged


def _group(ranges: list[tuple[int, int]], chunk: int) -> list[list[tuple[int, int]]]:
    """Consecutive ranges in groups of about `chunk` bytes (one task each)."""
    groups: list[list[tuple[int, int]]] = []
    held = chunk
    for r in ranges:
        if held >= chunk:
            groups.append([])
            held = 0
        groups[-1].append(r)
        held += r[1] - r[0]
    return groups


@dataclass(frozen=True)
class SampleDraw:
    """A sample drawn from a corpus: its tasks and what is needed to describe it."""

    spec: SampleSpec
    corpus_bytes: int        # bytes on disk of every corpus file
    share: float             # the share of every file asked for (1.0: the whole corpus)
    tasks: tuple[CorpusTask, ...]
    files_by_ranges: int = 0
    files_by_coin: int = 0

    @property
    def whole(self) -> bool:
        return self.share >= 1.0

    def check(self, stats: ReadStats) -> None:
        """Refuse a sample that holds no document (naming the option)."""
        if stats.documents == 0 and not self.whole:
            raise MaskprepError(
                f"{self.spec.option} {self.spec.text}: the sample of this "
                f"{_size(self.corpus_bytes)} corpus holds no document (seed "
                f"{self.spec.seed}); ask for a larger sample"
            )

    def summary(self, stats: ReadStats) -> dict[str, Any]:
        """The sample's figures, as the audit JSON and the command line report them."""
        disk = self.corpus_bytes if self.whole else stats.sample_disk_bytes
        return {
            "option": self.spec.option,
            "asked": self.spec.text,
            "seed": self.spec.seed,
            "share_asked": self.share,
            "whole_corpus": self.whole,
            "documents": stats.documents,
            "text_bytes": None if self.whole else stats.sample_text_bytes,
            "disk_bytes": disk,
            "corpus_bytes": self.corpus_bytes,
            "share": disk / self.corpus_bytes if self.corpus_bytes else 1.0,
            "files_by_byte_ranges": self.files_by_ranges,
            "files_by_coin": self.files_by_coin,
        }


def draw_sample(files: Sequence[str | Path], options: CorpusOptions,
                spec: SampleSpec) -> SampleDraw:
    """The tasks of a seeded sample of `files` (see the module docstring for how).

    >>> draw = draw_sample(resolve_inputs(["data/"]), CorpusOptions(),
    ...                    SampleSpec.parse("10%"))  # doctest: +SKIP
    """
    paths = [Path(f) for f in files]
    sizes = [os.path.getsize(p) for p in paths]
    total = sum(sizes)
    share = spec.share if spec.share is not None else (spec.size or 0) / max(total, 1)
    if share >= 1.0:
        return SampleDraw(spec, total, 1.0, tuple(plan_tasks(paths, options)))
    chunk = task_size(paths, options)
    sampled_chunk = chunk_for(share * total) if options.chunk_bytes is None else chunk
    tasks: list[CorpusTask] = []
    by_ranges = by_coin = 0
    for stream, (path, size) in enumerate(zip(paths, sizes)):
        fmt, comp = detect_format(path)  # type: ignore[misc]
        if fmt in TEXT_FORMATS and comp is None and options.doc_sep == "line":
            by_ranges += 1
            for group in _group(choose_ranges(size, share, spec.seed, stream), sampled_chunk):
                pick = Pick(ranges=tuple(group))
                tasks.append(CorpusTask(len(tasks), str(path), fmt, None, group[0][0],
                                        group[-1][1], pick))
            continue
        by_coin += 1
        own = plan_tasks([path], dataclasses.replace(options, chunk_bytes=chunk))
        for t, w in zip(own, task_weights(own)):
            pick = Pick(share=share, seed=spec.seed, stream=stream, weight=w)
            tasks.append(dataclasses.replace(t, index=len(tasks), pick=pick))
    return SampleDraw(spec, total, share, tuple(tasks), by_ranges, by_coin)


def _size(n: int | None) -> str:
    """Bytes for people: ``_size(12_345_678)`` is '12.3 MB'."""
    if n is None:
        return "?"
    for unit, scale in (("GB", 1e9), ("MB", 1e6), ("kB", 1e3)):
        if n >= scale:
            return f"{n / scale:,.1f} {unit}"
    return f"{n:,} bytes"


def describe_sample(summary: dict[str, Any]) -> str:
    """One plain sentence about a sample's summary, for the terminal, the page and the notes."""
    asked = f"{summary['option']} {summary['asked']}, seed {summary['seed']}"
    if summary["whole_corpus"]:
        return (
            f"The whole corpus was used: {summary['option']} {summary['asked']} is at least its "
            f"{_size(summary['corpus_bytes'])} on disk "
            f"({plural(summary['documents'], 'document')})."
        )
    text = (
        f"A SAMPLE of the corpus was used ({asked}): {plural(summary['documents'], 'document')}, "
        f"{_size(summary['text_bytes'])} of text, {summary['share']:.1%} of the corpus's "
        f"{_size(summary['corpus_bytes'])} on disk"
    )
    if summary["files_by_coin"]:
        text += (
            f" (estimated: {plural(summary['files_by_coin'], 'file')} read in full, each "
            "document kept by a seeded coin)"
        )
    return text + "; every figure is of the sample, not of the whole corpus."

"""Where a stage's encoded batches come from: a raw corpus (tokenized now) or an encoded directory.

`open_source(inputs, options, tokenizer=...)` looks at a stage's CORPUS
arguments. An encoded directory (recognised by its manifest) must be the
only input; its tasks, corpus fingerprint, reading options and tokenizer
come from the manifest, and a tokenizer given with ``-t`` must be the one it
was encoded with. Anything else is a raw corpus, split into tasks by
`corpus.plan_tasks`.

Task functions get `SourceTask`s (small and picklable) and read them with
`TaskReader`, which yields the task's `EncodedBatch`es either way, identical
batch for batch: the encoded directory stores the batches the raw reader
makes (about `BATCH_CHARS` characters each). `TaskReader.consumed` holds
the read statistics of the batches yielded so far (all of the task's once it
is exhausted), so a stage that stops early reports the same figures from
both kinds of input.

This module does not write encoded directories (see `maskprep.encoded.write`).
"""

from __future__ import annotations

import dataclasses
import os
from collections import deque
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Iterator, Sequence

import numpy as np

from ..corpus.reader import (
    CorpusOptions,
    CorpusTask,
    ReadStats,
    corpus_fingerprint,
    iter_batches,
    plan_tasks,
    resolve_inputs,
    task_size,
    task_weights,
)
from ..errors import MaskprepError
from ..tokenizer.encoding import (
    SPECIAL,
    EncodedBatch,
    TokenizerInfo,
    WordGroups,
    encode_grouped,
    load_tokenizer,
    tally_literal_specials,
    tally_special_ids,
)
from .format import (
    BATCH_CHARS,
    MANIFEST,
    EncodedManifest,
    EncodedTask,
    WordTable,
    is_encoded_dir,
    is_unfinished_encoded_dir,
    iter_encoded,
    iter_word_types,
    read_word_table,
)

__all__ = ["SourceTask", "Source", "TaskReader", "open_source", "read_stats_of"]


@dataclass(frozen=True)
class SourceTask:
    """One task of a source: a corpus task to tokenize, or an encoded task to read."""

    index: int
    label: str
    weight: float                   # bytes on disk of the corpus part it covers
    raw: CorpusTask | None = None
    encoded: EncodedTask | None = None

    def describe(self) -> str:
        return self.label


def read_stats_of(doc: dict[str, int] | Any) -> ReadStats:
    """`ReadStats` from its `to_dict()` form."""
    return ReadStats.from_dict(doc)


@dataclass(frozen=True)
class Source:
    """A stage's input, raw or encoded: its tasks and what its outputs record about it."""

    inputs: tuple[str, ...]
    files: tuple[str, ...]          # corpus files, as they were named when read
    fingerprint: str
    options: CorpusOptions          # the reading options (those of the encoded directory, if one)
    tasks: tuple[SourceTask, ...]
    manifest: EncodedManifest | None = None
    task_bytes: int | None = None   # the size the raw corpus was split by (None if encoded)

    @property
    def encoded(self) -> bool:
        return self.manifest is not None

    def describe(self) -> str:
        return ", ".join(self.inputs)

    def read_totals(self) -> ReadStats | None:
        """Read statistics of the whole corpus if known unread (encoded input), else None."""
        if self.manifest is None:
            return None
        return read_stats_of(self.manifest.corpus["read"])

    def tokenizer(self, given: str | Path | TokenizerInfo | None, *, stage: str) -> TokenizerInfo:
        """The tokenizer to use.

        ``-t`` for raw input (required); for an encoded directory its own copy, or ``-t`` if it
        is the same tokenizer (same hash), else a clear error.
        """
        if self.manifest is None:
            if given is None:
                raise MaskprepError(
                    f"{stage}: give the tokenizer with -t TOKENIZER.json (it is optional only "
                    "when CORPUS is an encoded directory made by maskprep encode)"
                )
            return given if isinstance(given, TokenizerInfo) else load_tokenizer(given)
        m = self.manifest
        recorded = m.tokenizer
        if given is None:
            info = load_tokenizer(m.directory / "tokenizer.json")
            info.name = str(recorded.get("name", info.name))
        else:
            info = given if isinstance(given, TokenizerInfo) else load_tokenizer(given)
        if info.hash != recorded["hash"]:
            label = info.path or info.name
            raise MaskprepError(
                f"-t {label}: not the tokenizer {m.directory} was encoded with (tokenizer hash "
                f"{info.hash[:12]}, the directory's {str(recorded['hash'])[:12]}); drop -t to "
                "use the directory's tokenizer, or encode the corpus again with this one"
            )
        return info

    def check_words(self, words: Any) -> Any:
        """`words` (a `WordsConfig`), checked against an encoded directory's word definition."""
        if self.manifest is None:
            return words
        recorded = self.manifest.doc.get("words", "tokenizer")
        if isinstance(recorded, str):
            recorded = {"definition": recorded}
        if words.describe() != recorded:
            raise MaskprepError(
                f"--words {words.definition}: {self.manifest.directory} was encoded with --words "
                f"{recorded.get('definition')} ({recorded}); pass that --words, or encode again"
            )
        return words


def _check_options(
    directory: Path, recorded: dict[str, Any], options: CorpusOptions
) -> CorpusOptions:
    """The encoded directory's reading options; options given on the command line must agree."""
    mine = CorpusOptions(doc_sep=recorded["doc_sep"], text_field=recorded["text_field"],
                         text_column=recorded["text_column"], strict=bool(recorded["strict"]),
                         chunk_bytes=int(recorded["chunk_bytes"]))
    default = CorpusOptions()
    for name, flag in (
        ("doc_sep", "--doc-sep"),
        ("text_field", "--text-field"),
        ("text_column", "--text-column"),
        ("strict", "--strict"),
    ):
        asked = getattr(options, name)
        if asked != getattr(default, name) and asked != getattr(mine, name):
            raise MaskprepError(
                f"{flag} {asked}: {directory} was encoded with {flag} {getattr(mine, name)}; "
                f"drop {flag} (an encoded directory keeps its reading options) or encode again"
            )
    return mine


def open_source(inputs: Sequence[str | Path], options: CorpusOptions | None = None, *,
                task_bytes: int | None = None, min_task_bytes: int | None = None) -> Source:
    """A stage's CORPUS arguments as a `Source`: ``open_source(["enc/"]).encoded`` -> True.

    `task_bytes` caps the size of the raw corpus tasks (count uses smaller tasks);
    `min_task_bytes` raises the default (balanced) size of small ones, unless the options
    name a chunk size. An encoded directory keeps the tasks it was written with.
    """
    options = options or CorpusOptions()
    names = [str(i) for i in inputs]
    encoded = [n for n in names if is_encoded_dir(n)]
    for n in names:
        if is_unfinished_encoded_dir(n):
            raise MaskprepError(
                f"{n}: an unfinished encoded directory (no {MANIFEST}); finish it with maskprep "
                "encode ... --resume, or give the raw corpus"
            )
    if encoded:
        if len(names) > 1:
            raise MaskprepError(
                f"{encoded[0]}: an encoded directory must be the only CORPUS argument "
                f"(got {len(names)}); encode all the files into one directory"
            )
        m = EncodedManifest.read(encoded[0])
        opts = _check_options(m.directory, m.corpus["options"], options)
        tasks = tuple(SourceTask(t.index, t.source, t.weight, encoded=t) for t in m.tasks)
        return Source(
            tuple(names), tuple(m.corpus["files"]), str(m.corpus["fingerprint"]), opts, tasks, m
        )
    files = resolve_inputs(names)
    chosen = options.chunk_bytes is not None
    # recorded as a number
    options = dataclasses.replace(options, chunk_bytes=task_size(files, options))
    assert options.chunk_bytes is not None
    size = options.chunk_bytes
    if min_task_bytes is not None and not chosen:
        size = max(size, min_task_bytes)
    if task_bytes is not None:
        size = min(size, task_bytes)
    task_opts = dataclasses.replace(options, chunk_bytes=size)
    planned = plan_tasks(files, task_opts)
    weights = task_weights(planned)
    tasks = tuple(
        SourceTask(
            t.index, t.describe(), w, raw=dataclasses.replace(t, path=os.path.abspath(t.path))
        )
        for t, w in zip(planned, weights)
    )
    return Source(
        tuple(names),
        tuple(str(f) for f in files),
        corpus_fingerprint(files, options),
        options,
        tasks,
        task_bytes=size,
    )


class TaskReader:
    """The `EncodedBatch`es of one task, from the corpus or from an encoded directory.

    >>> reader = TaskReader(task, info, options)  # doctest: +SKIP
    >>> for batch in reader: ...  # doctest: +SKIP
    >>> reader.consumed.documents  # doctest: +SKIP
    """

    def __init__(self, task: SourceTask, info: TokenizerInfo, options: CorpusOptions, *,
                 batch_chars: int = BATCH_CHARS, words: Any = None) -> None:
        self.task, self.info, self.options, self.batch_chars = task, info, options, batch_chars
        self.words = words  # a WordsConfig for raw text (None: the tokenizer's words)
        self.consumed = ReadStats()
        self._table: WordTable | None = None

    def word_table(self) -> WordTable | None:
        """The task's word types (encoded input only; raw input: in the tokenizer's cache)."""
        if self.task.encoded is None:
            return None
        if self._table is None:
            self._table = read_word_table(self.task.encoded.words)
        return self._table

    def __iter__(self) -> Iterator[EncodedBatch]:
        literal: dict[str, int] = {}  # special-token strings met in the text, for the warning
        if self.task.encoded is not None:
            batches = self._encoded(self.task.encoded)
        else:
            assert self.task.raw is not None
            batches = (batch for batch, _ in self._raw(self.task.raw))
        for batch in batches:
            tally_literal_specials(self.info, batch, literal)
            yield batch
        self.consumed.literal_specials = literal

    def _encoded(self, task: EncodedTask) -> Iterator[EncodedBatch]:
        deltas = list(task.batches)
        for i, batch in enumerate(iter_encoded(task, self.word_table())):
            d = deltas[i] if i < len(deltas) else (0, 0, 0, 0)
            self.consumed.merge(ReadStats(*d))
            yield batch
        self.consumed = read_stats_of(task.read)

    def word_fields(self) -> Iterator[tuple[np.ndarray, np.ndarray, np.ndarray]]:
        """Per batch of an encoded task: word keys (uint64 [W]), word kinds (int8 [W]) and
        document offsets into the words (int64 [D + 1]); the fields of `EncodedBatch` that
        `maskprep count` reads, without gathering token ids. Statistics and literal special
        tokens are kept as when iterating the batches.
        """
        task = self.task.encoded
        if task is None:
            raise ValueError("TaskReader.word_fields: only an encoded directory's tasks")
        table = self.word_table()
        assert table is not None
        keys, kinds = table.fields["word_keys"], table.fields["word_kinds"]
        first_ids = table.ids[table.offsets[:-1][kinds == SPECIAL]]  # of each special type
        special_rank = np.cumsum(kinds == SPECIAL) - 1
        literal: dict[str, int] = {}
        deltas = list(task.batches)
        for i, (types, doc_offsets) in enumerate(iter_word_types(task)):
            d = deltas[i] if i < len(deltas) else (0, 0, 0, 0)
            self.consumed.merge(ReadStats(*d))
            word_kinds = kinds[types]
            special = types[word_kinds == SPECIAL]
            if len(special):  # as `tally_literal_specials` counts them from the token ids
                tally_special_ids(self.info, first_ids[special_rank[special]], literal)
            yield keys[types], word_kinds, doc_offsets
        self.consumed = read_stats_of(task.read)
        self.consumed.literal_specials = literal

    def _raw(self, task: CorpusTask) -> Iterator[tuple[EncodedBatch, WordGroups]]:
        total = ReadStats()
        pending: deque[ReadStats] = deque()

        def texts() -> Iterator[list[str]]:
            seen = ReadStats()
            for docs in iter_batches(task, self.options, total, batch_chars=self.batch_chars):
                pending.append(_minus(total, seen))
                seen = dataclasses.replace(total)
                yield docs

        for batch, groups in encode_grouped(self.info, texts(), self.words):
            self.consumed.merge(pending.popleft())
            yield batch, groups
        self.consumed = total

    def deltas(self) -> Iterator[tuple[EncodedBatch, WordGroups, ReadStats]]:
        """Each batch of raw input with its distinct words and the read statistics of its documents.

        What `maskprep encode` stores; the literal special tokens are tallied as when iterating.
        """
        if self.task.raw is None:
            raise ValueError("TaskReader.deltas: only raw corpus tasks are encoded")
        literal: dict[str, int] = {}
        before = ReadStats()
        for batch, groups in self._raw(self.task.raw):
            tally_literal_specials(self.info, batch, literal)
            yield batch, groups, _minus(self.consumed, before)
            before = dataclasses.replace(self.consumed)
        self.consumed.literal_specials = literal


def _minus(a: ReadStats, b: ReadStats) -> ReadStats:
    return ReadStats(
        a.documents - b.documents,
        a.empty_skipped - b.empty_skipped,
        a.invalid_utf8 - b.invalid_utf8,
        a.bytes_read - b.bytes_read,
    )

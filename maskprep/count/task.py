"""One counting task: read a task's encoded batches (tokenizing raw text, or from an encoded
directory) and count its n-grams into sorted spills.

`ChunkCounter` counts all n = 1..max_n of each batch at once (`kernels.count_block`),
buffers the distinct n-grams per coarse key range and, when its share of ``--memory``
is used, reduces the buffer and spills one sorted file per n. `count_task` is the task
function that a local pool or a Dask worker runs. It does not merge (spills.py) or
write the counts directory (files.py, driver.py).
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from pathlib import Path
from typing import Iterator, Sequence

import numpy as np

from .._arrow import arrow_strings
from ..corpus.reader import CorpusOptions, batch_documents, iter_documents
from ..corpus.types import ReadStats
from ..encoded.format import WordTable
from ..errors import MaskprepError, PartError, os_error_text
from ..encoded.source import SourceTask, TaskReader
from ..tokenizer.encoding import (
    SPACE,
    WORD,
    EncodedBatch,
    TokenizerInfo,
    encode_grouped,
    shared_tokenizer,
    tally_literal_specials,
    tokenizer_from_json,
)
from .files import Vocabulary, collision_error, take_strings
from .kernels import COARSE_BUCKETS, FINE_BUCKETS, count_block, fine_bucket, reduce_rows
from .spills import SpillFile, SpillWriter, disk_error
from .types import CountConfig, TaskCounts

__all__ = ["ChunkCounter", "CountTask", "count_task", "group_tasks", "group_small_files",
           "REDUCE_ROWS"]

REDUCE_ROWS = 1 << 16  # rows reduced at once when spilling (a few MB: stays in cache)


@dataclass(frozen=True)
class CountTask:
    """One counting task: one or more consecutive tasks of the source, counted by one counter.

    Counting several small tasks of an encoded directory together spills fewer rows (an
    n-gram met in several of them is one row) and fewer files.
    """

    index: int
    parts: tuple[SourceTask, ...]

    @property
    def weight(self) -> float:
        return sum(p.weight for p in self.parts)

    def describe(self) -> str:
        if len(self.parts) == 1:
            return self.parts[0].describe()
        first, last = self.parts[0], self.parts[-1]
        if first.raw is not None and last.raw is not None:  # small files, each read whole
            return f"{first.raw.path} .. {last.raw.path} ({len(self.parts)} files)"
        return f"{first.describe()} .. {last.describe()}"


def group_tasks(tasks: Sequence[SourceTask], group_bytes: float) -> list[CountTask]:
    """Consecutive source tasks (an encoded directory's) in groups of about equal weight, each
    about `group_bytes` at most (a task heavier than that alone).

    The groups depend only on the tasks, never on --memory or --workers, so a resumed
    count finds the same tasks.

    >>> [len(g.parts) for g in group_tasks(tasks_of_1mb_each[:10], 4 << 20)]  # doctest: +SKIP
    [4, 3, 3]
    """
    if not tasks:
        return []
    weights = np.array([t.weight for t in tasks], np.float64)
    total = float(weights.sum())
    k = max(1, min(len(tasks), int(np.ceil(total / group_bytes))))
    # task i goes to the group where the middle of its weight falls, of k equal shares
    mids = np.cumsum(weights) - weights / 2
    share = np.minimum((mids * k / max(total, 1e-9)).astype(np.int64), k - 1)
    groups: list[CountTask] = []
    for g in range(k):
        parts = tuple(t for t, gi in zip(tasks, share.tolist()) if gi == g)
        if parts:
            groups.append(CountTask(len(groups), parts))
    return groups


def group_small_files(tasks: Sequence[SourceTask], group_bytes: float,
                      compressed_ratio: float) -> list[CountTask]:
    """Raw-text tasks for counting: consecutive files read whole by one task each (a directory
    of small files) counted in groups of about `group_bytes` of text (`group_tasks`; the text
    of a compressed file estimated as `compressed_ratio` times its size); a task that is a
    part of a larger file stays alone, so an error names its byte range.

    Like `group_tasks`, the groups depend only on the tasks.
    """
    per_file: dict[str, int] = {}
    for t in tasks:
        if t.raw is not None:
            per_file[t.raw.path] = per_file.get(t.raw.path, 0) + 1
    out: list[CountTask] = []
    run: list[SourceTask] = []

    def close_run() -> None:
        # grouped by estimated text; the parts keep their own weights (bytes on disk)
        est = [dataclasses.replace(t, index=i, weight=t.weight * (
            compressed_ratio if t.raw is not None and t.raw.compression else 1.0))
            for i, t in enumerate(run)]
        for g in group_tasks(est, group_bytes):
            out.append(CountTask(len(out), tuple(run[p.index] for p in g.parts)))
        run.clear()

    for t in tasks:
        raw = t.raw
        if raw is not None and raw.pick is None and per_file[raw.path] == 1:
            run.append(t)
        else:
            close_run()
            out.append(CountTask(len(out), (t,)))
    close_run()
    return out


def _runs_of(kinds: np.ndarray, word_keys: np.ndarray, doc_offsets: np.ndarray
             ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Counted words of a batch: keys [M], words left in their run [M], run start offsets [R].

    Space words are dropped; a run ends at any other non-word and at the end of a document.
    """
    W = len(kinds)
    doc_start = np.zeros(W + 1, np.int8)
    doc_start[doc_offsets[:-1]] = 1
    keep = np.flatnonzero(kinds != SPACE)
    if len(keep) == W:
        kept_kinds, new_doc, keys = kinds, doc_start[:W], word_keys
    else:  # a document start on a dropped space word moves to the next kept word
        doc = np.cumsum(doc_start[:W])[keep]
        new_doc = np.concatenate(([1], np.diff(doc))) if len(doc) else doc
        kept_kinds, keys = kinds[keep], word_keys[keep]
    is_word = kept_kinds == WORD
    continues = np.zeros(len(kept_kinds), bool)
    continues[1:] = is_word[:-1]
    continues &= new_doc == 0
    words = np.flatnonzero(is_word)
    wk = keys[words]
    run_starts = np.flatnonzero(~continues[words])
    # no words: no runs
    run_ends = np.append(run_starts[1:], len(wk)) if len(run_starts) else run_starts
    rem = np.repeat(run_ends, run_ends - run_starts) - np.arange(len(wk), dtype=np.int64)
    return wk, rem, run_starts


class ChunkCounter:
    """Count the n-grams of a stream of `EncodedBatch`es within a memory share, spilling sorted
    runs.

    >>> c = ChunkCounter(info, max_n=5, spill_dir=Path("spill"), share=256 << 20,  # doctest: +SKIP
    ...     tag="t0")
    >>> c.add(info.encode(["To be, or not to be"])); result = c.finish()  # doctest: +SKIP
    """

    def __init__(self, info: TokenizerInfo, *, max_n: int, spill_dir: Path, share: int, tag: str,
                 block_words: int | None = None, joined: bool = False) -> None:
        self.info = info
        self.joined = joined  # segmenter words (their texts are made without whitespace)
        self.max_n = max_n
        self.spill_dir = spill_dir
        self.tag = tag
        self.limit = share * 5 // 8   # the rest: one batch in flight and one bucket being reduced
        self.block_words = block_words or int(np.clip(share // 256, 2048, 1 << 17))
        self.buffers: list[list[list[tuple[np.ndarray, np.ndarray, np.ndarray]]]] = [
            [[] for _ in range(COARSE_BUCKETS)] for _ in range(max_n)
        ]
        self.buffer_bytes = 0
        self.totals = [0] * max_n
        self.runs: list[SpillFile] = []
        self.flushes = 0
        self.vocab: dict[int, str] = {}  # texts of words of raw text (tokenizer's cache)
        self._tables: list[tuple[np.ndarray, object]] = []  # (keys, texts) of word tables
        self._seen_types = 0

    def add(self, batch: EncodedBatch) -> None:
        """Count one batch of raw text (its words' texts are collected from the tokenizer's word
        types; encoded input gives them with `add_word_table` and counts with `add_words`)."""
        self._collect_words(batch)
        self.add_words(batch.word_kinds, batch.word_keys, batch.doc_offsets)

    def add_words(self, kinds: np.ndarray, keys: np.ndarray, doc_offsets: np.ndarray) -> None:
        """Count one batch given by its words' kinds and keys and its document offsets (the
        texts of its words known already: `add_word_table`)."""
        wk, rem, run_starts = _runs_of(kinds, keys, doc_offsets)
        M = len(wk)
        if M == 0:
            return
        run_lens = np.diff(np.append(run_starts, M))
        for n in range(1, self.max_n + 1):
            self.totals[n - 1] += int(np.maximum(run_lens - (n - 1), 0).sum())
        targets = np.arange(self.block_words, M, self.block_words)
        cuts = run_starts[np.searchsorted(run_starts, targets, side="right") - 1]
        bounds = np.unique(np.concatenate(([0], cuts, [M])))
        for a, b in zip(
            bounds[:-1].tolist(), bounds[1:].tolist()
        ):  # one step per block of ~64k words
            for n, (keys, counts, fp, offsets) in enumerate(
                count_block(wk[a:b], rem[a:b], self.max_n), start=1
            ):
                buf = self.buffers[n - 1]
                for c in np.flatnonzero(np.diff(offsets)).tolist():
                    lo, hi = offsets[c], offsets[c + 1]
                    buf[c].append((keys[:, lo:hi], counts[lo:hi], fp[lo:hi]))
                self.buffer_bytes += keys.nbytes + counts.nbytes + fp.nbytes
            if self.buffer_bytes >= self.limit:
                self.flush()

    def flush(self) -> None:
        """Reduce the buffer and write one sorted run per n."""
        if self.buffer_bytes == 0:
            return
        try:
            for n in range(1, self.max_n + 1):
                path = self.spill_dir / f"{self.tag}-r{self.flushes:04d}-n{n}.npy"
                bucket_rows = np.zeros(FINE_BUCKETS, np.int64)
                with SpillWriter(path, n + 1) as writer:
                    for pieces in self._bucket_groups(n):
                        if len(pieces) == 1:
                            keys, counts, fp = pieces[0]
                        else:
                            keys, counts, fp = (np.concatenate(p, axis=-1) for p in zip(*pieces))
                        del pieces
                        out, fp = reduce_rows(keys, counts, fp=fp)
                        writer.write(out)
                        bucket_rows += np.bincount(fine_bucket(fp), minlength=FINE_BUCKETS)
                offsets = np.concatenate(([0], np.cumsum(bucket_rows)))
                if writer.rows:
                    self.runs.append(SpillFile(str(path), n, writer.rows, offsets, writer.crc32))
                else:
                    path.unlink()
        except OSError as exc:
            raise disk_error(exc, self.spill_dir, "spilling n-gram counts") from None
        self.buffer_bytes = 0
        self.flushes += 1

    def _bucket_groups(self, n: int) -> Iterator[list[tuple[np.ndarray, np.ndarray, np.ndarray]]]:
        """The buffered pieces of n, consecutive coarse buckets together up to `REDUCE_ROWS` rows.

        Coarse buckets are ranges of the fingerprint, so reducing several at once gives
        the same rows in the same (canonical) order as reducing them one by one; it
        only saves the per-call overhead of reducing many small buckets (a small task
        has a few thousand rows per bucket). The buffer is emptied as it goes.
        """
        buf = self.buffers[n - 1]
        group: list[tuple[np.ndarray, np.ndarray, np.ndarray]] = []
        rows = 0
        for c in range(COARSE_BUCKETS):
            pieces, buf[c] = buf[c], []
            group.extend(pieces)
            rows += sum(len(p[1]) for p in pieces)
            if rows >= REDUCE_ROWS:
                yield group
                group, rows = [], 0
        if group:
            yield group

    def finish(self, *, task_index: int = 0, documents: int = 0) -> TaskCounts:
        """Spill what is left and write the task's word list; return the task's result."""
        self.flush()
        words = Vocabulary()
        if self.vocab:
            keys = np.fromiter(self.vocab.keys(), dtype=np.uint64, count=len(self.vocab))
            words.add_words(keys, arrow_strings(list(self.vocab.values())))
        for keys, texts in self._tables:
            words.add_words(keys, texts)
        words.finish()  # sorted by key, one row per key; two texts under one key raise
        path = self.spill_dir / f"{self.tag}-words.arrow"
        try:
            words.save(str(path))
        except OSError as exc:
            raise disk_error(exc, self.spill_dir, "writing the word list") from None
        return TaskCounts(
            task_index, self.runs, self.totals, str(path), len(words.keys), self.flushes, documents
        )

    def _collect_words(self, batch: EncodedBatch) -> None:
        """Texts of the words first seen in this batch; two texts with one key raise."""
        size = self.info.word_type_count
        if size < self._seen_types:  # the tokenizer's type cache was cleared during this batch
            self._seen_types = 0
            self._decode_missing(batch)
        new = self.info.newest_word_types(size - self._seen_types)
        vocab = self.vocab
        for wt in new:  # one step per distinct word type, not per occurrence
            if wt.kind == WORD:
                prev = vocab.setdefault(wt.key, wt.text)
                if prev != wt.text:
                    raise collision_error(wt.key, prev, wt.text)
        self._seen_types = size

    def _decode_missing(self, batch: EncodedBatch) -> None:
        words = np.flatnonzero(batch.word_kinds == WORD)
        uniq, first = np.unique(batch.word_keys[words], return_index=True)
        missing = [i for i, k in enumerate(uniq.tolist()) if k not in self.vocab]
        wo = batch.word_offsets
        lists = [batch.ids[wo[w]:wo[w + 1]].tolist() for w in words[first[missing]].tolist()]
        for i, text in zip(missing, self.info.canonical_texts(lists, joined=self.joined)):
            self.vocab[int(uniq[i])] = text

    def add_word_table(self, table: WordTable) -> None:
        """Texts of the words of an encoded task (its word table); checked for collisions (two
        texts under one key) when the task finishes."""
        keys, kinds = table.fields["word_keys"], table.fields["word_kinds"]
        sel = np.flatnonzero(kinds == WORD)
        self._tables.append((keys[sel], take_strings(table.texts, sel)))

    def abort(self) -> None:
        """Drop the buffer (files are removed with the spill directory)."""
        self.buffers = [[[] for _ in range(COARSE_BUCKETS)] for _ in range(self.max_n)]
        self.buffer_bytes = 0


def _batch_chars(config: CountConfig, share: int) -> int:
    # the tokenizer holds about 200 bytes per character of a batch while it encodes, two
    # batches at once with the look-ahead: a batch of share / 1024 characters keeps that
    # under a fifth of the share
    return config.batch_chars or int(np.clip(share // 1024, 16_384, 1 << 20))


def count_task(task: CountTask, tokenizer_json: str, config: CountConfig, spill_dir: str,
               corpus_options: CorpusOptions, share: int) -> TaskCounts:
    """Task function: count one task (raw text or an encoded directory's parts), spilling runs
    under `spill_dir`.

    >>> count_task(group_tasks(tasks, 4 << 20)[0], info.json, CountConfig(),  # doctest: +SKIP
    ...     "out/.spill-x", CorpusOptions(), 1 << 28)
    """
    if all(p.encoded is not None for p in task.parts):  # word texts in the word tables
        info = shared_tokenizer(tokenizer_json)
    else:  # a fresh word-type cache per task: its entries give the texts
        info = tokenizer_from_json(tokenizer_json)
    counter = ChunkCounter(info, max_n=config.max_n, spill_dir=Path(spill_dir), share=share,
                           tag=f"t{task.index:06d}", joined=not config.words.is_tokenizer)
    documents = 0
    literal: dict[str, int] = {}
    words = None if config.words.is_tokenizer else config.words
    try:
        if len(task.parts) > 1 and all(p.raw is not None for p in task.parts):
            # small files: their documents in batches across files (a batch per file would
            # pay the per-batch cost of encoding and grouping once per file)
            stats = ReadStats()
            docs = batch_documents(_across_files(task, corpus_options, stats),
                                   _batch_chars(config, share))
            for batch, _ in encode_grouped(info, docs, words):
                tally_literal_specials(info, batch, literal)
                counter.add(batch)
            documents = stats.documents
        else:
            for part in task.parts:
                reader = TaskReader(part, info, corpus_options,
                                    batch_chars=_batch_chars(config, share), words=words)
                table = reader.word_table()
                if table is not None:  # encoded input: the word texts are in its word table
                    counter.add_word_table(table)
                    for keys, kinds, doc_offsets in reader.word_fields():  # no token ids
                        counter.add_words(kinds, keys, doc_offsets)
                else:
                    for batch in reader:
                        counter.add(batch)
                documents += reader.consumed.documents
                for s, k in reader.consumed.literal_specials.items():
                    literal[s] = literal.get(s, 0) + k
        result = counter.finish(task_index=task.index, documents=documents)
        result.literal_specials.update(literal)
        return result
    except BaseException:
        counter.abort()
        raise


def _across_files(task: CountTask, options: CorpusOptions, stats: ReadStats) -> Iterator[str]:
    """The documents of a group of small files, in order; a reading error names its file."""
    for part in task.parts:
        assert part.raw is not None
        try:
            yield from iter_documents(part.raw, options, stats)
        except MaskprepError as exc:  # named by the file at fault, not by the whole group
            raise PartError(f"{part.describe()}: {exc}") from None
        except OSError as exc:
            raise PartError(f"{part.describe()}: {os_error_text(exc)}") from None

"""Exact, streaming, memory-bounded counts of word n-grams: `maskprep count`.

A word is one piece of the tokenizer's pre-tokenization (`EncodedBatch`
words). Whitespace-only words are dropped (they are no positions and break
nothing); punctuation-only and special words are not counted and break
n-grams; n-grams never cross documents. N is the number of counted word
positions, and every count divides by N.

How: the corpus is split into tasks (`corpus.plan_tasks`). `count_chunk`
encodes a task batch by batch and counts all n = 1..max_n at once with numpy
(`ngram_kernels.count_block`), buffers the distinct n-grams per coarse key range,
and when its share of ``--memory`` is used, reduces the buffer and spills one
sorted run per n to ``COUNTS_DIR/.maskprep-count/`` (each finished task is
recorded there for ``--resume``, see `maskprep.count.resume`). Every run is sorted by the
n-grams' fingerprints, so a key range (fine bucket) is one slice of each run.
`merge_partition` then reduces one key range of one n at a time, in small
cache-sized groups, so no process ever holds all keys; pruning by
``min_count`` happens there, exactly, after all occurrences are summed. The
driver writes ``ngrams-<n>.parquet`` (count descending, then fingerprint, then
keys), ``counts.json`` and a copy of the tokenizer, renaming each into place
only when all are complete; ``counts.json`` is renamed last, and then the
state directory (runs included) is removed.

Memory: every task keeps to ``memory / workers`` (with ``--dask``, each task
gets all of ``--memory``: it is then the budget per running task); merges and
the final write work in blocks of that size. What is not bounded by ``--memory``: one batch
holds at least one whole document, and the driver keeps the word vocabulary
(distinct words and their texts) to write the ``text`` column.

It does not score n-grams (cohesion.py) or choose units (units.py).
"""

from __future__ import annotations

import dataclasses
import itertools
import json
import os
import re
import time
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .._version import __version__
from ..corpus.reader import CorpusOptions, CorpusTask, ReadStats, corpus_fingerprint, iter_batches, plan_tasks, \
    resolve_inputs
from ..errors import MaskprepError
from ..execute import Executor, map_tasks, pool_running
from .files import Vocabulary, collision_error, fsynced_text, publish, write_ngrams
from .kernels import COARSE_BUCKETS, FINE_BUCKETS, count_block, fine_bucket, reduce_rows
from .spills import MergeJob, PartitionResult, RunInfo, RunWriter, disk_error, merge_partition, plan_merges
from ..tokenizer.encoding import SPACE, WORD, EncodedBatch, TokenizerInfo, encode_stream, load_tokenizer, \
    tokenizer_from_json

__all__ = ["CountConfig", "CountSummary", "ChunkCounter", "count_ngrams", "count_chunk", "merge_partition",
           "finish_counts", "task_share", "write_task", "parse_memory", "format_summary", "FORMAT_VERSION", "MIN_TASK_MEMORY", "MAX_N"]

FORMAT_VERSION = 1
MAX_N = 8
MIN_TASK_MEMORY = 4 << 20       # below this a task cannot hold a batch and a buffer at once
TASK_BYTES = 8 << 20            # text files are split into tasks of about this size
POOL_ROWS = 8_000_000           # merges / writes smaller than this run in the driver unless the pool is
                                # already running (starting one costs ~1-2 s)
_UNITS = {"": 1, "b": 1, "k": 1 << 10, "m": 1 << 20, "g": 1 << 30, "t": 1 << 40,
          "kib": 1 << 10, "mib": 1 << 20, "gib": 1 << 30, "tib": 1 << 40,
          "kb": 10 ** 3, "mb": 10 ** 6, "gb": 10 ** 9, "tb": 10 ** 12}


def parse_memory(text: str | int, *, option: str = "--memory") -> int:
    """Bytes from "1GiB", "512MiB", "2G" (K/M/G/T and KiB.. are powers of 1024; KB/MB/GB of 1000) or an int.

    >>> parse_memory("512MiB"), parse_memory("2G"), parse_memory("10MB")
    (536870912, 2147483648, 10000000)
    """
    if isinstance(text, int) and not isinstance(text, bool):
        value = text
    else:
        m = re.fullmatch(r"\s*(\d+(?:\.\d*)?|\.\d+)\s*([a-zA-Z]*)\s*", str(text))
        unit = m.group(2).lower() if m else None
        if m is None or unit not in _UNITS:
            raise MaskprepError(f"{option}: cannot read {text!r} as a size; write e.g. 1GiB, 512MiB, 2G or a "
                                "number of bytes")
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

    def __post_init__(self) -> None:
        if not isinstance(self.max_n, int) or not 1 <= self.max_n <= MAX_N:
            raise MaskprepError(f"--max-n: expected 1 to {MAX_N}, got {self.max_n}")
        if not isinstance(self.min_count, int) or self.min_count < 1:
            raise MaskprepError(f"--min-count: expected a whole number >= 1, got {self.min_count}")
        if self.batch_chars is not None and self.batch_chars < 1:
            raise MaskprepError(f"batch_chars: expected a positive number, got {self.batch_chars}")
        parse_memory(self.memory)

    @property
    def memory_bytes(self) -> int:
        return parse_memory(self.memory)


@dataclass(frozen=True)
class ChunkResult:
    """What one counting task left behind (runs and its word list) and its totals per n."""

    task_index: int
    runs: list[RunInfo]
    totals: list[int]
    words_path: str
    words: int
    flushes: int
    documents: int


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


# ---------------------------------------------------------------- counting one task

def _runs_of(batch: EncodedBatch) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Counted words of a batch: keys [M], words left in their run [M], run start offsets [R].

    Space words are dropped; a run ends at any other non-word and at the end of a document.
    """
    kinds = batch.word_kinds
    W = len(kinds)
    doc_start = np.zeros(W + 1, np.int8)
    doc_start[batch.doc_offsets[:-1]] = 1
    keep = np.flatnonzero(kinds != SPACE)
    if len(keep) == W:
        kept_kinds, new_doc, keys = kinds, doc_start[:W], batch.word_keys
    else:  # a document start on a dropped space word moves to the next kept word
        doc = np.cumsum(doc_start[:W])[keep]
        new_doc = np.concatenate(([1], np.diff(doc))) if len(doc) else doc
        kept_kinds, keys = kinds[keep], batch.word_keys[keep]
    is_word = kept_kinds == WORD
    continues = np.zeros(len(kept_kinds), bool)
    continues[1:] = is_word[:-1]
    continues &= new_doc == 0
    words = np.flatnonzero(is_word)
    wk = keys[words]
    run_starts = np.flatnonzero(~continues[words])
    run_ends = np.append(run_starts[1:], len(wk)) if len(run_starts) else run_starts  # no words: no runs
    rem = np.repeat(run_ends, run_ends - run_starts) - np.arange(len(wk), dtype=np.int64)
    return wk, rem, run_starts


class ChunkCounter:
    """Count the n-grams of a stream of `EncodedBatch`es within a memory share, spilling sorted runs.

    >>> c = ChunkCounter(info, max_n=5, spill_dir=Path("spill"), share=256 << 20, tag="t0")  # doctest: +SKIP
    >>> c.add(info.encode(["To be, or not to be"])); result = c.finish()  # doctest: +SKIP
    """

    def __init__(self, info: TokenizerInfo, *, max_n: int, spill_dir: Path, share: int, tag: str,
                 block_words: int | None = None) -> None:
        self.info = info
        self.max_n = max_n
        self.spill_dir = spill_dir
        self.tag = tag
        self.limit = share * 5 // 8   # the rest: one batch in flight and one bucket being reduced
        self.block_words = block_words or int(np.clip(share // 256, 2048, 1 << 17))
        self.buffers: list[list[list[tuple[np.ndarray, np.ndarray, np.ndarray]]]] = [[[] for _ in range(COARSE_BUCKETS)] for _ in range(max_n)]
        self.buffer_bytes = 0
        self.totals = [0] * max_n
        self.runs: list[RunInfo] = []
        self.flushes = 0
        self.vocab: dict[int, str] = {}
        self._seen_types = 0

    def add(self, batch: EncodedBatch) -> None:
        """Count one batch (its words' texts are collected from the tokenizer's word types)."""
        self._collect_words(batch)
        wk, rem, run_starts = _runs_of(batch)
        M = len(wk)
        if M == 0:
            return
        run_lens = np.diff(np.append(run_starts, M))
        for n in range(1, self.max_n + 1):
            self.totals[n - 1] += int(np.maximum(run_lens - (n - 1), 0).sum())
        targets = np.arange(self.block_words, M, self.block_words)
        cuts = run_starts[np.searchsorted(run_starts, targets, side="right") - 1]
        bounds = np.unique(np.concatenate(([0], cuts, [M])))
        for a, b in zip(bounds[:-1].tolist(), bounds[1:].tolist()):  # one step per block of ~64k words
            for n, (keys, counts, fp, offsets) in enumerate(count_block(wk[a:b], rem[a:b], self.max_n), start=1):
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
                with RunWriter(path, n + 1) as writer:
                    buf = self.buffers[n - 1]
                    for c in range(COARSE_BUCKETS):
                        pieces, buf[c] = buf[c], []
                        if not pieces:
                            continue
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
                    self.runs.append(RunInfo(str(path), n, writer.rows, offsets))
                else:
                    path.unlink()
        except OSError as exc:
            raise disk_error(exc, self.spill_dir, "spilling n-gram counts") from None
        self.buffer_bytes = 0
        self.flushes += 1

    def finish(self, *, task_index: int = 0, documents: int = 0) -> ChunkResult:
        """Spill what is left and write the task's word list; return the task's result."""
        self.flush()
        import pyarrow as pa

        keys = np.fromiter(self.vocab.keys(), dtype=np.uint64, count=len(self.vocab))
        order = np.argsort(keys, kind="stable")
        texts = list(self.vocab.values())
        table = pa.table({"key": pa.array(keys[order]), "text": pa.array([texts[i] for i in order.tolist()],
                                                                          type=pa.large_string())})
        path = self.spill_dir / f"{self.tag}-words.arrow"
        try:
            with pa.OSFile(str(path), "wb") as sink, pa.ipc.new_file(sink, table.schema) as w:
                w.write_table(table)
        except OSError as exc:
            raise disk_error(exc, self.spill_dir, "writing the word list") from None
        return ChunkResult(task_index, self.runs, self.totals, str(path), len(keys), self.flushes, documents)

    def _collect_words(self, batch: EncodedBatch) -> None:
        """Texts of the words first seen in this batch; two texts with one key raise."""
        types = self.info._types
        size = len(types)
        if size < self._seen_types:  # the tokenizer's type cache was cleared during this batch
            self._seen_types = 0
            self._decode_missing(batch)
        new = itertools.islice(reversed(types.values()), size - self._seen_types)
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
        for i, text in zip(missing, self.info.tokenizer.decode_batch(lists, skip_special_tokens=False)):
            self.vocab[int(uniq[i])] = text.strip()

    def abort(self) -> None:
        """Drop the buffer (files are removed with the spill directory)."""
        self.buffers = [[[] for _ in range(COARSE_BUCKETS)] for _ in range(self.max_n)]
        self.buffer_bytes = 0


def _batch_chars(config: CountConfig, share: int) -> int:
    return config.batch_chars or int(np.clip(share // 256, 16_384, 1 << 20))


def count_chunk(task: CorpusTask, tokenizer_json: str, config: CountConfig, spill_dir: str,
                corpus_options: CorpusOptions, share: int) -> ChunkResult:
    """Task function: count one corpus task, spilling runs under `spill_dir`.

    >>> count_chunk(plan_tasks(files)[0], info.json, CountConfig(), "out/.spill-x", CorpusOptions(), 1 << 28)  # doctest: +SKIP
    """
    info = tokenizer_from_json(tokenizer_json)  # a fresh word-type cache per task: its entries give the texts
    counter = ChunkCounter(info, max_n=config.max_n, spill_dir=Path(spill_dir), share=share,
                           tag=f"t{task.index:06d}")
    stats = ReadStats()
    try:
        for batch in encode_stream(info, iter_batches(task, corpus_options, stats,
                                                      batch_chars=_batch_chars(config, share))):
            counter.add(batch)
        return counter.finish(task_index=task.index, documents=stats.documents)
    except BaseException:
        counter.abort()
        raise


# ---------------------------------------------------------------- the driver

def _task_megabytes(task: CorpusTask) -> float:
    if task.end >= 0 and task.fmt in ("txt", "jsonl"):
        return (task.end - task.start) / 1e6
    try:
        return os.path.getsize(task.path) / 1e6
    except OSError:
        return 1.0


def count_ngrams(corpus: list[str] | tuple[str, ...], *, tokenizer: str | Path | TokenizerInfo, output: str | Path,
                 config: CountConfig = CountConfig(), corpus_options: CorpusOptions = CorpusOptions(),
                 executor: Executor = Executor(), overwrite: bool = False, quiet: bool = False,
                 resume: bool = False) -> CountSummary:
    """Count the word n-grams of a corpus exactly into COUNTS_DIR `output`; `resume` finishes an interrupted count.

    Finished tasks are recorded in ``COUNTS_DIR/.maskprep-count/`` (see `maskprep.count.resume`).

    >>> count_ngrams(["plays.txt"], tokenizer="tokenizer.json", output="counts", config=CountConfig(max_n=3))  # doctest: +SKIP
    CountSummary(output=PosixPath('counts'), N=860226, ...)
    """
    from .resume import count_recorded, finished_summary, open_state, run_identity

    started = time.monotonic()
    output = Path(output)
    files = resolve_inputs(list(corpus))
    info = tokenizer if isinstance(tokenizer, TokenizerInfo) else load_tokenizer(tokenizer)
    executor = dataclasses.replace(executor, quiet=executor.quiet or quiet)
    task_options = dataclasses.replace(corpus_options, chunk_bytes=min(corpus_options.chunk_bytes, TASK_BYTES))
    tasks = plan_tasks(files, task_options)
    share = task_share(config, executor, len(tasks))
    fingerprint = corpus_fingerprint(files, corpus_options)
    identity = run_identity(config, info, fingerprint, task_options, format_version=FORMAT_VERSION)
    state = open_state(output, identity, resume=resume, overwrite=overwrite)
    if state is None:  # --resume on counts finished with these options: nothing to do
        return finished_summary(output, tasks=len(tasks), started=started)
    done = state.finished([t.index for t in tasks]) if resume else {}
    state.clean(done)
    todo = [t for t in tasks if t.index not in done]
    root = os.path.abspath(state.root)  # tasks get absolute paths: a Dask worker's cwd is not the driver's
    args = [(dataclasses.replace(t, path=os.path.abspath(t.path)), info.json, config, root, task_options, share,
             state.digest) for t in todo]
    for result in map_tasks(count_recorded, args, executor=executor, label="count",
                            describe=lambda i: todo[i].describe(), weights=[_task_megabytes(t) for t in todo],
                            unit="MB", shared=output):
        done[result.task_index] = result
    summary = finish_counts([done[t.index] for t in tasks], info=info, output=output,
                            spill=state.merge_dir().resolve(), config=config, files=files,
                            corpus_options=corpus_options, executor=executor, started=started,
                            fingerprint=fingerprint)
    state.remove()
    return summary


def task_share(config: CountConfig, executor: Executor, tasks: int) -> int:
    """Bytes of --memory for each task running at once; too little raises, naming the minimum.

    >>> task_share(CountConfig(memory="1GiB"), Executor(workers=2), 10) >> 20
    512
    """
    slots = max(1, min(1 if executor.dask else executor.workers, tasks))
    share = config.memory_bytes // slots
    if share < MIN_TASK_MEMORY:
        raise MaskprepError(f"--memory {config.memory}: too small to make progress with {slots} workers; the "
                            f"minimum is {MIN_TASK_MEMORY * slots >> 20} MiB ({MIN_TASK_MEMORY >> 20} MiB per "
                            "worker); raise --memory or lower --workers")
    return share


def write_task(path: str, n: int, parts: list[PartitionResult], vocab_path: str, band_rows: int) -> str:
    """Task function: write ngrams-<n>.parquet from the merged key ranges of one n."""
    vocab = Vocabulary()
    vocab.add_file(vocab_path)
    vocab.finish()
    try:
        write_ngrams(Path(path), n, parts, vocab, band_rows)
    except OSError as exc:
        raise disk_error(exc, Path(path).parent, f"writing {Path(path).name}") from None
    for p in parts:
        os.unlink(p.path)
    return path


def _for_rows(executor: Executor, rows: int) -> Executor:
    """The executor for a phase of `rows` rows: small phases run in this process (same results), unless
    the counting tasks already started the pool."""
    if executor.dask or executor.workers == 1 or rows >= POOL_ROWS or pool_running(executor.workers):
        return executor
    return dataclasses.replace(executor, workers=1)


def finish_counts(results: list[ChunkResult], *, info: TokenizerInfo, output: Path, spill: Path,
                  config: CountConfig, files: list[Path], corpus_options: CorpusOptions, executor: Executor,
                  started: float, fingerprint: str | None = None) -> CountSummary:
    """Merge the spilled runs of all tasks, write COUNTS_DIR and rename it into place.

    >>> finish_counts(results, info=info, output=Path("counts"), spill=spill, config=config, files=files,
    ...               corpus_options=CorpusOptions(), executor=Executor(), started=0.0)  # doctest: +SKIP
    """
    max_n = config.max_n
    vocab = Vocabulary()
    for r in results:
        vocab.add_file(r.words_path)  # kept: a resumed count merges the recorded tasks again
    vocab.finish()
    vocab_path = str(spill / "words.arrow")
    try:
        vocab.save(vocab_path)
    except OSError as exc:
        raise disk_error(exc, spill, "writing the word list") from None
    totals = [sum(r.totals[n - 1] for r in results) for n in range(1, max_n + 1)]
    if totals[0] == 0:
        raise MaskprepError(f"{', '.join(map(str, files))}: no words to count (every document is empty, "
                            "whitespace or punctuation)")
    share = task_share(config, executor, 2 * max_n)
    jobs: list[MergeJob] = []
    for n in range(1, max_n + 1):
        runs = [run for r in results for run in r.runs if run.n == n]
        group_rows = int(np.clip(share // (16 * (n + 1) + 64), 4096, 1 << 18))
        jobs += plan_merges(runs, n, 2 * max(1, executor.workers), config.min_count, group_rows, spill)
    run_rows = sum(run.rows for r in results for run in r.runs)
    parts: list[PartitionResult] = list(map_tasks(
        merge_partition, [(j,) for j in jobs], executor=_for_rows(executor, run_rows), label="merge",
        describe=lambda i: f"merge of {jobs[i].n}-grams, part {i}"))
    by_n = {n: [p for p in parts if p.n == n] for n in range(1, max_n + 1)}
    for n in range(1, max_n + 1):
        if sum(p.total for p in by_n[n]) != totals[n - 1]:
            raise RuntimeError(f"internal error: merged {n}-gram occurrences do not add up to the counted total")
    distinct = [sum(p.distinct for p in by_n[n]) for n in range(1, max_n + 1)]
    kept = [sum(p.kept for p in by_n[n]) for n in range(1, max_n + 1)]
    order = sorted(range(1, max_n + 1), key=lambda n: -kept[n - 1])  # biggest first: better load balance
    list(map_tasks(write_task, [(str(spill / f"ngrams-{n}.parquet"), n, by_n[n], vocab_path,
                                 max(1024, share // (24 * (n + 1) + 96))) for n in order],
                   executor=_for_rows(executor, 2 * sum(kept)), label="write",
                   describe=lambda i: f"ngrams-{order[i]}.parquet"))
    documents = sum(r.documents for r in results)
    meta = {
        "format_version": FORMAT_VERSION, "N": totals[0], "max_n": max_n, "min_count": config.min_count,
        "totals": {str(n): totals[n - 1] for n in range(1, max_n + 1)},
        "distinct": {str(n): distinct[n - 1] for n in range(1, max_n + 1)},
        "kept": {str(n): kept[n - 1] for n in range(1, max_n + 1)},
        "documents": documents,
        "tokenizer_hash": info.hash, "tokenizer_name": info.name,
        "corpus_fingerprint": fingerprint or corpus_fingerprint(files, corpus_options),
        "corpus_files": [str(f) for f in files],
        "options": {"max_n": max_n, "min_count": config.min_count, "doc_sep": corpus_options.doc_sep,
                    "text_field": corpus_options.text_field, "text_column": corpus_options.text_column,
                    "strict": corpus_options.strict},
        "maskprep_version": __version__,
    }
    try:
        fsynced_text(spill / "tokenizer.json", info.json)
        fsynced_text(spill / "counts.json", json.dumps(meta, indent=2, sort_keys=True) + "\n")
        publish(spill, output, max_n)
    except OSError as exc:
        raise disk_error(exc, output, "writing the counts") from None
    rng = range(1, max_n + 1)
    return CountSummary(output=output, N=totals[0], max_n=max_n, min_count=config.min_count,
                        totals=dict(zip(rng, totals)), distinct=dict(zip(rng, distinct)),
                        kept=dict(zip(rng, kept)), documents=documents,
                        spill_runs=sum(len(r.runs) for r in results), tasks=len(results),
                        seconds=time.monotonic() - started, files=[str(f) for f in files])



def format_summary(summary: CountSummary) -> str:
    """A short table of the count for the terminal.

    >>> print(format_summary(summary))  # doctest: +SKIP
    """
    lines = [f"counted N = {summary.N:,} word positions in {summary.documents:,} documents "
             f"({summary.tasks} tasks, {summary.spill_runs} sorted runs spilled, {summary.seconds:.1f}s)",
             f"{'n':>3}  {'occurrences':>14}  {'distinct':>12}  {'kept (count >= ' + str(summary.min_count) + ')':>20}"]
    for n in range(1, summary.max_n + 1):
        lines.append(f"{n:>3}  {summary.totals[n]:>14,}  {summary.distinct[n]:>12,}  {summary.kept[n]:>20,}")
    names = ", ".join(f"ngrams-{n}.parquet" for n in range(1, summary.max_n + 1))
    lines.append(f"wrote {summary.output}/ ({names}, counts.json, tokenizer.json)")
    return "\n".join(lines)

"""Exact, streaming, memory-bounded counts of word n-grams: `maskprep count`.

A word is one piece of the tokenizer's pre-tokenization (`EncodedBatch`
words). Whitespace-only words are dropped (they are no positions and break
nothing); punctuation-only and special words are not counted and break
n-grams; n-grams never cross documents. N is the number of counted word
positions, and every count divides by N.

How: the corpus is split into tasks (`corpus.plan_tasks`); an encoded directory's
consecutive tasks are counted in groups of about ``ENCODED_TASK_BYTES`` of text
(`task.group_tasks`: fewer spilled rows and files). `count_task` encodes (or reads)
a group batch by batch and counts all n = 1..max_n at once with numpy
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
import json
import os
import time
from pathlib import Path

import numpy as np

from .._version import __version__
from ..corpus.reader import CorpusOptions, corpus_fingerprint
from ..encoded.source import open_source
from .._paths import check_apart
from ..errors import MaskprepError
from ..wording import name_files, plural
from ..execute import Executor, map_tasks, pool_running, start_workers
from .._files import file_sha256, fsynced_write_text
from .files import Vocabulary, publish, write_ngrams
from .task import group_small_files, group_tasks
from .spills import MergeJob, PartitionResult, disk_error, merge_partition, plan_merges
from ..tokenizer.encoding import TokenizerInfo, warn_literal_specials

from .types import (
    COUNTS_FORMAT_VERSION,
    ENCODED_TASK_BYTES,
    MAX_N,
    MIN_TASK_MEMORY,
    POOL_ROWS,
    SMALL_FILES_BYTES,
    TASK_BYTES,
    CountConfig,
    CountSummary,
    TaskCounts,
    parse_memory,
)

__all__ = [
    "CountConfig",
    "CountSummary",
    "count_ngrams",
    "finish_counts",
    "task_share",
    "write_task",
    "parse_memory",
    "format_summary",
    "COUNTS_FORMAT_VERSION",
    "MIN_TASK_MEMORY",
    "MAX_N",
    "TASK_BYTES",
]


# ---------------------------------------------------------------- the driver

def _path_of(tokenizer: object) -> str | None:
    return str(tokenizer) if isinstance(tokenizer, (str, Path)) else None


def count_ngrams(
    corpus: list[str] | tuple[str, ...],
    *,
    tokenizer: str | Path | TokenizerInfo | None,
    output: str | Path,
    config: CountConfig = CountConfig(),
    corpus_options: CorpusOptions = CorpusOptions(),
    executor: Executor = Executor(),
    overwrite: bool = False,
    quiet: bool = False,
    resume: bool = False,
) -> CountSummary:
    """Count the word n-grams of a corpus exactly into COUNTS_DIR `output`; `resume` finishes an
    interrupted count.

    Finished tasks are recorded in ``COUNTS_DIR/.maskprep-count/`` (see `maskprep.count.resume`).

    >>> count_ngrams(["plays.txt"], tokenizer="tokenizer.json", output="counts",  # doctest: +SKIP
    ...     config=CountConfig(max_n=3))
    CountSummary(output=PosixPath('counts'), N=860226, ...)
    """
    from . import resume as count_state

    started = time.monotonic()
    output = Path(output)
    # raw text in tasks of at least ENCODED_TASK_BYTES unless CorpusOptions.chunk_bytes names
    # a size: one word-type cache and one set of spills per 4 MiB instead of per 1 MiB (about
    # 1 CPU-s per 21 MB); an error still names the task's own byte range
    source = open_source(list(corpus), corpus_options, task_bytes=TASK_BYTES,
                         min_task_bytes=ENCODED_TASK_BYTES)
    source.check_words(config.words)
    check_apart(output, [*source.inputs, *source.files], others=[_path_of(tokenizer)])
    start_workers(executor, len(source.tasks), ("maskprep.count.resume", "pyarrow"))
    corpus_options = source.options
    files = [Path(f) for f in source.files]
    info = source.tokenizer(tokenizer, stage="count")
    executor = dataclasses.replace(executor, quiet=executor.quiet or quiet)
    # the raw tasks' own size (recorded in the resume identity)
    task_options = corpus_options if source.encoded else dataclasses.replace(
        corpus_options, chunk_bytes=source.task_bytes)
    # an encoded directory's small tasks in groups, and small files read whole likewise (one
    # word-type cache and one set of spills per group: a directory of 600 files of 16 KB
    # counted 2.2x slower one by one); a part of a larger file alone, so an error names it
    if source.encoded:
        tasks = group_tasks(source.tasks, ENCODED_TASK_BYTES)
    else:
        from ..encoded.write import COMPRESSED_RATIO

        tasks = group_small_files(source.tasks, SMALL_FILES_BYTES, COMPRESSED_RATIO)
    share = task_share(config, executor, len(tasks))
    fingerprint = source.fingerprint
    identity = count_state.run_identity(
        config, info, fingerprint, task_options, format_version=COUNTS_FORMAT_VERSION
    )
    with count_state.open_state(output, identity, resume=resume, overwrite=overwrite) as state:
        if state.finished:  # --resume on counts finished with these options: nothing to do
            return count_state.finished_summary(output, tasks=len(tasks), started=started)
        done = (
            count_state.finished_results(state, [t.index for t in tasks]) if state.resumed else {}
        )
        state.clean(count_state.attempts_of(done))
        todo = [t for t in tasks if t.index not in done]
        # absolute paths: a Dask worker's cwd is not the driver's
        root = os.path.abspath(state.root)
        args = [(t, info.json, config, root, corpus_options, share, state.digest) for t in todo]
        for result in map_tasks(count_state.count_recorded, args, executor=executor, label="count",
                                describe=lambda i: todo[i].describe(),
                                weights=[t.weight / 1e6 for t in todo], unit="MB", shared=output):
            done[result.task_index] = result
        summary = finish_counts([done[t.index] for t in tasks], info=info, output=output,
                                spill=state.attempt("merge").resolve(), config=config, files=files,
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
        raise MaskprepError(
            f"--memory {config.memory}: too small to make progress with {slots} workers; the "
            f"minimum is {MIN_TASK_MEMORY * slots >> 20} MiB ({MIN_TASK_MEMORY >> 20} MiB per "
            "worker); raise --memory or lower --workers"
        )
    return share


def write_task(
    path: str, n: int, parts: list[PartitionResult], vocab_path: str, band_rows: int
) -> str:
    """Task function: write ngrams-<n>.parquet from the merged key ranges of one n; returns its
    sha256 (for counts.json; the files are hashed in parallel, not one by one by the driver)."""
    vocab = Vocabulary()
    vocab.add_file(vocab_path)
    vocab.finish()
    try:
        write_ngrams(Path(path), n, parts, vocab, band_rows)
        digest = file_sha256(path)
    except OSError as exc:
        raise disk_error(exc, Path(path).parent, f"writing {Path(path).name}") from None
    for p in parts:
        os.unlink(p.path)
    return digest


def _for_rows(executor: Executor, rows: int) -> Executor:
    """The executor for a phase of `rows` rows.

    Small phases run in this process (same results), unless the counting tasks
    already started the pool.
    """
    if (
        executor.dask
        or executor.workers == 1
        or rows >= POOL_ROWS
        or pool_running(executor.workers)
    ):
        return executor
    return dataclasses.replace(executor, workers=1)


def finish_counts(
    results: list[TaskCounts],
    *,
    info: TokenizerInfo,
    output: Path,
    spill: Path,
    config: CountConfig,
    files: list[Path],
    corpus_options: CorpusOptions,
    executor: Executor,
    started: float,
    fingerprint: str | None = None,
) -> CountSummary:
    """Merge the spilled runs of all tasks, write COUNTS_DIR and rename it into place.

    >>> finish_counts(results, info=info, output=Path("counts"), spill=spill,  # doctest: +SKIP
    ...               config=config, files=files, corpus_options=CorpusOptions(),
    ...               executor=Executor(), started=0.0)
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
        raise MaskprepError(
            f"{name_files(files)}: no words to count (every document is empty, "
            "whitespace or punctuation)"
        )
    share = task_share(config, executor, 2 * max_n)
    jobs: list[MergeJob] = []
    for n in range(1, max_n + 1):
        runs = [run for r in results for run in r.runs if run.n == n]
        group_rows = int(np.clip(share // (16 * (n + 1) + 64), 4096, 1 << 18))
        jobs += plan_merges(
            runs, n, 2 * max(1, executor.workers), config.min_count, group_rows, spill
        )
    run_rows = sum(run.rows for r in results for run in r.runs)
    parts: list[PartitionResult] = list(
        map_tasks(
            merge_partition,
            [(j,) for j in jobs],
            executor=_for_rows(executor, run_rows),
            label="merge",
            describe=lambda i: f"merge of {jobs[i].n}-grams, part {i}",
        )
    )
    by_n = {n: [p for p in parts if p.n == n] for n in range(1, max_n + 1)}
    for n in range(1, max_n + 1):
        if sum(p.total for p in by_n[n]) != totals[n - 1]:
            raise RuntimeError(
                f"internal error: merged {n}-gram occurrences do not add up to the counted total"
            )
    distinct = [sum(p.distinct for p in by_n[n]) for n in range(1, max_n + 1)]
    kept = [sum(p.kept for p in by_n[n]) for n in range(1, max_n + 1)]
    # biggest first: better load balance
    order = sorted(range(1, max_n + 1), key=lambda n: -kept[n - 1])
    digests = dict(zip(order, map_tasks(
        write_task, [(str(spill / f"ngrams-{n}.parquet"), n, by_n[n], vocab_path,
                      max(1024, share // (24 * (n + 1) + 96))) for n in order],
        executor=_for_rows(executor, 2 * sum(kept)), label="write",
        describe=lambda i: f"ngrams-{order[i]}.parquet")))
    documents = sum(r.documents for r in results)
    literal: dict[str, int] = {}
    for r in results:
        for s, k in r.literal_specials.items():
            literal[s] = literal.get(s, 0) + k
    warn_literal_specials(info, literal, name_files(files))
    meta = {
        "format_version": COUNTS_FORMAT_VERSION,
        "N": totals[0],
        "max_n": max_n,
        "min_count": config.min_count,
        "totals": {str(n): totals[n - 1] for n in range(1, max_n + 1)},
        "distinct": {str(n): distinct[n - 1] for n in range(1, max_n + 1)},
        "kept": {str(n): kept[n - 1] for n in range(1, max_n + 1)},
        "documents": documents,
        "literal_special_tokens": dict(sorted(literal.items())),
        "tokenizer_hash": info.hash,
        "tokenizer_name": info.name,
        "words": config.words.describe(),
        "corpus_fingerprint": fingerprint or corpus_fingerprint(files, corpus_options),
        "corpus_files": [str(f) for f in files],
        "options": {
            "max_n": max_n,
            "min_count": config.min_count,
            "doc_sep": corpus_options.doc_sep,
            "text_field": corpus_options.text_field,
            "text_column": corpus_options.text_column,
            "strict": corpus_options.strict,
        },
        "maskprep_version": __version__,
        # checked by the stages that read the files (a flipped byte must not pass as counts)
        "sha256": {f"ngrams-{n}.parquet": digests[n] for n in range(1, max_n + 1)},
    }
    try:
        fsynced_write_text(spill / "tokenizer.json", info.json)
        fsynced_write_text(spill / "counts.json", json.dumps(meta, indent=2, sort_keys=True) + "\n")
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
    lines = [
        f"counted N = {plural(summary.N, 'word position')} in "
        f"{plural(summary.documents, 'document')} "
        f"({plural(summary.tasks, 'task')}, {plural(summary.spill_runs, 'sorted run')} spilled, "
        f"{summary.seconds:.1f}s)",
        f"{'n':>3}  {'occurrences':>14}  {'distinct':>12}  "
        f"{'kept (count >= ' + str(summary.min_count) + ')':>20}",
    ]
    for n in range(1, summary.max_n + 1):
        lines.append(
            f"{n:>3}  {summary.totals[n]:>14,}  {summary.distinct[n]:>12,}  {summary.kept[n]:>20,}"
        )
    names = ", ".join(f"ngrams-{n}.parquet" for n in range(1, summary.max_n + 1))
    lines.append(f"wrote {summary.output}/ ({names}, counts.json, tokenizer.json)")
    return "\n".join(lines)

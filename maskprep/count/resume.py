"""Resume state of `maskprep count`: finished chunk tasks recorded durably, so `--resume` skips
them.

Layout, inside COUNTS_DIR while a count is unfinished::

    .maskprep-count/
        run.json                  what identifies the run (options, tokenizer, corpus)
        task-000012.json          done-record of corpus task 12 (written last, then renamed)
        t000012-<attempt>/        the sorted runs and word list of one attempt at task 12
        merge-<attempt>/          one attempt at the merge and write phase (vocabulary,
                                  merged key ranges, staged Parquet files)

`count_recorded` is the task function: it counts one corpus task into a
fresh attempt directory (`count.task.count_task`), flushes the files to disk,
and writes a done-record listing every file with its size and checksum (the word
list's sha256; each sorted run's CRC-32, computed as it was written) under a
temporary name, renamed into place. On `--resume`, a task whose record matches
this run and whose files all still have their recorded size and checksum is not
counted again; every other file in the state directory
(half-written runs, an interrupted merge, temporary files) is removed first.
The merge and write phase is not checkpointed: it starts again from the
recorded runs, in a new attempt directory, so it restarts safely wherever it
stopped, and its output depends only on the runs' contents. Attempt
directories have unique names so a task still running on a Dask worker for
a killed driver can never write into the files of its replacement.

When the counts are renamed into place (counts.json last) the state
directory is removed. Runs are kept until then (not deleted as soon as they
are merged), so any interruption can be resumed; that costs disk space of
the runs and the merged ranges at once.

The lock, run.json, the comparison on ``--resume`` and the done-records are
the shared mechanism of `maskprep._resume` (``COUNT_STAGE``); this module
adds what only count has: the task function, the records' run files, and the
identity of a finished counts.json. A ``.maskprep-count/lock`` file is held
while a count runs.

This module does not count (see `maskprep.count.driver`) or write COUNTS_DIR files
(see `maskprep.count.files`).
"""

from __future__ import annotations

import base64
import shutil
import uuid
from pathlib import Path
from typing import Any, Mapping

import numpy as np

from .._files import file_sha256, read_json
from .._resume import RunDir, Stage, claim, write_record
from .._version import __version__
from ..errors import MaskprepError
from .spills import HEADER_BYTES, SpillFile
from .task import count_task
from .types import CountSummary, TaskCounts

__all__ = [
    "STATE_DIR",
    "COUNT_STAGE",
    "run_identity",
    "open_state",
    "finished_results",
    "count_recorded",
    "finished_summary",
    "file_sha256",
]

STATE_DIR = ".maskprep-count"
STATE_VERSION = 3  # 3: small raw files counted in groups; 2: spill offsets as base64 int64
COUNT_STAGE_RECORD = "task-{:06d}.json"
# how the options of a run are named in messages
_LABELS = {"max_n": "--max-n", "min_count": "--min-count", "tokenizer_hash": "tokenizer (-t)",
           "corpus_fingerprint": "corpus (file names, sizes and contents)", "doc_sep": "--doc-sep",
           "text_field": "--text-field", "text_column": "--text-column", "task_bytes": "task size",
           "format_version": "counts format version", "maskprep_version": "maskprep version",
           "state_version": "resume state version",
           "words": "--words (word definition)"}


def run_identity(
    config: Any, info: Any, fingerprint: str, task_options: Any, *, format_version: int
) -> dict[str, Any]:
    """What must not change between the attempts of one count (not --memory, --workers or --strict).

    >>> run_identity(CountConfig(), info, corpus_fingerprint(files),  # doctest: +SKIP
    ...     CorpusOptions(), format_version=1)["max_n"]
    5
    """
    return {
        "state_version": STATE_VERSION,
        "format_version": format_version,
        "maskprep_version": __version__,
        "max_n": config.max_n,
        "min_count": config.min_count,
        "tokenizer_hash": info.hash,
        "corpus_fingerprint": fingerprint,
        "doc_sep": task_options.doc_sep,
        "text_field": task_options.text_field,
        "text_column": task_options.text_column,
        "task_bytes": task_options.chunk_bytes,
        "words": config.words.describe(),
    }


def _drop_old_spills(output: Path) -> None:
    for old in output.glob(".spill-*"):  # left by counts of earlier versions
        shutil.rmtree(old, ignore_errors=True)


def _finished_identity(output: Path) -> dict[str, Any] | None:
    counts = output / "counts.json"
    return _identity_of_counts(read_json(counts, what="counts.json")) if counts.is_file() else None


COUNT_STAGE = Stage(noun="count", state=STATE_DIR, marker="counts.json", labels=_LABELS,
                    changed=("corpus_fingerprint", "tokenizer_hash"), digits=6,
                    finished_identity=_finished_identity, on_overwrite=_drop_old_spills)


def open_state(
    output: Path, identity: Mapping[str, Any], *, resume: bool, overwrite: bool
) -> RunDir:
    """Lock COUNTS_DIR and check it against `--resume` / `--overwrite` (``run.finished``: nothing to
    do).

    >>> with open_state(Path("counts"), identity, resume=False,  # doctest: +SKIP
    ...     overwrite=False) as run: ...
    """
    return claim(output, COUNT_STAGE, identity, resume=resume, overwrite=overwrite)


def finished_results(run: RunDir, task_indices: list[int]) -> dict[int, Any]:
    """TaskCounts of the tasks whose done-record and files are intact (others are counted again)."""
    records = run.done(
        task_indices, files=lambda rec: [rec["words_file"], *rec["runs"]], base=run.root
    )
    done = {}
    for i, rec in records.items():
        result = _result_of(run.root, rec)
        if result is not None and rec.get("state_version") == STATE_VERSION:
            done[i] = result
    return done


def attempts_of(results: Mapping[int, Any]) -> set[str]:
    """Names in the state folder that the kept tasks' results need (records and attempt folders)."""
    names = set()
    for i, result in results.items():
        names.add(COUNT_STAGE_RECORD.format(i))
        names.add(Path(result.words_path).parent.name)
    return names


_FINISHED_KEYS = (
    "max_n",
    "min_count",
    "tokenizer_hash",
    "corpus_fingerprint",
    "doc_sep",
    "text_field",
    "text_column",
)


def _identity_of_counts(meta: Any) -> dict[str, Any]:
    """The comparable part of a finished counts.json."""
    if not isinstance(meta, dict):
        return {}
    options = meta.get("options", {}) if isinstance(meta.get("options"), dict) else {}
    return {
        "max_n": meta.get("max_n"),
        "min_count": meta.get("min_count"),
        "tokenizer_hash": meta.get("tokenizer_hash"),
        "corpus_fingerprint": meta.get("corpus_fingerprint"),
        "doc_sep": options.get("doc_sep"),
        "text_field": options.get("text_field"),
        "text_column": options.get("text_column"),
    }


def finished_summary(output: Path, *, tasks: int, started: float) -> Any:
    """The `CountSummary` of counts already finished in `output`, read back from its counts.json.

    >>> finished_summary(Path("counts"), tasks=3, started=time.monotonic()).N  # doctest: +SKIP
    860226
    """
    import time

    meta = read_json(output / "counts.json", what="counts.json")
    try:
        max_n = int(meta["max_n"])
        per_n = {key: {n: int(meta[key][str(n)]) for n in range(1, max_n + 1)}
                 for key in ("totals", "distinct", "kept")}
        return CountSummary(
            output=output,
            N=int(meta["N"]),
            max_n=max_n,
            min_count=int(meta["min_count"]),
            totals=per_n["totals"],
            distinct=per_n["distinct"],
            kept=per_n["kept"],
            documents=int(meta["documents"]),
            spill_runs=0,
            tasks=tasks,
            seconds=time.monotonic() - started,
            files=list(meta.get("corpus_files", [])),
        )
    except (KeyError, TypeError, ValueError) as exc:
        raise MaskprepError(
            f"{output / 'counts.json'}: incomplete counts file ({exc}); use --overwrite to "
            "count again"
        ) from None


# ---------------------------------------------------------------- the task function and its record

def count_recorded(
    task: Any,
    tokenizer_json: str,
    config: Any,
    state_dir: str,
    corpus_options: Any,
    share: int,
    digest: str,
) -> Any:
    """Task function: `count.task.count_task` into a fresh attempt directory, then its done-record.

    >>> count_recorded(task, info.json, CountConfig(), "counts/.maskprep-count",  # doctest: +SKIP
    ...     CorpusOptions(), 1 << 28, digest)
    """
    root = Path(state_dir)
    attempt = root / f"t{task.index:06d}-{uuid.uuid4().hex[:12]}"
    attempt.mkdir()
    try:
        result = count_task(task, tokenizer_json, config, str(attempt), corpus_options, share)
    except BaseException:
        shutil.rmtree(attempt, ignore_errors=True)  # a failed attempt leaves nothing behind
        raise
    record = {"state_version": STATE_VERSION, "run": digest, "task": result.task_index,
              "totals": list(result.totals), "words": result.words, "flushes": result.flushes,
              "documents": result.documents, "words_file": _entry(root, result.words_path),
              "literal_specials": dict(sorted(result.literal_specials.items())),
              "runs": [{**_run_entry(root, r), "n": r.n, "rows": r.rows,
                        "offsets": _pack(r.offsets)} for r in result.runs]}
    write_record(root / COUNT_STAGE_RECORD.format(task.index), record)
    return result


def _entry(base: Path, path: str | Path) -> dict[str, Any]:
    """A spill file for a done-record: name, bytes and sha256 (not fsynced).

    A spill lost or torn by a crash is caught on resume by its size and sha256
    (`maskprep._resume.entry_intact`) and its task is counted again, so flushing
    every spill to disk (about a third of the time of a small count) buys nothing;
    the record itself is written durably.
    """
    p = Path(path)
    return {"file": str(p.relative_to(base)), "bytes": p.stat().st_size, "sha256": file_sha256(p)}


def _run_entry(base: Path, run: SpillFile) -> dict[str, Any]:
    """A sorted run for a done-record: its CRC-32 was computed as it was written (reading the
    run back for a sha256 cost about a tenth of the counting time)."""
    if run.crc32 is None:
        return _entry(base, run.path)
    p = Path(run.path)
    return {"file": str(p.relative_to(base)), "bytes": p.stat().st_size, "crc32": run.crc32,
            "crc32_head": HEADER_BYTES}


def _pack(offsets: Any) -> str:
    """Fine-bucket offsets for a record: little-endian int64, base64 (4097 numbers per run)."""
    return base64.b64encode(np.asarray(offsets, "<i8").tobytes()).decode("ascii")


def _unpack(text: str) -> np.ndarray:
    return np.frombuffer(base64.b64decode(text.encode("ascii"), validate=True), "<i8").astype(
        np.int64)


def _result_of(root: Path, rec: Mapping[str, Any]) -> Any:
    """The TaskCounts of a done-record (files already checked), else None."""
    try:
        runs = [
            SpillFile(
                str(root / r["file"]),
                int(r["n"]),
                int(r["rows"]),
                _unpack(r["offsets"]),
            )
            for r in rec["runs"]
        ]
        return TaskCounts(
            task_index=int(rec["task"]),
            runs=runs,
            totals=[int(x) for x in rec["totals"]],
            words_path=str(root / rec["words_file"]["file"]),
            words=int(rec["words"]),
            flushes=int(rec["flushes"]),
            documents=int(rec["documents"]),
            literal_specials={str(k): int(v) for k, v in rec.get("literal_specials", {}).items()},
        )
    except (KeyError, TypeError, ValueError, AttributeError):
        return None

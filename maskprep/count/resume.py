"""Resume state of `maskprep count`: finished chunk tasks recorded durably, so `--resume` skips them.

Layout, inside COUNTS_DIR while a count is unfinished::

    .maskprep-count/
        run.json                  what identifies the run (options, tokenizer, corpus)
        task-000012.json          done-record of corpus task 12 (written last, then renamed)
        t000012-<attempt>/        the sorted runs and word list of one attempt at task 12
        merge-<attempt>/          one attempt at the merge and write phase (vocabulary,
                                  merged key ranges, staged Parquet files)

`count_recorded` is the task function: it counts one corpus task into a
fresh attempt directory (`ngrams.count_task`), flushes the files to disk,
and writes a done-record listing every file with its size and sha256 under
a temporary name, renamed into place. On `--resume`, a task whose record
matches this run and whose files all still have their recorded size and
sha256 is not counted again; every other file in the state directory
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

This module does not count (see `maskprep.count.driver`) or write COUNTS_DIR files
(see `maskprep.count.files`).
"""

from __future__ import annotations

import hashlib
import json
import os
import shutil
import uuid
from pathlib import Path
from typing import Any, Mapping

import numpy as np

from .._version import __version__
from ..errors import MaskprepError
from .._files import atomic_write_text, file_sha256, read_json
from .spills import RunInfo
from .task import count_task
from .types import CountSummary, TaskCounts

__all__ = ["STATE_DIR", "CountState", "run_identity", "open_state", "count_recorded", "finished_summary", "file_sha256"]

STATE_DIR = ".maskprep-count"
STATE_VERSION = 1
# how the options of a run are named in messages
_LABELS = {"max_n": "--max-n", "min_count": "--min-count", "tokenizer_hash": "tokenizer (-t)",
           "corpus_fingerprint": "corpus (file names, sizes and contents)", "doc_sep": "--doc-sep",
           "text_field": "--text-field", "text_column": "--text-column", "task_bytes": "task size",
           "format_version": "counts format version", "maskprep_version": "maskprep version",
           "state_version": "resume state version"}


def _digest(identity: Mapping[str, Any]) -> str:
    return hashlib.sha256(json.dumps(dict(identity), sort_keys=True).encode()).hexdigest()


def _differences(old: Mapping[str, Any], new: Mapping[str, Any]) -> list[str]:
    out = []
    for key in sorted(set(old) | set(new)):
        if old.get(key) != new.get(key):
            label = _LABELS.get(key, key)
            if key in ("corpus_fingerprint", "tokenizer_hash"):
                out.append(f"{label} changed")
            else:
                out.append(f"{label}: {json.dumps(old.get(key))} before, {json.dumps(new.get(key))} now")
    return out


def _refuse(output: Path, diffs: list[str]) -> MaskprepError:
    return MaskprepError(f"--resume: the count in {output} was made with other options or inputs ("
                         + "; ".join(diffs) + "); rerun with the same ones, or use --overwrite to count again")


def run_identity(config: Any, info: Any, fingerprint: str, task_options: Any, *, format_version: int) -> dict[str, Any]:
    """What must not change between the attempts of one count (not --memory, --workers or --strict).

    >>> run_identity(CountConfig(), info, corpus_fingerprint(files), CorpusOptions(), format_version=1)["max_n"]  # doctest: +SKIP
    5
    """
    return {"state_version": STATE_VERSION, "format_version": format_version, "maskprep_version": __version__,
            "max_n": config.max_n, "min_count": config.min_count, "tokenizer_hash": info.hash,
            "corpus_fingerprint": fingerprint, "doc_sep": task_options.doc_sep,
            "text_field": task_options.text_field, "text_column": task_options.text_column,
            "task_bytes": task_options.chunk_bytes}


class CountState:
    """The state directory of one unfinished count: ``state = open_state(out, identity, resume=True)``."""

    def __init__(self, output: Path, identity: Mapping[str, Any]) -> None:
        self.output = output
        self.root = output / STATE_DIR
        self.identity = dict(identity)
        self.digest = _digest(identity)

    def record_path(self, task: int) -> Path:
        return self.root / f"task-{task:06d}.json"

    def finished(self, task_indices: list[int]) -> dict[int, Any]:
        """ChunkResults of the tasks whose done-record and files are intact (others are counted again)."""
        done = {}
        for i in task_indices:
            result = _read_record(self.root, self.record_path(i), self.digest)
            if result is not None and result.task_index == i:
                done[i] = result
        return done

    def clean(self, keep: dict[int, Any]) -> None:
        """Remove everything but run.json and the kept tasks' records and attempt directories."""
        wanted = {"run.json"}
        for i, result in keep.items():
            wanted.add(self.record_path(i).name)
            wanted.add(Path(result.words_path).parent.name)
        for p in self.root.iterdir():
            if p.name in wanted:
                continue
            if p.is_dir():
                shutil.rmtree(p, ignore_errors=True)
            else:
                p.unlink(missing_ok=True)

    def merge_dir(self) -> Path:
        """A new, empty directory for one attempt at the merge and write phase."""
        path = self.root / f"merge-{uuid.uuid4().hex[:12]}"
        path.mkdir()
        return path

    def remove(self) -> None:
        """Drop the state once the counts are in place."""
        shutil.rmtree(self.root, ignore_errors=True)


def open_state(output: Path, identity: Mapping[str, Any], *, resume: bool, overwrite: bool) -> CountState | None:
    """Check COUNTS_DIR against `--resume` / `--overwrite` and return its state (None: already finished).

    >>> state = open_state(Path("counts"), {"max_n": 5}, resume=False, overwrite=False)  # doctest: +SKIP
    """
    if resume and overwrite:
        raise MaskprepError("--overwrite and --resume exclude each other: pick one")
    if output.exists() and not output.is_dir():
        raise MaskprepError(f"-o {output}: is a file; give a directory for the counts")
    state = CountState(output, identity)
    entries = sorted(p.name for p in output.iterdir()) if output.is_dir() else []
    run_file = state.root / "run.json"
    if STATE_DIR in entries and not overwrite:
        if not resume:
            raise MaskprepError(f"-o {output}: holds an unfinished count; pass --resume to finish it, or "
                                "--overwrite to count again")
        old = read_json(run_file, what="resume state") if run_file.is_file() else None
        if not isinstance(old, dict):
            raise MaskprepError(f"--resume: {run_file} is missing or damaged; use --overwrite to count again")
        diffs = _differences(old, identity)
        if diffs:
            raise _refuse(output, diffs)
        return state
    if entries and resume and not overwrite:
        counts = output / "counts.json"
        if not counts.is_file():
            raise MaskprepError(f"--resume: {output} holds no unfinished maskprep count (no {STATE_DIR}/run.json); "
                                "use --overwrite to replace its contents")
        diffs = _differences(_identity_of_counts(read_json(counts, what="counts.json")),
                             {k: identity.get(k) for k in _FINISHED_KEYS})
        if diffs:
            raise _refuse(output, diffs)
        return None  # finished already, with these options
    if entries and not overwrite:
        raise MaskprepError(f"-o {output}: directory exists and is not empty; pass --overwrite to replace the "
                            "counts in it, --resume to finish an interrupted count, or choose another directory")
    if overwrite:
        shutil.rmtree(state.root, ignore_errors=True)
        for old in output.glob(".spill-*"):
            shutil.rmtree(old, ignore_errors=True)
    state.root.mkdir(parents=True, exist_ok=True)
    atomic_write_text(run_file, json.dumps(dict(identity), indent=2, sort_keys=True) + "\n")
    return state


_FINISHED_KEYS = ("max_n", "min_count", "tokenizer_hash", "corpus_fingerprint", "doc_sep", "text_field",
                  "text_column")


def _identity_of_counts(meta: Any) -> dict[str, Any]:
    """The comparable part of a finished counts.json."""
    if not isinstance(meta, dict):
        return {}
    options = meta.get("options", {}) if isinstance(meta.get("options"), dict) else {}
    return {"max_n": meta.get("max_n"), "min_count": meta.get("min_count"),
            "tokenizer_hash": meta.get("tokenizer_hash"), "corpus_fingerprint": meta.get("corpus_fingerprint"),
            "doc_sep": options.get("doc_sep"), "text_field": options.get("text_field"),
            "text_column": options.get("text_column")}


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
        return CountSummary(output=output, N=int(meta["N"]), max_n=max_n, min_count=int(meta["min_count"]),
                            totals=per_n["totals"], distinct=per_n["distinct"], kept=per_n["kept"],
                            documents=int(meta["documents"]), spill_runs=0, tasks=tasks,
                            seconds=time.monotonic() - started, files=list(meta.get("corpus_files", [])))
    except (KeyError, TypeError, ValueError) as exc:
        raise MaskprepError(f"{output / 'counts.json'}: incomplete counts file ({exc}); use --overwrite to "
                            "count again") from None


# ---------------------------------------------------------------- the task function and its record

def _fsync(path: Path) -> None:
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def _entry(root: Path, path: str | Path) -> dict[str, Any]:
    p = Path(path)
    _fsync(p)
    return {"file": str(p.relative_to(root)), "bytes": p.stat().st_size, "sha256": file_sha256(p)}


def count_recorded(task: Any, tokenizer_json: str, config: Any, state_dir: str, corpus_options: Any, share: int,
                   digest: str) -> Any:
    """Task function: `ngrams.count_task` into a fresh attempt directory, then its done-record.

    >>> count_recorded(task, info.json, CountConfig(), "counts/.maskprep-count", CorpusOptions(), 1 << 28, digest)  # doctest: +SKIP
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
              "runs": [{**_entry(root, r.path), "n": r.n, "rows": r.rows,
                        "offsets": np.asarray(r.offsets, np.int64).tolist()} for r in result.runs]}
    atomic_write_text(root / f"task-{task.index:06d}.json", json.dumps(record, sort_keys=True) + "\n")
    return result


def _intact(root: Path, entry: Mapping[str, Any]) -> bool:
    p = root / str(entry.get("file", ""))
    try:
        return p.is_file() and p.stat().st_size == entry["bytes"] and file_sha256(p) == entry["sha256"]
    except (OSError, KeyError):
        return False


def _read_record(root: Path, path: Path, digest: str) -> Any:
    """The TaskCounts of a done-record whose files are all intact, else None."""
    try:
        rec = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    if not isinstance(rec, dict) or rec.get("run") != digest or rec.get("state_version") != STATE_VERSION:
        return None
    try:
        entries = [rec["words_file"], *rec["runs"]]
        if not all(_intact(root, e) for e in entries):
            return None
        runs = [RunInfo(str(root / r["file"]), int(r["n"]), int(r["rows"]), np.asarray(r["offsets"], np.int64))
                for r in rec["runs"]]
        return TaskCounts(task_index=int(rec["task"]), runs=runs, totals=[int(x) for x in rec["totals"]],
                           words_path=str(root / rec["words_file"]["file"]), words=int(rec["words"]),
                           flushes=int(rec["flushes"]), documents=int(rec["documents"]))
    except (KeyError, TypeError, ValueError):
        return None

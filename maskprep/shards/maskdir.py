"""The output directory of `maskprep mask`: its resume stage, the files it owns, its done-records.

`MASK_STAGE` tells `maskprep._resume` how to claim, resume and overwrite a shards
directory: the options that make a run (with the labels used in messages),
where the finished marker is, and which files ``--overwrite`` removes (only
those mask writes; anything else in the directory is left alone).
"""

from __future__ import annotations

from pathlib import Path
from typing import Any, Mapping

from .._resume import RunDir, Stage, claim
from .layout import FORMATS as _FORMATS, META_DIR, METADATA_FILES, STATE_DIR

__all__ = ["MASK_STAGE", "MASK_STAGE_RECORD", "done_path", "prepare_dir"]

_OPTION_LABELS = {
    "strategy": "--strategy",
    "rate": "--rate",
    "mix": "--mix",
    "mix_per": "--mix-per",
    "span_p": "--span-p",
    "span_max": "--span-max",
    "seq_len": "--seq-len",
    "pack": "pack (--no-pack)",
    "copies": "--copies",
    "seed": "--seed",
    "format": "--format",
    "shard_rows": "--shard-rows",
    "dynamic": "--dynamic",
    "units_sha256": "units (--units)",
    "tokenizer_hash": "tokenizer (-t)",
    "corpus_fingerprint": "corpus (file names, sizes and contents)",
    "doc_sep": "--doc-sep",
    "text_field": "--text-field",
    "text_column": "--text-column",
    "chunk_bytes": "task size",
    "maskprep_version": "maskprep version",
    "units_tokenizer_hash": "the units' tokenizer",
}
_FINISHED_NAMES = METADATA_FILES  # in META_DIR; at the top of format version 1 directories


def _owned(name: str) -> bool:
    """Files of OUT that mask writes (replaced by --overwrite); other files are left alone."""
    return (
        name in _FINISHED_NAMES
        or (name.startswith("shard-") and name.endswith(tuple(_FORMATS.values())))
        or (name.startswith(".shard-") and name.endswith(".tmp"))
        or any(name.startswith(f".{n}.") for n in _FINISHED_NAMES)
    )


def _remove_owned(out: Path) -> None:
    for p in out.iterdir():
        if _owned(p.name) and not p.is_dir():
            p.unlink()
    if (out / META_DIR).is_dir():
        for p in (out / META_DIR).iterdir():
            if _owned(p.name) and not p.is_dir():
                p.unlink()
        if not any((out / META_DIR).iterdir()):
            (out / META_DIR).rmdir()


MASK_STAGE = Stage(
    noun="mask run",
    state=STATE_DIR,
    marker=f"{META_DIR}/manifest.json",
    labels=_OPTION_LABELS,
    changed=("units_sha256", "tokenizer_hash", "corpus_fingerprint", "units_tokenizer_hash"),
    digits=5,
    on_overwrite=_remove_owned,
)
MASK_STAGE_RECORD = "task-{:05d}.json"


def prepare_dir(out: Path, *, overwrite: bool, resume: bool, options: Mapping[str, Any]) -> RunDir:
    """Lock OUT and check it (see `maskprep._resume.claim`).

    On resume, drop the temporary files of the last run.
    """
    run = claim(out, MASK_STAGE, options, resume=resume, overwrite=overwrite)
    if run.resumed:
        for tmp in [*out.glob(".*.tmp"), *(out / META_DIR).glob(".*.tmp")]:  # left by the last run
            tmp.unlink(missing_ok=True)
        run.clean(p.name for p in run.root.glob("task-*.json"))
    return run


def done_path(out: Path, task: int) -> Path:
    """Where the done-record of task `task` of a shards directory lives."""
    return out / STATE_DIR / MASK_STAGE_RECORD.format(task)

"""Inputs and outputs kept apart; maskprep's own outputs recognised.

`check_apart` refuses an output path that is, contains, or lies inside one of
a command's inputs, after resolving symbolic links: an output written inside a
corpus directory would be read back as corpus by the next run, and an output
on an input would destroy it. `maskprep_output` tells whether a directory or
table file was written by maskprep (a state folder, a manifest or summary
with maskprep's format marks, a table with maskprep's schema metadata), so
corpus discovery can skip it. `refuse_existing_file` keeps a command from
replacing a file unless ``--overwrite`` says so.

This module reads no corpus and writes nothing.
"""

from __future__ import annotations

import json
import os
from collections.abc import Iterable
from pathlib import Path

from .errors import MaskprepError

__all__ = ["check_apart", "maskprep_output", "refuse_existing_file", "MARKER_FILES"]

# JSON files maskprep writes at the top of an output directory (each says "maskprep" inside)
MARKER_FILES = (
    "manifest.json",
    "counts.json",
    "pipeline.json",
    "audit.json",
    "compare.json",
    "encoded.json",
)


def _real(path: str | Path) -> Path:
    return Path(os.path.realpath(os.path.abspath(path)))


def _within(inner: Path, outer: Path) -> bool:
    return inner == outer or outer in inner.parents


def check_apart(output: str | Path, inputs: Iterable[str | Path | None], *, option: str = "-o",
                others: Iterable[str | Path | None] = ()) -> None:
    """Refuse an output that is, contains or lies inside a corpus input or another input
    (a tokenizer, units, counts), symbolic links resolved.

    >>> check_apart("corpus/counts", ["corpus"])  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    maskprep.errors.MaskprepError: -o corpus/counts: lies inside the corpus (corpus); write ...
    """
    out = _real(output)
    for item, kind in [*((i, "corpus") for i in inputs), *((i, "input") for i in others)]:
        if item is None:
            continue
        real = _real(item)
        name = f"the corpus ({item})" if kind == "corpus" else f"the input {item}"
        if real == out:
            why = f"is {name}"
        elif _within(out, real):
            why = f"lies inside {name}"
        elif _within(real, out):
            why = f"would hold {name}: it would write inside the corpus" if kind == "corpus" \
                else f"contains {name}"
        else:
            continue
        raise MaskprepError(
            f"{option} {output}: {why}; write the output outside the inputs (it would be "
            "read back, or overwrite them)"
        )


def _says_maskprep(path: Path) -> bool:
    try:
        if path.stat().st_size > 64 << 20:
            return False
        doc = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return False
    if not isinstance(doc, dict):
        return False
    fmt = doc.get("format")
    return "maskprep_version" in doc or (isinstance(fmt, str) and fmt.startswith("maskprep"))


def maskprep_output(path: str | Path) -> bool:
    """Was this directory (or Parquet/Arrow file) written by maskprep?

    >>> maskprep_output("sample_corpus")
    False
    """
    p = Path(path)
    if p.is_dir():
        try:
            names = {q.name for q in p.iterdir()}
        except OSError:
            return False
        if any(
            n.startswith((".maskprep", "_maskprep")) for n in names
        ):  # state or metadata folders
            return True
        return any(_says_maskprep(p / n) for n in MARKER_FILES if n in names)
    if p.suffix in (".parquet", ".arrow"):
        return _table_metadata_says_maskprep(p)
    return False


def _table_metadata_says_maskprep(path: Path) -> bool:
    try:
        import pyarrow as pa
        import pyarrow.parquet as pq

        if path.suffix == ".parquet":
            meta = pq.read_schema(str(path)).metadata or {}
        else:
            try:
                meta = pa.ipc.open_file(str(path)).schema.metadata or {}
            except pa.ArrowInvalid:
                meta = pa.ipc.open_stream(str(path)).schema.metadata or {}
    except Exception:  # unreadable: the reader reports it properly later
        return False
    return b"maskprep" in meta


def refuse_existing_file(path: str | Path, *beside: str | Path, overwrite: bool, option: str = "-o",
                         own_ok: bool = False) -> None:
    """Refuse to replace an existing file (or the files written beside it) without --overwrite.

    With `own_ok`, a table maskprep wrote there before is replaced. A directory in the way is
    refused.
    """
    overwrite = overwrite or (own_ok and maskprep_output(path))
    for p in (Path(path), *map(Path, beside)):
        if p.is_dir():
            raise MaskprepError(f"{option} {path}: {p} is a directory; give a file name")
        if p.exists() and not overwrite:
            raise MaskprepError(
                f"{option} {path}: {p.name} exists; pass --overwrite to replace it, or "
                "choose another name"
            )

"""Read a counts directory for unit selection: counts.json checked, the tokenizer, the n-grams.

Every check names the file at fault and says to re-run ``maskprep count``:
counts.json must hold the fields unit selection needs, in the counts format
this version reads; the tokenizer copy must have the recorded hash; every
n-gram file must still have its recorded sha256. It scores nothing (see
``maskprep.units.select``).
"""

from __future__ import annotations

from pathlib import Path
from typing import Any, Mapping

import numpy as np

from .._arrow import numpy_of
from .._checks import is_whole
from ..count.types import COUNTS_FORMAT_VERSION
from ..errors import MaskprepError
from .._files import file_sha256, read_json

__all__ = [
    "counts_meta",
    "counts_tokenizer",
    "check_sha256",
    "read_ngrams",
    "COUNTS_FORMAT_VERSION",
]

_COUNTS_FIELDS = (
    "format_version",
    "N",
    "max_n",
    "min_count",
    "tokenizer_hash",
    "corpus_fingerprint",
)


def counts_meta(counts_dir: Path) -> dict[str, Any]:
    if not counts_dir.exists():
        raise MaskprepError(f"COUNTS_DIR {counts_dir}: not found; make it first with "
                            f"maskprep count CORPUS... -t TOKENIZER.json -o {counts_dir}")
    if not counts_dir.is_dir():
        raise MaskprepError(
            f"COUNTS_DIR {counts_dir}: is a file, not a counts directory written by maskprep count"
        )
    path = counts_dir / "counts.json"
    if not path.is_file():
        raise MaskprepError(
            f"COUNTS_DIR {counts_dir}: has no counts.json, so it is not a finished counts "
            "directory; re-run maskprep count"
        )
    meta = read_json(path, what="counts file")
    if not isinstance(meta, dict):
        raise MaskprepError(
            f"{path}: not a counts file (expected a JSON object); re-run maskprep count"
        )
    for name in _COUNTS_FIELDS:
        if name not in meta:
            raise MaskprepError(
                f"{path}: field {name!r} is missing; the file is incomplete or from another "
                "program; re-run maskprep count"
            )
    if meta["format_version"] != COUNTS_FORMAT_VERSION:
        raise MaskprepError(
            f"{path}: counts format_version {meta['format_version']!r}, but this maskprep "
            f"reads version {COUNTS_FORMAT_VERSION}; re-run maskprep count with this version"
        )
    for name in ("N", "max_n", "min_count"):
        if not is_whole(meta[name], 1):
            raise MaskprepError(
                f"{path}: field {name!r} must be a whole number >= 1, got {meta[name]!r}; "
                "re-run maskprep count"
            )
    if not isinstance(meta["tokenizer_hash"], str):
        raise MaskprepError(
            f"{path}: field 'tokenizer_hash' must be a string; re-run maskprep count"
        )
    return meta


def counts_tokenizer(counts_dir: Path, expected_hash: str) -> Any:
    from ..tokenizer.encoding import load_tokenizer

    path = counts_dir / "tokenizer.json"
    if not path.is_file():
        raise MaskprepError(
            f"COUNTS_DIR {counts_dir}: has no tokenizer.json (the copy of the tokenizer "
            "used for counting); re-run maskprep count"
        )
    info = load_tokenizer(path)  # one definition of the tokenizer hash for every stage
    if info.hash != expected_hash:
        raise MaskprepError(
            f"{path}: this tokenizer does not match the tokenizer_hash in counts.json, so the "
            "counts come from another tokenizer; re-run maskprep count"
        )
    return info.tokenizer


def check_sha256(counts_dir: Path, meta: Mapping[str, Any]) -> None:
    """Every n-gram file must still have the sha256 counts.json recorded (counts of older versions
    recorded none)."""
    recorded = meta.get("sha256")
    if not isinstance(recorded, dict):
        return
    for name, digest in sorted(recorded.items()):
        path = counts_dir / str(name)
        if path.is_file() and file_sha256(path) != digest:
            raise MaskprepError(
                f"{path}: changed or damaged since it was counted (its sha256 differs from "
                "counts.json); re-run maskprep count"
            )


def read_ngrams(
    counts_dir: Path, n: int, *, with_text: bool
) -> tuple[np.ndarray, np.ndarray, Any]:
    import pyarrow as pa
    import pyarrow.parquet as pq

    path = counts_dir / f"ngrams-{n}.parquet"
    if not path.is_file():
        raise MaskprepError(
            f"{path}: missing; the counts directory is incomplete; re-run maskprep count"
        )
    wanted = ["count"] + [f"w{j}" for j in range(n)] + (["text"] if with_text else [])
    try:
        file = pq.ParquetFile(path)  # read_table would import pandas (about 0.3 s)
        names = file.schema_arrow.names
        missing = [c for c in wanted if c not in names]
        if missing:
            raise MaskprepError(
                f"{path}: missing column(s) {', '.join(missing)}; re-run maskprep count"
            )
        table = file.read(columns=wanted, use_threads=False)  # half the CPU of threads
    except (pa.ArrowException, OSError) as exc:
        raise MaskprepError(
            f"{path}: not a readable Parquet file ({exc}); re-run maskprep count"
        ) from None
    for j in range(n):
        if table.schema.field(f"w{j}").type != pa.uint64():
            raise MaskprepError(
                f"{path}: column w{j} must be uint64 word keys; re-run maskprep count"
            )
    if not pa.types.is_integer(table.schema.field("count").type):
        raise MaskprepError(f"{path}: column count must be integers; re-run maskprep count")
    keys = np.empty((table.num_rows, n), dtype=np.uint64)
    for j in range(n):
        keys[:, j] = numpy_of(table.column(f"w{j}"))
    counts = numpy_of(table.column("count"), np.int64)
    text = table.column("text").cast(pa.large_string()) if with_text else None
    return keys, counts, text

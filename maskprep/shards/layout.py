"""Where things live in a shards directory, and the manifest that lists the shards.

Layout of SHARDS_DIR (format version 2)::

    shard-TTTTT-CC-PPPP.arrow | .parquet   the rows (see `maskprep.shards.write`)
    _maskprep/manifest.json                per shard: rows, tokens, targets, sha256; the run
    _maskprep/stats.json                   masking figures counted from the rows written
    _maskprep/tokenizer.json               a copy of the tokenizer the ids belong to
    .maskprep/                             resume state: run options, one record per task

Directory readers skip names that start with ``_`` or ``.`` (pyarrow.dataset's
default ``ignore_prefixes``), so ``pyarrow.dataset.dataset(SHARDS_DIR,
format="ipc")`` (or ``format="parquet"``) sees the shard files and nothing else.

Format version 1 (maskprep before the loader) kept manifest.json, stats.json
and tokenizer.json at the top of the directory and had no ``copy`` column.
Such directories are still read, loaded, verified and shown (`metadata_path`
falls back to the top level); directory readers open them once the three files
are moved into ``_maskprep/`` (``legacy_layout`` tells; nothing else changes).

This module does not write shards or rows.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass
from pathlib import Path
from typing import Any, Mapping

from .._files import read_json
from ..errors import MaskprepError

__all__ = [
    "SHARDS_FORMAT_VERSION",
    "READS_VERSIONS",
    "METADATA_KEY",
    "META_DIR",
    "STATE_DIR",
    "ShardRecord",
    "ShardManifest",
    "metadata_path",
    "new_metadata_path",
    "shard_name",
    "FORMATS",
]

SHARDS_FORMAT_VERSION = 2
READS_VERSIONS = (1, 2)
METADATA_KEY = b"maskprep"
META_DIR = "_maskprep"
STATE_DIR = ".maskprep"
FORMATS = {"arrow": ".arrow", "parquet": ".parquet"}
METADATA_FILES = ("manifest.json", "stats.json", "tokenizer.json")


def new_metadata_path(directory: str | Path, name: str) -> Path:
    """Where the current layout keeps a metadata file: ``new_metadata_path("s", "stats.json")``.

    >>> new_metadata_path("shards", "stats.json").as_posix()
    'shards/_maskprep/stats.json'
    """
    return Path(directory) / META_DIR / name


def metadata_path(directory: str | Path, name: str) -> Path:
    """The metadata file `name` of a shards directory, in ``_maskprep/`` or (version 1) at the top.

    Returns the ``_maskprep/`` path when neither exists, so messages name the current layout.
    """
    new = new_metadata_path(directory, name)
    old = Path(directory) / name
    if not new.is_file() and old.is_file():
        return old
    return new


def shard_name(task: int, copy: int, part: int, fmt: str) -> str:
    """File name of a shard: ``shard_name(3, 0, 1, "arrow")`` -> 'shard-00003-00-0001.arrow'."""
    return f"shard-{task:05d}-{copy:02d}-{part:04d}{FORMATS[fmt]}"


@dataclass(frozen=True)
class ShardRecord:
    """One shard file as listed in the manifest."""

    file: str
    task: int
    copy: int
    part: int
    rows: int
    tokens: int
    maskable: int
    targets: int
    bytes: int
    sha256: str


@dataclass(frozen=True)
class ShardManifest:
    """The contents of manifest.json: ``ShardManifest.read("shards/").totals["rows"]``."""

    options: Mapping[str, Any]
    tokenizer: Mapping[str, Any]
    corpus: Mapping[str, Any]
    totals: Mapping[str, Any]
    shards: tuple[ShardRecord, ...]
    maskprep_version: str = ""
    format_version: int = SHARDS_FORMAT_VERSION

    def to_json(self) -> dict[str, Any]:
        return {
            "format": "maskprep-shards",
            "format_version": self.format_version,
            "maskprep_version": self.maskprep_version,
            "options": dict(self.options),
            "tokenizer": dict(self.tokenizer),
            "corpus": dict(self.corpus),
            "totals": dict(self.totals),
            "shards": [asdict(s) for s in self.shards],
        }

    @property
    def has_copy_column(self) -> bool:
        """Whether the shard files carry a ``copy`` column (format version 2 on)."""
        return self.format_version >= 2

    @staticmethod
    def legacy_layout(directory: str | Path) -> bool:
        """Whether the metadata sits at the top of the directory (version 1 layout)."""
        return metadata_path(directory, "manifest.json").parent == Path(directory)

    @classmethod
    def read(cls, directory: str | Path) -> "ShardManifest":
        if not Path(directory).exists():
            raise MaskprepError(
                f"{directory}: no such directory (give the SHARDS_DIR written by maskprep mask)"
            )
        if not Path(directory).is_dir():
            raise MaskprepError(f"{directory}: is a file, not a shards directory "
                                "(give the SHARDS_DIR written by maskprep mask)")
        path = metadata_path(directory, "manifest.json")
        if not path.is_file():
            raise MaskprepError(
                f"{directory}: no {META_DIR}/manifest.json; not a finished shards "
                "directory (write one with maskprep mask, or finish it with "
                "maskprep mask ... --resume)"
            )
        doc = read_json(path, what="shard manifest")
        if not isinstance(doc, dict) or doc.get("format") != "maskprep-shards":
            raise MaskprepError(f"{path}: not a maskprep shard manifest")
        version = doc.get("format_version")
        if version not in READS_VERSIONS:
            raise MaskprepError(
                f"{path}: format_version {version!r}; this maskprep reads versions "
                f"{', '.join(map(str, READS_VERSIONS))}"
            )
        try:
            shards = tuple(ShardRecord(**s) for s in doc["shards"])
            return cls(
                options=doc["options"],
                tokenizer=doc["tokenizer"],
                corpus=doc["corpus"],
                totals=doc["totals"],
                shards=shards,
                maskprep_version=doc.get("maskprep_version", ""),
                format_version=version,
            )
        except (KeyError, TypeError) as exc:
            raise MaskprepError(f"{path}: incomplete manifest ({exc})") from None

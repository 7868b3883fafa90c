"""Find the corpus files of a command's CORPUS arguments: files, directories (searched
recursively) and glob patterns.

Hidden entries are left out; so are maskprep's own outputs found inside a corpus directory
(a folder holding a state or metadata folder or a maskprep manifest, a table with maskprep's
schema metadata) and broken symbolic links, each with a note on stderr. A symbolic link loop
given by name is reported as one.

This module does not read the files (see `maskprep.corpus.reader`).
"""

from __future__ import annotations

import errno
import glob
import os
import sys
from pathlib import Path

from ..errors import MaskprepError

_SUFFIX_FORMAT = {".txt": "txt", ".text": "txt", ".jsonl": "jsonl", ".ndjson": "jsonl",
                  ".parquet": "parquet", ".arrow": "arrow", ".feather": "arrow"}
_COMPRESSION = {".gz": "gzip", ".zst": "zstd"}

__all__ = ["detect_format", "resolve_inputs"]


def detect_format(path: str | Path) -> tuple[str, str | None] | None:
    """Return (format, compression) from a file name, or None if not a corpus file.

    >>> detect_format("news.jsonl.zst")
    ('jsonl', 'zstd')
    """
    name = Path(path).name.lower()
    suffixes = Path(name).suffixes
    compression = None
    if suffixes and suffixes[-1] in _COMPRESSION:
        compression = _COMPRESSION[suffixes[-1]]
        suffixes = suffixes[:-1]
    if not suffixes or suffixes[-1] not in _SUFFIX_FORMAT:
        return None
    return _SUFFIX_FORMAT[suffixes[-1]], compression


def resolve_inputs(inputs: list[str] | tuple[str, ...]) -> list[Path]:
    """Expand files, directories and globs into a sorted list of corpus files.

    >>> resolve_inputs(["sample_corpus"])  # doctest: +SKIP
    [PosixPath('sample_corpus/bulletins.jsonl.gz'), PosixPath('sample_corpus/logbooks.txt.gz')]
    """
    if not inputs:
        raise MaskprepError("no corpus given: pass one or more files, directories or glob patterns")
    files: list[Path] = []
    for item in inputs:
        p = Path(item)
        if p.is_symlink() and not p.exists():
            _broken_link(item, p)
        if p.is_dir():
            found = _discover(p)
            if not found:
                raise MaskprepError(
                    f"{item}: directory holds no readable corpus files "
                    "(expected .txt, .jsonl, .parquet or .arrow, optionally .gz or .zst)")
            files.extend(found)
        elif p.is_file():
            if detect_format(p) is None:
                raise MaskprepError(
                    f"{item}: unknown corpus format; name it .txt, .jsonl, .parquet or .arrow "
                    "(optionally with .gz or .zst)")
            files.append(p)
        elif any(ch in item for ch in "*?["):
            matched = sorted(Path(m) for m in glob.glob(item, recursive=True)
                             if Path(m).is_file() and detect_format(m))
            if not matched:
                raise MaskprepError(f"{item}: pattern matches no corpus files")
            files.extend(matched)
        else:
            raise MaskprepError(f"{item}: file not found")
    seen: set[Path] = set()
    unique = []
    for f in files:
        r = f.resolve()
        if r not in seen:
            seen.add(r)
            unique.append(f)
    return unique


def _broken_link(item: str, p: Path) -> None:
    try:
        p.stat()
    except OSError as exc:
        if exc.errno == errno.ELOOP:
            raise MaskprepError(
                f"{item}: symbolic link loop (the link leads back to itself)"
            ) from None
    raise MaskprepError(f"{item}: symbolic link to {os.readlink(p)}, which does not exist")


def _note(text: str) -> None:
    sys.stderr.write(f"note: {text}\n")


def _discover(root: Path) -> list[Path]:
    """Corpus files under a directory, in sorted order: hidden entries, maskprep's own outputs
    (noted on stderr) and broken symbolic links (noted) are left out."""
    from .._paths import maskprep_output

    skipped_dirs: list[Path] = []
    found = []
    for q in sorted(root.rglob("*")):
        rel = q.relative_to(root)
        if any(part.startswith(".") for part in rel.parts):
            continue
        if any(d in q.parents for d in skipped_dirs):
            continue
        if q.is_dir() and not q.is_symlink():
            if maskprep_output(q):
                skipped_dirs.append(q)
                _note(f"{q}: skipped, a maskprep output directory (not read as corpus)")
            continue
        if q.is_symlink() and not q.exists():
            if detect_format(q):
                _note(f"{q}: skipped, a broken symbolic link")
            continue
        if not q.is_file() or not detect_format(q):
            continue
        if q.suffix in (".parquet", ".arrow") and maskprep_output(q):
            _note(f"{q}: skipped, a table written by maskprep (not read as corpus)")
            continue
        found.append(q)
    return found

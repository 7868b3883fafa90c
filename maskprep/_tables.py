"""Plain-text tables for the terminal: a header, a rule of dashes, aligned columns.

One function for every command that prints a table (audit, compare, run); it formats
strings it is given and computes nothing.
"""

from __future__ import annotations

from collections.abc import Container, Sequence

__all__ = ["format_table"]


def format_table(rows: Sequence[Sequence[str]], *, left: Container[int] = (0,)) -> str:
    """The first row is the header; columns in `left` are left-aligned, the others right-aligned.

    >>> print(format_table([("name", "n"), ("the", "12"), ("a", "3")]))
    name   n
    ----  --
    the   12
    a      3
    """
    widths = [max(len(r[i]) for r in rows) for i in range(len(rows[0]))]
    lines = []
    for j, r in enumerate(rows):
        lines.append("  ".join(c.ljust(w) if i in left else c.rjust(w)
                               for i, (c, w) in enumerate(zip(r, widths))))
        if j == 0:
            lines.append("  ".join("-" * w for w in widths))
    return "\n".join(lines)

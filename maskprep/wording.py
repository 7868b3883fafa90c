"""Counts in words for messages: ``plural(1, "task")`` is "1 task", ``plural(3, "task")`` "3 tasks".

One helper so every line the user reads says "1 shard" and "2 shards", never
"1 shards". Numbers get thousands separators; irregular plurals are given.
"""

from __future__ import annotations

__all__ = ["plural", "name_files"]


def plural(n: int | float, noun: str, many: str | None = None) -> str:
    """``n`` and the noun, singular for exactly one.

    >>> plural(1, "arrow shard"), plural(2, "arrow shard"), plural(1_234, "row")
    ('1 arrow shard', '2 arrow shards', '1,234 rows')
    >>> plural(1, "copy", "copies"), plural(0, "copy", "copies")
    ('1 copy', '0 copies')
    """
    word = noun if n == 1 else (many if many is not None else noun + "s")
    number = f"{n:,}" if isinstance(n, int) or float(n).is_integer() else f"{n:,.2f}"
    if not isinstance(n, int) and float(n).is_integer():
        number = f"{int(n):,}"
    return f"{number} {word}"


def name_files(paths: object, shown: int = 3) -> str:
    """Files for a message: all of them when few, else the first `shown` and how many more.

    >>> name_files(["a.txt", "b.txt"])
    'a.txt, b.txt'
    >>> name_files([f"part-{i}.txt" for i in range(500)])
    'part-0.txt, part-1.txt, part-2.txt and 497 more files'
    """
    names = [str(p) for p in paths]  # type: ignore[attr-defined]
    if len(names) <= shown + 1:
        return ", ".join(names)
    return f"{', '.join(names[:shown])} and {plural(len(names) - shown, 'more file')}"

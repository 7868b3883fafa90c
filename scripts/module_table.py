"""Print the module table of DEVELOPERS.md from the package itself, in data-flow order.

Each row is a module and the first sentence of its docstring, so the table says what
the code says. ``python scripts/module_table.py`` prints it, ``--write`` puts it in
DEVELOPERS.md; the test suite checks that DEVELOPERS.md lists every module this prints.
"""

from __future__ import annotations

import ast
from pathlib import Path

PACKAGE = Path(__file__).resolve().parent.parent / "maskprep"
# The stages in the order data moves through them; shared helpers first, the CLI last.
ORDER = [
    "_version",
    "errors",
    "wording",
    "progress",
    "_files",
    "_paths",
    "_checks",
    "_tables",
    "_resume",
    "_interrupt",
    "_budget",
    "_arrow",
    "_pool",
    "execute",
    "corpus",
    "tokenizer",
    "encoded",
    "audit",
    "count",
    "units",
    "masking",
    "packing",
    "shards",
    "stats",
    "compare",
    "report",
    "pipeline",
    "_cli_options",
    "_cli_start",
    "cli",
    "__main__",
]
GUIDE = PACKAGE.parent / "DEVELOPERS.md"


def _summary(path: Path) -> str:
    doc = ast.get_docstring(ast.parse(path.read_text(encoding="utf-8"))) or ""
    first = " ".join(doc.split("\n\n")[0].split())
    return first.split(". ")[0].rstrip(".")


def modules() -> list[tuple[str, str]]:
    """(module path relative to maskprep/, summary) in data-flow order."""
    def rank(p: Path) -> tuple[int, int, str]:
        rel = p.relative_to(PACKAGE)
        top = rel.parts[0].removesuffix(".py")
        stage = ORDER.index(top) if top in ORDER else len(ORDER)
        return stage, 0 if rel.name == "__init__.py" else 1, str(rel)

    paths = sorted(
        (p for p in PACKAGE.rglob("*.py") if p.name != "__init__.py" or p.parent != PACKAGE),
        key=rank,
    )
    return [(str(p.relative_to(PACKAGE)), _summary(p)) for p in paths]


def table() -> str:
    rows = ["| module | what it does |", "|---|---|"]
    rows += [f"| `{m}` | {s.replace('|', '/')} |" for m, s in modules()]
    return "\n".join(rows)


def write_guide() -> bool:
    """Replace the module table in DEVELOPERS.md; True if it changed."""
    lines = GUIDE.read_text(encoding="utf-8").split("\n")
    start = lines.index("| module | what it does |")
    end = start
    while end < len(lines) and lines[end].startswith("|"):
        end += 1
    new = lines[:start] + table().split("\n") + lines[end:]
    if new == lines:
        return False
    GUIDE.write_text("\n".join(new), encoding="utf-8")
    return True


if __name__ == "__main__":
    import sys

    if sys.argv[1:] == ["--write"]:
        print("DEVELOPERS.md updated" if write_guide() else "DEVELOPERS.md already up to date")
    else:
        print(table())

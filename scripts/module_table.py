"""Print the module table of DEVELOPERS.md from the package itself, in data-flow order.

Each row is a module and the first sentence of its docstring, so the table says what
the code says. ``python scripts/module_table.py`` prints it; the test suite checks that
DEVELOPERS.md lists every module this prints.
"""

from __future__ import annotations

import ast
from pathlib import Path

PACKAGE = Path(__file__).resolve().parent.parent / "maskprep"
# The stages in the order data moves through them; shared helpers first, the CLI last.
ORDER = ["_version", "errors", "progress", "_files", "_checks", "_tables", "_resume", "execute",
         "corpus", "tokenizer", "audit", "count", "units", "masking", "packing", "shards", "stats",
         "compare", "report", "pipeline", "cli", "__main__"]


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

    paths = sorted((p for p in PACKAGE.rglob("*.py") if p.name != "__init__.py" or p.parent != PACKAGE),
                   key=rank)
    return [(str(p.relative_to(PACKAGE)), _summary(p)) for p in paths]


def table() -> str:
    rows = ["| module | what it does |", "|---|---|"]
    rows += [f"| `{m}` | {s.replace('|', '/')} |" for m, s in modules()]
    return "\n".join(rows)


if __name__ == "__main__":
    print(table())

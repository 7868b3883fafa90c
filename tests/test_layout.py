"""The package's shape: stages as subpackages, no import cycles, short modules and lines."""

from __future__ import annotations

import ast
from pathlib import Path

import maskprep

PACKAGE = Path(maskprep.__file__).resolve().parent
MAX_LINES = 500  # a module longer than this is split by concept
MAX_WIDTH = 100  # characters per line, as pyproject's ruff line-length


def _module_name(path: Path) -> str:
    rel = path.relative_to(PACKAGE.parent).with_suffix("")
    parts = list(rel.parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def _imports() -> dict[str, set[str]]:
    """Every import (module level and inside functions) between the package's own modules."""
    modules = {_module_name(p): p for p in PACKAGE.rglob("*.py")}
    graph: dict[str, set[str]] = {m: set() for m in modules}
    for name, path in modules.items():
        is_pkg = path.name == "__init__.py"
        base = name.split(".") if is_pkg else name.split(".")[:-1]
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            targets: list[str] = []
            if isinstance(node, ast.ImportFrom):
                if node.level:
                    anchor = base[: len(base) - (node.level - 1)]
                    mod = ".".join(anchor + ([node.module] if node.module else []))
                else:
                    mod = node.module or ""
                targets.append(mod)
                targets += [f"{mod}.{a.name}" for a in node.names]  # `from . import charts`
            elif isinstance(node, ast.Import):
                targets += [a.name for a in node.names]
            for t in targets:
                if t in modules and t != name:
                    graph[name].add(t)
    return graph


def _cycle(graph: dict[str, set[str]]) -> list[str] | None:
    """One import cycle between modules (not counting a package's own __init__ re-exports)."""
    state: dict[str, int] = {}
    stack: list[str] = []

    def visit(m: str) -> list[str] | None:
        state[m] = 1
        stack.append(m)
        for t in sorted(graph[m]):
            # a package's __init__ re-exports its own modules: importing one of them
            # from inside the package is not a cycle through the __init__
            if m.startswith(t + "."):
                continue
            if state.get(t) == 1:
                return stack[stack.index(t):] + [t]
            if t not in state and (found := visit(t)):
                return found
        stack.pop()
        state[m] = 2
        return None

    for m in sorted(graph):
        if m not in state and (found := visit(m)):
            return found
    return None


def test_no_import_cycles() -> None:
    cycle = _cycle(_imports())
    assert cycle is None, "import cycle: " + " -> ".join(cycle or [])


def test_cycle_finder_finds_a_cycle() -> None:
    assert _cycle({"a": {"b"}, "b": {"c"}, "c": {"a"}}) == ["a", "b", "c", "a"]
    assert _cycle({"a": {"b"}, "b": set()}) is None


def test_stages_are_subpackages_in_data_flow_order() -> None:
    stages = [
        "corpus",
        "tokenizer",
        "encoded",
        "audit",
        "count",
        "units",
        "masking",
        "stats",
        "shards",
        "compare",
        "report",
        "pipeline",
    ]
    for stage in stages:
        assert (PACKAGE / stage / "__init__.py").is_file(), stage
        doc = ast.get_docstring(ast.parse((PACKAGE / stage / "__init__.py").read_text()))
        assert doc, f"{stage}/__init__.py has no docstring saying what the stage does"


def test_every_module_has_a_docstring_and_stays_short() -> None:
    for path in sorted(PACKAGE.rglob("*.py")):
        text = path.read_text(encoding="utf-8")
        assert ast.get_docstring(ast.parse(text)), (
            f"{path.relative_to(PACKAGE)}: no module docstring"
        )
        lines = text.count("\n")
        where = path.relative_to(PACKAGE)
        assert lines <= MAX_LINES, f"{where}: {lines} lines (split it by concept)"


def test_no_line_of_the_package_is_over_100_characters() -> None:
    # Characters, not bytes or display width: a line of CJK text counts each character once.
    long = [
        f"{path.relative_to(PACKAGE)}:{number} ({len(line)})"
        for path in sorted(PACKAGE.rglob("*.py"))
        for number, line in enumerate(path.read_text(encoding="utf-8").splitlines(), 1)
        if len(line) > MAX_WIDTH
    ]
    assert not long, f"lines over {MAX_WIDTH} characters: " + ", ".join(long)


LAZY_PACKAGES = ("maskprep", "maskprep.shards", "maskprep.compare")


def _typing_imports(package: str) -> dict[str, str]:
    """{name: module} of the imports a lazy package makes under ``if TYPE_CHECKING:``."""
    path = PACKAGE.parent.joinpath(*package.split("."), "__init__.py")
    found: dict[str, str] = {}
    for node in ast.parse(path.read_text(encoding="utf-8")).body:
        if isinstance(node, ast.If) and ast.unparse(node.test) == "TYPE_CHECKING":
            for imp in node.body:
                assert isinstance(imp, ast.ImportFrom) and imp.level == 1, ast.unparse(imp)
                for alias in imp.names:
                    found[alias.asname or alias.name] = f"{package}.{imp.module}"
    return found


def test_public_api_is_explicit() -> None:
    """Every public name is imported by name for type checkers, and the lazy attribute is that
    very object (no name comes from anywhere else)."""
    import importlib

    for package in LAZY_PACKAGES:
        mod = importlib.import_module(package)
        typed = _typing_imports(package)
        eager = {"__version__", "MaskprepError"} if package == "maskprep" else set()
        assert set(mod.__all__) == set(typed) | eager, package
        for name in mod.__all__:
            assert name in dir(mod), name
            if name in typed:
                home = importlib.import_module(typed[name])
                assert getattr(mod, name) is getattr(home, name), f"{package}.{name}"


def test_importing_the_package_loads_no_stage() -> None:
    """`import maskprep` (the command line's and every pool worker's first step) stays cheap:
    the stages are imported when a name of theirs is first used."""
    import subprocess
    import sys

    code = ("import sys, maskprep, maskprep.shards, maskprep.compare; "
            "print(' '.join(sorted(m for m in sys.modules if m.startswith('maskprep'))))")
    loaded = set(subprocess.run([sys.executable, "-c", code], check=True, capture_output=True,
                                text=True).stdout.split())
    assert loaded == {"maskprep", "maskprep._cli_start", "maskprep._lazy", "maskprep._version",
                      "maskprep.errors", "maskprep.shards", "maskprep.compare"}
    assert maskprep.MaskingConfig().rate == 0.15  # and a name still arrives on first use


def test_developers_guide_lists_every_module() -> None:
    guide = (PACKAGE.parent / "DEVELOPERS.md").read_text(encoding="utf-8")
    for path in sorted(PACKAGE.rglob("*.py")):
        rel = path.relative_to(PACKAGE).as_posix()
        if rel != "__init__.py":
            assert f"| `{rel}` |" in guide, f"DEVELOPERS.md's module table lacks {rel}: " \
                                           "run python scripts/module_table.py"

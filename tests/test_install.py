"""A real, non-editable install: `maskprep demo` works from any directory.

What is tested: the package built from a copy of the source tree (the files
git tracks for the build: pyproject.toml, setup.py, README.md, LICENSE,
maskprep/ and sample_corpus/) and installed with ``pip install --no-deps
--target`` (no network, no build isolation) carries the sample corpus and its
TOML files as package data, byte for byte; that installed copy, not a
checkout, is what `sample_corpus_dir` finds; ``maskprep demo -o OUT`` run
through the installed console script from an unrelated working directory
succeeds, writes only under OUT and nothing into the installed package; and
with the sample corpus removed, the demo stops with one clear message.

What is not: the figures of the demo (tests/test_pipeline.py checks the run).
"""

from __future__ import annotations

import hashlib
import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parent.parent
SOURCES = ("pyproject.toml", "setup.py", "README.md", "LICENSE", "maskprep", "sample_corpus")


def _files(root: Path) -> dict[str, str]:
    """sha256 of every file under `root` by relative path, bytecode caches left out."""
    return {p.relative_to(root).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(root.rglob("*")) if p.is_file() and "__pycache__" not in p.parts}


@pytest.fixture(scope="module")
def installed(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The package installed into a fresh --target directory, from a copy of the sources.

    The copy keeps the build (build/, *.egg-info) out of the checkout.
    """
    root = tmp_path_factory.mktemp("install")
    src = root / "src"
    src.mkdir()
    for name in SOURCES:
        if (REPO / name).is_dir():
            shutil.copytree(REPO / name, src / name,
                            ignore=shutil.ignore_patterns("__pycache__", "*.pyc"))
        else:
            shutil.copy2(REPO / name, src / name)
    target = root / "target"
    run = subprocess.run(
        [
            sys.executable,
            "-m",
            "pip",
            "install",
            "--no-deps",
            "--no-build-isolation",
            "--no-index",
            "--no-input",
            "--disable-pip-version-check",
            "--quiet",
            "--target",
            str(target),
            str(src),
        ],
        capture_output=True,
        text=True,
        cwd=root,
    )
    assert run.returncode == 0, run.stdout + run.stderr
    return target


def _env(target: Path) -> dict[str, str]:
    """Only the installed copy on the path (no checkout on PYTHONPATH)."""
    return {**os.environ, "PYTHONPATH": str(target), "PYTHONDONTWRITEBYTECODE": "1"}


def test_sample_corpus_is_package_data(installed: Path) -> None:
    assert _files(installed / "maskprep" / "sample_corpus") == _files(REPO / "sample_corpus")


def test_installed_copy_is_the_one_found(installed: Path, tmp_path: Path) -> None:
    code = ("import maskprep, maskprep.pipeline as p; "
            "print(maskprep.__file__); print(p.sample_corpus_dir())")
    run = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         cwd=tmp_path, env=_env(installed), check=True)
    module, corpus = run.stdout.splitlines()
    assert Path(module) == installed / "maskprep" / "__init__.py"
    assert Path(corpus) == installed / "maskprep" / "sample_corpus"
    where = subprocess.run([str(installed / "bin" / "maskprep"), "demo", "--where"],
                           capture_output=True, text=True, cwd=tmp_path, env=_env(installed))
    assert where.returncode == 0, where.stderr
    assert where.stdout.strip() == corpus


@pytest.mark.slow
def test_demo_runs_from_another_directory(installed: Path, tmp_path: Path) -> None:
    """About 20-40 s on 2 cores: the whole demo pipeline."""
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    before = _files(installed)
    run = subprocess.run([str(installed / "bin" / "maskprep"), "--quiet", "demo", "-o", "OUT"],
                         capture_output=True, text=True, cwd=elsewhere, env=_env(installed))
    assert run.returncode == 0, run.stdout + run.stderr
    out = elsewhere / "OUT"
    assert (out / "compare" / "compare.html").is_file()
    assert (out / "mask" / "pmi" / "_maskprep" / "manifest.json").is_file()
    assert str(Path("OUT") / "compare" / "compare.html") in run.stdout
    assert sorted(p.name for p in elsewhere.iterdir()) == ["OUT"]
    assert _files(installed) == before, "the demo wrote into the installed package"


def test_missing_sample_corpus_is_one_clear_error(installed: Path, tmp_path: Path) -> None:
    """A copy of the install without its sample corpus (runs after the tests that use it)."""
    broken = tmp_path / "broken"
    shutil.copytree(installed, broken)
    shutil.rmtree(broken / "maskprep" / "sample_corpus")
    run = subprocess.run([str(broken / "bin" / "maskprep"), "demo", "-o", "OUT"],
                         capture_output=True, text=True, cwd=tmp_path, env=_env(broken))
    assert run.returncode == 1
    assert "sample corpus (with demo.toml) is not installed" in run.stderr
    assert str(broken / "maskprep" / "sample_corpus") in run.stderr
    assert "Traceback" not in run.stderr
    assert not (tmp_path / "OUT").exists()

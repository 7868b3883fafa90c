"""The command line as a whole: help texts, lazy imports, error style."""

from __future__ import annotations

import subprocess
import sys

import click
from click.testing import CliRunner

from maskprep.cli import cli


def _commands() -> dict[str, click.Command]:
    return dict(cli.commands)


def test_every_command_and_option_has_help() -> None:
    missing = []
    for name, cmd in _commands().items():
        if not (cmd.help or "").strip():
            missing.append(name)
        for p in cmd.params:
            if isinstance(p, click.Option) and not (p.help or "").strip() and p.name != "help":
                missing.append(f"{name} {p.opts[0]}")
    assert missing == []


def test_contract_commands_exist() -> None:
    # The command set fixed by the design contract.
    expected = {
        "train-tokenizer",
        "audit",
        "count",
        "units",
        "mask",
        "show",
        "verify",
        "compare",
        "run",
        "demo",
    }
    assert expected <= set(_commands())


def test_help_is_instant_no_heavy_imports() -> None:
    # The package imports its public names explicitly, so numpy (a light import that the
    # dataclasses' defaults use) loads with it; the heavy libraries stay lazy.
    code = ("import sys, maskprep.cli; "
            "print(sorted(m for m in ('pyarrow', 'tokenizers', 'dask') if m in sys.modules))")
    out = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, check=True
    ).stdout
    assert out.strip() == "[]"


def test_python_dash_m_runs() -> None:
    r = subprocess.run([sys.executable, "-m", "maskprep", "--help"], capture_output=True, text=True)
    assert r.returncode == 0 and "audit" in r.stdout


def test_unknown_option_is_a_usage_error() -> None:
    r = CliRunner().invoke(cli, ["audit", "--no-such-option"])
    assert r.exit_code == 2 and "No such option" in r.output


def test_workers_must_be_positive(tmp_path) -> None:
    corpus = tmp_path / "c.txt"
    corpus.write_text("a b c\n")
    r = CliRunner().invoke(
        cli, ["--workers", "0", "count", str(corpus), "-t", "x.json", "-o", str(tmp_path / "o")]
    )
    assert r.exit_code == 1
    assert "--workers: expected a positive whole number, got 0" in r.output


def test_public_api_names_resolve() -> None:
    import maskprep

    for name in maskprep.__all__:
        assert getattr(maskprep, name) is not None, name

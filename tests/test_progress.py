"""Progress reporting: lines on stderr during long work, nothing with --quiet, never on stdout."""

from __future__ import annotations

import re
import subprocess
import sys
from pathlib import Path

import pytest

from maskprep.progress import Progress


def _count(
    corpus: Path, tokenizer: Path, out: Path, *global_options: str
) -> subprocess.CompletedProcess[str]:
    # A real process, so stdout and stderr are the streams a shell pipe or a log file would get.
    cmd = [
        sys.executable,
        "-m",
        "maskprep",
        *global_options,
        "--workers",
        "1",
        "count",
        str(corpus),
        "-t",
        str(tokenizer),
        "-o",
        str(out),
        "--max-n",
        "2",
        "--min-count",
        "2",
    ]
    return subprocess.run(cmd, capture_output=True, text=True, timeout=300, check=False)


def test_count_reports_progress_on_stderr_and_quiet_silences_it(
        shakespeare_small: Path, small_wordpiece: Path, tmp_path: Path) -> None:
    loud = _count(shakespeare_small, small_wordpiece, tmp_path / "loud")
    assert loud.returncode == 0, loud.stderr
    stages = [line.split(":")[0] for line in loud.stderr.splitlines() if "%" in line]
    assert "count" in stages and "merge" in stages and "write" in stages, loud.stderr
    # the final line of each stage reaches 100%
    assert any(line.startswith("count:") and "100.0%" in line for line in loud.stderr.splitlines())
    # stdout carries the results only: the summary table, no progress lines
    assert "counted N =" in loud.stdout
    assert "%" not in loud.stdout.replace("(count >=", "")

    quiet = _count(shakespeare_small, small_wordpiece, tmp_path / "quiet", "--quiet")
    assert quiet.returncode == 0, quiet.stderr
    assert quiet.stderr == ""
    def same(text: str) -> str:  # the summary shows the elapsed seconds and the output path
        return re.sub(r"[0-9.]+s\)", "s)", text).replace(
            str(tmp_path / "loud"), str(tmp_path / "quiet")
        )

    assert same(quiet.stdout) == same(loud.stdout)

    # the global options also work after the command name, as people type them
    after = subprocess.run(
        [sys.executable, "-m", "maskprep", "count", str(shakespeare_small), "-t",
         str(small_wordpiece), "-o", str(tmp_path / "after"), "--max-n", "2", "--min-count", "2",
         "--quiet", "--workers", "2"],
        capture_output=True, text=True, timeout=300, check=False,
    )
    assert after.returncode == 0 and after.stderr == "", after.stderr
    assert same(after.stdout.replace(str(tmp_path / "after"), str(tmp_path / "loud"))) == same(
        loud.stdout
    )
    bad = subprocess.run(
        [sys.executable, "-m", "maskprep", "count", str(shakespeare_small), "-t",
         str(small_wordpiece), "-o", str(tmp_path / "bad"), "--workers", "0"],
        capture_output=True, text=True, timeout=300, check=False,
    )
    assert bad.returncode == 1 and "--workers" in bad.stderr and not (tmp_path / "bad").exists()


def test_progress_line_format_and_quiet(capsys: pytest.CaptureFixture[str]) -> None:
    with Progress("count", total=2_000_000, unit="bytes") as p:
        p.advance(500_000)
        p.advance(1_500_000)
    err = capsys.readouterr().err.splitlines()
    # not a terminal: intermediate lines are rate-limited, the final one is always written
    assert err[-1].startswith("count: 100.0% (2.00M/2.00M bytes)")
    with Progress("merge", quiet=True) as p:
        p.advance(3)
    assert capsys.readouterr() == ("", "")


def test_progress_without_total_counts_up(capsys: pytest.CaptureFixture[str]) -> None:
    with Progress("train wordpiece-8000", unit="documents") as p:
        p.advance(12_345)
    assert capsys.readouterr().err.startswith("train wordpiece-8000: 12.3k documents")


def test_progress_shows_fractional_totals_in_three_figures(
    capsys: pytest.CaptureFixture[str],
) -> None:
    # what audit prints for a corpus of 1.31123 MB: three significant figures, not six
    with Progress("audit tokenizer", total=1.31123, unit="MB") as p:
        p.advance(1.31123)
    assert capsys.readouterr().err.startswith("audit tokenizer: 100.0% (1.31/1.31 MB)")

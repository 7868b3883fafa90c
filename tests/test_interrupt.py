"""Ctrl-C: `count` and `mask` interrupted at many moments, worker start-up and the end included.

Each command runs as a subprocess (``python -m maskprep --workers 2``) in its own session, and
SIGINT goes to the whole process group, as a terminal's Ctrl-C does. Expected (the contract of
the safety issue, and common practice for command-line tools: 130 = 128 + SIGINT): the process
exits within 2 seconds with status 130 (or 0 when the run had already finished), prints no
traceback (no process does, workers included), leaves no worker process behind, and leaves
either a finished output or one with nothing that looks finished; `--resume` then finishes it
byte-identical to an uninterrupted run.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from conftest import deal_lines

psutil = pytest.importorskip("psutil")

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def plays(tmp_path_factory, shakespeare_corpus: Path) -> list[str]:
    lines = shakespeare_corpus.read_text(encoding="utf-8").splitlines()
    return deal_lines(lines, tmp_path_factory.mktemp("plays-int"), 4, "plays-{}.txt")


def command(*args: str) -> list[str]:
    return [sys.executable, "-m", "maskprep", "--quiet", "--workers", "2", *args]


def all_files(d: Path) -> dict[str, bytes]:
    return {str(p.relative_to(d)): p.read_bytes() for p in sorted(d.rglob("*")) if p.is_file()}


def interrupt_at(args: list[str], delay: float) -> tuple[int, float, str]:
    """Run, SIGINT the process group after `delay` s; (status, seconds to exit, stderr)."""
    proc = subprocess.Popen(
        command(*args),
        cwd=ROOT,
        stdout=subprocess.DEVNULL,
        stderr=subprocess.PIPE,
        start_new_session=True,
    )
    time.sleep(delay)
    try:
        family = [psutil.Process(proc.pid), *psutil.Process(proc.pid).children(recursive=True)]
    except psutil.NoSuchProcess:
        family = []
    sent = time.monotonic()
    try:
        os.killpg(proc.pid, signal.SIGINT)
    except ProcessLookupError:
        pass
    try:
        _, err = proc.communicate(timeout=30)
    finally:
        if proc.poll() is None:
            os.killpg(proc.pid, signal.SIGKILL)
            proc.wait()
    took = time.monotonic() - sent
    _, alive = psutil.wait_procs(family, timeout=2)
    alive = [p for p in alive if p.status() != psutil.STATUS_ZOMBIE]
    assert not alive, f"processes left after Ctrl-C at {delay} s: {[p.pid for p in alive]}"
    return proc.returncode, took, err.decode(errors="replace")


def check_interrupts(
    args: list[str], out: Path, ref: Path, delays: list[float], finished: str
) -> None:
    statuses = []
    for delay in delays:
        code, took, err = interrupt_at([*args, "-o", str(out), "--resume"], delay)
        statuses.append(code)
        assert code in (0, 130), f"Ctrl-C at {delay} s: status {code}: {err[-2000:]}"
        assert took < 2.0, f"Ctrl-C at {delay} s: exit took {took:.2f} s"
        assert "Traceback" not in err and "Exception ignored" not in err, (
            f"Ctrl-C at {delay} s:\n{err}"
        )
        if code == 130:
            assert "interrupted" in err
            if (out / finished).exists():  # interrupted after the last rename: it is finished
                assert all_files(out) == all_files(ref)
    assert 130 in statuses
    done = subprocess.run(
        command(*args, "-o", str(out), "--resume"),
        cwd=ROOT,
        capture_output=True,
        text=True,
        timeout=300,
    )
    assert done.returncode == 0, done.stderr
    assert all_files(out) == all_files(ref)


@pytest.mark.slow
def test_mask_interrupted_anywhere_exits_130_quickly_and_resumes(tmp_path, plays, small_wordpiece):
    args = ["mask", *plays, "-t", str(small_wordpiece), "--copies", "2", "--format", "parquet"]
    ref = tmp_path / "ref"
    started = time.monotonic()
    assert subprocess.run(command(*args, "-o", str(ref)), cwd=ROOT, capture_output=True,
                          timeout=300).returncode == 0
    whole = time.monotonic() - started
    # from interpreter start-up through pool start-up to past the end of the run
    delays = [0.05, 0.2, 0.4, 0.55, 0.7, 0.85, 1.0, 1.2] + [
        whole * f for f in (0.5, 0.75, 0.9, 0.97, 1.1)
    ]
    check_interrupts(args, tmp_path / "out", ref, delays, "manifest.json")


@pytest.mark.slow
def test_count_interrupted_anywhere_exits_130_quickly_and_resumes(tmp_path, plays, small_wordpiece):
    args = ["count", *plays, "-t", str(small_wordpiece), "--max-n", "4", "--min-count", "2",
            "--memory", "64MiB"]
    ref = tmp_path / "ref"
    started = time.monotonic()
    assert subprocess.run(command(*args, "-o", str(ref)), cwd=ROOT, capture_output=True,
                          timeout=300).returncode == 0
    whole = time.monotonic() - started
    delays = [0.1, 0.45, 0.6, 0.75, 0.9, 1.1] + [whole * f for f in (0.4, 0.6, 0.8, 0.9, 0.97, 1.1)]
    check_interrupts(args, tmp_path / "out", ref, delays, "counts.json")


def test_ctrl_c_during_the_command_lines_own_set_up_exits_130_without_traceback():
    # The window between the full handler's installation and the first command: a Ctrl-C that
    # lands in the allocator set-up (maskprep._malloc) must be caught like any other.
    code = (
        "import os, signal, sys\n"
        "import maskprep._malloc as m\n"
        "def hit():\n"
        "    os.kill(os.getpid(), signal.SIGINT)\n"
        "    import time; time.sleep(1)\n"
        "m.reuse_freed_memory = hit\n"
        "sys.argv = ['maskprep', '--help']\n"
        "from maskprep.cli import main\n"
        "main()\n"
    )
    proc = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True,
                          timeout=60)
    assert proc.returncode == 130, proc.stderr
    assert "Traceback" not in proc.stderr
    assert "interrupted" in proc.stderr
    assert proc.stdout == ""  # the command itself never ran


def test_workers_end_with_a_finished_command(tmp_path, plays, small_wordpiece):
    # The command line does not wait for its idle workers at the end: they must still end
    # with it (PR_SET_PDEATHSIG on Linux), never outlive it.
    proc = subprocess.Popen(
        command("count", *plays, "-t", str(small_wordpiece), "-o", str(tmp_path / "c")),
        cwd=ROOT, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE,
    )
    workers: list = []
    while proc.poll() is None and not workers:
        try:
            workers = psutil.Process(proc.pid).children(recursive=True)
        except psutil.NoSuchProcess:
            break
        time.sleep(0.01)
    _, err = proc.communicate(timeout=120)
    assert proc.returncode == 0, err.decode()
    assert workers, "the pool never started"
    _, alive = psutil.wait_procs(workers, timeout=2)
    alive = [p for p in alive if p.status() != psutil.STATUS_ZOMBIE]
    assert not alive, f"worker processes outlived the command: {[p.pid for p in alive]}"
    assert b"Traceback" not in err and b"Error" not in err, err.decode()


def test_a_command_done_before_its_worker_started_exits_cleanly(tmp_path, plays, small_wordpiece):
    # `--resume` of a finished count: the pool is started (more than one task), then the
    # command finds nothing to do and ends while the spawned worker is still starting. The
    # worker is killed, not left to start on its own (it would fail to find the pool's
    # semaphores and print a traceback into the command's stderr). Survivors are found by a
    # mark in their environment, since the worker may live too briefly to be seen as a child.
    import uuid

    args = ["count", *plays, "-t", str(small_wordpiece), "-o", str(tmp_path / "c"), "--resume"]
    assert subprocess.run(command(*args), cwd=ROOT, capture_output=True,
                          timeout=300).returncode == 0
    for _ in range(3):
        mark = uuid.uuid4().hex
        proc = subprocess.run(command(*args), cwd=ROOT, capture_output=True, timeout=60,
                              env={**os.environ, "MASKPREP_TEST_MARK": mark})
        assert proc.returncode == 0, proc.stderr.decode()
        time.sleep(0.3)  # a worker left to start would have failed by now
        assert b"Traceback" not in proc.stderr and b"Error" not in proc.stderr, (
            proc.stderr.decode())
        assert not _marked(mark), "a worker outlived its command"


def _marked(mark: str) -> list[int]:
    """Live processes whose environment holds MASKPREP_TEST_MARK=mark."""
    found = []
    for p in psutil.process_iter():
        try:
            if p.environ().get("MASKPREP_TEST_MARK") == mark and p.status() != psutil.STATUS_ZOMBIE:
                found.append(p.pid)
        except (psutil.Error, OSError):
            continue
    return found

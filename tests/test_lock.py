"""The lock on output directories and the shared resume mechanism (`maskprep._resume`).

Source for the expected behaviour: the command contract (one run per output
directory, a second run names the holder's PID, a killed run's lock never
blocks, --resume refuses other options naming them) and common practice for
``flock`` locks (released by the OS when the holder dies).
"""

from __future__ import annotations

import json
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
from click.testing import CliRunner, Result

from maskprep._resume import LOCK_NAME, DirLock, Stage, claim, lock_dir
from maskprep.cli import cli
from maskprep.errors import MaskprepError

ROOT = Path(__file__).resolve().parents[1]
STAGE = Stage(
    noun="test run", state=".state", marker="done.json", labels={"n": "--n"}, changed=("h",)
)

HOLDER = """
import sys, time
from pathlib import Path
from maskprep._resume import lock_dir
with lock_dir(Path(sys.argv[1]), sys.argv[2]):
    print("locked", flush=True)
    time.sleep(120)
"""


def hold(out: Path, state: str) -> subprocess.Popen:
    proc = subprocess.Popen(
        [sys.executable, "-c", HOLDER, str(out), state], cwd=ROOT, stdout=subprocess.PIPE, text=True
    )
    assert proc.stdout is not None and proc.stdout.readline().strip() == "locked"
    return proc


def cli_while_held(out: Path, state: str, args: list[str]) -> tuple[Result, int]:
    """``maskprep --quiet --workers 1 ARGS`` while another process holds `out`'s lock.

    Returns the command's result and the holder's PID (the holder is killed afterwards).
    """
    proc = hold(out, state)
    try:
        r = CliRunner().invoke(cli, ["--quiet", "--workers", "1", *args])
    finally:
        proc.send_signal(signal.SIGKILL)
        proc.wait()
    return r, proc.pid


def stage_args(command: str, corpus: Path, tokenizer: Path, out: Path, *extra: str) -> list[str]:
    """``COMMAND CORPUS -t TOKENIZER -o OUT EXTRA...``."""
    return [command, str(corpus), "-t", str(tokenizer), "-o", str(out), *extra]


def test_a_second_claim_is_refused_naming_the_pid_and_a_killed_holder_never_blocks(tmp_path):
    out = tmp_path / "out"
    proc = hold(out, STAGE.state)
    try:
        with pytest.raises(
            MaskprepError, match=rf"another maskprep run \(PID {proc.pid}\) is writing"
        ):
            claim(out, STAGE, {"n": 1}, resume=True, overwrite=False)
        assert out.is_dir()  # the holder's directory is left alone
    finally:
        proc.send_signal(signal.SIGKILL)
        proc.wait()
    assert (out / STAGE.state / LOCK_NAME).is_file()  # a stale lock file: the OS released the lock
    with claim(out, STAGE, {"n": 1}, resume=True, overwrite=False) as run:
        assert not run.resumed and (out / STAGE.state / LOCK_NAME).is_file()
    # lock removed on release
    assert sorted(p.name for p in (out / STAGE.state).iterdir()) == ["run.json"]


def test_count_and_mask_refuse_a_locked_directory(tmp_path, shakespeare_small, small_wordpiece):
    for command, state in (("count", ".maskprep-count"), ("mask", ".maskprep")):
        out = tmp_path / command
        r, pid = cli_while_held(
            out, state, stage_args(command, shakespeare_small, small_wordpiece, out, "--overwrite")
        )
        assert r.exit_code == 1 and f"(PID {pid}) is writing this directory now" in r.output, (
            r.output
        )
        assert "Traceback" not in r.output
        assert sorted(p.name for p in out.iterdir()) == [state]  # nothing written or removed


def test_lock_is_reentrant_safe_after_the_file_is_replaced(tmp_path):
    folder = tmp_path / "s"
    folder.mkdir()
    first = DirLock(folder, "-o s").acquire()
    pid_line = (folder / LOCK_NAME).read_text()
    assert pid_line.startswith("pid ")
    first.release()
    assert not (folder / LOCK_NAME).exists()
    with lock_dir(tmp_path / "o", ".st"):
        assert (tmp_path / "o" / ".st" / LOCK_NAME).is_file()
    assert not (tmp_path / "o" / ".st").exists()  # the folder the lock made is gone again


def test_claim_rules(tmp_path):
    out = tmp_path / "out"
    with claim(out, STAGE, {"n": 1, "h": "a"}, resume=False, overwrite=False) as run:
        assert json.loads((out / ".state" / "run.json").read_text()) == {"n": 1, "h": "a"}
        (out / "part.bin").write_bytes(b"x")
    with pytest.raises(MaskprepError, match="holds an unfinished test run; pass --resume"):
        claim(out, STAGE, {"n": 1, "h": "a"}, resume=False, overwrite=False)
    with pytest.raises(MaskprepError, match=r"\(h changed; --n: 1 before, 2 now\)"):
        claim(out, STAGE, {"n": 2, "h": "b"}, resume=True, overwrite=False)
    with claim(out, STAGE, {"n": 1, "h": "a"}, resume=True, overwrite=False) as run:
        assert run.resumed
    with pytest.raises(MaskprepError, match="exclude each other"):
        claim(out, STAGE, {"n": 1}, resume=True, overwrite=True)
    (tmp_path / "file").write_text("x")
    with pytest.raises(MaskprepError, match="is a file"):
        claim(tmp_path / "file", STAGE, {}, resume=False, overwrite=False)
    foreign = tmp_path / "foreign"
    foreign.mkdir()
    (foreign / "notes.txt").write_text("mine")
    with pytest.raises(MaskprepError, match="holds no unfinished maskprep test run to resume"):
        claim(foreign, STAGE, {}, resume=True, overwrite=False)
    with pytest.raises(MaskprepError, match="directory is not empty"):
        claim(foreign, STAGE, {}, resume=False, overwrite=False)
    # a refused claim leaves nothing behind
    assert [p.name for p in foreign.iterdir()] == ["notes.txt"]


@pytest.mark.slow
def test_two_mask_runs_on_one_directory(tmp_path, shakespeare_corpus, small_wordpiece):
    """Two `mask --overwrite` runs 0.5 s apart: the second is refused, the first finishes intact."""
    out = tmp_path / "shards"
    base = [
        sys.executable,
        "-m",
        "maskprep",
        "--quiet",
        "--workers",
        "2",
        "mask",
        str(shakespeare_corpus),
        "-t",
        str(small_wordpiece),
        "-o",
        str(out),
        "--overwrite",
    ]
    first = subprocess.Popen([*base, "--strategy", "word"], cwd=ROOT, stdout=subprocess.PIPE,
                             stderr=subprocess.PIPE, text=True)
    deadline = time.monotonic() + 60
    while not (out / ".maskprep" / LOCK_NAME).exists() and time.monotonic() < deadline:
        time.sleep(0.01)
    second = subprocess.run(
        [*base, "--strategy", "token"], cwd=ROOT, capture_output=True, text=True, timeout=120
    )
    _, err = first.communicate(timeout=300)
    assert first.returncode == 0, err
    assert (
        second.returncode == 1
        and f"(PID {first.pid}) is writing this directory now" in second.stderr
    )
    assert "Traceback" not in second.stderr
    verify = CliRunner().invoke(cli, ["verify", str(out)])
    assert verify.exit_code == 0, verify.output
    assert (
        json.loads((out / "_maskprep" / "manifest.json").read_text())["options"]["strategy"]
        == "word"
    )


def test_audit_compare_and_run_lock_their_output_directory(
    tmp_path, shakespeare_small, small_wordpiece
):
    from maskprep._resume import LOCK_STATE

    for command in ("audit", "compare"):
        out = tmp_path / command
        r, pid = cli_while_held(
            out, LOCK_STATE, stage_args(command, shakespeare_small, small_wordpiece, out)
        )
        assert r.exit_code == 1 and f"(PID {pid}) is writing this directory now" in r.output, (
            r.output
        )
    cfg = tmp_path / "run.toml"
    cfg.write_text(
        f'[corpus]\npaths = ["{shakespeare_small}"]\n[tokenizer]\npath = "{small_wordpiece}"\n'
        '[mask]\nstrategies = ["word"]\n',
        encoding="utf-8",
    )
    out = tmp_path / "run"
    r, _ = cli_while_held(out, LOCK_STATE, ["run", str(cfg), "-o", str(out)])
    assert r.exit_code == 1 and "is writing this directory now" in r.output, r.output
    args = stage_args("compare", shakespeare_small, small_wordpiece, tmp_path / "compare")
    r = CliRunner().invoke(cli, ["--quiet", "--workers", "1", *args])
    assert r.exit_code == 0, r.output  # the killed holder's lock is stale: no obstacle
    assert not (tmp_path / "compare" / LOCK_STATE).exists()

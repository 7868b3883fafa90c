"""One resume mechanism and one lock for every stage that writes an output directory.

A stage (count, mask, encode, ...) describes itself once with a `Stage` and
claims its output directory with `claim`, which returns a `RunDir` held for
the whole run::

    STAGE = Stage(noun="count", state=".maskprep-count", marker="counts.json",
                  labels={"max_n": "--max-n", "tokenizer_hash": "tokenizer (-t)"},
                  changed=("tokenizer_hash", "corpus_fingerprint"))
    with claim(out, STAGE, identity, resume=resume, overwrite=overwrite) as run:
        if run.finished:            # --resume on an output already finished with this identity
            return ...
        done = run.done([t.index for t in tasks], files=lambda rec: rec["files"], base=out)
        run.clean({run.record_name(i) for i in done})     # drop attempts of unfinished tasks
        ... tasks write their files, then
        ... write_record(run.record_path(i), {..., "task": i, "run": run.digest})
        ... the driver writes the finished files, `marker` last
        run.remove()                # optional: drop the state once the output is complete

Layout inside OUT::

    STATE/                  the stage's state folder (e.g. ``.maskprep-count``)
        lock                exclusive lock, held for the whole run (see below)
        run.json            the run identity: options, tokenizer hash, corpus fingerprint, ...
        task-000012.json    durable done-record of task 12 (written last, atomically)
        ...                 attempt folders or files of the stage's own choosing

The identity is any JSON-able dict; `RunDir.digest` is its sha256 and every
done-record carries it under ``"run"``, so a record of another run never
counts. On ``--resume`` the stored identity is compared key by key and a
difference is refused naming the option (``Stage.labels``: ``--max-n: 5
before, 4 now``; keys in ``Stage.changed`` only say "changed"). A record
counts as done when its run digest and task index match and every file it
lists (entries made by `file_entry`: name, bytes, sha256) is intact; anything
else is redone.

The lock is ``fcntl.flock`` on STATE/lock, taken before anything in OUT is
read or removed and released when the `RunDir` is left (the lock file is then
removed, and STATE too if nothing else is in it). A crashed or killed run's
lock is released by the OS, so a stale lock file never blocks a later run
or ``--resume``; a second live run fails at once, naming the holder's PID.
`lock_dir` gives the same lock to stages without resume state.

What is finished: an output with the stage's ``marker`` file and no
unfinished state (for stages that keep STATE after finishing, such as mask,
the caller decides). Stages write their marker last (see `_files`).

This module knows no stage; it does not write the stage's own files.
"""

from __future__ import annotations

import contextlib
import errno
import fcntl
import functools
import hashlib
import json
import os
import shutil
import socket
import uuid
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable, Iterable, Iterator, Mapping

from ._files import atomic_write_text, file_crc32, file_sha256, fsync_file, read_json
from .errors import MaskprepError

__all__ = [
    "Stage",
    "RunDir",
    "DirLock",
    "claim",
    "lock_dir",
    "locked_output",
    "LOCK_STATE",
    "write_record",
    "read_record",
    "file_entry",
    "entry_intact",
    "digest_of",
    "LOCK_NAME",
    "RUN_NAME",
]

LOCK_NAME = "lock"
LOCK_STATE = (
    ".maskprep-lock"  # the lock folder of outputs without resume state (audit, compare, run)
)
Entry = Mapping[str, Any]  # {"file": name under a base folder, "bytes": size, "sha256": hex}
RUN_NAME = "run.json"


@dataclass(frozen=True)
class Stage:
    """How one stage names its state and its options.

    `noun` reads in messages ("holds an unfinished count"); `state` is the
    state folder inside OUT; `marker` the file written last by a finished run
    (a path relative to OUT);
    `labels` name identity keys as options; `changed` are keys (hashes) only
    reported as changed; `digits` pad task numbers in record names;
    `finished_identity(OUT)` returns the comparable identity of a finished
    output without state (or None); `on_overwrite(OUT)` removes what
    ``--overwrite`` replaces, besides the state.
    """

    noun: str
    state: str
    marker: str
    labels: Mapping[str, str] = field(default_factory=dict)
    changed: tuple[str, ...] = ()
    digits: int = 6
    finished_identity: Callable[[Path], Mapping[str, Any] | None] | None = None
    on_overwrite: Callable[[Path], None] | None = None

    def differences(self, old: Mapping[str, Any], new: Mapping[str, Any]) -> list[str]:
        """What differs between two identities, named as options.

        >>> stage = Stage("count", ".s", "c.json", labels={"max_n": "--max-n"})
        >>> stage.differences({"max_n": 5}, {"max_n": 4})
        ['--max-n: 5 before, 4 now']
        """
        out = []
        for key in sorted(set(old) | set(new)):
            if old.get(key) != new.get(key):
                label = self.labels.get(key, key)
                if key in self.changed:
                    out.append(f"{label} changed")
                else:
                    before, now = json.dumps(old.get(key)), json.dumps(new.get(key))
                    out.append(f"{label}: {before} before, {now} now")
        return out


def digest_of(identity: Mapping[str, Any]) -> str:
    """sha256 of an identity (sorted-key JSON): the ``"run"`` of every done-record."""
    return hashlib.sha256(json.dumps(dict(identity), sort_keys=True).encode()).hexdigest()


# ---------------------------------------------------------------- the lock

class DirLock:
    """An exclusive ``flock`` on ``FOLDER/lock``: ``with DirLock(Path("o/.maskprep"), "-o o"):``.

    The file holds the holder's PID and host while held and is removed on
    release. Taking it never waits: a lock held by a live process raises
    `MaskprepError` naming that process.
    """

    def __init__(self, folder: Path, what: str) -> None:
        self.folder = folder
        self.path = folder / LOCK_NAME
        self.what = what
        self.fd: int | None = None

    def acquire(self) -> "DirLock":
        while True:
            fd = os.open(self.path, os.O_RDWR | os.O_CREAT | os.O_CLOEXEC, 0o644)
            try:
                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
            except OSError as exc:
                os.close(fd)
                if exc.errno not in (errno.EWOULDBLOCK, errno.EAGAIN, errno.EACCES):
                    raise
                raise MaskprepError(f"{self.what}: {self._holder()} is writing this directory now; "
                                    "wait for it to finish (or stop it), or choose another output"
                                    ) from None
            try:  # the last holder may have removed the file after we opened it: lock the new one
                same = os.fstat(fd).st_ino == os.stat(self.path).st_ino
            except FileNotFoundError:
                same = False
            if same:
                break
            os.close(fd)
        os.ftruncate(fd, 0)
        os.write(fd, f"pid {os.getpid()} on {socket.gethostname()}\n".encode())
        self.fd = fd
        return self

    def _holder(self) -> str:
        try:
            text = self.path.read_text(encoding="utf-8", errors="replace").split()
        except OSError:
            text = []
        if len(text) >= 2 and text[0] == "pid" and text[1].isdigit():
            host = f" on {text[3]}" if len(text) >= 4 and text[3] != socket.gethostname() else ""
            return f"another maskprep run (PID {text[1]}{host})"
        return "another maskprep run"

    def release(self) -> None:
        """Remove the lock file (while still holding it) and unlock."""
        if self.fd is None:
            return
        with contextlib.suppress(OSError):
            if os.fstat(self.fd).st_ino == os.stat(self.path).st_ino:
                self.path.unlink()
        os.close(self.fd)
        self.fd = None

    def __enter__(self) -> "DirLock":
        return self.acquire() if self.fd is None else self

    def __exit__(self, *exc: Any) -> None:
        self.release()


def _mkdir(path: Path) -> bool:
    """Create `path` (and parents); True if this call created it. OS errors name the path."""
    if path.is_dir():
        return False
    try:
        path.mkdir(parents=True)
    except FileExistsError:
        if not path.is_dir():
            raise MaskprepError(f"{path}: exists and is not a directory") from None
        return False
    except NotADirectoryError:
        raise MaskprepError(f"{path}: a part of this path is a file, not a directory") from None
    except OSError as exc:
        from .errors import os_error_text

        raise MaskprepError(os_error_text(exc, doing="creating the output directory")) from None
    return True


@contextlib.contextmanager
def lock_dir(output: Path, state: str, *, what: str | None = None) -> Iterator[DirLock]:
    """Lock an output directory that has no resume state: ``with lock_dir(out, ".maskprep-x"):``.

    Creates OUT and OUT/STATE; on leaving, removes the lock, STATE if empty, and OUT if this
    call made it and nothing was written in it.
    """
    made_out = _mkdir(output)
    folder = output / state
    made = _mkdir(folder)
    lock = DirLock(folder, what or f"-o {output}")
    try:
        lock.acquire()
    except BaseException:
        _tidy(folder, made, output, made_out)
        raise
    try:
        yield lock
    finally:
        lock.release()
        _tidy(folder, True, output, made_out)


def locked_output(state: str) -> Callable[[Callable[..., Any]], Callable[..., Any]]:
    """Decorate a stage function taking ``output=DIR``: its directory is locked for the call.

    The lock is `lock_dir`'s.

    >>> @locked_output(".maskprep-lock")
    ... def run_stage(*, output): ...
    """
    def wrap(fn: Callable[..., Any]) -> Callable[..., Any]:
        @functools.wraps(fn)
        def locked(*args: Any, **kwargs: Any) -> Any:
            with lock_dir(Path(kwargs["output"]), state):
                return fn(*args, **kwargs)
        return locked
    return wrap


def _tidy(folder: Path, folder_ours: bool, output: Path, output_ours: bool) -> None:
    """Remove folders this run created, if nothing was left in them."""
    for path, ours in ((folder, folder_ours), (output, output_ours)):
        if ours:
            with contextlib.suppress(OSError):
                path.rmdir()


# ---------------------------------------------------------------- the run directory

class RunDir:
    """The claimed output directory of one run (see the module docstring); leave it to unlock."""

    def __init__(self, output: Path, stage: Stage, identity: Mapping[str, Any], lock: DirLock,
                 made: tuple[bool, bool]) -> None:
        self.output = output
        self.stage = stage
        self.root = output / stage.state
        self.identity = dict(identity)
        self.digest = digest_of(identity)
        self.lock = lock
        self.resumed = False   # an unfinished run with this identity was found
        self.finished = False  # --resume found the output finished with this identity
        self._made = made

    def record_name(self, task: int) -> str:
        return f"task-{task:0{self.stage.digits}d}.json"

    def record_path(self, task: int) -> Path:
        return self.root / self.record_name(task)

    def done(self, tasks: Iterable[int], *, files: Callable[[Mapping[str, Any]], Iterable[Entry]],
             base: Path) -> dict[int, dict[str, Any]]:
        """Done-records of `tasks` from this run whose `files(record)` are intact under `base`."""
        found = {}
        for i in tasks:
            rec = read_record(self.record_path(i), self.digest)
            if rec is None or rec.get("task") != i:
                continue
            try:
                if all(entry_intact(base, e) for e in files(rec)):
                    found[i] = rec
            except (KeyError, TypeError, ValueError):
                continue
        return found

    def clean(self, keep: Iterable[str] = ()) -> None:
        """Remove everything in the state folder but the lock, run.json and the names in `keep`."""
        _clear(self.root, {LOCK_NAME, RUN_NAME, *keep})

    def attempt(self, prefix: str) -> Path:
        """A new, empty folder in the state folder with a unique name (one attempt at some work)."""
        path = self.root / f"{prefix}-{uuid.uuid4().hex[:12]}"
        path.mkdir()
        return path

    def remove(self) -> None:
        """Drop the state once the output is complete (the lock stays held until release)."""
        _clear(self.root, {LOCK_NAME})

    def release(self) -> None:
        """Unlock, remove the lock file, then the state folder and a new OUT if they are empty."""
        self.lock.release()
        with contextlib.suppress(OSError):
            self.root.rmdir()
        _tidy(self.root, False, self.output, self._made[0])

    def __enter__(self) -> "RunDir":
        return self

    def __exit__(self, *exc: Any) -> None:
        self.release()


def _clear(folder: Path, keep: set[str]) -> None:
    for p in list(folder.iterdir()) if folder.is_dir() else []:
        if p.name in keep:
            continue
        if p.is_dir() and not p.is_symlink():
            shutil.rmtree(p, ignore_errors=True)
        else:
            p.unlink(missing_ok=True)


def claim(output: Path, stage: Stage, identity: Mapping[str, Any], *, resume: bool,
          overwrite: bool) -> RunDir:
    """Lock OUT and check it against ``--resume`` / ``--overwrite``; write run.json for a new run.

    Refusals (`MaskprepError`): both flags; OUT a file; another live run; an
    unfinished run without ``--resume``; a non-empty OUT without either flag;
    ``--resume`` with another identity (naming each difference) or on a
    directory holding no run of this stage. A new or empty OUT with
    ``--resume`` simply starts.

    >>> run = claim(Path("o"), STAGE, {"n": 5}, resume=False, overwrite=False)  # doctest: +SKIP
    """
    if resume and overwrite:
        raise MaskprepError("--overwrite and --resume exclude each other: pick one")
    if output.exists() and not output.is_dir():
        raise MaskprepError(f"-o {output}: is a file; give a directory")
    root = output / stage.state
    made_out = _mkdir(output)
    made_root = _mkdir(root)
    lock = DirLock(root, f"-o {output}")
    try:
        lock.acquire()
    except BaseException:
        _tidy(root, made_root, output, made_out)
        raise
    run = RunDir(output, stage, identity, lock, (made_out, made_root))
    try:
        _check(run, resume=resume, overwrite=overwrite)
    except BaseException:
        run.release()
        raise
    return run


def _check(run: RunDir, *, resume: bool, overwrite: bool) -> None:
    stage, output, root = run.stage, run.output, run.root
    state_entries = [p.name for p in root.iterdir() if p.name != LOCK_NAME]
    others = [p.name for p in output.iterdir() if p.name != stage.state]
    unfinished = bool(state_entries)
    run_file = root / RUN_NAME
    redo = "start again"
    if unfinished and not overwrite:
        if not resume:
            if (output / stage.marker).is_file():  # a finished output (marker: a path in OUT)
                raise _not_empty(output, stage)
            raise MaskprepError(f"-o {output}: holds an unfinished {stage.noun}; pass --resume to "
                                f"finish it, or --overwrite to {redo}")
        old = read_json(run_file, what="resume state") if run_file.is_file() else None
        if not isinstance(old, dict):
            raise MaskprepError(f"--resume: {run_file} is missing or damaged; use --overwrite to "
                                f"{redo}")
        diffs = stage.differences(old, run.identity)
        if diffs:
            raise _refuse(output, stage, diffs)
        run.resumed = True
        return
    if others and resume and not overwrite:
        finished = stage.finished_identity(output) if stage.finished_identity else None
        if finished is None:
            raise MaskprepError(f"--resume: {output} holds no unfinished maskprep {stage.noun} to "
                                f"resume (no {stage.state}/{RUN_NAME}); use --overwrite to replace "
                                "its contents")
        diffs = stage.differences(finished, {k: run.identity.get(k) for k in finished})
        if diffs:
            raise _refuse(output, stage, diffs)
        run.finished = True
        return
    if others and not overwrite:
        raise _not_empty(output, stage)
    if overwrite:
        run.clean()
        run_file.unlink(missing_ok=True)
        if stage.on_overwrite is not None:
            stage.on_overwrite(output)
    atomic_write_text(run_file, json.dumps(run.identity, indent=2, ensure_ascii=False) + "\n")


def _not_empty(output: Path, stage: Stage) -> MaskprepError:
    return MaskprepError(f"-o {output}: directory is not empty; pass --overwrite to replace it or "
                         f"--resume to finish an interrupted {stage.noun}, or choose another "
                         "directory")


def _refuse(output: Path, stage: Stage, diffs: list[str]) -> MaskprepError:
    return MaskprepError(f"--resume: the options differ from the {stage.noun} in {output} ("
                         + "; ".join(diffs) + "); rerun with the same ones, or use --overwrite to "
                         "start again")


# ------------------------------------------------------------ records (written by tasks, anywhere)

def file_entry(base: Path, path: str | Path) -> dict[str, Any]:
    """Flush a finished file to disk and describe it for a done-record (name, bytes, sha256)."""
    p = Path(path)
    fsync_file(p)
    return {"file": str(p.relative_to(base)), "bytes": p.stat().st_size, "sha256": file_sha256(p)}


def entry_intact(base: Path, entry: Mapping[str, Any]) -> bool:
    """Does the file of a record entry still have its recorded size and checksum?

    The checksum is ``sha256``, or ``crc32`` (`maskprep._files.file_crc32`, with the entry's
    ``crc32_head``) for scratch files that a task checksums as it writes them.
    """
    p = base / str(entry.get("file", ""))
    try:
        if not (p.is_file() and p.stat().st_size == entry["bytes"]):
            return False
        if "crc32" in entry:
            return file_crc32(p, head=int(entry.get("crc32_head", 0))) == int(entry["crc32"])
        return file_sha256(p) == entry["sha256"]
    except (OSError, KeyError, TypeError, ValueError):
        return False


def write_record(path: Path, record: Mapping[str, Any]) -> None:
    """Write a done-record durably (fsynced, renamed into place): the task's last act."""
    atomic_write_text(path, json.dumps(dict(record), sort_keys=True) + "\n")


def read_record(path: Path, digest: str) -> dict[str, Any] | None:
    """A done-record of the run with `digest`, or None (missing, damaged or another run's)."""
    try:
        rec = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    if not isinstance(rec, dict) or rec.get("run") != digest:
        return None
    return rec

"""The stages of a run as records: fingerprints, the up-to-date check, the results and their table.

Each stage directory holds ``.stage.json`` (`STAGE_FILE`): the stage's
fingerprint (`stage_fingerprint`: its options, its inputs' fingerprints and
`code_version`) and the files it wrote. `StageRunner.stage` skips a stage whose
record matches and whose files are all present, and otherwise replaces its
directory and runs it. `format_run_summary` is the terminal table of a run.
Which stages a run has, and in what order, is `maskprep.pipeline.runner`.
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
import shutil
import threading
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable, Sequence

from .._files import atomic_write_json as write_json
from .._tables import format_table

__all__ = [
    "StageResult",
    "RunResult",
    "StageRunner",
    "code_version",
    "stage_fingerprint",
    "files_in",
    "format_run_summary",
    "STAGE_FILE",
    "RUN_FILE",
]

STAGE_FILE = ".stage.json"
RUN_FILE = "pipeline.json"


@dataclass(frozen=True)
class StageResult:
    """One stage of a run.

    ``StageResult("count", "skipped", 0.0, Path("out/counts"), "ab12...")``
    """

    name: str
    status: str  # "ran" or "skipped"
    seconds: float  # this run's; 0.0 when skipped
    output: Path
    fingerprint: str
    earlier_seconds: float | None = None  # a skipped stage: its time when it last ran (if recorded)
    beside: tuple[str, ...] = ()  # the stages that ran while this one ran in the background

    def timing(self) -> dict[str, Any]:
        """The stage's time for pipeline.json, saying which run it comes from."""
        if self.status == "ran":
            ran = {"seconds": round(self.seconds, 3), "seconds_from": "this run"}
            return {**ran, "ran_beside": list(self.beside)} if self.beside else ran
        if self.earlier_seconds is None:
            return {"seconds": None, "seconds_from": "not recorded"}
        return {
            "seconds": round(self.earlier_seconds, 3),
            "seconds_from": "an earlier run (skipped now)",
        }


@dataclass(frozen=True)
class RunResult:
    """What `run_pipeline` did: stages in order, and compare.json if compare ran or was kept."""

    output: Path
    config: Path
    stages: tuple[StageResult, ...]
    tokenizer: Path
    compare: dict[str, Any] | None = None

    def stage(self, name: str) -> StageResult:
        """The result of one stage: ``result.stage("mask.pmi").status`` -> 'skipped'."""
        return next(s for s in self.stages if s.name == name)


_CODE: list[str] = []


def code_version() -> str:
    """Package version plus sha256 of every source file of the package (code changes rerun stages).

    >>> len(code_version()) > 10
    True
    """
    if not _CODE:
        from .._version import __version__

        h = hashlib.sha256()
        package = Path(__file__).resolve().parent.parent
        for p in sorted(package.rglob("*.py")):
            h.update(p.relative_to(package).as_posix().encode() + b"\0" + p.read_bytes() + b"\0")
        _CODE.append(f"{__version__}+{h.hexdigest()[:16]}")
    return _CODE[0]


def _jsonable(value: Any) -> Any:
    if hasattr(value, "value") and not isinstance(value, (int, float, str)):
        return value.value
    if isinstance(value, (tuple, list)):
        return [_jsonable(v) for v in value]
    if isinstance(value, dict):
        return {str(k): _jsonable(v) for k, v in value.items()}
    if hasattr(value, "__dataclass_fields__"):
        return {k: _jsonable(getattr(value, k)) for k in value.__dataclass_fields__}
    if isinstance(value, Path):
        return str(value)
    return value


def stage_fingerprint(name: str, options: Any, inputs: dict[str, Any]) -> str:
    """sha256 over a stage's name, options, input fingerprints and the code version.

    >>> len(stage_fingerprint("units", {"top": 5000}, {"counts": "ab12"}))
    64
    """
    doc = {"stage": name, "options": _jsonable(options), "inputs": inputs, "code": code_version()}
    return hashlib.sha256(json.dumps(doc, sort_keys=True).encode()).hexdigest()


class StageRunner:
    """Runs the stages of one run in order, each skipped when its record says it is up to date."""

    def __init__(self, out: Path, *, force: bool, quiet: bool) -> None:
        self.out, self.force, self.quiet = out, force, quiet
        self.results: list[StageResult] = []
        self._background: dict[str, _Background] = {}

    def stage(self, name: str, subdir: str, options: Any, inputs: dict[str, Any],
              run: Callable[[Path], Sequence[str]], *, background: bool = False) -> StageResult:
        """Run `run(dir)` (returning the files it wrote, relative to dir) unless up to date.

        With `background`, a stage that must run is started in a thread and this returns at
        once (status "ran", its time not yet known); `wait(name)` joins it before its output
        is used, and `finish()` before the run's results are read. Only a stage that computes
        in the driver alone should run so: it then uses the core the other stages leave idle.
        """
        d = self.out / subdir
        fp = stage_fingerprint(name, options, inputs)
        record = d / STAGE_FILE
        if not self.force and record.is_file():
            try:
                old = json.loads(record.read_text(encoding="utf-8"))
            except (OSError, ValueError):
                old = {}
            if old.get("fingerprint") == fp and all(
                (d / f).exists() for f in old.get("files", ["?"])
            ):
                earlier = old.get("seconds")
                result = StageResult(name, "skipped", 0.0, d, fp,
                                     float(earlier) if isinstance(earlier, (int, float)) else None)
                self._log(result)
                self.results.append(result)
                return result
        for job in self._background.values():
            if job.thread.is_alive():
                job.beside.append(name)
        if d.exists():
            shutil.rmtree(d)
        d.mkdir(parents=True)
        if not self.quiet:
            import sys

            where = " in the background, beside the stages that do not need it"
            print(f"[{name}] running{where if background else ''}", file=sys.stderr, flush=True)

        def work() -> float:
            start = time.monotonic()
            files = sorted(run(d))
            seconds = time.monotonic() - start
            write_json(record, {"stage": name, "fingerprint": fp, "options": _jsonable(options),
                                "inputs": inputs, "code": code_version(), "files": files,
                                "seconds": round(seconds, 3)})
            return seconds

        result = StageResult(name, "ran", 0.0, d, fp)
        if background:
            self._background[name] = _Background(work, len(self.results))
            self.results.append(result)  # its place in the run's order; times filled by wait()
            return result
        result = dataclasses.replace(result, seconds=work())
        self._log(result)
        self.results.append(result)
        return result

    def wait(self, name: str) -> None:
        """Join the background stage `name` (if one runs), raising what it raised."""
        job = self._background.pop(name, None)
        if job is None:
            return
        seconds = job.join()
        result = dataclasses.replace(
            self.results[job.slot], seconds=seconds, beside=tuple(job.beside)
        )
        self.results[job.slot] = result
        self._log(result)

    def finish(self) -> None:
        """Join every background stage."""
        for name in list(self._background):
            self.wait(name)

    def settle(self) -> None:
        """After a failure elsewhere: let background stages end, ignoring what they raise (the
        first failure is the one reported), so none still writes while the run cleans up."""
        for job in self._background.values():
            job.thread.join()
        self._background.clear()

    def _log(self, r: StageResult) -> None:
        if not self.quiet:
            import sys

            how = "up to date, skipped" if r.status == "skipped" else f"done in {r.seconds:.1f}s"
            print(f"[{r.name}] {how}: {r.output}", file=sys.stderr, flush=True)


class _Background:
    """One stage's work running in a thread of the driver: its time, or what it raised."""

    def __init__(self, work: Callable[[], float], slot: int) -> None:
        self.slot = slot
        self.beside: list[str] = []
        self._seconds = 0.0
        self._error: BaseException | None = None

        def target() -> None:
            try:
                self._seconds = work()
            except BaseException as exc:  # handed to the main thread by join()
                self._error = exc

        # a daemon: Ctrl-C in the main thread ends the run without waiting for this stage,
        # which then has no record and reruns next time
        self.thread = threading.Thread(target=target, name="maskprep-stage", daemon=True)
        self.thread.start()

    def join(self) -> float:
        self.thread.join()
        if self._error is not None:
            raise self._error
        return self._seconds


def files_in(d: Path) -> list[str]:
    return [str(p.relative_to(d)) for p in d.rglob("*") if p.is_file() and p.name != STAGE_FILE
            and not any(part.startswith(".") for part in p.relative_to(d).parts)]


_MAIN_FILES = {
    "tokenizer": "tokenizer.json",
    "encode": "encoded.json",
    "audit": "audit.html",
    "count": "counts.json",
    "units": "units.tsv",
    "compare": "compare.html",
}


def format_run_summary(result: RunResult) -> str:
    """Stage table (status, time, main output) for the terminal.

    ``print(format_run_summary(result))``
    """
    rows = [("stage", "status", "seconds", "output")]
    for s in result.stages:
        main = _MAIN_FILES.get(s.name.split(".")[0])
        where = s.output / main if main and (s.output / main).exists() else s.output
        rows.append(
            (s.name, s.status, f"{s.seconds:.1f}" if s.status == "ran" else "-", str(where))
        )
    table = format_table(rows, left=(0, 1, 3))
    notes = [f"{s.name} ran in the background beside {', '.join(s.beside)}; its seconds "
             "overlap theirs" for s in result.stages if s.beside]
    return "\n".join([table, *notes])

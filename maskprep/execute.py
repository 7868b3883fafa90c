"""Run plain task functions on a local process pool or a Dask cluster.

A task function is an ordinary top-level function taking picklable arguments
and returning a picklable result (usually a small summary; large results are
written to files by the task itself). `map_tasks` runs one function over a list
of argument tuples and yields the results *in task order*, whatever order the
workers finish in, so drivers are deterministic by construction.

Where tasks run:

- ``workers=1`` (or a single task): in this process, no pickling, easiest to
  debug; the tokenizer library may use its own threads.
- ``workers>1``: a ``spawn`` process pool (the tokenizer library's threads do
  not survive a fork). Each worker process runs one tokenizer thread
  (``RAYON_NUM_THREADS=1``, ``TOKENIZERS_PARALLELISM=false``) and no
  encoding look-ahead thread: the pool is the parallelism. The pool is kept
  for the life of the process, so the stages of one run share warm workers.
  On Linux a worker dies with the driver (``PR_SET_PDEATHSIG``), so a killed
  run leaves no orphan still writing into the output directory.
- ``dask="tcp://host:8786"``: a running Dask scheduler through
  ``distributed.Client`` (or ``dask="/shared/scheduler.json"``, the file
  written by ``dask scheduler --scheduler-file``); dask is imported only then. Arguments shared by
  every task (the same object in every tuple, e.g. a tokenizer) are sent to
  the cluster once. Tasks also run with one tokenizer thread each (unless the
  worker's environment sets ``RAYON_NUM_THREADS`` / ``TOKENIZERS_PARALLELISM``).
  With ``shared=DIR``, every connected worker must see a probe file the driver
  writes in DIR before any task is sent: the output directory must be on a
  filesystem shared by the driver and all workers, at the same path.

A task that raises, a worker process that dies and a task lost by the cluster
are all reported as a `MaskprepError` starting with the task's description
(for corpus tasks: the file and byte range), and the run stops. Tasks that
finished before keep whatever they recorded, so a stage with ``--resume`` can
continue from there.

What it does not do: retry (Dask itself reruns tasks whose worker died), or
keep state between runs (resume state is kept by each stage in its output
directory).
"""

from __future__ import annotations

import os
import sys
import uuid
from concurrent.futures.process import BrokenProcessPool
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable, Iterator, Sequence

from ._checks import is_whole
from ._pool import ENCODE_AHEAD_ENV, ONE_THREAD, call, drop_pool, get_pool, kill_pools, \
    no_lookahead, ordered, pool_running, pool_size, shutdown_pools, warm, workers_ignore_sigint
from .errors import MaskprepError, task_error
from .wording import plural
from .progress import Progress

__all__ = ["Executor", "default_workers", "map_tasks", "pool_running", "shutdown_pools",
           "kill_pools", "start_workers", "DASK_INSTALL_HINT", "ENCODE_AHEAD_ENV"]

DASK_INSTALL_HINT = "pip install 'maskprep[dask]' (or: pip install 'dask[distributed]')"
_SMALL = (int, float, bool, type(None))


@dataclass(frozen=True)
class Executor:
    """Where tasks run: ``Executor(workers=2)`` or ``Executor(dask="tcp://10.0.0.5:8786")``."""

    workers: int = 1
    dask: str | None = None
    quiet: bool = False

    def __post_init__(self) -> None:
        if not is_whole(self.workers, 1):
            raise MaskprepError(
                f"--workers: expected a positive whole number, got {self.workers!r}"
            )
        if self.workers > 1024:
            raise MaskprepError(f"--workers: {self.workers} is absurd; use at most 1024")
        if self.dask is not None and not str(self.dask).strip():
            raise MaskprepError("--dask: give the scheduler's address, e.g. tcp://10.0.0.5:8786")


def default_workers() -> int:
    """All cores this process may use: ``default_workers()`` -> 2 on a two-core machine."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover - not Linux
        return max(1, os.cpu_count() or 1)


def _call_remote(fn: Callable[..., Any], *args: Any) -> tuple[bool, Any]:
    """`_call` on a Dask worker: one tokenizer thread per task unless the worker's environment says
    otherwise."""
    for key, value in ONE_THREAD.items():
        os.environ.setdefault(key, value)
    no_lookahead()
    return call(fn, args)


# ---------------------------------------------------------------- the driver side

def map_tasks(
    fn: Callable[..., Any],
    args_list: Sequence[tuple[Any, ...]],
    *,
    executor: Executor = Executor(),
    label: str = "tasks",
    describe: Callable[[int], str] | None = None,
    weights: Sequence[float] | None = None,
    unit: str = "tasks",
    shared: str | Path | None = None,
) -> Iterator[Any]:
    """Run `fn(*args)` for each args tuple; yield results in task order.

    `describe(i)` names task i in error messages; `weights` drive the progress
    line; `shared` is a directory the tasks read or write (checked on Dask).

    >>> list(map_tasks(pow, [(2, 3), (3, 2)]))
    [8, 9]
    """
    n = len(args_list)
    weights = [float(w) for w in weights] if weights is not None else [1.0] * n
    if len(weights) != n:
        raise ValueError(f"map_tasks: {len(weights)} weights for {n} tasks")
    describe = describe or (lambda i: f"task {i}")
    with Progress(label, total=float(sum(weights)), unit=unit, quiet=executor.quiet) as progress:
        if executor.dask:
            yield from _map_dask(
                fn, args_list, executor, describe, weights, progress, shared, label
            )
            return
        if executor.workers == 1 or n <= 1:
            for i, args in enumerate(args_list):
                ok, value = call(fn, args)
                if not ok:
                    raise task_error(describe(i), value)
                progress.advance(weights[i])
                yield value
            return
        size = pool_size(executor.workers)
        pool = get_pool(size)
        try:
            yield from ordered(pool, fn, args_list, size, describe, weights, progress)
        except BaseException as exc:
            if isinstance(exc, KeyboardInterrupt) or getattr(pool, "_broken", False):
                drop_pool(size, terminate=True)
            raise


def start_workers(executor: Executor, tasks: int, modules: Sequence[str] = ()) -> None:
    """Start the pool's worker processes now, while the driver still prepares the run.

    A spawned worker spends about 0.3 s importing maskprep, numpy and pyarrow;
    started here, that overlaps the driver's own start (reading the manifest, the
    tokenizer, the units) instead of following it. Nothing happens when the tasks
    would run in this process anyway (one worker, one task) or on Dask.

    >>> start_workers(Executor(workers=1), 8)  # in this process: nothing to start
    """
    if executor.dask or executor.workers == 1 or tasks <= 1 or pool_running(executor.workers):
        return
    size = pool_size(executor.workers)
    pool = get_pool(size)
    for _ in range(min(size, tasks)):
        try:
            with workers_ignore_sigint():
                pool.submit(warm, tuple(modules))
        except BrokenProcessPool:  # reported by map_tasks, with the task at fault
            return


# ---------------------------------------------------------------- Dask

def _distributed() -> Any:
    """The `distributed` package, or a clear error saying how to install it."""
    try:
        import distributed
    except ImportError:
        raise MaskprepError(
            f"--dask needs the dask extra, which is not installed here: {DASK_INSTALL_HINT}; "
            "or drop --dask to run on local processes"
        ) from None
    return distributed


def _sees(path: str, token: str) -> bool:
    """On a worker: does the driver's probe file exist here with the driver's token?"""
    try:
        return Path(path).read_text(encoding="utf-8") == token
    except OSError:
        return False


def _check_shared(client: Any, address: str, directory: str | Path) -> None:
    """Every connected worker must see `directory` (the shared filesystem, at the same path)."""
    where = Path(directory).resolve()
    workers = client.scheduler_info().get("workers", {})
    if not workers:
        sys.stderr.write(
            f"note: no Dask worker is connected to {address} yet; tasks wait until one joins "
            f"(each must see {where} at that path)\n"
        )
        return
    where.mkdir(parents=True, exist_ok=True)
    token = uuid.uuid4().hex
    probe = where / f".maskprep-probe-{token}.tmp"
    probe.write_text(token, encoding="utf-8")
    try:
        seen = client.run(_sees, str(probe), token)
    finally:
        probe.unlink(missing_ok=True)
    blind = sorted(w for w, ok in seen.items() if not ok)
    if blind:
        raise MaskprepError(
            f"--dask {address}: {len(blind)} of {plural(len(seen), 'worker')} cannot see {where} "
            f"(first: {blind[0]}); the corpus and the output directory must be on a filesystem "
            "shared by this machine and every worker, at the same path"
        )


def _shared_args(args_list: Sequence[tuple[Any, ...]]) -> list[int]:
    """Positions holding one and the same (non-trivial) object in every task: sent to the cluster
    once."""
    if len(args_list) < 2 or len({len(a) for a in args_list}) != 1:
        return []
    first = args_list[0]
    return [j for j, obj in enumerate(first) if not isinstance(obj, _SMALL)
            and not (isinstance(obj, str) and len(obj) < 4096)
            and all(a[j] is obj for a in args_list[1:])]


def _map_dask(fn: Callable[..., Any], args_list: Sequence[tuple[Any, ...]], executor: Executor,
              describe: Callable[[int], str], weights: list[float], progress: Progress,
              shared: str | Path | None, label: str) -> Iterator[Any]:
    distributed = _distributed()
    address = str(executor.dask)
    target = {"scheduler_file": address} if address.endswith(".json") else {"address": address}
    if "scheduler_file" in target and not Path(address).is_file():
        raise MaskprepError(
            f"--dask {address}: no such scheduler file (written by dask scheduler "
            "--scheduler-file FILE); or give the scheduler's address, e.g. tcp://10.0.0.5:8786"
        )
    try:
        client = distributed.Client(**target, timeout="10s", set_as_default=False)
    except Exception as exc:
        raise MaskprepError(
            f"--dask {address}: cannot reach the scheduler ({type(exc).__name__}: {exc}); "
            f"start one with: dask scheduler, and workers with: dask worker {address}"
        ) from None
    futures: list[Any] = []
    try:
        if shared is not None:
            _check_shared(client, address, shared)
        run = uuid.uuid4().hex[:12]
        positions = _shared_args(args_list)
        try:
            sent = (
                client.scatter([args_list[0][j] for j in positions], hash=False)
                if positions
                else []
            )
            once = dict(zip(positions, sent))
            futures = [
                client.submit(
                    _call_remote,
                    fn,
                    *[once.get(j, a) for j, a in enumerate(args)],
                    pure=False,
                    key=f"maskprep-{fn.__name__}-{run}-{i:06d}",
                )
                for i, args in enumerate(args_list)
            ]
        except Exception as exc:  # e.g. a worker that cannot unpickle maskprep's objects
            raise MaskprepError(
                f"--dask {address}: sending the {label} tasks to the cluster failed "
                f"({type(exc).__name__}: {str(exc)[:300]}); every worker must have the same "
                "maskprep and library versions as this machine"
            ) from None
        index = {f.key: i for i, f in enumerate(futures)}
        done: dict[int, Any] = {}
        emit = 0
        for fut in distributed.as_completed(futures, loop=client.loop):
            i = index[fut.key]
            try:
                ok, value = fut.result()
            except Exception as exc:  # lost worker (KilledWorker), cancelled, unpicklable result...
                raise MaskprepError(
                    f"{describe(i)}: the cluster lost this task ({type(exc).__name__}: {exc}); "
                    "finished tasks are kept for --resume"
                ) from None
            if not ok:
                raise task_error(describe(i), value)
            progress.advance(weights[i])
            done[i] = value
            while emit in done:
                yield done.pop(emit)
                emit += 1
    finally:
        pending = [f for f in futures if not f.done()]
        if pending:
            try:
                client.cancel(pending)
            except Exception:  # pragma: no cover - the scheduler is gone already
                pass
        client.close()

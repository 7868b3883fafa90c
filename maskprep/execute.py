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

import contextlib
import multiprocessing
import os
import signal
import sys
import threading
import traceback
import uuid
from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
from concurrent.futures.process import BrokenProcessPool
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable, Iterator, Sequence

from ._checks import is_whole
from .errors import MaskprepError, os_error_text
from .wording import plural
from .progress import Progress

__all__ = ["Executor", "default_workers", "map_tasks", "pool_running", "shutdown_pools",
           "kill_pools", "start_workers", "DASK_INSTALL_HINT"]

DASK_INSTALL_HINT = "pip install 'maskprep[dask]' (or: pip install 'dask[distributed]')"
_ONE_THREAD = {"RAYON_NUM_THREADS": "1", "TOKENIZERS_PARALLELISM": "false"}
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


# ---------------------------------------------------------------- running one task

def _call(fn: Callable[..., Any], args: tuple[Any, ...]) -> tuple[bool, Any]:
    """Run one task; failures come back as (False, message) so every scheduler reports them
    alike."""
    try:
        return True, fn(*args)
    except MaskprepError as exc:
        return False, str(exc)
    except OSError as exc:  # an OS error is the user's to fix: one line, no traceback
        return False, os_error_text(exc)
    except MemoryError:
        return False, "out of memory (lower --memory or --workers, or free memory)"
    except Exception as exc:  # reported with the task's description by the driver
        return False, f"{type(exc).__name__}: {exc}\n{traceback.format_exc(limit=6)}"


def _call_local(cwd: str, fn: Callable[..., Any], args: tuple[Any, ...]) -> tuple[bool, Any]:
    """`_call` in a pool worker, from the driver's current directory (a kept pool outlives a
    chdir)."""
    if os.getcwd() != cwd:
        os.chdir(cwd)
    return _call(fn, args)


def _call_remote(fn: Callable[..., Any], *args: Any) -> tuple[bool, Any]:
    """`_call` on a Dask worker: one tokenizer thread per task unless the worker's environment says
    otherwise."""
    for key, value in _ONE_THREAD.items():
        os.environ.setdefault(key, value)
    _no_lookahead()
    return _call(fn, args)


ENCODE_AHEAD_ENV = "MASKPREP_ENCODE_AHEAD"


def _no_lookahead() -> None:
    """Workers share the cores with other workers: no encoding thread beside the task's own.

    Said through the environment (read by `tokenizer.encoding.encode_stream`), so this
    module imports no stage.
    """
    os.environ[ENCODE_AHEAD_ENV] = "0"


def _worker_init(parent: int) -> None:
    """Pool worker start-up: one tokenizer thread, die with the driver, leave Ctrl-C to the
    driver."""
    os.environ.update(_ONE_THREAD)
    _no_lookahead()
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    if sys.platform.startswith("linux"):
        try:
            import ctypes

            ctypes.CDLL(None, use_errno=True).prctl(1, signal.SIGKILL)  # 1 = PR_SET_PDEATHSIG
        except (OSError, AttributeError):  # pragma: no cover - no prctl
            pass
    if os.getppid() != parent:  # the driver died before the line above took effect
        os._exit(1)


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
                ok, value = _call(fn, args)
                if not ok:
                    raise MaskprepError(f"{describe(i)}: {value}")
                progress.advance(weights[i])
                yield value
            return
        size = _pool_size(executor.workers)
        pool = _pool(size)
        try:
            yield from _ordered(pool, fn, args_list, size, describe, weights, progress)
        except BaseException as exc:
            if isinstance(exc, KeyboardInterrupt) or getattr(pool, "_broken", False):
                _drop_pool(size, terminate=True)
            raise


_POOLS: dict[int, ProcessPoolExecutor] = {}


def _pool_size(workers: int) -> int:
    """Pool processes for `workers` workers: this process is the last worker (see `_ordered`)."""
    return max(1, workers - 1)


def _pool(workers: int) -> ProcessPoolExecutor:
    """One spawn pool per worker count, kept for the life of the process: the stages of a run (count
    then merge, say) share its warm workers instead of paying the start-up of fresh ones."""
    pool = _POOLS.get(workers)
    if pool is None or getattr(pool, "_broken", False) or getattr(pool, "_shutdown_thread", False):
        pool = ProcessPoolExecutor(
            max_workers=workers,
            mp_context=multiprocessing.get_context("spawn"),
            initializer=_worker_init,
            initargs=(os.getpid(),),
        )
        _POOLS[workers] = pool
    return pool


def _warm(modules: tuple[str, ...]) -> None:
    """In a new worker: import what its tasks will need, before they arrive."""
    import importlib

    for name in modules:
        importlib.import_module(name)


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
    size = _pool_size(executor.workers)
    pool = _pool(size)
    for _ in range(min(size, tasks)):
        try:
            with _workers_ignore_sigint():
                pool.submit(_warm, tuple(modules))
        except BrokenProcessPool:  # reported by map_tasks, with the task at fault
            return


def pool_running(workers: int) -> bool:
    """Is the kept pool for `workers` workers already started (so more tasks on it cost no
    start-up)?"""
    pool = _POOLS.get(_pool_size(workers))
    return (
        pool is not None
        and not getattr(pool, "_broken", False)
        and not getattr(pool, "_shutdown_thread", False)
    )


def _drop_pool(workers: int, *, terminate: bool) -> None:
    """Forget a pool; with `terminate`, kill its processes now (after Ctrl-C or a dead worker).

    Futures are not cancelled when terminating: the pool's own thread then fails them, which it
    cannot do to a cancelled future without an error (CPython 3.11).
    """
    pool = _POOLS.pop(workers, None)
    if pool is None:
        return
    if terminate:
        _kill(pool)
    pool.shutdown(wait=not terminate, cancel_futures=not terminate)


def _kill(pool: ProcessPoolExecutor) -> None:
    for proc in list((getattr(pool, "_processes", None) or {}).values()):
        try:
            proc.kill()  # workers keep no state worth saving: tasks record their work atomically
        except (OSError, AttributeError, ValueError):  # pragma: no cover - already gone
            pass


def kill_pools() -> None:
    """Kill every kept worker process at once (Ctrl-C): ``kill_pools()``."""
    for pool in list(_POOLS.values()):
        _kill(pool)
    _POOLS.clear()


@contextlib.contextmanager
def _workers_ignore_sigint() -> Iterator[None]:
    """Start worker processes with Ctrl-C ignored from their first instruction.

    A pool spawns its processes inside ``submit``. A spawned process inherits an ignored SIGINT
    (not a handler), so for that moment the driver ignores it too, with the signal blocked so that
    one arriving meanwhile stays pending and reaches the driver's own handler right after.
    Without this a worker still importing maskprep would print a traceback on Ctrl-C.
    """
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    old_mask = signal.pthread_sigmask(signal.SIG_BLOCK, {signal.SIGINT})
    old = signal.signal(signal.SIGINT, signal.SIG_IGN)
    try:
        yield
    finally:
        signal.signal(signal.SIGINT, old)
        signal.pthread_sigmask(signal.SIG_SETMASK, old_mask)


def shutdown_pools() -> None:
    """Stop the kept worker processes (they also stop when this process exits):
    ``shutdown_pools()``."""
    for workers in list(_POOLS):
        _drop_pool(workers, terminate=False)


def _ordered(
    pool: ProcessPoolExecutor,
    fn: Callable[..., Any],
    args_list: Sequence[tuple[Any, ...]],
    workers: int,
    describe: Callable[[int], str],
    weights: list[float],
    progress: Progress,
) -> Iterator[Any]:
    """Keep a bounded window of tasks in flight on the pool; yield results in order.

    This process is a worker too: whenever no result is ready and tasks remain that
    are not yet sent, it runs the next one itself (its tasks start at once, while the
    pool's processes are still starting, and ``--workers N`` costs N - 1 extra
    processes). Results are the same whoever computes them, so outputs do not change.
    """
    n = len(args_list)
    futures: dict[int, Any] = {}
    done: dict[int, Any] = {}
    nxt = 0
    emit = 0
    cwd = os.getcwd()
    failing = -1  # index of the task that failed: the tasks sent before it still finish

    def died(i: int) -> MaskprepError:
        nonlocal failing
        failing = i
        return MaskprepError(
            f"{describe(i)}: a worker process died while running this task (killed, or out of "
            "memory?); finished tasks are kept for --resume; fewer --workers or a smaller "
            "--memory may help"
        )

    def send(limit: int) -> None:  # tasks to the pool until `limit` are unfinished there
        nonlocal nxt
        while nxt < n and len(futures) < limit:
            try:
                with _workers_ignore_sigint():
                    futures[nxt] = pool.submit(_call_local, cwd, fn, args_list[nxt])
            except BrokenProcessPool:
                raise died(nxt) from None
            nxt += 1

    def collect(ready: list[int]) -> None:
        for i in sorted(ready):
            try:
                ok, value = futures.pop(i).result()
            except BrokenProcessPool:
                raise died(i) from None
            if not ok:
                raise failed(i, value)
            progress.advance(weights[i])
            done[i] = value

    def failed(i: int, message: str) -> MaskprepError:
        nonlocal failing
        failing = i
        return MaskprepError(f"{describe(i)}: {message}")

    try:
        while emit < n:
            collect([i for i, f in futures.items() if f.done()])
            if emit in done:
                yield done.pop(emit)
                emit += 1
                continue
            send(workers)  # one task running in each pool process
            if nxt < n:  # and one here; meanwhile one more waits for each pool process
                i = nxt
                nxt += 1
                send(2 * workers)
                ok, value = _call(fn, args_list[i])
                if not ok:
                    raise failed(i, value)
                progress.advance(weights[i])
                done[i] = value
                continue
            wait(list(futures.values()), return_when=FIRST_COMPLETED)
    except KeyboardInterrupt:  # the caller kills the pool; cancelled futures would upset its thread
        raise
    except BaseException:  # a failed task, or the caller stopped early
        # tasks before the failed one finish (and record their work, for --resume); later ones
        # that have not started are dropped
        running = [f for i, f in futures.items() if i < failing or not f.cancel()]
        if running and not getattr(pool, "_broken", False):
            wait(running)  # tasks already running finish and record their work (for --resume)
        raise


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
                raise MaskprepError(f"{describe(i)}: {value}")
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

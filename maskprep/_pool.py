"""The local process pool behind `maskprep.execute.map_tasks`: workers, and tasks in order.

One spawn pool per worker count is kept for the life of the process, so the stages
of a run share warm workers. ``--workers N`` starts N - 1 pool processes: the driver
is the N-th worker (`ordered` runs a task itself whenever no result is ready), so its
tasks start at once while the pool's processes are still importing. Each pool
process runs one tokenizer thread and no encoding look-ahead thread, keeps freed memory for
reuse (`maskprep._malloc`), ignores Ctrl-C
(the driver handles it and kills the pool) and, on Linux, dies with the driver.
This module imports no stage.
"""

from __future__ import annotations

import contextlib
import multiprocessing
import os
import signal
import sys
import threading
import traceback
from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
from concurrent.futures.process import BrokenProcessPool
from typing import Any, Callable, Iterator, Sequence

from ._malloc import reuse_freed_memory
from .errors import MaskprepError, PartError, PartMessage, os_error_text, task_error
from .progress import Progress

__all__ = ["ENCODE_AHEAD_ENV", "ONE_THREAD", "call", "no_lookahead", "get_pool", "pool_size",
           "pool_running", "drop_pool", "kill_pools", "shutdown_pools", "ordered",
           "workers_ignore_sigint", "warm"]

ONE_THREAD = {"RAYON_NUM_THREADS": "1", "TOKENIZERS_PARALLELISM": "false"}


def call(fn: Callable[..., Any], args: tuple[Any, ...]) -> tuple[bool, Any]:
    """Run one task; failures come back as (False, message) so every scheduler reports them
    alike."""
    try:
        return True, fn(*args)
    except MaskprepError as exc:
        return False, PartMessage(exc) if isinstance(exc, PartError) else str(exc)
    except OSError as exc:  # an OS error is the user's to fix: one line, no traceback
        return False, os_error_text(exc)
    except MemoryError:
        return False, "out of memory (lower --memory or --workers, or free memory)"
    except Exception as exc:  # reported with the task's description by the driver
        return False, f"{type(exc).__name__}: {exc}\n{traceback.format_exc(limit=6)}"


def _call_local(cwd: str, fn: Callable[..., Any], args: tuple[Any, ...]) -> tuple[bool, Any]:
    """`call` in a pool worker, from the driver's current directory (a kept pool outlives a
    chdir)."""
    if os.getcwd() != cwd:
        os.chdir(cwd)
    return call(fn, args)


ENCODE_AHEAD_ENV = "MASKPREP_ENCODE_AHEAD"


def no_lookahead() -> None:
    """Workers share the cores with other workers: no encoding thread beside the task's own.

    Said through the environment (read by `tokenizer.encoding.encode_stream`), so this
    module imports no stage.
    """
    os.environ[ENCODE_AHEAD_ENV] = "0"


def _worker_init(parent: int) -> None:
    """Pool worker start-up: one tokenizer thread, die with the driver, leave Ctrl-C to the
    driver."""
    os.environ.update(ONE_THREAD)
    no_lookahead()
    reuse_freed_memory()
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    if sys.platform.startswith("linux"):
        try:
            import ctypes

            ctypes.CDLL(None, use_errno=True).prctl(1, signal.SIGKILL)  # 1 = PR_SET_PDEATHSIG
        except (OSError, AttributeError):  # pragma: no cover - no prctl
            pass
    if os.getppid() != parent:  # the driver died before the line above took effect
        os._exit(1)


_POOLS: dict[int, ProcessPoolExecutor] = {}


def pool_size(workers: int) -> int:
    """Pool processes for `workers` workers: this process is the last worker (see `ordered`)."""
    return max(1, workers - 1)


def get_pool(workers: int) -> ProcessPoolExecutor:
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


def warm(modules: tuple[str, ...]) -> None:
    """In a new worker: import what its tasks will need, before they arrive."""
    import importlib

    for name in modules:
        importlib.import_module(name)


def pool_running(workers: int) -> bool:
    """Is the kept pool for `workers` workers already started (so more tasks on it cost no
    start-up)?"""
    pool = _POOLS.get(pool_size(workers))
    return (
        pool is not None
        and not getattr(pool, "_broken", False)
        and not getattr(pool, "_shutdown_thread", False)
    )


def drop_pool(workers: int, *, terminate: bool) -> None:
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
def workers_ignore_sigint() -> Iterator[None]:
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


def shutdown_pools(*, wait: bool = True) -> None:
    """Stop the kept worker processes (they also stop when this process exits):
    ``shutdown_pools()``.

    ``wait=False`` (the command line's last step, `maskprep._interrupt.finish`, once every
    task's result is in): the workers are killed instead of waited for, as after Ctrl-C.
    They are idle, or still starting if the command needed fewer of them; waiting for each
    to tear its interpreter down cost about 0.05 s at the end of every command, and a worker
    left to start on its own after the command ended would fail to find the pool's
    semaphores.
    """
    for workers in list(_POOLS):
        drop_pool(workers, terminate=not wait)


def ordered(
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
                with workers_ignore_sigint():
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
        return task_error(describe(i), message)

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
                ok, value = call(fn, args_list[i])
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



"""Run plain task functions on a local process pool or a Dask cluster.

A task function is an ordinary top-level function taking picklable arguments
and returning a picklable result (usually a small summary; large results are
written to files by the task itself). `map_tasks` runs one function over a list
of argument tuples and yields the results *in task order*, whatever order the
workers finish in, so drivers are deterministic by construction.

With `workers=1` tasks run in this process (no pickling, easiest to debug).
With `workers>1` a `spawn` process pool is used (the tokenizer library's own
threads do not survive a fork). With `dask="tcp://host:8786"` tasks go to a
running Dask scheduler through `distributed.Client`; dask is imported only
then. A task that raises is reported with the task's description and the run
stops with a `MaskprepError`.

What it does not do: retry, or keep state between runs (resume state is kept
by each stage in its output directory).
"""

from __future__ import annotations

import multiprocessing
import os
import traceback
from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
from dataclasses import dataclass
from typing import Any, Callable, Iterator, Sequence

from .errors import MaskprepError
from .progress import Progress


@dataclass(frozen=True)
class Executor:
    """Where tasks run: ``Executor(workers=2)`` or ``Executor(dask="tcp://10.0.0.5:8786")``."""

    workers: int = 1
    dask: str | None = None
    quiet: bool = False

    def __post_init__(self) -> None:
        if not isinstance(self.workers, int) or self.workers < 1:
            raise MaskprepError(f"--workers: expected a positive whole number, got {self.workers!r}")
        if self.workers > 1024:
            raise MaskprepError(f"--workers: {self.workers} is absurd; use at most 1024")


def default_workers() -> int:
    """All cores this process may use."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover - not Linux
        return max(1, os.cpu_count() or 1)


def _worker_init() -> None:
    # One tokenizer thread per worker process: the pool provides the parallelism.
    os.environ["RAYON_NUM_THREADS"] = "1"
    os.environ["TOKENIZERS_PARALLELISM"] = "false"


def _call(fn: Callable[..., Any], args: tuple[Any, ...]) -> tuple[bool, Any]:
    try:
        return True, fn(*args)
    except MaskprepError as exc:
        return False, str(exc)
    except Exception as exc:  # reported with the task's description by the driver
        return False, f"{type(exc).__name__}: {exc}\n{traceback.format_exc(limit=6)}"


def map_tasks(fn: Callable[..., Any], args_list: Sequence[tuple[Any, ...]], *, executor: Executor = Executor(),
              label: str = "tasks", describe: Callable[[int], str] | None = None,
              weights: Sequence[float] | None = None, unit: str = "tasks") -> Iterator[Any]:
    """Run `fn(*args)` for each args tuple; yield results in task order.

    >>> list(map_tasks(pow, [(2, 3), (3, 2)]))
    [8, 9]
    """
    n = len(args_list)
    weights = list(weights) if weights is not None else [1.0] * n
    total = float(sum(weights))
    describe = describe or (lambda i: f"task {i}")
    with Progress(label, total=total, unit=unit, quiet=executor.quiet) as progress:
        if executor.dask:
            yield from _map_dask(fn, args_list, executor, describe, weights, progress)
            return
        if executor.workers == 1 or n <= 1:
            for i, args in enumerate(args_list):
                ok, value = _call(fn, args)
                if not ok:
                    raise MaskprepError(f"{describe(i)}: {value}")
                progress.advance(weights[i])
                yield value
            return
        ctx = multiprocessing.get_context("spawn")
        with ProcessPoolExecutor(max_workers=min(executor.workers, n), mp_context=ctx,
                                 initializer=_worker_init) as pool:
            yield from _ordered(pool, fn, args_list, executor.workers, describe, weights, progress)


def _ordered(pool: ProcessPoolExecutor, fn: Callable[..., Any], args_list: Sequence[tuple[Any, ...]],
             workers: int, describe: Callable[[int], str], weights: list[float],
             progress: Progress) -> Iterator[Any]:
    """Keep a bounded window of tasks in flight; yield results in order."""
    n = len(args_list)
    window = max(2 * workers, 2)
    futures: dict[int, Any] = {}
    done: dict[int, Any] = {}
    nxt = 0
    emit = 0
    try:
        while emit < n:
            while nxt < n and len(futures) + len(done) < window:
                futures[nxt] = pool.submit(_call, fn, args_list[nxt])
                nxt += 1
            if emit in done:
                yield done.pop(emit)
                emit += 1
                continue
            finished, _ = wait(list(futures.values()), return_when=FIRST_COMPLETED)
            for i in [i for i, f in futures.items() if f in finished]:
                ok, value = futures.pop(i).result()
                if not ok:
                    raise MaskprepError(f"{describe(i)}: {value}")
                progress.advance(weights[i])
                done[i] = value
    finally:
        for f in futures.values():
            f.cancel()


def _map_dask(fn: Callable[..., Any], args_list: Sequence[tuple[Any, ...]], executor: Executor,
              describe: Callable[[int], str], weights: list[float], progress: Progress) -> Iterator[Any]:
    try:
        from distributed import Client, as_completed
    except ImportError:
        raise MaskprepError("--dask needs the dask extra: pip install 'maskprep[dask]'") from None
    try:
        client = Client(executor.dask, timeout="10s", set_as_default=False)
    except Exception as exc:
        raise MaskprepError(f"--dask {executor.dask}: cannot reach the scheduler ({exc})") from None
    try:
        futures = [client.submit(_call, fn, args, pure=False, key=f"maskprep-{fn.__name__}-{i}-{os.getpid()}-{id(args_list)}")
                   for i, args in enumerate(args_list)]
        index = {f.key: i for i, f in enumerate(futures)}
        done: dict[int, Any] = {}
        emit = 0
        for fut in as_completed(futures, loop=client.loop):
            i = index[fut.key]
            ok, value = fut.result()
            if not ok:
                for f in futures:
                    f.cancel()
                raise MaskprepError(f"{describe(i)}: {value}")
            progress.advance(weights[i])
            done[i] = value
            while emit in done:
                yield done.pop(emit)
                emit += 1
    finally:
        client.close()

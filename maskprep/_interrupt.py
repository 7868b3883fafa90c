"""Ctrl-C for the command line: stop within 2 seconds, no traceback, exit status 130.

`install` (called once by `cli.main`) puts in place:

- a SIGINT handler: the first Ctrl-C raises `KeyboardInterrupt` in the main
  thread (so ``finally`` blocks run: temporary files removed, locks released)
  and ignores every later one, so clean-up is never interrupted itself;
- a watchdog thread woken by the signal itself (``signal.set_wakeup_fd``, so
  it runs even while the main thread is inside a long C call): if the process
  has not ended 1.5 s after the first Ctrl-C, it prints the message, kills
  the worker processes and ends the process;
- a quiet ``threading.excepthook`` once interrupted (threads of the process
  pool may fail while their workers are killed; nothing is worth showing).

`finish` ends the process: worker pools stopped (killed after Ctrl-C), output
flushed, then ``os._exit``, so no interpreter shutdown step (joining pool
threads, ``threading._shutdown``) can hang or print after the command is done.
An interrupted run leaves what a killed one leaves: finished tasks recorded,
nothing that looks finished, the output lock released by the OS; ``--resume``
continues it.

Library calls are not affected: they see a plain `KeyboardInterrupt`.
"""

from __future__ import annotations

import os
import signal
import socket
import sys
import threading
import time
from typing import Any

__all__ = ["install", "finish", "say_interrupted", "MESSAGE", "GRACE_SECONDS"]

from ._cli_start import MESSAGE
GRACE_SECONDS = 1.5

_state: dict[str, Any] = {"interrupted": False, "said": False}
_lock = threading.Lock()


def say_interrupted() -> None:
    """Print the message once, whoever gets there first (handler, watchdog or `finish`)."""
    with _lock:
        if _state["said"]:
            return
        _state["said"] = bool(_state.get("installed"))  # outside `main` (tests): every time
    try:
        sys.stderr.write(MESSAGE + "\n")
        sys.stderr.flush()
    except (OSError, ValueError):  # stderr closed
        pass


def _on_sigint(signum: int, frame: Any) -> None:
    _state["interrupted"] = True
    signal.signal(signal.SIGINT, signal.SIG_IGN)  # a second Ctrl-C must not break the clean-up
    threading.excepthook = _quiet
    raise KeyboardInterrupt


def _quiet(args: Any) -> None:
    return None


def _watchdog(sock: socket.socket) -> None:
    signal.pthread_sigmask(signal.SIG_BLOCK, {signal.SIGINT})  # the main thread takes the signal
    while True:
        try:
            data = sock.recv(64)
        except InterruptedError:
            continue
        except OSError:
            return
        if not data:
            return
        if signal.SIGINT in data:
            break
    time.sleep(GRACE_SECONDS)
    say_interrupted()
    _kill_workers()
    os._exit(130)


def install() -> None:
    """Install the handler and the watchdog (main thread only; once per process)."""
    if threading.current_thread() is not threading.main_thread() or _state.get("installed"):
        return
    _state["installed"] = True
    reader, writer = socket.socketpair()
    reader.setblocking(True)
    writer.setblocking(False)
    _state["sockets"] = (reader, writer)
    signal.set_wakeup_fd(writer.fileno(), warn_on_full_buffer=False)
    signal.signal(signal.SIGINT, _on_sigint)
    watchdog = threading.Thread(
        target=_watchdog, args=(reader,), name="maskprep-interrupt", daemon=True
    )
    watchdog.start()


def _kill_workers() -> None:
    if "maskprep._pool" not in sys.modules:  # no pool was ever started: nothing to import
        return
    try:
        from ._pool import kill_pools

        kill_pools()
    except Exception:  # pragma: no cover - nothing more can be done
        pass


def finish(code: int) -> None:
    """Exit with `code` (130 after Ctrl-C): pools stopped, output flushed, no exit hooks run."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    if code == 130 or _state["interrupted"]:
        code = 130
        say_interrupted()
        _kill_workers()
    elif "maskprep._pool" in sys.modules:  # else no pool was ever started
        try:
            from ._pool import shutdown_pools

            threading.excepthook = _quiet  # the pool's thread may see its workers go
            shutdown_pools(wait=False)  # idle: killed, not waited for
        except Exception:  # pragma: no cover
            _kill_workers()
    _release_semaphores()
    for stream in (sys.stdout, sys.stderr):
        try:
            stream.flush()
        except (OSError, ValueError):
            pass
    os._exit(code)


def _release_semaphores() -> None:
    """Unlink the pool's named semaphores (what interpreter exit would do), so the resource tracker
    finds nothing left and prints no warning."""
    try:
        from multiprocessing import util

        # exit priority >= 0: semaphore unlinks and queue closes, no joins
        util._run_finalizers(0)  # type: ignore[attr-defined]
    except Exception:  # pragma: no cover
        pass

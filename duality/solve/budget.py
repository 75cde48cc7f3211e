"""Wall-clock budgets for work that might not finish (mostly symbolic solving).

:func:`run_with_budget` runs a function in a worker process and kills the worker at the
deadline, so a hung ``sympy.solve`` can never hang the caller.  It works from any thread:
the worker is forked directly when the caller's process runs a single thread, and is
started from a fork server otherwise (forking a multi-threaded process is unsafe).

The function's result travels back pickled, so it must be picklable; an exception raised
in the worker is re-raised in the caller with its type and message.  With the fork server
the function and its arguments are pickled too, so pass a module-level function.

A worker started by the fork server or by spawn would normally import the caller's
``__main__`` module first.  Under a script runner (the Streamlit app runs its page script as
``__main__`` in a thread) that would run the whole script again in the worker, so while a
worker starts, ``__main__`` is hidden whenever the function does not come from it.
"""
from __future__ import annotations

import multiprocessing as mp
import contextlib
import pickle
import sys
import threading
import types
import time
import traceback
from typing import Any, Callable, TypeVar

from ..errors import BudgetExceeded

T = TypeVar("T")

#: Modules imported once by the fork server, so workers started from it begin warm.
FORKSERVER_PRELOAD = ("sympy", "numpy")
_preload_lock = threading.Lock()
_preload_done = False
_main_lock = threading.Lock()


class WorkerError(RuntimeError):
    """An exception from the worker that could not be sent back as itself."""


class _RemoteTraceback(Exception):
    """Carries the worker's traceback text as the ``__cause__`` of a re-raised error."""

    def __init__(self, text: str):
        super().__init__(text)
        self.text = text

    def __str__(self) -> str:
        return "\n" + self.text


def start_method() -> str:
    """The start method :func:`run_with_budget` would use from the calling thread.

    Returns ``"fork"`` when the process runs a single thread (cheap, and the function
    need not be picklable), otherwise ``"forkserver"`` (``"spawn"`` where neither exists).
    """
    methods = mp.get_all_start_methods()
    if threading.active_count() == 1 and "fork" in methods:
        return "fork"
    return "forkserver" if "forkserver" in methods else "spawn"


def run_with_budget(fn: Callable[..., T], *args: Any, budget: float | None,
                    **kwargs: Any) -> T:
    """Call ``fn(*args, **kwargs)`` and return its result within ``budget`` seconds.

    Parameters
    ----------
    fn : callable
        The work.  Its result must be picklable.  When called from a process running
        more than one thread, ``fn`` and its arguments must be picklable too (use a
        module-level function).
    *args, **kwargs
        Passed to ``fn``.  (A keyword named ``budget`` cannot be passed through.)
    budget : float or None
        Wall-clock limit in seconds, counted from this call (including the worker's
        start-up).  ``None`` runs ``fn`` in this process with no limit.

    Returns
    -------
    The value returned by ``fn``.

    Raises
    ------
    BudgetExceeded
        The worker did not finish in time (it is killed), or ``budget`` is not positive.
    Exception
        Whatever ``fn`` raised, re-raised here with its message; its traceback in the
        worker is attached as the ``__cause__``.  Exceptions that cannot be pickled come
        back as :class:`WorkerError` naming the original type.

    Notes
    -----
    The deadline is ``t0 + budget`` with ``t0`` the time of the call; the worker is killed
    with SIGKILL at the deadline, so no clean-up code of ``fn`` runs.
    """
    if budget is None:
        return fn(*args, **kwargs)
    if not budget > 0:
        raise BudgetExceeded(f"no time left in the budget ({budget:g} s) for {_name(fn)}")
    deadline = time.monotonic() + float(budget)
    method = start_method()
    ctx = mp.get_context(method)
    if method == "forkserver":
        _preload(ctx, fn)
    receiver, sender = ctx.Pipe(duplex=False)
    proc = ctx.Process(target=_worker, args=(sender, fn, args, kwargs), daemon=True)
    with _main_hidden(method, fn):
        proc.start()
    sender.close()
    try:
        ready = receiver.poll(max(0.0, deadline - time.monotonic()))
        if not ready:
            raise BudgetExceeded(f"{_name(fn)} did not finish within its budget of "
                                 f"{budget:g} s")
        try:
            status, payload, tb_text = receiver.recv()
        except EOFError:
            proc.join(1.0)
            raise WorkerError(f"the worker running {_name(fn)} died without an answer "
                              f"(exit code {proc.exitcode})") from None
        except Exception as exc:  # the answer could not be unpickled here
            raise WorkerError(f"the answer of {_name(fn)} could not be read back: "
                              f"{type(exc).__name__}: {exc}") from None
    finally:
        receiver.close()
        if proc.is_alive():
            proc.kill()
        proc.join()
    if status == "ok":
        return payload
    raise payload from _RemoteTraceback(tb_text)


def _worker(sender, fn: Callable, args: tuple, kwargs: dict) -> None:
    """Body of the worker process: run, then send ``(status, payload, traceback)``."""
    try:
        message = ("ok", fn(*args, **kwargs), "")
    except BaseException as exc:  # noqa: BLE001 - everything goes back to the caller
        message = ("error", exc, traceback.format_exc())
    try:
        data = pickle.dumps(message)
    except Exception as exc:  # result or exception not picklable
        if message[0] == "ok":
            err = WorkerError(f"the result of {_name(fn)} cannot be sent back from the "
                              f"worker: {type(exc).__name__}: {exc}")
        else:
            err = WorkerError(f"{type(message[1]).__name__}: {message[1]}")
        data = pickle.dumps(("error", err, message[2]))
    sender.send_bytes(data)
    sender.close()


@contextlib.contextmanager
def _main_hidden(method: str, fn: Callable):
    """Hide ``__main__`` from a starting spawn or fork-server worker that does not need it.

    Such workers re-import the module found as ``sys.modules["__main__"]`` (by its file
    path) before they run anything.  When ``fn`` lives in a proper module, an empty
    stand-in takes that place while the worker (and, the first time, the fork server)
    starts, so a page script run as ``__main__`` is never executed again in the worker.
    """
    if method == "fork" or getattr(fn, "__module__", None) == "__main__":
        yield
        return
    with _main_lock:
        real = sys.modules.get("__main__")
        sys.modules["__main__"] = types.ModuleType("__main__")
        try:
            yield
        finally:
            if real is not None:
                sys.modules["__main__"] = real


def _preload(ctx, fn: Callable) -> None:
    """Ask the fork server (before it first starts) to import the usual heavy modules."""
    global _preload_done
    with _preload_lock:
        if _preload_done:
            return
        modules = list(FORKSERVER_PRELOAD)
        mod = getattr(fn, "__module__", None)
        if mod and mod != "__main__" and mod not in modules:
            modules.append(mod)
        ctx.set_forkserver_preload(modules)
        _preload_done = True


def _name(fn: Callable) -> str:
    return getattr(fn, "__qualname__", None) or getattr(fn, "__name__", None) or repr(fn)


__all__ = ["run_with_budget", "start_method", "WorkerError", "FORKSERVER_PRELOAD"]

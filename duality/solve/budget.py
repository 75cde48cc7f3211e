"""Budgets in CPU seconds for work that might not finish (mostly symbolic solving).

A budget counts the CPU seconds of the work itself, not wall-clock time, so the same call
gives the same answer on an idle machine and on a busy one: a process that gets half a core
takes twice as long but is charged the same.  Two pieces make that up:

* :class:`Budget`, an account of CPU seconds that several steps draw on (a solver chain
  tries its methods one after another on one account), with :meth:`Budget.measure` for
  work done in this process (numeric passes) and :meth:`Budget.run` for work done in a
  worker;
* :func:`run_with_budget`, which runs a function in a warm worker process, reads the
  worker's CPU time while it works and kills it when the budget is used up, so a hung
  ``sympy.solve`` can never hang the caller.

Workers are kept warm between calls (started once, then reused; a killed worker is
replaced), so start-up is neither charged nor paid again.  A worker is forked directly
when the caller's process runs a single thread, and is started from a fork server otherwise
(forking a multi-threaded process is unsafe).  Nothing outlives its budget or its owner:

* a wall-clock backstop (``BACKSTOP_FACTOR`` × budget + ``BACKSTOP_GRACE`` seconds) kills
  a worker that is blocked rather than computing;
* a worker dies with the process that started it: on Linux through the parent-death
  signal (``prctl(PR_SET_PDEATHSIG, SIGKILL)``), everywhere through a watchdog thread that
  exits the worker once the owning process is gone.

The function and its arguments travel to the worker pickled (so pass a module-level
function), and the result travels back pickled; an exception raised in the worker is
re-raised in the caller with its type and message.  A function that cannot be pickled runs
in a one-off forked process instead, where that is possible.

A worker started by the fork server would normally import the caller's ``__main__`` module
first.  Under a script runner (the Streamlit app runs its page script as ``__main__`` in a
thread) that would run the whole script again in the worker, so while a worker starts,
``__main__`` is hidden; a function defined in ``__main__`` itself gets a one-off worker that
sees it.
"""
from __future__ import annotations

import contextlib
import ctypes
import importlib
import multiprocessing as mp
import os
import pickle
import signal
import sys
import threading
import time
import traceback
import types
from typing import Any, Callable, Iterator, TypeVar

from ..errors import BudgetExceeded

T = TypeVar("T")

#: Modules a worker imports before its first piece of work (so the import is never charged
#: to a budget); the fork server imports them once, so workers started from it begin warm.
#: ``sympy.physics.units`` is imported by the first call of ``sympy.simplify``.
FORKSERVER_PRELOAD = ("sympy", "numpy", "sympy.physics.units")
#: The wall-clock backstop of a worker: ``BACKSTOP_FACTOR * budget + BACKSTOP_GRACE`` s.
BACKSTOP_FACTOR = 20.0
BACKSTOP_GRACE = 5.0
#: Warm workers kept between calls.
MAX_IDLE = 2
#: How often (seconds) a worker checks that its owner is still alive.
WATCHDOG_PERIOD = 0.25

_preload_lock = threading.Lock()
_preload_done = False
_main_lock = threading.Lock()
_pool_lock = threading.Lock()
_idle: list["_Worker"] = []
_worker_cpu = [0.0]  # CPU seconds used by workers of this process, in all


class WorkerError(RuntimeError):
    """An exception from the worker that could not be sent back as itself."""


class _RemoteTraceback(Exception):
    """Carries the worker's traceback text as the ``__cause__`` of a re-raised error."""

    def __init__(self, text: str):
        super().__init__(text)
        self.text = text

    def __str__(self) -> str:
        return "\n" + self.text


# -- the account ----------------------------------------------------------------------------
class Budget:
    """An account of CPU seconds drawn on by several steps of one piece of work.

    Parameters
    ----------
    seconds : float or None
        CPU seconds allowed in all; ``None`` is no limit.
    parent : Budget, optional
        An account this one is carved out of: what is charged here is charged there too,
        and no more than the parent has left can be spent.

    Notes
    -----
    Work in a worker process (:meth:`run`) is charged the CPU time the worker used; work
    in this process (:meth:`measure`) is charged the CPU time of the calling thread.
    Neither depends on how busy the machine is, so a step that fits the budget on an idle
    machine fits it on a loaded one.
    """

    def __init__(self, seconds: float | None, *, parent: "Budget | None" = None):
        if seconds is not None:
            seconds = float(seconds)
        self.seconds = seconds
        self.parent = parent
        self.spent = 0.0
        self._lock = threading.Lock()

    @classmethod
    def of(cls, budget: "Budget | float | None") -> "Budget":
        """``budget`` itself when it is an account, else a new account of that many seconds."""
        return budget if isinstance(budget, Budget) else cls(budget)

    @property
    def remaining(self) -> float | None:
        """CPU seconds left (``None`` when unlimited)."""
        own = None if self.seconds is None else max(0.0, self.seconds - self.spent)
        up = None if self.parent is None else self.parent.remaining
        if own is None:
            return up
        return own if up is None else min(own, up)

    @property
    def exhausted(self) -> bool:
        left = self.remaining
        return left is not None and left <= 0.0

    def charge(self, seconds: float) -> None:
        """Record ``seconds`` of CPU time spent (here and in every parent account)."""
        with self._lock:
            self.spent += max(0.0, float(seconds))
        if self.parent is not None:
            self.parent.charge(seconds)

    def share(self, seconds: float | None) -> "Budget":
        """A sub-account of at most ``seconds`` (and at most what is left here)."""
        return Budget(seconds, parent=self)

    @contextlib.contextmanager
    def measure(self) -> Iterator["Budget"]:
        """Charge the CPU time of the calling thread spent inside the ``with`` block."""
        t0 = time.thread_time()
        try:
            yield self
        finally:
            self.charge(time.thread_time() - t0)

    def require(self, what: str) -> None:
        """Raise :class:`BudgetExceeded` (kind ``"spent"``) when nothing is left."""
        if self.exhausted:
            raise BudgetExceeded(f"no CPU time left in the budget of {self.total:g} s for "
                                 f"{what}", kind="spent", seconds=self.total)

    @property
    def total(self) -> float:
        """The limit that applies (the smallest of this account and its parents)."""
        limits = []
        acc: Budget | None = self
        while acc is not None:
            if acc.seconds is not None:
                limits.append(acc.seconds)
            acc = acc.parent
        return min(limits) if limits else float("inf")

    def run(self, fn: Callable[..., T], *args: Any, **kwargs: Any) -> T:
        """``run_with_budget(fn, *args, budget=self, **kwargs)``."""
        return run_with_budget(fn, *args, budget=self, **kwargs)

    def __repr__(self) -> str:
        lim = "unlimited" if self.seconds is None else f"{self.seconds:g} s"
        return f"Budget({lim}, spent {self.spent:.3g} s)"


# -- running work in a worker ---------------------------------------------------------------
def start_method() -> str:
    """The start method a new worker would use from the calling thread.

    Returns ``"fork"`` when the process runs a single thread (cheap, and the function
    need not be picklable), otherwise ``"forkserver"`` (``"spawn"`` where neither exists).
    """
    methods = mp.get_all_start_methods()
    if threading.active_count() == 1 and "fork" in methods:
        return "fork"
    return "forkserver" if "forkserver" in methods else "spawn"


def run_with_budget(fn: Callable[..., T], *args: Any, budget: "Budget | float | None",
                    **kwargs: Any) -> T:
    """Call ``fn(*args, **kwargs)`` in a worker and return its result within ``budget``.

    Parameters
    ----------
    fn : callable
        The work.  It and its arguments and result must be picklable (use a module-level
        function); a function that cannot be pickled runs in a one-off forked worker when
        the calling process runs a single thread.
    *args, **kwargs
        Passed to ``fn``.  (A keyword named ``budget`` cannot be passed through.)
    budget : Budget, float or None
        CPU seconds the worker may use, or an account to draw on (it is charged what the
        worker used).  ``None`` runs ``fn`` in this process with no limit.

    Returns
    -------
    The value returned by ``fn``.

    Raises
    ------
    BudgetExceeded
        The worker used the budget (``kind="cpu"``), the wall-clock backstop fired
        (``kind="wall"``), or nothing was left to start with (``kind="spent"``); a worker
        that is stopped is killed.
    Exception
        Whatever ``fn`` raised, re-raised here with its message; its traceback in the
        worker is attached as the ``__cause__``.  Exceptions that cannot be pickled come
        back as :class:`WorkerError` naming the original type.

    Notes
    -----
    The limit is the CPU time of the worker from the moment it receives the work, so
    start-up and waiting for a core are never charged.  The backstop is
    ``BACKSTOP_FACTOR * limit + BACKSTOP_GRACE`` wall-clock seconds; it only fires for a
    worker that is blocked or starved for far longer than any load explains.  A killed
    worker gets SIGKILL, so no clean-up code of ``fn`` runs.
    """
    if budget is None:
        return fn(*args, **kwargs)
    account = Budget.of(budget)
    limit = account.remaining
    if limit is None:
        with account.measure():
            return fn(*args, **kwargs)
    if not limit > 0:
        raise BudgetExceeded(f"no CPU time left in the budget ({account.total:g} s) for "
                             f"{_name(fn)}", kind="spent", seconds=account.total)
    one_off = (getattr(fn, "__module__", None) == "__main__"
               and start_method() != "fork")
    payload = None
    if not one_off:
        try:
            payload = pickle.dumps((fn, args, kwargs))
        except Exception:  # noqa: BLE001 - not picklable: a one-off forked worker sees it
            one_off = True
    if one_off:
        return _run_one_off(fn, args, kwargs, account, limit)
    worker = _acquire()
    status, value, tb_text = worker.call(payload, account, limit, _name(fn))
    if status == "unloadable":  # e.g. defined after the warm worker started
        return _run_one_off(fn, args, kwargs, account, limit)
    return _unpack(status, value, tb_text)


def _run_one_off(fn, args, kwargs, account: Budget, limit: float):
    method = start_method()
    if method != "fork":
        try:  # the fork server needs the work pickled
            pickle.dumps((fn, args, kwargs))
        except Exception as exc:  # noqa: BLE001
            raise WorkerError(f"{_name(fn)} cannot be sent to a worker process from a "
                              f"multi-threaded program: {type(exc).__name__}: {exc}") from None
    worker = _Worker(job=(fn, args, kwargs), main_needed=True)
    try:
        status, value, tb_text = worker.call(None, account, limit, _name(fn))
    finally:
        worker.kill()
    return _unpack(status, value, tb_text)


def _unpack(status, value, tb_text):
    if status == "ok":
        return value
    if status == "unloadable":
        raise WorkerError(f"the work could not be loaded in the worker: {value}")
    raise value from _RemoteTraceback(tb_text)


def _acquire() -> "_Worker":
    with _pool_lock:
        while _idle:
            w = _idle.pop()
            if w.alive():
                return w
            w.kill()
    return _Worker()


def _release(worker: "_Worker") -> None:
    with _pool_lock:
        if worker.alive() and len(_idle) < MAX_IDLE:
            _idle.append(worker)
            return
    worker.kill()


def shutdown_workers() -> None:
    """Stop every warm worker now (they also stop with this process)."""
    with _pool_lock:
        idle = list(_idle)
        _idle.clear()
    for w in idle:
        w.kill()


def worker_cpu_seconds() -> float:
    """CPU seconds used by the workers of this process so far (for benchmarks)."""
    with _pool_lock:
        return _worker_cpu[0]


def worker_pids() -> list[int]:
    """Process ids of the warm workers waiting for work (for diagnostics and tests)."""
    with _pool_lock:
        return [w.proc.pid for w in _idle if w.alive()]


class _Worker:
    """One worker process and the pipe to it; warm (reusable) unless given one ``job``."""

    def __init__(self, job: tuple | None = None, main_needed: bool = False):
        method = start_method()
        ctx = mp.get_context(method)
        if method == "forkserver":
            _preload(ctx)
        else:  # import once here, so that no forked worker pays for it again
            _import_preload()
        self.conn, child = ctx.Pipe()
        target = _serve if job is None else _serve_once
        extra = () if job is None else job
        self.proc = ctx.Process(target=target, args=(child, os.getpid()) + extra,
                                daemon=True, name="duality-worker")
        with _main_hidden(method, hide=not main_needed):
            self.proc.start()
        child.close()
        self.one_off = job is not None

    def alive(self) -> bool:
        return self.proc.is_alive()

    def cpu(self) -> float:
        """CPU seconds used by the worker so far (read before it is reaped)."""
        return _process_cpu(self.proc.pid)

    def kill(self) -> None:
        if self.proc.is_alive():
            self.proc.kill()
        self.proc.join()
        self.conn.close()

    def call(self, payload: bytes | None, account: Budget, limit: float, what: str):
        """Send the work (if any), wait within the limits, charge the account."""
        # A warm worker says when it has loaded the work (imports, unpickling), and only
        # then does its clock start; a one-off worker's time is all its own.
        started = payload is None
        start = 0.0 if started else None
        t0 = time.monotonic()
        backstop = BACKSTOP_FACTOR * limit + BACKSTOP_GRACE
        finished = False
        used = 0.0
        try:
            if payload is not None:
                self.conn.send_bytes(payload)
            wait = 0.002
            while True:
                if self.conn.poll(wait):
                    if started:
                        break
                    try:
                        data = self.conn.recv_bytes()
                    except (EOFError, OSError):
                        raise WorkerError(f"the worker for {what} died while loading the "
                                          "work") from None
                    if data:  # an answer straight away: the work could not be loaded
                        finished = True
                        break
                    started, start, wait = True, self.cpu(), 0.002
                    continue
                used = self.cpu() - start if started else 0.0
                if used > limit:
                    raise BudgetExceeded(f"{what} did not finish within its budget of "
                                         f"{limit:.3g} CPU s", kind="cpu", seconds=limit)
                if time.monotonic() - t0 > backstop:
                    raise BudgetExceeded(
                        f"{what} did not finish within {backstop:.3g} s of wall-clock time "
                        f"(the backstop of a {limit:.3g} CPU s budget; it used {used:.3g} "
                        "CPU s, so it was blocked or starved)", kind="wall", seconds=limit)
                if not self.proc.is_alive() and not self.conn.poll(0):
                    raise WorkerError(f"the worker running {what} died without an answer "
                                      f"(exit code {self.proc.exitcode})")
                wait = min(0.05, wait * 2)
            if not finished:
                try:
                    data = self.conn.recv_bytes()
                except (EOFError, OSError):
                    self.proc.join(1.0)
                    raise WorkerError(f"the worker running {what} died without an answer "
                                      f"(exit code {self.proc.exitcode})") from None
                used = max(used, self.cpu() - start)
                finished = True
        finally:
            spent = min(max(used, 0.0), limit) if not finished else max(used, 0.0)
            account.charge(spent)
            with _pool_lock:
                _worker_cpu[0] += max(used, 0.0)
            if not finished or self.one_off:
                self.kill()
        if not self.one_off:
            _release(self)
        try:
            return pickle.loads(data)
        except Exception as exc:  # the answer could not be unpickled here
            raise WorkerError(f"the answer of {what} could not be read back: "
                              f"{type(exc).__name__}: {exc}") from None


def _process_cpu(pid: int) -> float:
    """CPU seconds (user + system) used so far by process ``pid``."""
    try:
        with open(f"/proc/{pid}/stat", "rb") as fh:
            fields = fh.read().rsplit(b")", 1)[1].split()
        return (int(fields[11]) + int(fields[12])) / _CLK_TCK
    except (OSError, IndexError, ValueError):
        pass
    try:  # other systems: psutil when installed
        import psutil  # deferred: optional, only where /proc is missing
        t = psutil.Process(pid).cpu_times()
        return t.user + t.system
    except Exception:  # noqa: BLE001 - last resort: wall-clock time
        return time.monotonic()


try:
    _CLK_TCK = os.sysconf("SC_CLK_TCK")
except (ValueError, OSError, AttributeError):
    _CLK_TCK = 100


# -- inside the worker ------------------------------------------------------------------------
def _die_with_owner(owner: int) -> None:
    """Make this worker end when the process that owns it ends, however that happens."""
    if sys.platform.startswith("linux"):
        try:
            libc = ctypes.CDLL(None, use_errno=True)
            libc.prctl(1, int(signal.SIGKILL), 0, 0, 0)  # PR_SET_PDEATHSIG = 1
        except Exception:  # noqa: BLE001 - the watchdog below still applies
            pass
    try:  # Ctrl-C reaches the whole process group: the owner handles it and kills us
        signal.signal(signal.SIGINT, signal.SIG_IGN)
    except (ValueError, OSError):
        pass
    parent = os.getppid()
    if not _alive(owner) or (parent == 1 and owner != 1):  # orphaned before we began
        os._exit(1)

    def watch():
        while True:
            time.sleep(WATCHDOG_PERIOD)
            if os.getppid() != parent or not _alive(owner):
                os._exit(1)
    threading.Thread(target=watch, name="duality-watchdog", daemon=True).start()


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


def _serve(conn, owner: int) -> None:
    """Body of a warm worker: run each piece of work sent, answer, wait for the next."""
    _die_with_owner(owner)
    _import_preload()  # already done when forked from a warm process
    while True:
        try:
            data = conn.recv_bytes()
        except (EOFError, OSError):
            os._exit(0)
        try:
            fn, args, kwargs = pickle.loads(data)
        except BaseException as exc:  # noqa: BLE001 - the caller runs it elsewhere
            conn.send_bytes(pickle.dumps(("unloadable", f"{type(exc).__name__}: {exc}",
                                          traceback.format_exc())))
            continue
        conn.send_bytes(b"")  # loaded: the budget starts now
        conn.send_bytes(_answer(fn, args, kwargs))


def _serve_once(conn, owner: int, fn, args, kwargs) -> None:
    """Body of a one-off worker: the work came with the process."""
    _die_with_owner(owner)
    conn.send_bytes(_answer(fn, args, kwargs))
    conn.close()


def _answer(fn: Callable, args: tuple, kwargs: dict) -> bytes:
    """Run the work and pickle ``(status, payload, traceback)``."""
    try:
        message = ("ok", fn(*args, **kwargs), "")
    except BaseException as exc:  # noqa: BLE001 - everything goes back to the caller
        message = ("error", exc, traceback.format_exc())
    try:
        return pickle.dumps(message)
    except Exception as exc:  # result or exception not picklable
        if message[0] == "ok":
            err = WorkerError(f"the result of {_name(fn)} cannot be sent back from the "
                              f"worker: {type(exc).__name__}: {exc}")
        else:
            err = WorkerError(f"{type(message[1]).__name__}: {message[1]}")
        return pickle.dumps(("error", err, message[2]))


# -- start-up details -------------------------------------------------------------------------
@contextlib.contextmanager
def _main_hidden(method: str, hide: bool):
    """Hide ``__main__`` from a starting spawn or fork-server worker that does not need it.

    Such workers re-import the module found as ``sys.modules["__main__"]`` (by its file
    path) before they run anything.  An empty stand-in takes that place while the worker
    (and, the first time, the fork server) starts, so a page script run as ``__main__`` is
    never executed again in the worker.
    """
    if method == "fork" or not hide:
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


def _import_preload() -> None:
    for name in FORKSERVER_PRELOAD:
        if name not in sys.modules:
            try:
                importlib.import_module(name)
            except Exception:  # noqa: BLE001 - a missing extra is imported (or not) later
                pass


def _preload(ctx) -> None:
    """Ask the fork server (before it first starts) to import the usual heavy modules."""
    global _preload_done
    with _preload_lock:
        if _preload_done:
            return
        ctx.set_forkserver_preload(list(FORKSERVER_PRELOAD))
        _preload_done = True


def _name(fn: Callable) -> str:
    return getattr(fn, "__qualname__", None) or getattr(fn, "__name__", None) or repr(fn)


__all__ = ["Budget", "run_with_budget", "start_method", "shutdown_workers", "worker_pids",
           "worker_cpu_seconds",
           "WorkerError", "FORKSERVER_PRELOAD", "BACKSTOP_FACTOR", "BACKSTOP_GRACE"]

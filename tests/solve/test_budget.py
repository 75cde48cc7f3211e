"""Tests of duality.solve.budget: CPU-second budgets, warm workers, their lifetime
(expected behaviour: common practice, no source)."""
from __future__ import annotations

import os
import signal
import subprocess
import sys
import threading
import time
from pathlib import Path

import pytest

from duality.solve import budget as budget_mod
from duality.solve.budget import Budget, run_with_budget
from duality.errors import BudgetExceeded

ROOT = str(Path(__file__).resolve().parents[2])


def _add(a, b, *, c=0):
    return a + b + c


def _fail(message):
    raise ValueError(message)


def _sleep_long():
    time.sleep(30)
    return "woke up"


def _pid():
    return os.getpid()


def _spin():
    while True:
        pass


def _burn(n):
    return sum(i * i for i in range(n))


def test_returns_result_with_args_and_kwargs():
    assert run_with_budget(_add, 2, 3, c=4, budget=20.0) == 9


def test_runs_in_a_worker_process():
    assert run_with_budget(_pid, budget=20.0) != os.getpid()


def test_worker_value_error_is_reraised_with_message():
    with pytest.raises(ValueError, match="bad thing 42"):
        run_with_budget(_fail, "bad thing 42", budget=20.0)


def test_a_busy_worker_is_stopped_when_its_cpu_seconds_are_used():
    with pytest.raises(BudgetExceeded) as info:
        run_with_budget(_spin, budget=0.3)
    assert info.value.kind == "cpu" and info.value.seconds == pytest.approx(0.3)
    assert "_spin" in str(info.value) and "CPU s" in str(info.value)
    # the killed worker is replaced: the next call still works
    assert run_with_budget(_add, 1, 2, budget=20.0) == 3


def test_a_blocked_worker_is_stopped_by_the_wall_clock_backstop(monkeypatch):
    # sleeping uses no CPU, so only the backstop (factor x budget + grace) can stop it
    monkeypatch.setattr(budget_mod, "BACKSTOP_FACTOR", 1.0)
    monkeypatch.setattr(budget_mod, "BACKSTOP_GRACE", 0.2)
    with pytest.raises(BudgetExceeded) as info:
        run_with_budget(_sleep_long, budget=0.3)
    assert info.value.kind == "wall"
    assert "backstop" in str(info.value)


def test_an_account_is_charged_and_refuses_work_once_used_up():
    acc = Budget(0.4)
    assert run_with_budget(_burn, 200_000, budget=acc) == sum(i * i for i in range(200_000))
    assert 0.0 <= acc.spent < 0.4
    with pytest.raises(BudgetExceeded) as info:
        acc.run(_spin)
    assert info.value.kind == "cpu"
    assert acc.exhausted and acc.spent == pytest.approx(0.4)
    with pytest.raises(BudgetExceeded) as info:
        run_with_budget(_add, 1, 2, budget=acc)
    assert info.value.kind == "spent" and "no CPU time left" in str(info.value)


def test_a_shared_account_is_charged_through_its_parent():
    parent = Budget(5.0)
    child = parent.share(0.3)
    assert child.remaining == pytest.approx(0.3)
    with pytest.raises(BudgetExceeded):
        child.run(_spin)
    assert parent.spent == pytest.approx(0.3) and parent.remaining == pytest.approx(4.7)
    with parent.measure():
        _burn(1000)
    assert parent.spent >= 0.3


def test_workers_stay_warm_between_calls():
    first = run_with_budget(_pid, budget=20.0)
    assert run_with_budget(_pid, budget=20.0) == first
    assert first in budget_mod.worker_pids()


def test_unpicklable_work_runs_in_a_one_off_worker():
    box = []  # a closure cannot be pickled; a forked worker sees it anyway
    if budget_mod.start_method() != "fork":
        pytest.skip("one-off workers for closures need fork")
    assert run_with_budget(lambda: len(box) + 5, budget=20.0) == 5


def test_budget_none_runs_in_process():
    assert run_with_budget(_pid, budget=None) == os.getpid()
    with pytest.raises(ValueError, match="here"):
        run_with_budget(_fail, "here", budget=None)


@pytest.mark.parametrize("budget", [0, -1.0, 0.0])
def test_non_positive_budget_raises(budget):
    with pytest.raises(BudgetExceeded):
        run_with_budget(_add, 1, 2, budget=budget)


def test_works_from_non_main_thread():
    box = {}

    def target():
        try:
            box["result"] = run_with_budget(_add, 5, 6, budget=30.0)
            box["pid"] = run_with_budget(_pid, budget=30.0)
        except BaseException as exc:  # noqa: BLE001 - reported below
            box["error"] = exc

    th = threading.Thread(target=target)
    th.start()
    th.join(60)
    assert not th.is_alive()
    assert "error" not in box, box.get("error")
    assert box["result"] == 11
    assert box["pid"] != os.getpid()


def test_budget_exceeded_from_non_main_thread():
    box = {}

    def target():
        try:
            run_with_budget(_spin, budget=0.5)
        except BaseException as exc:  # noqa: BLE001 - inspected below
            box["error"] = exc

    th = threading.Thread(target=target)
    th.start()
    th.join(60)
    assert isinstance(box.get("error"), BudgetExceeded)


_PAGE = """
import math, os
from duality.solve.budget import run_with_budget, start_method
with open(os.environ["PAGE_MARK"], "a") as fh:
    fh.write("page ran\\n")
print(start_method(), run_with_budget(math.sqrt, 16.0, budget=60))
"""

_RUNNER = """
import sys, threading, types
path = sys.argv[1]
def run_page():
    # as a script runner does: the page becomes __main__ while it runs, in a thread
    module = types.ModuleType("__main__")
    module.__file__ = path
    sys.modules["__main__"] = module
    exec(compile(open(path).read(), path, "exec"), module.__dict__)
t = threading.Thread(target=run_page)
t.start()
t.join()
"""


def test_a_page_script_run_as_main_in_a_thread_is_not_run_again_by_the_worker(tmp_path):
    # Regression: a fork-server worker imports __main__ by its file path before it runs;
    # for a page script that would run the page a second time inside the worker.
    import os
    import subprocess
    import sys
    from pathlib import Path
    page, runner, mark = tmp_path / "page.py", tmp_path / "runner.py", tmp_path / "mark.txt"
    page.write_text(_PAGE)
    runner.write_text(_RUNNER)
    root = str(Path(__file__).resolve().parents[2])
    env = {**os.environ, "PAGE_MARK": str(mark),
           "PYTHONPATH": os.pathsep.join(filter(None, [root, os.environ.get("PYTHONPATH")]))}
    out = subprocess.run([sys.executable, str(runner), str(page)], capture_output=True,
                         text=True, timeout=120, env=env)
    assert out.returncode == 0, out.stderr
    assert out.stdout.split() == ["forkserver", "4.0"]
    assert mark.read_text().splitlines() == ["page ran"]


_OWNER = """
import os, sys, threading, time
from duality.solve.budget import run_with_budget
def work():
    print(run_with_budget(os.getpid, budget=30), flush=True)  # the warm worker's id
    run_with_budget(time.sleep, 600, budget=600)
if sys.argv[1] == "thread":  # started from a fork server
    t = threading.Thread(target=work)
    t.start()
    t.join()
else:
    work()
"""


def _descendants(pid: int) -> set[int]:
    children: dict[int, list[int]] = {}
    for entry in os.listdir("/proc"):
        if entry.isdigit():
            try:
                with open(f"/proc/{entry}/stat") as fh:
                    ppid = int(fh.read().rsplit(")", 1)[1].split()[1])
            except (OSError, ValueError, IndexError):
                continue
            children.setdefault(ppid, []).append(int(entry))
    out, todo = set(), [pid]
    while todo:
        for c in children.get(todo.pop(), []):
            out.add(c)
            todo.append(c)
    return out


def _running(pid: int) -> bool:
    try:
        with open(f"/proc/{pid}/stat") as fh:
            return fh.read().rsplit(")", 1)[1].split()[0] not in ("Z", "X")
    except OSError:
        return False


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="reads /proc")
@pytest.mark.parametrize("mode, sig", [("main", signal.SIGKILL), ("thread", signal.SIGKILL),
                                       ("main", signal.SIGTERM)])
def test_workers_die_with_the_process_that_owns_them(tmp_path, mode, sig):
    script = tmp_path / "owner.py"
    script.write_text(_OWNER)
    env = {**os.environ,
           "PYTHONPATH": os.pathsep.join(filter(None, [ROOT, os.environ.get("PYTHONPATH")]))}
    owner = subprocess.Popen([sys.executable, str(script), mode], stdout=subprocess.PIPE,
                             text=True, env=env)
    try:
        worker = int(owner.stdout.readline())
        helpers = _descendants(owner.pid)
        assert worker in helpers and _running(worker)
        owner.send_signal(sig)
        owner.wait(30)
        # a liveness condition, not a timing: wait (generously) until nothing is left
        for _ in range(300):
            if not any(_running(p) for p in helpers):
                break
            time.sleep(0.1)
        assert not [p for p in helpers if _running(p)], "a worker outlived its owner"
    finally:
        if owner.poll() is None:
            owner.kill()

"""Tests of duality.solve.budget.run_with_budget (expected behaviour: common practice, no source)."""
from __future__ import annotations

import os
import threading
import time

import pytest

from duality.solve.budget import run_with_budget
from duality.errors import BudgetExceeded


def _add(a, b, *, c=0):
    return a + b + c


def _fail(message):
    raise ValueError(message)


def _sleep_long():
    time.sleep(30)
    return "woke up"


def _pid():
    return os.getpid()


def test_returns_result_with_args_and_kwargs():
    assert run_with_budget(_add, 2, 3, c=4, budget=20.0) == 9


def test_runs_in_a_worker_process():
    assert run_with_budget(_pid, budget=20.0) != os.getpid()


def test_worker_value_error_is_reraised_with_message():
    with pytest.raises(ValueError, match="bad thing 42"):
        run_with_budget(_fail, "bad thing 42", budget=20.0)


def test_sleeping_worker_exceeds_budget():
    with pytest.raises(BudgetExceeded):
        run_with_budget(_sleep_long, budget=0.5)


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
            run_with_budget(_sleep_long, budget=1.0)
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

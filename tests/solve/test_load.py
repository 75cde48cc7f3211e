"""Same input, same answer on an idle and on a loaded machine.

Budgets count the CPU seconds of the work itself (duality.solve.budget), so CPU-bound
processes running beside a derivation must change neither its route, nor its notes, nor
the statuses of its checks.  The assertions compare results only, never timings
(expected behaviour: common practice, no source).
"""
from __future__ import annotations

import os
import subprocess
import sys

import pytest
from sympy.core.cache import clear_cache

import duality as dy
from duality.analyse import checks
from duality.solve import budget, derive


def _fresh() -> None:
    """Forget derivations, proofs, sympy's cache and the warm workers."""
    for fn in (derive._spending_solution, derive._indirect_solution,
               derive._profit_solution):
        fn.cache_clear()
    checks._PROVED.clear()
    clear_cache()
    budget.shutdown_workers()


def _results() -> list:
    _fresh()
    out = []
    # homothetic but not a catalogue form: the symbolic route finds it (about 1.5 CPU s)
    t = dy.technology("(x1^0.3*x2^0.5)^2 + 3*x1^0.3*x2^0.5", ["x1", "x2"])
    c = dy.cost(t, budget=5)
    out.append(("cost", c.route, c.method, c.notes))
    # plain sympy.solve never finishes here: the budget runs out, the numeric route answers
    t = dy.technology("(x1+x2)^7 + x1^3*x2^4 + x1*x2", ["x1", "x2"])
    c = dy.cost(t, budget=1)
    out.append(("cost", c.route, c.method, c.notes))
    recs = dy.check(dy.preference("x1^0.3*x2^0.7", ["x1", "x2"]), points=4)
    out.append(tuple((r.name, r.status) for r in recs))
    return out


@pytest.mark.slow
def test_routes_notes_and_check_statuses_do_not_depend_on_machine_load():
    idle = _results()
    assert idle[0][1] == "symbolic" and idle[1][1] == "numeric"
    assert any("did not finish within the budget" in n for n in idle[1][3])
    hogs = [subprocess.Popen([sys.executable, "-c", "while True: pass"])
            for _ in range((os.cpu_count() or 2) + 1)]
    try:
        loaded = _results()
    finally:
        for h in hogs:
            h.kill()
            h.wait()
    assert loaded == idle

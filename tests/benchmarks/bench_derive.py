"""Derivation benchmark: catalogue forms, and symbolic routes against plain sympy.solve.

Run:  python tests/benchmarks/bench_derive.py [--lagrangian-limit SECONDS] [--load-compare]

Prints, measured side by side in one run:
1. the time to derive every dual (cost or expenditure, indirect utility, profit) of each
   catalogue form in a fresh process (imports not counted) and from cleared caches in
   this one, and what its checks report;
2. for Cobb–Douglas with 2 and 3 inputs and CES with 2 inputs (free parameters), the
   engine's symbolic routes (log-linear, homothetic) against plain Lagrangian
   ``sympy.solve`` on the first-order conditions, with the ratio;
3. ``check()`` of each catalogue and flexible form in a fresh process, with the former
   proof strategy (a proof first, by ``simplify`` with the parameters left symbolic, up to
   2 CPU s per residual) and the current one (numeric pass first, then cheap exact
   rewrites with the parameter values put in), with the ratio and the number proved;
4. with ``--load-compare``: the route, notes and check statuses of every benchmark model
   on this machine idle and with a CPU-bound process per core beside it, and how many
   are identical.
Goals: every catalogue form's duals under 0.5 CPU s in a fresh process; symbolic routes at least 5x faster where both
finish; ``check()`` under 1 s for catalogue forms and 2 s for flexible forms with at least
as many proved; every model identical idle and loaded.  Times are wall-clock and CPU
seconds (this process and its workers); on a shared machine the CPU column is the one to
read.  Every headline is printed beside its goal and again as one JSON line at the end.
"""
from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import time
from pathlib import Path

import sympy as sp

import duality as dy
from duality.analyse import checks
from duality.solve import budget as budget_mod
from duality.solve import derive, dual_forms
from duality.solve.budget import run_with_budget
from duality.errors import BudgetExceeded

from _report import emit, headline

CATALOGUE_CASES = {
    "cobb_douglas": ("technology", "A*x1^a*x2^b*x3^c", ["x1", "x2", "x3"],
                     {"A": 1.5, "a": 0.2, "b": 0.3, "c": 0.4}),
    "ces": ("technology", "(d1*x1^rho + d2*x2^rho + d3*x3^rho)^(0.9/rho)", ["x1", "x2", "x3"],
            {"d1": 0.2, "d2": 0.3, "d3": 0.5, "rho": -0.5}),
    "nested_ces": ("technology", "(b1*(d1*x1^r + d2*x2^r)^(s/r) + b2*x3^s)^(0.9/s)",
                   ["x1", "x2", "x3"],
                   {"b1": 0.4, "b2": 0.6, "d1": 0.3, "d2": 0.7, "r": 0.5, "s": -1.0}),
    "leontief": ("technology", "min(x1/a1, x2/a2)", ["x1", "x2"], {"a1": 2, "a2": 3}),
    "linear": ("technology", "a1*x1 + a2*x2", ["x1", "x2"], {"a1": 2, "a2": 3}),
    "stone_geary": ("preference", "b1*log(x1 - g1) + b2*log(x2 - g2)", ["x1", "x2"],
                    {"b1": 0.4, "b2": 0.6, "g1": 1, "g2": 2}),
    "quasi_linear": ("preference", "x1 + a*log(x2)", ["x1", "x2"], {"a": 3}),
}


def _clear_caches() -> None:
    """Forget every derivation, and sympy's own operation cache, so each run starts cold."""
    from sympy.core.cache import clear_cache
    for fn in (derive._spending_solution, derive._indirect_solution, derive._profit_solution):
        fn.cache_clear()
    clear_cache()


def _model(role, formula, qs, params):
    build = dy.technology if role == "technology" else dy.preference
    return build(formula, qs, params=params)


def _derive_all(model, role) -> None:
    if role == "technology":
        dy.cost(model)
        try:
            dy.profit(model)
        except dy.NoSolutionError:
            pass
    else:
        dy.expenditure(model)
        dy.indirect_utility(model)


def _one_form(key: str) -> None:
    """Child process: build one catalogue model and derive every dual, print a JSON line
    (wall and CPU seconds of this process and its workers, imports excluded)."""
    role, formula, qs, params = CATALOGUE_CASES[key]
    w0, c0 = time.perf_counter(), time.process_time()
    w_workers = budget_mod.worker_cpu_seconds()
    _derive_all(_model(role, formula, qs, params), role)
    print(json.dumps({"wall": time.perf_counter() - w0,
                      "cpu": time.process_time() - c0
                      + budget_mod.worker_cpu_seconds() - w_workers}))


def _fresh(flag: str, key: str) -> dict:
    cmd = [sys.executable, __file__, flag, key]
    root = str(Path(__file__).resolve().parents[2])
    env = {**os.environ, "PYTHONPATH": os.pathsep.join(
        filter(None, [root, os.environ.get("PYTHONPATH")]))}
    out = subprocess.run(cmd, capture_output=True, text=True, env=env, timeout=900)
    return json.loads(out.stdout.strip().splitlines()[-1])


def bench_catalogue(repeats: int) -> None:
    print("1. Catalogue forms: time to build the model and derive every dual, in a fresh "
          f"process (median of {repeats}; imports not counted) and in this process with "
          "caches cleared")
    print(f"   {'form':<14}{'fresh wall/cpu':>16}{'warm':>9}{'checks':>9}   check results")
    for key, (role, formula, qs, params) in CATALOGUE_CASES.items():
        fresh = [_fresh("--one-form", key) for _ in range(repeats)]
        fw = statistics.median(d["wall"] for d in fresh)
        fc = statistics.median(d["cpu"] for d in fresh)
        times = []
        for _ in range(repeats):
            _clear_caches()
            t0 = time.perf_counter()
            model = _model(role, formula, qs, params)
            _derive_all(model, role)
            times.append(time.perf_counter() - t0)
        t0 = time.perf_counter()
        records = dy.check(model)
        tc = time.perf_counter() - t0
        counts = {}
        for r in records:
            counts[r.status] = counts.get(r.status, 0) + 1
        summary = ", ".join(f"{v} {k}" for k, v in counts.items())
        print(f"   {key:<14}{fw:>8.3f}s/{fc:.3f}s{statistics.median(times):>8.3f}s"
              f"{tc:>8.2f}s   {summary}")
        headline("derive", f"every dual of {key}, fresh process (CPU s)", fc, 0.5,
                 at_most=True, unit=" s", note=f"wall {fw:.3f} s")


def _lagrangian(model):
    return derive._spending_candidates("lagrangian", model)


def _route(method, model):
    return derive._spending_candidates(method, model)


def bench_symbolic(limit: float) -> None:
    x1, x2, x3 = sp.symbols("x1 x2 x3")
    cases = {
        "Cobb-Douglas, 2 inputs": ("A*x1^a*x2^b", ["x1", "x2"], {"A": None, "a": None,
                                                                  "b": None}),
        "Cobb-Douglas, 3 inputs": ("A*x1^a*x2^b*x3^c", ["x1", "x2", "x3"],
                                   {"A": None, "a": None, "b": None, "c": None}),
        "CES, 2 inputs": ("(d1*x1^rho + d2*x2^rho)^(1/rho)", ["x1", "x2"],
                          {"d1": None, "d2": None, "rho": None}),
    }
    print()
    print("2. Symbolic routes against plain Lagrangian sympy.solve (free parameters; "
          f"Lagrangian stopped after {limit:g} s)")
    print(f"   {'case':<24}{'log-linear':>12}{'homothetic':>12}{'lagrangian':>16}{'ratio':>10}")
    for name, (formula, qs, params) in cases.items():
        model = dy.technology(formula, qs, params=params,
                              assume={k: "positive" for k in params})
        row = {}
        for method in ("log-linear", "homothetic"):
            t0 = time.perf_counter()
            try:
                out = run_with_budget(_route, method, model, budget=limit)
                ok = not isinstance(out, str) and len(out) > 0
                if ok:
                    ok = derive._verify_spending(model, *out[0])[0]
            except BudgetExceeded:
                ok = None
            except Exception:  # noqa: BLE001 - a failing route is reported, not fatal
                ok = False
            row[method] = (time.perf_counter() - t0, ok)
        t0 = time.perf_counter()
        try:
            out = run_with_budget(_lagrangian, model, budget=limit)
            lag = (time.perf_counter() - t0, bool(out))
        except BudgetExceeded:
            lag = (None, None)
        except NotImplementedError:
            lag = (time.perf_counter() - t0, "NotImplementedError")
        except Exception as exc:  # noqa: BLE001
            lag = (time.perf_counter() - t0, type(exc).__name__)

        def cell(t, ok):
            if ok is None:
                return f"> {limit:g} s"
            if ok is True:
                return f"{t:.3f}s"
            if ok is False:
                return "n/a"
            return str(ok)
        best = min((t for t, ok in row.values() if ok is True), default=None)
        if best is not None and lag[1] is True:
            ratio = f"{lag[0] / best:.1f}x"
        elif best is not None and lag[1] is None:
            ratio = f"> {limit / best:.0f}x"
        else:
            ratio = "-"
        print(f"   {name:<24}{cell(*row['log-linear']):>12}{cell(*row['homothetic']):>12}"
              f"{cell(*lag):>22}{ratio:>10}")
        if best is not None and lag[1] in (True, None):
            r = (lag[0] if lag[1] else limit) / best
            headline("derive", f"symbolic route vs Lagrangian sympy.solve, {name}", r, 5,
                     at_most=False, note="" if lag[1] else "lower bound: Lagrangian stopped")
        else:  # the goal counts only where both finish: no ratio exists here
            why = (f"Lagrangian: {lag[1] if lag[1] is not False else 'no solution'}"
                   if best is not None else "no verified symbolic route")
            print(f"  symbolic route vs Lagrangian sympy.solve, {name}: no ratio ({why})")
    print("   (route times include starting the worker process; ratio = Lagrangian time / "
          "fastest verified route)")


# -- 3. check() before and after -------------------------------------------------------------
FLEXIBLE_CASES = {
    "translog, 2": lambda: dual_forms.translog_cost(2),
    "translog, 3": lambda: dual_forms.translog_cost(3),
    "gen. Leontief, 2": lambda: dual_forms.generalized_leontief_cost(2),
    "gen. Leontief, 3": lambda: dual_forms.generalized_leontief_cost(3),
    "Almost Ideal, 2": lambda: dual_forms.aids_expenditure(2),
    "Almost Ideal, 3": lambda: dual_forms.aids_expenditure(3),
}


def _bench_model(key):
    if key in CATALOGUE_CASES:
        return _model(*CATALOGUE_CASES[key])
    return FLEXIBLE_CASES[key]()


def _former_is_zero(expr):
    """The former proof: simplify variants with the parameters left symbolic."""
    import sympy as sp
    if expr == 0:
        return True
    for attempt in (sp.simplify,
                    lambda e: sp.simplify(sp.powsimp(sp.expand_power_base(
                        sp.expand_log(e, force=True), force=True), force=True)),
                    lambda e: sp.simplify(sp.logcombine(sp.powdenest(e, force=True),
                                                        force=True)),
                    lambda e: sp.simplify(sp.powsimp(sp.expand_power_base(sp.factor_terms(
                        sp.expand_power_base(e, force=True)), force=True), force=True))):
        try:
            if attempt(expr) == 0:
                return True
        except Exception:  # noqa: BLE001
            continue
    return False


def _use_former_proofs() -> None:
    """Swap in the former order and proof (a proof first, 2 CPU s per residual)."""
    numeric_run = checks._run

    def former_run(spec, points, budget, names, values=None):
        exprs = getattr(spec, "symbolic_exprs", None) or [r.sym for r in spec.residuals]
        if spec.symbolic and exprs and all(e is not None for e in exprs):
            try:
                proved = all(run_with_budget(_former_is_zero, e, budget=2.0) for e in exprs)
            except Exception:  # noqa: BLE001
                proved = False
            if proved:
                return checks.CheckRecord(spec.name, spec.statement, "proved", "former")
        spec.symbolic = False
        return numeric_run(spec, points, None, names, values)
    checks._run = former_run


def _one_check(key: str, former: bool) -> None:
    """Child process: time check() of one model and print a JSON line."""
    if former:
        _use_former_proofs()
    model = _bench_model(key)
    t0, c0 = time.perf_counter(), time.process_time()
    records = dy.check(model)
    wall = time.perf_counter() - t0
    cpu = time.process_time() - c0 + budget_mod.worker_cpu_seconds()
    print(json.dumps({"wall": wall, "cpu": cpu,
                      "proved": sum(r.status == "proved" for r in records),
                      "statuses": [r.status for r in records]}))


def _fresh_check(key: str, former: bool) -> dict:
    cmd = [sys.executable, __file__, "--one-check", key] + (["--former"] if former else [])
    root = str(Path(__file__).resolve().parents[2])
    env = {**os.environ, "PYTHONPATH": os.pathsep.join(
        filter(None, [root, os.environ.get("PYTHONPATH")]))}
    out = subprocess.run(cmd, capture_output=True, text=True, env=env, timeout=900)
    return json.loads(out.stdout.strip().splitlines()[-1])


def bench_checks() -> None:
    print()
    print("3. check() in a fresh process: former proof strategy against the current one")
    print(f"   {'model':<18}{'former wall/cpu':>18}{'current wall/cpu':>18}{'cpu ratio':>11}"
          f"{'proved':>10}")
    for key in list(CATALOGUE_CASES) + list(FLEXIBLE_CASES):
        old, new = _fresh_check(key, True), _fresh_check(key, False)
        goal = 1.0 if key in CATALOGUE_CASES else 2.0
        flag = "" if new["cpu"] <= goal else f"  (over the {goal:g} s goal)"
        if new["proved"] < old["proved"]:
            flag += "  (fewer proved)"
        print(f"   {key:<18}{old['wall']:>8.2f}s/{old['cpu']:.2f}s{new['wall']:>9.2f}s/"
              f"{new['cpu']:.2f}s{old['cpu'] / max(new['cpu'], 1e-9):>10.1f}x"
              f"{old['proved']:>5} ->{new['proved']:>3}{flag}")
        headline("derive", f"check() of {key}, fresh process (CPU s)", new["cpu"], goal,
                 at_most=True, unit=" s")


# -- 4. idle against loaded -------------------------------------------------------------------
def _fingerprint(model) -> tuple:
    """Route, method and notes of every dual, and the check statuses, from cold caches."""
    from sympy.core.cache import clear_cache
    _clear_caches()
    checks._PROVED.clear()
    clear_cache()
    budget_mod.shutdown_workers()
    out = []
    for kind, dual in derive.duals(model).items():
        out.append((kind, dual.route, dual.method, dual.notes) if dual else
                   (kind, str(dual)))
    out.append(tuple((r.name, r.status) for r in dy.check(model)))
    return tuple(out)


def bench_load(hogs: int) -> None:
    extra = {
        "homothetic, not catalogue": ("technology", "(x1^0.3*x2^0.5)^2 + 3*x1^0.3*x2^0.5",
                                      ["x1", "x2"], {}),
        "sum of powers": ("technology", "(x1+x2)^7 + x1^3*x2^4 + x1*x2", ["x1", "x2"], {}),
        "power plus log": ("technology", "x1^0.3*x2^0.5 + log(1 + x1)", ["x1", "x2"], {}),
    }
    print()
    print(f"4. Same answer idle and loaded ({hogs} CPU-bound processes beside it): route, "
          "notes and check statuses")
    build = {**{k: (lambda k=k: _bench_model(k))
                for k in list(CATALOGUE_CASES) + list(FLEXIBLE_CASES)},
             **{k: (lambda v=v: _model(*v)) for k, v in extra.items()}}
    idle = {k: _fingerprint(make()) for k, make in build.items()}
    procs = [subprocess.Popen([sys.executable, "-c", "while True: pass"])
             for _ in range(hogs)]
    try:
        t0 = time.perf_counter()
        loaded = {k: _fingerprint(make()) for k, make in build.items()}
        took = time.perf_counter() - t0
    finally:
        for p in procs:
            p.kill()
            p.wait()
    same = 0
    for k in build:
        ok = idle[k] == loaded[k]
        same += ok
        routes = ", ".join(f"{d[0]}: {d[1] if len(d) > 2 else 'none'}" for d in idle[k][:-1])
        print(f"   {k:<28}{'identical' if ok else 'DIFFERENT':<11}{routes}")
    print(f"   {same} of {len(build)} identical (loaded pass took {took:.1f} s wall)")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--lagrangian-limit", type=float, default=90.0,
                    help="seconds before plain sympy.solve is stopped (default 90)")
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--load-compare", action="store_true",
                    help="also compare results idle and with a CPU-bound process per core")
    ap.add_argument("--only", choices=("catalogue", "symbolic", "checks", "load"),
                    help="run one section")
    ap.add_argument("--one-check", help=argparse.SUPPRESS)
    ap.add_argument("--one-form", help=argparse.SUPPRESS)
    ap.add_argument("--former", action="store_true", help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.one_check:
        _one_check(args.one_check, args.former)
        return
    if args.one_form:
        _one_form(args.one_form)
        return
    if args.only in (None, "catalogue"):
        bench_catalogue(args.repeats)
    if args.only in (None, "symbolic"):
        bench_symbolic(args.lagrangian_limit)
    if args.only in (None, "checks"):
        bench_checks()
    if args.load_compare or args.only == "load":
        bench_load(os.cpu_count() or 2)
    emit()


if __name__ == "__main__":
    main()

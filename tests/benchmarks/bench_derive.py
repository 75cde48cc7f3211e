"""Derivation benchmark: catalogue forms, and symbolic routes against plain sympy.solve.

Run:  python tests/benchmarks/bench_derive.py [--lagrangian-limit SECONDS]

Prints, measured side by side in one run:
1. the time to derive every dual (cost or expenditure, indirect utility, profit) of each
   catalogue form from a fresh cache, and what its checks report;
2. for Cobb–Douglas with 2 and 3 inputs and CES with 2 inputs (free parameters), the
   engine's symbolic routes (log-linear, homothetic) against plain Lagrangian
   ``sympy.solve`` on the first-order conditions, with the ratio.
Goals: every catalogue form under 1 s; symbolic routes at least 5x faster where both finish.
"""
from __future__ import annotations

import argparse
import statistics
import time

import sympy as sp

import duality as dy
from duality.solve import derive
from duality.solve.budget import run_with_budget
from duality.errors import BudgetExceeded

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


def bench_catalogue(repeats: int) -> None:
    print("1. Catalogue forms: time to build the model and derive every dual, caches cleared "
          f"(median of {repeats})")
    print(f"   {'form':<14}{'duals':>10}{'checks':>10}   check results")
    for key, (role, formula, qs, params) in CATALOGUE_CASES.items():
        times = []
        for _ in range(repeats):
            _clear_caches()
            t0 = time.perf_counter()
            model = _model(role, formula, qs, params)
            if role == "technology":
                dy.cost(model)
                try:
                    dy.profit(model)
                except dy.NoSolutionError:
                    pass
            else:
                dy.expenditure(model)
                dy.indirect_utility(model)
            times.append(time.perf_counter() - t0)
        t0 = time.perf_counter()
        records = dy.check(model)
        tc = time.perf_counter() - t0
        counts = {}
        for r in records:
            counts[r.status] = counts.get(r.status, 0) + 1
        summary = ", ".join(f"{v} {k}" for k, v in counts.items())
        flag = "" if statistics.median(times) < 1.0 else "  (over the 1 s goal)"
        print(f"   {key:<14}{statistics.median(times):>9.3f}s{tc:>9.2f}s   {summary}{flag}")


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
    print("   (route times include starting the worker process; ratio = Lagrangian time / "
          "fastest verified route)")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--lagrangian-limit", type=float, default=90.0,
                    help="seconds before plain sympy.solve is stopped (default 90)")
    ap.add_argument("--repeats", type=int, default=3)
    args = ap.parse_args()
    bench_catalogue(args.repeats)
    bench_symbolic(args.lagrangian_limit)


if __name__ == "__main__":
    main()

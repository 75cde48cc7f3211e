"""Numeric-engine benchmark: batched numeric duals and fast closed-form evaluation.

Run:  python tests/benchmarks/bench_numeric.py

Prints, measured side by side in one run:
1. numeric cost of a 3-input CES (rho = 0.5 and rho = -2) at N = 1,000 price points:
   the batched engine against a per-point scipy.optimize loop with default settings and
   against one with analytic gradients and tight tolerances; each against the closed form
   (goal: >= 500x the default loop, max relative error <= 1e-10);
2. the batched engine at N = 1e5 against the closed form's own evaluation for CES
   (rho = 0.5, -2), Cobb–Douglas and a typed non-catalogue technology (symbolic closed
   form): median of 5 side-by-side pairs (goal <= 20x, max relative error <= 1e-12);
3. closed-form evaluation of a derived cost function on 1e6 rows against hand-written
   numpy (goal <= 1.2x);
4. peak memory of the batched engine (goal <= 100 MiB) and of closed-form evaluation at
   N = 1e6.
Every headline is printed beside its goal and again as one JSON line at the end.
"""
from __future__ import annotations

import statistics
import time
import tracemalloc
import warnings

import numpy as np
from scipy import optimize

import duality as dy
from duality.solve import batch

from _report import emit, headline

D = np.array([1.0, 2.0, 3.0])


def ces(rho):
    return dy.technology(f"(x1^{rho} + 2*x2^{rho} + 3*x3^{rho})^(1/{rho})", ["x1", "x2", "x3"])


#: the models of the N = 1e5 comparison: CES and Cobb–Douglas (catalogue closed forms) and a
#: typed technology outside the catalogue whose cost the symbolic route derives
#: (homothetic, not homogeneous)
CASES_1E5 = {
    "CES rho=0.5": ces(0.5),
    "CES rho=-2": ces(-2.0),
    "Cobb-Douglas": dy.technology("x1^0.2*x2^0.3*x3^0.4", ["x1", "x2", "x3"]),
    "typed (x1x2x3)^(1/3)(1+x1x2x3)^(1/3)": dy.technology(
        "(x1*x2*x3)^(1/3)*(1 + x1*x2*x3)^(1/3)", ["x1", "x2", "x3"]),
}


def _f(x, rho):
    return (D @ x ** rho) ** (1 / rho)


def _grad(x, rho):
    return _f(x, rho) ** (1 - rho) * D * x ** (rho - 1)


def scipy_loop(W, Y, rho, tight: bool):
    out = np.empty(len(Y))
    for k in range(len(Y)):
        w, y = W[k], Y[k]
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            if tight:
                res = optimize.minimize(
                    lambda x: w @ x, np.full(3, y), jac=lambda x: w, method="SLSQP",
                    bounds=[(1e-9, None)] * 3,
                    constraints=[{"type": "ineq", "fun": lambda x: _f(x, rho) - y,
                                  "jac": lambda x: _grad(x, rho)}],
                    options={"ftol": 1e-15, "maxiter": 1000})
            else:
                res = optimize.minimize(
                    lambda x: w @ x, np.ones(3), method="SLSQP", bounds=[(1e-9, None)] * 3,
                    constraints=[{"type": "ineq", "fun": lambda x: _f(x, rho) - y}])
        out[k] = res.fun
    return out


def timed(fn, repeats=1):
    times, out = [], None
    for _ in range(repeats):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times), out


def relerr(a, b):
    return float(np.nanmax(np.abs(a / b - 1)))


def part1_2() -> None:
    print("1. Numeric cost of a 3-input CES, N = 1,000: batched engine vs per-point scipy loops")
    print(f"   {'rho':>5} {'batched':>10} {'scipy default':>14} {'ratio':>8} {'err default':>12}"
          f" {'scipy tight':>12} {'ratio':>8} {'err tight':>10} {'err batched':>12}")
    rng = np.random.default_rng(0)
    for rho in (0.5, -2.0):
        model = ces(rho)
        c = dy.cost(model)
        N = 1000
        W = rng.uniform(0.2, 5.0, (N, 3))
        Y = rng.uniform(0.2, 5.0, N)
        ref = c(w1=W[:, 0], w2=W[:, 1], w3=W[:, 2], y=Y)
        batch.solve_spending(model, W[:5], Y[:5], [])  # compile once (not timed)
        tb, res = timed(lambda: batch.solve_spending(model, W, Y, []), 5)
        td, d = timed(lambda: scipy_loop(W, Y, rho, False))
        tt, t = timed(lambda: scipy_loop(W, Y, rho, True))
        print(f"   {rho:>5} {tb:>9.4f}s {td:>13.2f}s {td / tb:>7.0f}x {relerr(d, ref):>12.2e}"
              f" {tt:>11.2f}s {tt / tb:>7.0f}x {relerr(t, ref):>10.2e} "
              f"{relerr(res.value, ref):>12.2e}")
        headline("numeric", f"N=1000 batched vs default scipy loop, CES rho={rho}",
                 td / tb, 500, at_most=False)
        headline("numeric", f"N=1000 batched max relative error, CES rho={rho}",
                 relerr(res.value, ref), 1e-10, at_most=True, unit="")
    print()
    print("2. N = 1e5: batched engine vs the closed form's own evaluation")
    for name, model in CASES_1E5.items():
        c = dy.cost(model)
        N = 100_000
        W = rng.uniform(0.2, 5.0, (N, 3))
        Y = rng.uniform(0.2, 5.0, N)
        kw = dict(w1=W[:, 0], w2=W[:, 1], w3=W[:, 2], y=Y)
        c(**kw)
        batch.solve_spending(model, W[:5], Y[:5], [])  # compile once (not timed)
        ratios, tbs, tcs = [], [], []
        for _ in range(5):  # side by side, the median ratio of the pairs
            tc, ref = timed(lambda: c(**kw), 3)
            tb, res = timed(lambda: batch.solve_spending(model, W, Y, []), 1)
            ratios.append(tb / tc)
            tbs.append(tb)
            tcs.append(tc)
        err = relerr(res.value, ref)
        print(f"   {name:<34} batched {statistics.median(tbs):.3f}s, closed form "
              f"({c.route}) {statistics.median(tcs) * 1e3:.2f} ms, "
              f"max rel error {err:.1e}, converged {res.converged.mean():.0%}, "
              f"iterations <= {res.iterations.max()}")
        headline("numeric", f"N=1e5 batched / closed form, {name}",
                 statistics.median(ratios), 20, at_most=True)
        headline("numeric", f"N=1e5 max relative error, {name}", err, 1e-12, at_most=True,
                 unit="")


def part3_4() -> None:
    print()
    print("3. Closed-form evaluation on 1e6 rows: derived cost function vs hand-written numpy")
    rng = np.random.default_rng(1)
    N = 1_000_000
    t = dy.technology("A*x1^a*x2^b*x3^c", ["x1", "x2", "x3"],
                      params={"A": 2, "a": 0.2, "b": 0.3, "c": 0.4})
    c = dy.cost(t)
    W = [np.ascontiguousarray(rng.uniform(0.5, 2.0, N)) for _ in range(3)]
    Y = rng.uniform(1.0, 3.0, N)
    a, b, cc, A = 0.2, 0.3, 0.4, 2.0
    k = a + b + cc

    def by_hand():
        # Cobb–Douglas cost, written out (Varian 1992, ch. 4; from memory)
        return k * (Y / A) ** (1 / k) * (W[0] / a) ** (a / k) * (W[1] / b) ** (b / k) * \
            (W[2] / cc) ** (cc / k)

    c(w1=W[0], w2=W[1], w3=W[2], y=Y)
    th, hand = timed(by_hand, 7)
    te, ours = timed(lambda: c(w1=W[0], w2=W[1], w3=W[2], y=Y), 7)
    print(f"   hand-written {th * 1e3:.1f} ms, derived {te * 1e3:.1f} ms, "
          f"max rel difference {relerr(ours, hand):.1e}")
    headline("numeric", "1e6 rows closed-form evaluation / hand-written numpy", te / th, 1.2,
             at_most=True)
    print()
    print("4. Peak memory at N = 1e6")
    tracemalloc.start()
    c(w1=W[0], w2=W[1], w3=W[2], y=Y)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    print(f"   closed-form evaluation: {peak / 2 ** 20:.0f} MiB above the inputs "
          f"({N * 8 / 2 ** 20:.0f} MiB per input column)")
    model = ces(0.5)
    W3 = rng.uniform(0.2, 5.0, (N, 3))
    Y3 = rng.uniform(0.2, 5.0, N)
    tracemalloc.start()
    t0 = time.perf_counter()
    res = batch.solve_spending(model, W3, Y3, [])
    t1 = time.perf_counter()
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    print(f"   batched numeric CES cost: {peak / 2 ** 20:.0f} MiB peak, {t1 - t0:.1f} s, "
          f"converged {res.converged.mean():.2%}")
    headline("numeric", "N=1e6 peak memory of the batched numeric CES cost", peak / 2 ** 20,
             100, at_most=True, unit=" MiB")


def main() -> None:
    part1_2()
    part3_4()
    emit()


if __name__ == "__main__":
    main()

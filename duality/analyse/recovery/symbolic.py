"""Symbolic recovery: Shephard's lemma solved for prices and level, verified."""
from __future__ import annotations

import numpy as np
import sympy as sp
from sympy.solvers.solveset import NonlinearError

from ...solve.budget import Budget, run_with_budget
from ...solve.derive import first_verified
from ...solve.result import Unavailable
from ...model.lambdas import numpy_function
from .result import SYMBOLIC_METHODS





_NOT_LOG_LINEAR = Unavailable("the logs of the demands are not linear in the log-prices "
                              "and log-level")


# -- symbolic route (workers run in a killable process) ----------------------------------
def _candidates(method: str, c, prices, level, xs, level_positive: bool):
    """Worker: list of (level expr, {price: expr}) solving Shephard's lemma, w_1 = 1; or
    :class:`Unavailable` with the reason when the method does not apply."""
    w1, rest = prices[0], list(prices[1:])
    c1 = c.xreplace({w1: sp.Integer(1)})
    ds = [sp.diff(c, w).xreplace({w1: sp.Integer(1)}) for w in prices]
    out = []
    if method == "log-linear":
        Ls = [sp.Symbol(f"_L{i}", real=True) for i in range(len(rest))]
        Ly = sp.Symbol("_Ly", real=True)
        sub = {w: sp.exp(L) for w, L in zip(rest, Ls)}
        sub[level] = sp.exp(Ly)
        eqs = []
        for d, x in zip(ds, xs):
            e = sp.expand_log(sp.log(sp.powsimp(sp.expand_power_base(d.xreplace(sub),
                                                                     force=True),
                                                force=True)), force=True)
            eqs.append(sp.expand(e - sp.log(x)))
        unknowns = Ls + [Ly]
        try:
            A, b = sp.linear_eq_to_matrix(eqs, unknowns)
        except (NonlinearError, ValueError):
            return _NOT_LOG_LINEAR
        if A.free_symbols & set(unknowns) or b.free_symbols & set(unknowns):
            return _NOT_LOG_LINEAR
        if A.det() == 0:
            return Unavailable("the log-linear system is singular")
        sol = A.LUsolve(b)
        lev = sp.exp(sol[-1])
        ws = {w: sp.exp(sol[i]) for i, w in enumerate(rest)}
        out.append((lev, ws))
        return out
    if method == "ratio":
        ratios = [sp.simplify(d / ds[0]) for d in ds[1:]]
        if any(level in r.free_symbols for r in ratios):
            return Unavailable("the demand ratios depend on the level (not homothetic)")
        if not rest:
            wsols = [{}]
        else:
            wsols = sp.solve([sp.Eq(r, x / xs[0]) for r, x in zip(ratios, xs[1:])], rest,
                             dict=True)
        for ws in wsols:
            if set(ws) != set(rest):
                continue
            spend = sp.Integer(1) * xs[0] + sum(ws[w] * x for w, x in zip(rest, xs[1:]))
            lev_eq = sp.Eq(c1.xreplace(ws), spend)
            for lev in sp.solve(lev_eq, level):
                out.append((lev, ws))
        return out
    # plain solve
    sols = sp.solve([sp.Eq(d, x) for d, x in zip(ds, xs)], rest + [level], dict=True)
    for s in sols:
        if level in s and all(w in s for w in rest):
            out.append((s[level], {w: s[w] for w in rest}))
    return out


def _simplify_worker(expr, xs):
    """Shortest of a few simplifications (quantities are positive, so powers split)."""
    cands = [expr]

    def tidy(e):
        e = sp.powsimp(sp.expand_power_base(e, force=True), force=True)
        e = e.replace(lambda z: z.is_Pow, lambda z: sp.Pow(z.base, sp.cancel(z.exp)))
        return sp.powsimp(e, force=True)

    steps = (tidy, lambda e: sp.factor(tidy(e)), lambda e: tidy(sp.simplify(tidy(e))),
             lambda e: sp.factor(tidy(sp.simplify(tidy(e)))))
    for step in steps:
        try:
            cands.append(step(expr))
        except Exception:  # noqa: BLE001 - simplification is optional
            continue
    return min(cands, key=lambda e: (sp.count_ops(e), len(str(e))))


class _Context:
    """Everything the symbolic verification needs about the dual."""

    def __init__(self, c_expr, c_exact, prices, level, xs, free, positive_level, engine):
        self.c = c_expr
        self.c_exact = c_exact
        self.prices = list(prices)
        self.level = level
        self.xs = list(xs)
        self.free = list(free)
        self.positive_level = positive_level
        self.engine = engine


def _verify(ctx: _Context, lev, ws) -> tuple[bool, str]:
    rng = np.random.default_rng(21)
    prices, xs = ctx.prices, ctx.xs
    wexprs = [sp.Integer(1)] + [ws[w] for w in prices[1:]]
    args = xs + ctx.free
    try:
        f_lev = numpy_function(args, lev)
        f_ws = [numpy_function(args, e) for e in wexprs]
        f_c = numpy_function(prices + [ctx.level] + ctx.free, ctx.c)
        f_d = [numpy_function(prices + [ctx.level] + ctx.free, sp.diff(ctx.c, p))
               for p in prices]
    except Exception as exc:  # noqa: BLE001
        return False, f"could not be evaluated ({type(exc).__name__})"
    for k in range(6):
        x = rng.uniform(0.5, 3.0, len(xs))
        pv = list(rng.uniform(0.2, 0.6, len(ctx.free)))
        with np.errstate(all="ignore"):
            try:
                y = complex(f_lev(*x, *pv))
                w = np.array([complex(g(*x, *pv)) for g in f_ws])
            except (ArithmeticError, ValueError, TypeError) as exc:
                return False, f"could not be evaluated ({type(exc).__name__})"
        if not (np.isfinite(y) and abs(y.imag) <= 1e-10 * (1 + abs(y.real))):
            return False, "not real at a sample point"
        if np.any(~np.isfinite(w)) or np.any(np.abs(w.imag) > 1e-10 * (1 + np.abs(w.real))) \
                or np.any(w.real <= 0):
            return False, "supporting prices not positive at a sample point"
        y, w = y.real, w.real
        if ctx.positive_level and not y > 0:
            return False, "level not positive at a sample point"
        with np.errstate(all="ignore"):
            try:
                cv = complex(f_c(*w, y, *pv))
                dv = np.array([complex(g(*w, y, *pv)) for g in f_d])
            except (ArithmeticError, ValueError, TypeError) as exc:
                return False, f"dual could not be evaluated ({type(exc).__name__})"
        spend = float(w @ x)
        if not abs(cv - spend) <= 1e-8 * (1 + abs(spend)):
            return False, "c(w(x), f(x)) differs from w(x)·x"
        if not np.all(np.abs(dv - x) <= 1e-8 * (1 + np.abs(x))):
            return False, "the demands at (w(x), f(x)) do not give back x"
        if ctx.engine is not None and k < 3:
            phi, _ = ctx.engine.phi(x, y)
            if not phi >= -1e-8 * (1 + spend):
                return False, "w(x) does not support the input requirement set"
    return True, ""


def _symbolic(ctx: _Context, budget, notes: list):
    account = Budget.of(budget)
    found = first_verified(
        SYMBOLIC_METHODS, account, notes,
        lambda method, acc: run_with_budget(
            _candidates, method, ctx.c_exact, tuple(ctx.prices), ctx.level, tuple(ctx.xs),
            ctx.positive_level, budget=acc),
        lambda cand: _verify(ctx, *cand))
    if found is None:
        return None
    method, (lev, _) = found
    try:
        lev = run_with_budget(_simplify_worker, lev, tuple(ctx.xs), budget=account)
    except Exception:  # noqa: BLE001 - keep the verified unsimplified form
        notes.append("simplification of the closed form did not finish within the budget")
    return method, lev

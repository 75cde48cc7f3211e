"""The solver chain: from a technology or a preference to its dual functions.

Each dual is found by the first route that works, in order:

1. **catalogue** — the function is recognised (under any symbol names, inside monotone
   outer layers) as a standard form whose closed-form dual is published;
2. **symbolic** — derived by the engine within a budget of CPU seconds, in a worker
   process killed when the budget is used up (:mod:`duality.solve.budget`).  Routes, cheapest first: the first-order conditions in logs
   solved as a linear system in log-quantities (power forms); tangency conditions solved
   for input ratios, then the level constraint (homothetic forms); plain Lagrangian
   ``sympy.solve`` last.  Every symbolic candidate is checked numerically (constraint,
   tangency, second-order condition) at sampled points before it is returned;
3. **numeric** — a callable that solves the optimisation at each price point
   (:mod:`duality.solve.numeric`).

Every result says which route produced it and why earlier routes stopped.

``budget`` is the CPU seconds of the symbolic work of one call: a profit or indirect
utility function draws on what its cost or expenditure function left (recorded with that
result, so the answer does not depend on whether it was cached).
"""
from __future__ import annotations

import math
from functools import lru_cache

import numpy as np
import sympy as sp

from . import additive as _additive
from . import derive_dual as _dual
from . import numeric as _numeric
from .budget import Budget, run_with_budget
from ..errors import BudgetExceeded, DualityError, NoSolutionError
from .forms import recognise
from ..model.base import Model
from .points import sample_primal_points
from .result import Derived, Evaluators, Solution, Unavailable
from ..model.formula import substitute
from ..model.lambdas import numpy_function
from sympy.solvers.solveset import NonlinearError

#: Default budget (CPU seconds, see :mod:`duality.solve.budget`) of the symbolic route of
#: one dual.
DEFAULT_BUDGET = 5.0

SYMBOLIC_METHODS = ("log-linear", "homothetic", "additive", "lagrangian")


# -- public entry points ---------------------------------------------------------------
def cost(model: Model, *, budget: float | None = DEFAULT_BUDGET) -> Derived:
    """The cost function c(w, y) = min { w·x : f(x) >= y } of a technology.

    ``.demands`` are the conditional input demands x_i(w, y) (Shephard's lemma).
    """
    _need(model, "technology", "cost function")
    return _spending_result(model, "cost", "conditional_demand", budget)


def expenditure(model: Model, *, budget: float | None = DEFAULT_BUDGET) -> Derived:
    """The expenditure function e(p, u) = min { p·x : U(x) >= u } of a preference.

    ``.demands`` are the Hicksian (compensated) demands h_i(p, u).
    """
    _need(model, "preference", "expenditure function")
    return _spending_result(model, "expenditure", "hicksian_demand", budget)


def indirect_utility(model: Model, *, budget: float | None = DEFAULT_BUDGET) -> Derived:
    """The indirect utility function v(p, m) = max { U(x) : p·x <= m } of a preference.

    ``.demands`` are the Marshallian demands x_i(p, m) (Roy's identity).
    """
    _need(model, "preference", "indirect utility function")
    sol = _indirect_solution(model, budget)
    args = tuple(model.prices) + (model.income,)
    return _derived(model, "indirect_utility", "marshallian_demand", args, sol, "utility")


def profit(model: Model, *, budget: float | None = DEFAULT_BUDGET) -> Derived:
    """The profit function π(p, w) = max { p f(x) − w·x } of a technology.

    It exists only under decreasing returns to scale; with constant or increasing returns
    a :class:`~duality.errors.NoSolutionError` explains why.  ``.demands`` holds the
    output supply (under the output's name) and the unconditional input demands
    (Hotelling's lemma).
    """
    _need(model, "technology", "profit function")
    sol = _profit_solution(model, budget)
    args = (model.output_price,) + tuple(model.prices)
    return _derived(model, "profit", "factor_demand", args, sol, "profit")


def _need(model: Model, role: str, what: str) -> None:
    if not isinstance(model, Model):
        raise DualityError(f"a {what} needs a model from technology() or preference(), "
                           f"not {type(model).__name__}")
    if model.role != role:
        other = "a technology" if role == "technology" else "a preference"
        raise DualityError(f"a {what} belongs to {other}; this model is a {model.role}")


# -- building results ------------------------------------------------------------------
def _derived(model: Model, kind: str, demand_kind: str, args: tuple, sol: Solution,
             numeric_kind: str) -> Derived:
    positive = frozenset(a for a in args if a.is_positive)
    names = [str(q) for q in model.quantities]
    if sol.evaluators is not None:  # numeric evaluators from the dual side (inversions)
        return _derived_from_evaluators(model, kind, demand_kind, args, sol, positive)
    batch = _numeric.Batch(model, numeric_kind) if sol.route == "numeric" else None

    def make(what, name, expr, numeric, **more):
        return Derived(kind=what, args=args, expr=expr, route=sol.route, method=sol.method,
                       params=model.values, source=sol.source, notes=sol.notes,
                       conditions=sol.conditions, name=name, positive_args=positive,
                       numeric=None if expr is not None else numeric, solver=batch,
                       condition_reasons=sol.condition_reasons, **more)

    def factory():
        out = {}
        if kind == "profit":
            yname = str(model.level)
            out[yname] = make("supply", yname, sol.supply, lambda pt: batch(pt).output)
        for i, name in enumerate(names):
            e = None if sol.demands is None else sol.demands[i]
            out[name] = make(demand_kind, name, e,
                             lambda pt, i=i: batch(pt).quantities[i])
        return out

    return make(kind, kind, sol.value, lambda pt: batch(pt).value, demand_factory=factory)


def _derived_from_evaluators(model, kind, demand_kind, args, sol, positive) -> Derived:
    ev = sol.evaluators
    names = [str(q) for q in model.quantities]

    def make(what, name, numeric, **more):
        return Derived(kind=what, args=args, expr=None, route="numeric", method=sol.method,
                       params=model.values, notes=sol.notes, name=name,
                       positive_args=positive, numeric=numeric, **more)

    def factory():
        out = {}
        if kind == "profit":
            out[str(model.level)] = make("supply", str(model.level), ev.output)
        for i, name in enumerate(names):
            out[name] = make(demand_kind, name, ev.quantities[i])
        return out
    return make(kind, kind, ev.value, demand_factory=factory)


# -- the dual side -------------------------------------------------------------------------
def _dual_spending(model: Model, budget) -> Solution:
    """Cost or expenditure of a dual-side model: given, or by inversion / conjugation."""
    if model.side in ("cost", "expenditure"):
        return _dual.given(model)
    notes: list[str] = []
    g = _dual.given(model)
    if model.side == "indirect_utility":
        m, u = model.income, model.level
        _dual.check_monotone_level(model, model.expr, m)
        e = _dual.invert(model, model.expr, m, u, budget, notes, "v(p, m) = u for m")
        if e is not None:
            return Solution(value=e, demands=tuple(d.xreplace({m: e}) for d in g.demands),
                            route="symbolic",
                            method="v(p, m) = u solved for m; Hicksian demands are the "
                            "Marshallian ones at m = e(p, u)", source=g.source,
                            notes=tuple(notes))
        value, xs = _dual.numeric_inverse(model, model.expr, m, u, list(g.demands), log=True)
        return Solution(value=None, demands=None, route="numeric",
                        method="v(p, m) = u solved for m by bisection", notes=tuple(notes),
                        evaluators=Evaluators(value=value, quantities=tuple(xs)))
    # profit side: c(w, y) = p*·y − π(p*, w) where supply ∂π/∂p = y
    p, y = model.output_price, model.level
    supply = g.supply
    _dual.check_monotone_level(model, supply, p)
    pstar = _dual.invert(model, supply, p, y, budget, notes, "∂π/∂p = y for p")
    if pstar is not None:
        c = (p * y - model.expr).xreplace({p: pstar})
        return Solution(value=c, demands=tuple(d.xreplace({p: pstar}) for d in g.demands),
                        route="symbolic",
                        method="c(w, y) = max_p p·y − π(p, w), at the price where supply "
                        "is y", source=g.source, notes=tuple(notes))
    value, xs = _dual.numeric_inverse(model, supply, p, y,
                                      [p * y - model.expr] + list(g.demands), log=True)
    return Solution(value=None, demands=None, route="numeric",
                    method="c(w, y) = max_p p·y − π(p, w) by bisection on the supply "
                    "function", notes=tuple(notes),
                    evaluators=Evaluators(value=xs[0], quantities=tuple(xs[1:])))


def _dual_indirect(model: Model, budget) -> Solution:
    if model.side == "indirect_utility":
        return _dual.given(model)
    notes: list[str] = []
    g = _dual.given(model)
    m, u = model.income, model.level
    _dual.check_monotone_level(model, model.expr, u)
    v = _dual.published_inverse(model, model.expr, u, m, notes, "e(p, u) = m for u")
    if v is not None:
        return Solution(value=v, demands=tuple(d.xreplace({u: v}) for d in g.demands),
                        route="catalogue",
                        method="the published indirect utility, which solves e(p, u) = m "
                        "for u; Marshallian demands are the Hicksian ones at u = v(p, m)",
                        source=g.source, notes=tuple(notes))
    v = _dual.invert(model, model.expr, u, m, budget, notes, "e(p, u) = m for u")
    if v is not None:
        return Solution(value=v, demands=tuple(d.xreplace({u: v}) for d in g.demands),
                        route="symbolic",
                        method="e(p, u) = m solved for u; Marshallian demands are the "
                        "Hicksian ones at u = v(p, m)", source=g.source, notes=tuple(notes))
    value, xs = _dual.numeric_inverse(model, model.expr, u, m, list(g.demands), log=False)
    return Solution(value=None, demands=None, route="numeric",
                    method="e(p, u) = m solved for u by bisection", notes=tuple(notes),
                    evaluators=Evaluators(value=value, quantities=tuple(xs)))


def _dual_numeric_profit(model: Model, spend: Solution, notes: list) -> Solution:
    """Profit from a cost function with no closed-form supply: marginal cost = p."""
    y, p = model.level, model.output_price
    mc = sp.diff(spend.value, y)
    _dual.check_monotone_level(
        model, mc, y, "no profit function: marginal cost falls as output rises at {at} "
        "(increasing returns there), so p·y − c(w, y) has no interior maximum; a profit "
        "function needs rising marginal cost (decreasing returns to scale)")
    value, xs = _dual.numeric_inverse(model, mc, y, p,
                                      [p * y - spend.value, y] + list(spend.demands),
                                      log=True)
    return Solution(value=None, demands=None, route="numeric",
                    method="π(p, w) = max_y p·y − c(w, y) by bisection on marginal cost",
                    notes=tuple(notes),
                    evaluators=Evaluators(value=xs[0], output=xs[1],
                                          quantities=tuple(xs[2:])))


def _spending_result(model: Model, kind: str, demand_kind: str, budget) -> Derived:
    sol = _spending_solution(model, budget)
    args = tuple(model.prices) + (model.level,)
    return _derived(model, kind, demand_kind, args, sol, "spending")


# -- spending problem: min w·x s.t. f(x) >= level --------------------------------------
@lru_cache(maxsize=256)
def _spending_solution(model: Model, budget) -> Solution:
    if not model.is_primal:
        return _dual_spending(model, budget)
    xs, ws, level = list(model.quantities), list(model.prices), model.level
    match, notes = recognise(model.expr, xs, model.values, model.role)
    notes = list(notes)
    if match is not None:
        core = match.form.solve(match.pieces, xs, ws, match.to_core(level))
        in_range, reasons = match.level_condition(
            level, model.values, "output" if model.is_technology else "utility")
        return Solution(value=core.value, demands=core.demands, route="catalogue",
                        method=f"recognised as {match.description}", source=match.form.source,
                        notes=tuple(notes) + core.notes,
                        conditions=tuple(match.conditions) + core.conditions + in_range,
                        match=match, condition_reasons=reasons)
    notes.append("not a catalogue form")
    account = Budget.of(budget)
    found = _symbolic(model, account, notes, _spending_candidates, _verify_spending)
    if found is not None:
        method, value, demands = found
        # every symbolic route solves the interior first-order conditions: where a demand
        # would be negative the optimum is a corner it does not give, so the result says
        # it is valid only where each demand is positive (never a negative quantity)
        conds = _additive.interior_conditions(demands)
        return Solution(value=value, demands=demands, route="symbolic", method=method,
                        notes=tuple(notes), conditions=conds, spent=account.spent)
    _numeric_allowed(model, notes)
    return _numeric_solution(notes, account.spent)


def _numeric_solution(notes: list, spent: float = 0.0) -> Solution:
    """The batched numeric route (:mod:`duality.solve.numeric`), after ``notes``."""
    return Solution(value=None, demands=None, route="numeric", method=_numeric.SOLVER,
                    notes=tuple(notes), spent=spent)


def _left_after(spend: Solution, budget):
    """The budget of a step that follows the spending problem in one call: what the
    spending problem's symbolic route left of ``budget`` (its CPU seconds are recorded,
    so the answer is the same whether the spending problem was solved now or cached)."""
    if budget is None:
        return None
    return max(0.0, float(budget) - spend.spent)


def _numeric_allowed(model: Model, notes: list) -> None:
    if model.free_params:
        raise NoSolutionError(
            "no closed form was found (" + "; ".join(notes) + "), and the numeric route "
            "needs a value for every parameter: give "
            + ", ".join(str(s) for s in model.free_params))


def _symbolic(model: Model, budget, notes: list, candidates_fn, verify_fn):
    """Run the symbolic methods in order on one account; first verified answer wins."""
    found = first_verified(SYMBOLIC_METHODS, Budget.of(budget), notes,
                           lambda method, account: run_with_budget(
                               candidates_fn, method, model, budget=account),
                           lambda cand: verify_fn(model, *cand))
    return None if found is None else (found[0], *found[1])


def first_verified(methods, account: Budget | float | None, notes: list, run, verify):
    """The first candidate of the first method that passes ``verify``, or None.

    ``account`` is the :class:`~duality.solve.budget.Budget` (CPU seconds) every method
    draws on, one after another.  ``run(method, account)`` returns a list of candidates or
    an :class:`~duality.solve.result.Unavailable` saying why the method does not apply (it
    runs in a worker charged to the account); ``verify(candidate)`` returns ``(ok, why)``
    and is charged too.  Every method that fails, runs out of budget or finds nothing
    leaves a note saying so.
    Returns ``(method, candidate)``.
    """
    account = Budget.of(account)
    for method in methods:
        if account.exhausted:
            notes.append(f"symbolic route stopped: budget of {account.total:g} CPU s "
                         "used up")
            return None
        try:
            cands = run(method, account)
        except BudgetExceeded as exc:
            if exc.kind == "wall":
                notes.append(f"{method} route stopped by the wall-clock backstop ({exc})")
            else:
                notes.append(f"{method} route did not finish within the budget "
                             f"({account.total:g} CPU s in all)")
            return None
        except NotImplementedError as exc:
            notes.append(f"{method} route: sympy cannot solve this ({exc})")
            continue
        except Exception as exc:  # noqa: BLE001 - a failing route is a note, not an error
            notes.append(f"{method} route failed: {type(exc).__name__}: {exc}")
            continue
        if isinstance(cands, Unavailable):
            notes.append(f"{method} route not applicable: {cands.reason}")
            continue
        rejected = []
        for cand in cands:
            with account.measure():
                ok, why = verify(cand)
            if ok:
                if rejected:
                    notes.append(f"{method} route: {len(rejected)} of {len(cands)} solution "
                                 f"branches rejected by the numeric check (e.g. {rejected[0]})")
                return method, cand
            rejected.append(why)
        if rejected:
            notes.append(f"{method} route: every candidate rejected by the numeric check "
                         f"(e.g. {rejected[0]})")
        else:
            notes.append(f"{method} route found no solution")
    return None


def _spending_candidates(method: str, model: Model):
    """Worker: candidate (value, demands) pairs of min w·x s.t. f = level, or
    :class:`Unavailable` with the reason the method does not apply."""
    xs, ws, y = list(model.quantities), list(model.prices), model.level
    f = model.expr
    n = len(xs)
    grads = [sp.diff(f, x) for x in xs]
    if method == "log-linear":
        zs = sp.symbols(f"z_0:{n}", real=True)
        sub = {x: sp.exp(z) for x, z in zip(xs, zs)}
        eqs = [sp.log(grads[i].xreplace(sub)) - sp.log(grads[0].xreplace(sub))
               - sp.log(ws[i]) + sp.log(ws[0]) for i in range(1, n)]
        eqs.append(sp.log(f.xreplace(sub)) - sp.log(y))
        eqs = [sp.expand(sp.expand_log(e, force=True)) for e in eqs]
        try:
            A, b = sp.linear_eq_to_matrix(eqs, zs)
        except NonlinearError:
            return Unavailable("the first-order conditions are not linear in log-quantities")
        if A.det() == 0:
            return Unavailable("the log-linear system is singular")
        zsol = A.LUsolve(b)
        demands = tuple(_exp_of_logs(z) for z in zsol)
        value = sp.Add(*[w * d for w, d in zip(ws, demands)])
        return [(value, demands)]
    if method == "homothetic":
        if n == 1:
            sols = sp.solve(sp.Eq(f, y), xs[0], dict=True)
            return [(ws[0] * s[xs[0]], (s[xs[0]],)) for s in sols]
        rs = sp.symbols(f"r_1:{n}", positive=True)
        sub = {xs[i]: rs[i - 1] * xs[0] for i in range(1, n)}
        ratios = []
        for i in range(1, n):
            r = (grads[i] / grads[0]).xreplace(sub)
            if not _free_of_numerically(r, xs[0]):
                return Unavailable("the tangency conditions depend on scale "
                                   "(not homothetic)")
            # the slope ratio does not depend on scale, so read it off at x1 = 1
            r = sp.powsimp(sp.simplify(r.xreplace({xs[0]: 1})), force=True)
            ratios.append(sp.Eq(r, ws[i] / ws[0]))
        rsols = sp.solve(ratios, rs, dict=True)
        out = []
        for rs_sol in rsols:
            g = f.xreplace(sub).xreplace(rs_sol)
            for x1 in sp.solve(sp.Eq(g, y), xs[0]):
                demands = (x1,) + tuple(rs_sol[r] * x1 for r in rs)
                out.append((sp.Add(*[w * d for w, d in zip(ws, demands)]), demands))
        return out
    if method == "additive":
        return _additive.candidates("spending", model)
    if method == "lagrangian":
        lam = sp.Symbol("lambda_", positive=True)
        eqs = [g - lam * w for g, w in zip(grads, ws)] + [f - y]
        sols = sp.solve(eqs, xs + [lam], dict=True)
        out = []
        for s in sols:
            if all(x in s for x in xs):
                demands = tuple(s[x] for x in xs)
                out.append((sp.Add(*[w * d for w, d in zip(ws, demands)]), demands))
        return out
    raise ValueError(f"unknown symbolic method {method!r}")


def _free_of_numerically(expr, x, tries: int = 6) -> bool:
    """True when ``expr`` does not change with ``x`` at random values of every symbol."""
    if x not in expr.free_symbols:
        return True
    rng = np.random.default_rng(5)
    others = sorted(expr.free_symbols - {x}, key=str)
    fn = numpy_function([x] + others, expr)
    for _ in range(tries):
        vals = list(rng.uniform(0.3, 0.9, len(others)))
        with np.errstate(all="ignore"):
            a = complex(fn(0.7, *vals))
            b = complex(fn(2.3, *vals))
        if not (np.isfinite(a) and np.isfinite(b)) or abs(a - b) > 1e-9 * (1 + abs(a)):
            return False
    return True


def _exp_of_logs(z):
    """exp(z) for z = sum_k c_k log(t_k) + d, written as prod_k t_k**c_k * exp(d)."""
    out = []
    for term in sp.Add.make_args(sp.expand(z)):
        logs = [f for f in sp.Mul.make_args(term) if isinstance(f, sp.log)]
        if len(logs) == 1:
            out.append(logs[0].args[0] ** sp.cancel(term / logs[0]))
        else:
            out.append(sp.exp(term))
    return sp.powsimp(sp.Mul(*out))


# -- numeric verification of symbolic candidates -----------------------------------------
def _lam(args, expr):
    return numpy_function(args, expr)


def _verify_spending(model: Model, value, demands) -> tuple[bool, str]:
    ws, y = list(model.prices), model.level
    comp = _numeric.compile_model(model)
    args = ws + [y] + list(comp.params)
    try:
        dfn = _lam(args, sp.Matrix(demands))
        vfn = _lam(args, value)
    except Exception as exc:  # noqa: BLE001
        return False, f"cannot evaluate ({exc})"
    for pt in sample_primal_points(model):
        pv, xr, w, F = pt.params, pt.quantities, pt.prices, pt.fns
        level = F.f(xr)
        if not math.isfinite(level):
            continue
        x, v = _bundle(dfn, vfn, list(w) + [level] + [pv[s] for s in comp.params])
        where = _where(ws, w, y, level)
        if x is None:
            return False, f"demands not positive and real at {where}"
        if abs(F.f(x) - level) > 1e-8 * (1 + abs(level)):
            return False, f"the level constraint fails at {where}"
        if abs(v.real - w @ x) > 1e-8 * (1 + abs(v.real)):
            return False, f"value differs from w·x at {where}"
        g = F.g(x)
        lam = g / w
        if not np.all(lam > 0) or np.ptp(lam) > 1e-7 * np.abs(lam).max():
            return False, f"the tangency condition fails at {where}"
        if not _numeric._second_order_spending(F, x):
            return False, f"the second-order condition fails at {where} (not a minimum)"
    return True, ""


def _bundle(dfn, vfn, vals):
    """Evaluate candidate demands and value; demands None unless positive and real (or
    when numpy cannot evaluate them, e.g. a special function it lacks)."""
    with np.errstate(all="ignore"):
        try:
            x = np.asarray(dfn(*vals), dtype=complex).reshape(-1)
            v = complex(vfn(*vals))
        except (NameError, TypeError, ValueError, ZeroDivisionError):
            return None, complex(math.nan)
    if np.any(np.abs(x.imag) > 1e-9 * (1 + np.abs(x.real))) or np.any(x.real <= 0):
        return None, v
    return x.real, v


def _where(syms, vals, lsym=None, lval=None) -> str:
    parts = [f"{s}={v:.4g}" for s, v in zip(syms, vals)]
    if lsym is not None:
        parts.append(f"{lsym}={lval:.4g}")
    return ", ".join(parts)


# -- indirect utility ---------------------------------------------------------------------
@lru_cache(maxsize=256)
def _indirect_solution(model: Model, budget) -> Solution:
    if not model.is_primal:
        return _dual_indirect(model, budget)
    xs, ps, m = list(model.quantities), list(model.prices), model.income
    spend = _spending_solution(model, budget)
    notes = list(spend.notes)
    match = spend.match
    if match is not None:
        core_level, conds = match.form.level(match.pieces, xs, ps, m)
        v = match.from_core(core_level)
        marsh = match.form.marshallian(match.pieces, xs, ps, m)
        if marsh is None:
            marsh = tuple(d.xreplace({model.level: v}) for d in spend.demands)
        return Solution(value=v, demands=tuple(marsh), route="catalogue",
                        method=spend.method, source=spend.source, notes=tuple(notes),
                        conditions=tuple(match.conditions) + tuple(conds))
    if _additive.split(model.expr, xs) is not None:
        found = _additive_utility(model, budget, notes)
        if found is not None:
            return found
    if spend.route == "symbolic":
        try:
            cands = run_with_budget(_invert_candidates, spend.value, model.level, m,
                                    budget=_left_after(spend, budget))
        except BudgetExceeded:
            cands = []
            notes.append("solving e(p, u) = m for u did not finish within the budget")
        except Exception as exc:  # noqa: BLE001
            cands = []
            notes.append(f"solving e(p, u) = m for u failed: {exc}")
        for v in cands:
            marsh = tuple(d.xreplace({model.level: v}) for d in spend.demands)
            ok, why = _verify_utility(model, v, marsh)
            if ok:
                return Solution(value=v, demands=marsh, route="symbolic",
                                method=f"e(p, u) = m solved for u; e by the {spend.method} "
                                "route", notes=tuple(notes),
                                conditions=_additive.interior_conditions(marsh))
            notes.append(f"candidate v(p, m) rejected by the numeric check: {why}")
    _numeric_allowed(model, notes)
    return _numeric_solution(notes)


def _additive_utility(model: Model, budget, notes: list) -> Solution | None:
    """Marshallian demands of an additive preference: inverse marginal utilities and the
    budget solved for the multiplier (:mod:`duality.solve.additive`), verified."""
    try:
        cands = run_with_budget(_additive.candidates, "utility", model, budget=budget)
    except BudgetExceeded:
        notes.append("additive route for v(p, m) did not finish within the budget")
        return None
    except Exception as exc:  # noqa: BLE001 - a failing route is a note, not an error
        notes.append(f"additive route for v(p, m) failed: {type(exc).__name__}: {exc}")
        return None
    if isinstance(cands, Unavailable):
        notes.append(f"additive route for v(p, m) not applicable: {cands.reason}")
        return None
    for v, marsh in cands:
        ok, why = _verify_utility(model, v, marsh)
        if ok:
            return Solution(value=v, demands=marsh, route="symbolic",
                            method="additive: inverse marginal utilities, budget solved "
                                   "for the multiplier", notes=tuple(notes),
                            conditions=_additive.interior_conditions(marsh))
        notes.append(f"additive candidate v(p, m) rejected by the numeric check: {why}")
    return None


def _invert_candidates(e, u, m):
    """Worker: solutions u of e(p, u) = m."""
    return [s for s in sp.solve(sp.Eq(e, m), u) if s.is_real is not False]


def _verify_utility(model: Model, v, marsh) -> tuple[bool, str]:
    ps, m = list(model.prices), model.income
    comp = _numeric.compile_model(model)
    args = ps + [m] + list(comp.params)
    try:
        vfn, dfn = _lam(args, v), _lam(args, sp.Matrix(marsh))
    except Exception as exc:  # noqa: BLE001
        return False, f"cannot evaluate ({exc})"
    for pt in sample_primal_points(model):
        pv, xr, p, F = pt.params, pt.quantities, pt.prices, pt.fns
        income = float(p @ xr)
        x, u = _bundle(dfn, vfn, list(p) + [income] + [pv[s] for s in comp.params])
        where = _where(ps, p, m, income)
        if x is None:
            return False, f"demands not positive and real at {where}"
        if abs(p @ x - income) > 1e-8 * income or abs(F.f(x) - u.real) > 1e-8 * (1 + abs(u)):
            return False, f"budget or utility level wrong at {where}"
        if F.f(xr) > u.real + 1e-8 * (1 + abs(u)):
            return False, f"a cheaper bundle gives more utility at {where}"
    return True, ""


# -- profit ---------------------------------------------------------------------------------
@lru_cache(maxsize=256)
def _profit_solution(model: Model, budget) -> Solution:
    if model.side == "profit":
        return _dual.given(model)
    ws, y, p = list(model.prices), model.level, model.output_price
    spend = _spending_solution(model, budget)
    notes = list(spend.notes)
    if spend.value is not None:
        s = _scale_elasticity(spend.value, y, ws)
        if s is None and model.values:
            # with the parameter values in, terms such as gyy·log y may vanish
            s = _scale_elasticity(substitute(spend.value, model.values), y, ws)
        if s is not None:
            # c = K(w) y**s: profit exists iff s > 1 (decreasing returns, RTS = 1/s < 1)
            sv = substitute(s, model.values)
            if sv.is_number:
                if float(sv) <= 1 + 1e-12:
                    kind = "constant" if abs(float(sv) - 1) <= 1e-12 else "increasing"
                    raise NoSolutionError(
                        f"no profit function: the technology has {kind} returns to scale "
                        f"(returns to scale {_rts_text(float(sv))}, so cost grows like "
                        f"y**{float(sv):.4g}). Profit p·y − c(w, y) is then unbounded when "
                        "p is above unit cost and maximal at y = 0 when it is below, so "
                        "there is no finite supply; a profit function needs decreasing "
                        "returns to scale")
                conds = ()
            else:
                conds = (sp.StrictGreaterThan(s, 1),)
            K = _neat_free_of(spend.value / y ** s, y)
            ystar = (p / (s * K)) ** (1 / (s - 1))
            # at the optimum K y**s = p y / s, so profit = p y (s - 1) / s
            return _profit_from_supply(model, spend, ystar, notes, conds,
                                       "p·y − c(w, y) maximised with c = K(w) y**s, s > 1",
                                       value=p * ystar * (s - 1) / s)
        try:
            if _log_polynomial_degree(spend.value, y) >= 2:
                raise NotImplementedError("log c is a polynomial of degree 2 or more in "
                                          "log y, so ∂c/∂y = p has no closed form")
            cands = run_with_budget(_supply_candidates, spend.value, y, p,
                                    budget=_left_after(spend, budget))
        except BudgetExceeded:
            cands = []
            notes.append("solving ∂c/∂y = p for y did not finish within the budget")
        except Exception as exc:  # noqa: BLE001
            cands = []
            notes.append(f"solving ∂c/∂y = p for y failed: {exc}")
        for ystar in cands:
            sol = _profit_from_supply(model, spend, ystar, notes, (),
                                      "maximise p·y − c(w, y): ∂c/∂y = p solved for y")
            ok, why = _verify_profit(model, sol)
            if ok:
                return sol
            notes.append(f"candidate supply rejected by the numeric check: {why}")
    if not model.is_primal:
        return _dual_numeric_profit(model, spend, notes)
    if not model.free_params:
        _check_returns_numerically(model)
    _numeric_allowed(model, notes)
    return _numeric_solution(notes)


def _profit_from_supply(model, spend: Solution, ystar, notes, conds, method,
                        value=None) -> Solution:
    y, p = model.level, model.output_price
    demands = tuple(d.xreplace({y: ystar}) for d in spend.demands)
    if value is None:
        value = p * ystar - spend.value.xreplace({y: ystar})
    route = "catalogue" if spend.route == "catalogue" else "symbolic"
    return Solution(value=value, demands=demands, route=route,
                    method=f"{method}; cost function {spend.method}", source=spend.source,
                    notes=tuple(notes), conditions=tuple(spend.conditions) + tuple(conds),
                    supply=ystar)


def _scale_elasticity(c, y, prices):
    """s with c(w, t·y) = t**s c(w, y) when it is a constant, else None."""
    if c.has(sp.Piecewise, sp.Min, sp.Max):
        return None
    s = sp.expand(sp.expand_log(sp.log(c), force=True).diff(y) * y)
    if s.free_symbols & ({y} | set(prices)):  # the cheap form may still hide a constant
        s = sp.simplify(s)
    if s.free_symbols & ({y} | set(prices)):
        return None
    return s


def _neat_free_of(e, y):
    """``e`` (which does not depend on ``y``) with powers combined; simplified only when
    the cheap rewrite still shows ``y``.  (``simplify`` costs much, and its first call
    imports a large part of sympy.)"""
    cheap = sp.powsimp(sp.expand_power_base(e, force=True), force=True)
    if y not in cheap.free_symbols:
        return cheap
    return sp.powsimp(sp.simplify(e), force=True)


def _log_polynomial_degree(c, y) -> int:
    """Degree of log c as a polynomial in log y (translog: 2), or 0 when it is not one."""
    z = sp.Symbol("z_", real=True)
    try:
        lc = sp.expand_log(sp.log(c), force=True).xreplace({y: sp.exp(z)})
        return sp.Poly(sp.expand(sp.expand_log(lc, force=True)), z).degree()
    except Exception:  # noqa: BLE001 - not a polynomial in log y: sympy may still solve it
        return 0


def _supply_candidates(c, y, p):
    return [s for s in sp.solve(sp.Eq(sp.diff(c, y), p), y) if s.is_real is not False]


def _verify_profit(model: Model, sol: Solution) -> tuple[bool, str]:
    ws, p = list(model.prices), model.output_price
    comp = _numeric.compile_model(model)
    args = [p] + ws + list(comp.params)
    try:
        xfn = _lam(args, sp.Matrix(sol.demands))
    except Exception as exc:  # noqa: BLE001
        return False, f"cannot evaluate ({exc})"
    for pt in sample_primal_points(model):
        pv, w, F = pt.params, pt.prices, pt.fns
        price = 2.0
        with np.errstate(all="ignore"):
            x = np.asarray(xfn(price, *w, *[pv[s] for s in comp.params]),
                           dtype=complex).reshape(-1)
        if np.any(np.abs(x.imag) > 1e-9) or np.any(x.real <= 0):
            return False, "input demands not positive and real"
        x = x.real
        g = F.g(x)
        if np.max(np.abs(price * g - w) / w) > 1e-7:
            return False, "the first-order condition p ∂f/∂x = w fails"
        H = F.h(x)
        if np.linalg.eigvalsh((H + H.T) / 2).max() >= 0:
            return False, "the second-order condition fails (not a maximum)"
    return _above_shut_down(model, sol, xfn, comp)


def _above_shut_down(model: Model, sol: Solution, xfn, comp) -> tuple[bool, str]:
    """A closed-form profit must not fall below the shut-down profit p·f(0) (x = 0 is
    feasible when f is defined there): checked at low, middle and high output prices."""
    ws, p = list(model.prices), model.output_price
    try:
        vfn = _lam([p] + ws + list(comp.params), sol.value)
    except Exception as exc:  # noqa: BLE001
        return False, f"cannot evaluate ({exc})"
    for pt in sample_primal_points(model):
        pv, w, F = pt.params, pt.prices, pt.fns
        f0 = F.f(np.zeros(len(w)))
        if not math.isfinite(f0):
            return True, ""
        for price in (0.25, 2.0, 16.0):
            with np.errstate(all="ignore"):
                try:
                    v = complex(vfn(price, *w, *[pv[s] for s in comp.params]))
                except (NameError, TypeError, ValueError, ZeroDivisionError):
                    return False, "cannot evaluate the profit"
            if abs(v.imag) <= 1e-9 * (1 + abs(v.real)) and \
                    v.real < price * f0 - 1e-9 * (1 + abs(price * f0)):
                return False, (f"profit {v.real:.4g} at p={price:g} is below the shut-down "
                               f"profit p·f(0) = {price * f0:.4g}")
    return True, ""


def _rts_text(s: float) -> str:
    """Returns to scale 1/s as text (unbounded when cost does not grow with output)."""
    return f"{1 / s:.4g}" if s > 0 else "unbounded"


def _check_returns_numerically(model: Model) -> None:
    """Refuse profit early when f(t x) >= t f(x) for t > 1 at sampled points (IRS/CRS)."""
    comp = _numeric.compile_model(model)
    F = _numeric._Fns(comp, tuple(model.values[s] for s in comp.params))
    rng = np.random.default_rng(3)
    ratios = []
    for _ in range(8):
        x = rng.uniform(0.5, 3.0, len(model.quantities))
        a, b = F.f(x), F.f(4.0 * x)
        if a > 0 and b > 0 and math.isfinite(a) and math.isfinite(b):
            ratios.append(math.log(b / a) / math.log(4.0))
    if ratios and min(ratios) >= 1 - 1e-9:
        kind = "constant" if max(ratios) < 1 + 1e-9 else "increasing"
        raise NoSolutionError(
            f"no profit function: the technology shows {kind} returns to scale at the "
            f"points tried (local scale elasticity {min(ratios):.4g} to {max(ratios):.4g}); "
            "profit is then unbounded or maximal at zero output, so a profit function "
            "needs decreasing returns to scale")


def duals(model: Model, *,
          budget: float | None = DEFAULT_BUDGET) -> dict[str, Derived | Unavailable]:
    """Every dual of ``model`` by kind: ``cost`` and ``profit`` for a technology,
    ``indirect_utility`` and ``expenditure`` for a preference.  A dual that does not exist
    (:class:`NoSolutionError`, e.g. no profit function under constant returns) maps to
    an :class:`~duality.solve.result.Unavailable` with the reason; any other error is
    raised."""
    makers = ((("cost", cost), ("profit", profit)) if model.is_technology else
              (("indirect_utility", indirect_utility), ("expenditure", expenditure)))
    out: dict[str, Derived | Unavailable] = {}
    for kind, make in makers:
        try:
            out[kind] = make(model, budget=budget)
        except NoSolutionError as exc:
            out[kind] = Unavailable(exc.reason)
    return out


__all__ = ["cost", "profit", "expenditure", "indirect_utility", "duals", "DEFAULT_BUDGET",
           "SYMBOLIC_METHODS", "Solution"]

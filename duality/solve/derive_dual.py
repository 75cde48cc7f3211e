"""Duals of a model given on the dual side (see :mod:`duality.model.dual_side`).

* The given function itself comes back with its demand system by differentiation:
  Shephard's lemma (cost, expenditure), Hotelling's lemma (profit), Roy's identity
  (indirect utility).
* The other dual of a preference by inversion: v(p, m) solves e(p, v) = m, and
  e(p, u) solves v(p, e) = u — symbolically under the budget (verified numerically), else
  numerically (vectorised bisection, the function being monotone in the level).
* A cost function from a profit function: c(w, y) = max_p p·y − π(p, w), at the output
  price where supply ∂π/∂p equals y; a profit function from a cost function goes through
  the usual route in :mod:`duality.solve.derive`.
"""
from __future__ import annotations

import numpy as np
import sympy as sp

from .budget import run_with_budget
from ..errors import BudgetExceeded, NoSolutionError
from ..model.formula import substitute
from ..model.lambdas import numpy_function
from ..model.base import Model, _safe_eval
from .dual_forms import BY_NAME as DUAL_FORMS
from .points import sample_points
from .result import Solution

LEMMA = {"cost": "Shephard's lemma", "expenditure": "Shephard's lemma",
         "profit": "Hotelling's lemma", "indirect_utility": "Roy's identity"}


def dual_source(model: Model) -> str | None:
    form = DUAL_FORMS.get(model.form)
    return None if form is None else form.source


def given(model: Model) -> Solution:
    """Solution of the function the model was given as, demands by its lemma."""
    e = model.expr
    ps = list(model.prices)
    if model.side in ("cost", "expenditure"):
        demands = tuple(sp.diff(e, p) for p in ps)
        supply = None
    elif model.side == "profit":
        demands = tuple(-sp.diff(e, w) for w in ps)
        supply = sp.diff(e, model.output_price)
    else:
        vm = sp.diff(e, model.income)
        demands = tuple(-sp.diff(e, p) / vm for p in ps)
        supply = None
    src = dual_source(model)
    route = "catalogue" if src else "symbolic"
    form = DUAL_FORMS.get(model.form)
    what = form.title if form is not None else f"{model.side.replace('_', ' ')} function"
    article = "an" if what[0].lower() in "aeiou" else "a"
    method = f"given as {article} {what}; demands by {LEMMA[model.side]}"
    return Solution(value=e, demands=demands, route=route, method=method, source=src,
                    supply=supply)


def _fn(expr, syms):
    return numpy_function(syms, expr)


def _invert_worker(expr, var, target):
    return [s for s in sp.solve(sp.Eq(expr, target), var) if s.is_real is not False]


def _passes(model: Model, expr, var, target, cand) -> bool:
    """expr(cand) = target at the sampled points (cand real and finite there)."""
    syms = sorted((expr.free_symbols | {target}) - {var}, key=str)
    f = _fn(expr, [var] + syms)
    g = _fn(cand, syms)
    for pt in sample_points(model, levels=False):
        pt = dict(pt)
        pt[target] = float(np.random.default_rng(len(pt)).uniform(1.0, 3.0)) \
            if target.is_positive else 0.7
        with np.errstate(all="ignore"):
            try:
                val = complex(g(*[pt[s] for s in syms]))
                back = complex(f(val.real, *[pt[s] for s in syms]))
            except (ArithmeticError, ValueError, TypeError, KeyError):
                return False
        if (abs(val.imag) > 1e-9 * (1 + abs(val.real)) or
                not abs(back - pt[target]) <= 1e-8 * (1 + abs(pt[target]))):
            return False
    return True


def published_inverse(model: Model, expr, var, target, notes: list, label: str):
    """The catalogue's published solution of expr(var) = target, verified; or None."""
    form = DUAL_FORMS.get(model.form)
    if form is None or form.other_dual is None:
        return None
    cand = form.other_dual(model)
    if _passes(model, expr, var, target, cand):
        return cand
    notes.append(f"the published solution of {label} did not pass the numeric check")
    return None


def invert(model: Model, expr, var, target, budget, notes: list, label: str):
    """Closed-form solutions of expr(var) = target, verified numerically; or None."""
    try:
        cands = run_with_budget(_invert_worker, expr, var, target, budget=budget)
    except BudgetExceeded:
        notes.append(f"solving {label} did not finish within the budget")
        return None
    except Exception as exc:  # noqa: BLE001 - a failed solve is a note
        notes.append(f"solving {label} failed: {type(exc).__name__}: {exc}")
        return None
    for cand in cands:
        if _passes(model, expr, var, target, cand):
            return cand
    notes.append(f"no closed-form solution of {label} passed the numeric check")
    return None


def bisect_increasing(fn, target, lo, hi, *, log=False, iters: int = 200):
    """Vectorised bisection for fn(x) = target with fn increasing; NaN where unbracketed."""
    target = np.asarray(target, float)
    shape = target.shape
    lo = np.full(shape, lo, float)
    hi = np.full(shape, hi, float)
    tr = (lambda z: np.exp(z)) if log else (lambda z: z)
    for _ in range(80):  # widen
        with np.errstate(all="ignore"):
            flo, fhi = fn(tr(lo)), fn(tr(hi))
        need_lo = ~(flo <= target)
        need_hi = ~(fhi >= target)
        if not (need_lo.any() or need_hi.any()):
            break
        lo = np.where(need_lo, lo - (2.0 if log else np.maximum(1.0, np.abs(lo))), lo)
        hi = np.where(need_hi, hi + (2.0 if log else np.maximum(1.0, np.abs(hi))), hi)
    with np.errstate(all="ignore"):
        ok = (fn(tr(lo)) <= target) & (fn(tr(hi)) >= target)
    for _ in range(iters):
        mid = 0.5 * (lo + hi)
        with np.errstate(all="ignore"):
            up = fn(tr(mid)) >= target
        hi = np.where(up, mid, hi)
        lo = np.where(up, lo, mid)
        if np.all(np.abs(hi - lo) <= 1e-15 * np.maximum(1.0, np.abs(hi))):
            break
    out = tr(0.5 * (lo + hi))
    return np.where(ok, out, np.nan)


def numeric_inverse(model: Model, expr, var, target, demand_exprs, *, log: bool):
    """Numeric evaluators: value(point) solving expr(var) = target, and demands there.

    ``demand_exprs`` are expressions in ``var`` and the other arguments (e.g. Marshallian
    demands in (p, m) for Hicksian demands at m = e(p, u)).
    """
    params = dict(model.values)
    e = expr.xreplace(params)
    rest_syms = sorted(e.free_symbols - {var}, key=str)
    f = _fn(e, [var] + rest_syms)
    dex = [d.xreplace(params) for d in demand_exprs]
    dsyms = [sorted(d.free_symbols, key=str) for d in dex]
    ds = [_fn(d, syms) for d, syms in zip(dex, dsyms)]

    def solve(point):
        shape = np.broadcast(*[np.asarray(v) for v in point.values()]).shape
        vals = {k: np.broadcast_to(np.asarray(v, float), shape) for k, v in point.items()}
        rest = [vals[s] for s in rest_syms]
        start = (0.0, 1.0) if log else (-1.0, 1.0)
        x = bisect_increasing(lambda z: f(z, *rest), vals[target], *start, log=log)
        return x, vals

    def value(point):
        return solve(point)[0]

    def demand(i):
        def run(point):
            x, vals = solve(point)
            sub = {**vals, var: x}
            return ds[i](*[sub[s] for s in dsyms[i]])
        return run
    return value, [demand(i) for i in range(len(dex))]


def check_monotone_level(model: Model, expr, var, why: str = "") -> None:
    """The given function must increase in its level argument for an inversion.

    Raises NoSolutionError (the other dual does not exist) with ``why`` appended."""
    d = substitute(sp.diff(expr, var), model.values)
    syms = sorted(d.free_symbols, key=str)
    fn = _fn(d, syms)
    rng = np.random.default_rng(1)
    for _ in range(6):
        vals = rng.uniform(0.5, 3.0, len(syms))
        v = _safe_eval(fn, vals)
        if v is not None and v <= 0:
            at = ", ".join(f"{s}={x:.3g}" for s, x in zip(syms, vals))
            raise NoSolutionError(why.format(at=at) if why else
                                  f"the given function does not increase in {var} at {at}; "
                                  "it cannot be inverted for the other dual")


__all__ = ["given", "invert", "published_inverse", "numeric_inverse", "bisect_increasing", "dual_source",
           "check_monotone_level", "LEMMA"]


"""Additively separable functions: f(x) = c + Σ_i φ_i(x_i).

The first-order conditions of both problems separate: with the multiplier written as
t = 1/λ,

* spending, min w·x s.t. f(x) = y:      φ_i'(x_i) = w_i / t,  so x_i = g_i(w_i / t),
* utility,  max f(x) s.t. p·x = m:       φ_i'(x_i) = p_i / t,  so x_i = g_i(p_i / t),

where g_i inverts the marginal function φ_i'.  One equation in t is left — the level
f(x(t)) = y, or the budget p·x(t) = m — and sympy solves it (a polynomial in t for power
and log terms, e.g. a quadratic in 1/λ for log(x1 − 2) + 0.5 log x2 + √x3).  Every
candidate is then verified numerically by the caller like any other symbolic candidate;
each demand carries the condition that it is positive (an interior solution).

Notes
-----
The separation of the first-order conditions of an additive utility is textbook (Varian,
Microeconomic Analysis, 3rd ed. (1992), ch. 7; Deaton and Muellbauer, Economics and
Consumer Behavior (1980), ch. 5 on additive preferences; from memory).
"""
from __future__ import annotations

from typing import Sequence

import sympy as sp

from ..model.base import Model
from .result import Unavailable

_q = sp.Symbol("q_", positive=True)
_t = sp.Symbol("t_", positive=True)


def split(expr: sp.Expr, xs: Sequence[sp.Symbol]) -> tuple[sp.Expr, dict] | None:
    """(c, {x_i: φ_i}) when ``expr`` = c + Σ φ_i(x_i) with every quantity in one term
    group, else None.  A single-quantity function or one quantity-free group is not
    counted as additive."""
    if not isinstance(expr, sp.Add) or len(xs) < 2:
        return None
    const, phis = sp.Integer(0), {}
    for term in expr.args:
        syms = term.free_symbols & set(xs)
        if not syms:
            const += term
        elif len(syms) == 1:
            (x,) = syms
            phis[x] = phis.get(x, 0) + term
        else:
            return None
    if set(phis) != set(xs):
        return None
    return const, phis


def _inverse_marginal(phi: sp.Expr, x: sp.Symbol) -> list[sp.Expr]:
    """Positive, real solutions x = g(q) of φ'(x) = q."""
    xp = sp.Symbol("xp_", positive=True)
    d = sp.diff(phi, x).xreplace({x: xp})
    return [s.xreplace({xp: x}) for s in sp.solve(sp.Eq(d, _q), xp)
            if s.is_real is not False]


def candidates(kind: str, model: Model) -> list | Unavailable:
    """Worker: candidate (value, demands) pairs of the spending (``kind="spending"``) or
    utility (``"utility"``) problem of an additive function, or :class:`Unavailable` with
    the reason it does not apply."""
    xs = list(model.quantities)
    parts = split(model.expr, xs)
    if parts is None:
        return Unavailable("the function is not a sum of functions of one quantity each")
    const, phis = parts
    prices = list(model.prices)
    inverses = []
    for x, w in zip(xs, prices):
        roots = _inverse_marginal(phis[x], x)
        if len(roots) != 1:
            return Unavailable(f"φ'({x}) = q has {len(roots)} closed-form solutions (one is "
                               "needed)")
        inverses.append(roots[0].xreplace({_q: w / _t}))
    if kind == "spending":
        eq = sp.Eq(const + sp.Add(*[phis[x].xreplace({x: g}) for x, g in zip(xs, inverses)]),
                   model.level)
    else:
        eq = sp.Eq(sp.Add(*[w * g for w, g in zip(prices, inverses)]), model.income)
    gap = eq.lhs - eq.rhs
    roots = _solve_for_multiplier(gap)
    if isinstance(roots, str):
        return Unavailable(roots)
    out = []
    for t in roots:
        if t.is_real is False or t.is_positive is False:
            continue
        demands = tuple(sp.simplify(g.xreplace({_t: t})) for g in inverses)
        if kind == "spending":
            value = sp.Add(*[w * d for w, d in zip(prices, demands)])
        else:
            value = model.expr.xreplace(dict(zip(xs, demands)))
        out.append((value, demands))
    return out


def _solve_for_multiplier(gap: sp.Expr) -> list | str:
    """Solutions t > 0 of gap(t) = 0 when the equation is algebraic in t, or linear in
    log t; otherwise a reason (sympy would search long for a transcendental root)."""
    gap = sp.expand(sp.expand_log(gap, force=True))
    s = sp.Symbol("s_", real=True)
    in_logs = gap.xreplace({sp.log(_t): s})
    if not in_logs.has(_t) and in_logs.has(s):
        if sp.diff(in_logs, s, 2) != 0:
            return "the equation in the multiplier is not linear in its logarithm"
        return [sp.exp(r) for r in sp.solve(in_logs, s)]
    if any(f.has(_t) for f in gap.atoms(sp.Function)):
        return ("the equation in the multiplier mixes powers with logarithms or other "
                "functions of it (no closed-form root)")
    return list(sp.solve(gap, _t))


def interior_conditions(demands: Sequence[sp.Expr]) -> tuple:
    """Each demand positive (an interior solution), unless sympy already knows it is."""
    return tuple(sp.StrictGreaterThan(d, 0) for d in demands if d.is_positive is not True)


__all__ = ["split", "candidates", "interior_conditions"]

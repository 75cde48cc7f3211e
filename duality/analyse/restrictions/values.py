"""Checking parameter values against restrictions, and imposing them."""
from __future__ import annotations

import math
from typing import Mapping

import sympy as sp

from ...errors import DualityError
from .algebra import _solve_linear, _symbols, _sympify
from .record import Restriction, _is_linear


# --------------------------------------------------------------------------------------
# Checking and imposing
# --------------------------------------------------------------------------------------
def check_values(restrictions, values: Mapping, *, tol: float = 1e-9
                 ) -> list[tuple[Restriction, float]]:
    """The restrictions violated by ``values`` (|residual| > tol) with their residuals."""
    restrictions = list(restrictions)
    if not isinstance(values, Mapping):
        raise DualityError("values must be a mapping of parameter names to numbers")
    known = {}
    for r in restrictions:
        if not isinstance(r, Restriction):
            raise DualityError(f"{r!r} is not a Restriction")
        for s in tuple(r.parameters) + r.symbols:
            known[s.name] = s
    for k in values:
        nm = k.name if isinstance(k, sp.Symbol) else k
        if not isinstance(nm, str):
            raise DualityError(f"parameter key {k!r} is neither a name nor a sympy Symbol")
        if nm not in known:
            raise DualityError(f"unknown parameter {nm!r} in values: the restrictions "
                               f"involve {', '.join(sorted(known)) or 'no parameters'}")
    out = []
    for r in restrictions:
        res = r.residual(values)
        if not math.isfinite(res) or abs(res) > tol:
            out.append((r, res))
    return out


def describe_violation(restriction: Restriction, residual: float) -> str:
    """One line naming the violated restriction and the parameters involved."""
    names = ", ".join(s.name for s in restriction.symbols)
    eq = restriction.equation
    written = (f"{sp.sstr(eq.lhs)} = {sp.sstr(eq.rhs)}" if isinstance(eq, sp.Equality)
               else sp.sstr(eq))
    return (f"{restriction.kind} restriction {written} is violated by {residual:.3g} "
            f"(left side minus right side); parameters involved: {names}")


def impose(expr, restrictions, params, *, keep=None
           ) -> tuple[sp.Expr, dict, tuple]:
    """Impose linear restrictions by eliminating parameters.

    Parameters not in ``keep`` are eliminated first, and among those the last ones in
    ``params`` order.  Returns ``(reduced expr, {eliminated: expression in kept},
    kept parameters)``.
    """
    F = _sympify(expr)
    params = _symbols(params, "parameter")
    keep = _symbols(keep or (), "kept parameter")
    for k in keep:
        if k not in params:
            raise DualityError(f"kept parameter {k.name} is not one of the parameters")
    exprs = []
    for r in restrictions:
        if not isinstance(r, Restriction):
            raise DualityError(f"{r!r} is not a Restriction")
        stray = r.expr.free_symbols - set(params)
        if stray:
            raise DualityError(f"restriction {sp.sstr(r.equation)} involves "
                               f"{sorted(s.name for s in stray)[0]}, which is not a parameter")
        if not _is_linear(r.expr, params):
            raise DualityError(f"restriction {sp.sstr(r.equation)} is nonlinear in the "
                               "parameters and cannot be imposed by elimination")
        exprs.append(r.expr)
    mapping, pivots = _solve_linear(exprs, params, keep=keep)
    forced = [p.name for p in pivots if p in keep]
    if forced:
        raise DualityError(f"cannot keep parameter {forced[0]}: the restrictions determine it")
    reduced = F.xreplace(mapping) if mapping else F
    kept = tuple(p for p in params if p not in mapping)
    return reduced, mapping, kept

"""Where a function is defined, and why a numeric point may be unavailable.

A formula is defined only where each logarithm has a positive argument, each fractional
power a non-negative base (positive when the exponent is negative) and each reciprocal a
non-zero denominator.  :func:`domain_of` reads these conditions off the expression tree;
a condition linear in one quantity, such as ``x1 - 2 > 0`` from ``log(x1 - 2)``, also gives
that quantity a lower bound, so the numeric route can *start* inside the domain and check
every point it returns against it.

A numeric point that fails a check is never a number: it is NaN with a reason code from
:data:`REASONS` (the batched solver returns one code per point; a scalar call raises
:class:`~duality.errors.DomainError` with the code's sentence).
"""
from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache
from typing import Mapping, Sequence

import numpy as np
import sympy as sp

from ..model.base import Model
from ..model.lambdas import numpy_function

#: Reason codes of a numeric point, by index (the batched solver stores the index).
#: ``ok`` is the only code whose point carries a number.
REASONS: dict[str, str] = {
    "ok": "solved",
    "not_converged": "the solver did not meet the first-order conditions",
    "second_order": "the point meeting the first-order conditions is not an optimum "
                    "(second-order condition fails)",
    "outside_domain": "the solver's point lies outside the function's domain",
    "infeasible": "the solver's point does not meet the budget or level constraint",
    "no_start": "no bundle inside the function's domain reaches this level",
    "below_range": "the level lies below the lowest value the function reaches on its "
                   "domain",
    "income_short": "income does not buy the least bundle of the function's domain",
    "no_interior_max": "no interior maximum was found; the shut-down profit p·f(0) is "
                       "only a lower bound here",
    "kkt_fails": "a quantity sits at zero but the Kuhn–Tucker conditions fail there (not "
                 "a corner optimum)",
}
CODES: tuple[str, ...] = tuple(REASONS)


def code(name: str) -> int:
    """Index of a reason code (KeyError listing the known codes for a typo)."""
    try:
        return CODES.index(name)
    except ValueError:
        raise KeyError(f"no reason code {name!r}; known: {', '.join(CODES)}") from None


def explain(codes: np.ndarray) -> str:
    """``"3 not_converged (…), 1 outside_domain (…)"``: counts of the failing codes."""
    codes = np.asarray(codes).reshape(-1)
    parts = []
    for k in np.unique(codes):
        if CODES[int(k)] == "ok":
            continue
        parts.append(f"{int((codes == k).sum())} {REASONS[CODES[int(k)]]}")
    return "; ".join(parts)


@dataclass(frozen=True)
class Domain:
    """The conditions under which f(x) is defined, in the quantities and parameters.

    Attributes
    ----------
    conditions : tuple of (sympy.Expr, bool)
        ``(a, strict)`` for ``a > 0`` (strict) or ``a >= 0``.
    bounds : tuple of sympy.Expr
        Per quantity, the largest lower bound read off a condition linear in that quantity
        alone (0 when there is none; quantities are positive throughout).
    """

    quantities: tuple[sp.Symbol, ...]
    params: tuple[sp.Symbol, ...]
    conditions: tuple[tuple[sp.Expr, bool], ...]
    bounds: tuple[sp.Expr, ...]

    @property
    def relations(self) -> tuple:
        """The conditions as sympy relationals (for display)."""
        return tuple(sp.StrictGreaterThan(a, 0) if s else sp.GreaterThan(a, 0)
                     for a, s in self.conditions)

    @property
    def has_bounds(self) -> bool:
        return any(b != 0 for b in self.bounds)

    def lower(self, P: Sequence[np.ndarray], N: int) -> np.ndarray:
        """Numeric lower bounds (N, n) at parameter arrays ``P`` (in :attr:`params` order)."""
        out = np.zeros((N, len(self.quantities)))
        for i, b in enumerate(self.bounds):
            if b != 0:
                fn = numpy_function(list(self.params), b)
                with np.errstate(all="ignore"):
                    out[:, i] = np.maximum(0.0, np.broadcast_to(
                        np.asarray(fn(*P), dtype=float), (N,)))
        return out

    def contains(self, X: np.ndarray, P: Sequence[np.ndarray]) -> np.ndarray:
        """Mask of the rows of ``X`` (N, n) inside the domain (NaN rows are outside)."""
        X = np.asarray(X, dtype=float)
        # x_i = 0 is a corner, inside wherever the formula's own conditions allow it
        ok = np.all(np.isfinite(X), axis=1) & np.all(X >= 0, axis=1)
        for fn, strict in _compiled(self):
            with np.errstate(all="ignore"):
                a = np.asarray(fn(*[X[:, i] for i in range(X.shape[1])], *P))
            if np.iscomplexobj(a):
                a = np.where(np.abs(a.imag) <= 1e-12 * (1 + np.abs(a.real)), a.real, np.nan)
            a = np.broadcast_to(a.astype(float), ok.shape)
            ok &= (a > 0) if strict else (a >= 0)
        return ok


@lru_cache(maxsize=128)
def _compiled(domain: Domain):
    args = list(domain.quantities) + list(domain.params)
    return tuple((numpy_function(args, a), s) for a, s in domain.conditions)


def _conditions(expr: sp.Expr, xs: Sequence[sp.Symbol]) -> list[tuple[sp.Expr, bool]]:
    """(a, strict) for each log argument, fractional-power base and denominator."""
    out: list[tuple[sp.Expr, bool]] = []
    xset = set(xs)
    for node in sp.preorder_traversal(expr):
        if not (node.free_symbols & xset):
            continue
        if isinstance(node, sp.log):
            out.append((node.args[0], True))
        elif isinstance(node, sp.Pow):
            base, k = node.base, node.exp
            if not (base.free_symbols & xset) or k.free_symbols & xset:
                continue
            if k.is_integer:
                if k.is_negative:
                    out.append((base ** 2, True))   # a non-zero denominator
                continue
            out.append((base, not bool(k.is_positive)))
    seen, unique = set(), []
    for a, s in out:
        if (a, s) in seen or a.is_positive or (not s and a.is_nonnegative):
            continue
        seen.add((a, s))
        unique.append((a, s))
    return unique


def _bound(a: sp.Expr, x: sp.Symbol) -> sp.Expr | None:
    """b when ``a > 0`` is ``x > b`` (a linear in x alone with a positive slope)."""
    try:
        poly = sp.Poly(a, x)
    except sp.PolynomialError:
        return None
    if poly.degree() != 1:
        return None
    c1, c0 = poly.all_coeffs()
    if c1.is_positive:
        return -c0 / c1
    return None


def domain_of(expr: sp.Expr, xs: Sequence[sp.Symbol],
              params: Sequence[sp.Symbol] = ()) -> Domain:
    """The domain of ``expr`` as a function of quantities ``xs`` (see :class:`Domain`)."""
    xs = tuple(xs)
    conds = _conditions(expr, xs)
    bounds = []
    for x in xs:
        best: sp.Expr = sp.Integer(0)
        for a, _ in conds:
            if (a.free_symbols & set(xs)) != {x}:
                continue
            b = _bound(a, x)
            if b is not None:
                best = b if best == 0 else sp.Max(best, b)
        bounds.append(best)
    return Domain(xs, tuple(params), tuple(conds), tuple(bounds))


@lru_cache(maxsize=64)
def model_domain(model: Model) -> Domain:
    """The domain of a primal model's function, parameters in sorted-name order (the
    order of the compiled numeric model)."""
    xs = list(model.quantities)
    params = tuple(sorted(model.expr.free_symbols - set(xs), key=str))
    return domain_of(model.expr, xs, params)


def level_floor(model: Model, values: Mapping[sp.Symbol, float] | None = None) -> float | None:
    """The infimum of f along the diagonal ray from the domain's lower corner, approached
    as the ray shrinks to the corner (a number, −inf, or None when it cannot be read).

    For a function increasing in every quantity this is the infimum of its range on the
    domain: levels at or below it are not reached by any bundle."""
    dom = model_domain(model)
    vals = dict(model.values if values is None else values)
    if any(p not in vals for p in dom.params):
        return None
    P = [np.array([float(vals[p])]) for p in dom.params]
    L = dom.lower(P, 1)[0]
    fn = numpy_function(list(dom.quantities) + list(dom.params), model.expr)
    out = []
    with np.errstate(all="ignore"):
        for t in (1e-6, 1e-9, 1e-12):
            out.append(complex(fn(*(L + t), *[p[0] for p in P])))
    vals_ = [v.real for v in out if abs(v.imag) <= 1e-12 * (1 + abs(v.real))]
    if not vals_ or not all(np.isfinite(vals_)):
        return -np.inf if any(v == -np.inf for v in vals_) else None
    if vals_[-1] < vals_[0] - 1e-3 * (1 + abs(vals_[0])):
        return -np.inf                       # still falling as the corner is approached
    return float(vals_[-1])


__all__ = ["REASONS", "CODES", "code", "explain", "Domain", "domain_of", "model_domain",
           "level_floor"]

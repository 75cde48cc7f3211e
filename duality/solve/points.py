"""Points at which a model's functions are evaluated: sampled, defaulted and completed.

* :func:`sample_points` — random points (prices, levels, free parameters) of a model given
  on the dual side, for numeric verification; the one sampler of the dual-side derivation
  and the checks.
* :func:`sample_primal_points` — random bundles, prices and parameter values of a
  production or utility function, with the function compiled at those values; the one
  sampler of the derivation's verification and the checks.
* :func:`default_point` — the plain point a front end shows results at when the user gives
  none (prices 1, 2, 3, …; output 5 at output price 4, or income 100), with what the user
  gave laid over it.
* :func:`complete_point` — for a preference, the utility level that income buys
  (u = v(p, m)) or the income a utility level costs (m = e(p, u)), so both duals are
  shown at one consistent point.
* :func:`value_at` — a derived function at a point, or None where it cannot be evaluated.
"""
from __future__ import annotations

import math
import warnings
from dataclasses import dataclass
from typing import Mapping

import numpy as np
import sympy as sp

from ..errors import DualityError
from ..model.base import Model
from .numeric import _Fns, compile_model
from .result import Derived

#: default prices are 1, 2, 3, …; these are the default levels
DEFAULT_OUTPUT, DEFAULT_OUTPUT_PRICE, DEFAULT_INCOME = 5.0, 4.0, 100.0


def sample_points(model: Model, n: int = 6, seed: int = 3, *,
                  levels: bool = True) -> list[dict[sp.Symbol, float]]:
    """``n`` random points in the model's symbols, reproducible from ``seed``.

    Free parameters are drawn from [0.2, 0.6], parameters with values keep them, prices
    from [0.5, 3].  With ``levels``: a technology's output from [0.5, 3] and its output
    price from [1, 3]; a preference's income from [5, 50] (the utility level it buys is
    left to the caller, who has the indirect utility function).
    """
    rng = np.random.default_rng(seed)
    pts = []
    for _ in range(n):
        pt = {s: float(rng.uniform(0.2, 0.6)) for s in model.free_params}
        pt.update(model.values)
        pt.update(zip(model.prices, rng.uniform(0.5, 3.0, len(model.prices))))
        if levels and model.is_technology:
            pt[model.level] = float(rng.uniform(0.5, 3.0))
            pt[model.output_price] = float(rng.uniform(1.0, 3.0))
        elif levels:
            pt[model.income] = float(rng.uniform(5.0, 50.0))
        pts.append(pt)
    return pts


@dataclass(frozen=True)
class PrimalSample:
    """One sampled point of a primal model: parameter values by symbol, a bundle
    (``quantities``) where the function is finite if any was found, ``prices``, the
    compiled function and its derivatives at these parameter values (``fns.f(x)`` …),
    and an output price when asked for."""

    params: dict
    quantities: np.ndarray
    prices: np.ndarray
    fns: _Fns
    output_price: float | None = None


def sample_primal_points(model: Model, n: int = 5, seed: int = 7, *,
                         output_price: bool = False) -> list[PrimalSample]:
    """``n`` random points of a production or utility function, reproducible from ``seed``.

    Free parameters from [0.2, 0.6] (parameters with values keep them), quantities and
    prices from [0.5, 3]; a bundle where the function is not finite is doubled up to eight
    times (e.g. Stone–Geary, above subsistence).  With ``output_price``, an output price
    from [1, 3] is drawn last for each point.
    """
    rng = np.random.default_rng(seed)
    comp = compile_model(model)
    out = []
    for _ in range(n):
        pv = {s: model.values.get(s, float(rng.uniform(0.2, 0.6))) for s in comp.params}
        fns = _Fns(comp, tuple(pv[s] for s in comp.params))
        x = rng.uniform(0.5, 3.0, len(model.quantities))
        for _ in range(8):  # scale up until the function is defined (e.g. subsistence)
            if math.isfinite(fns.f(x)):
                break
            x = 2.0 * x
        w = rng.uniform(0.5, 3.0, len(model.prices))
        p = float(rng.uniform(1.0, 3.0)) if output_price else None
        out.append(PrimalSample(pv, x, w, fns, p))
    return out


def default_point(model: Model, given: Mapping[str, float] | None = None) -> dict[str, float]:
    """The evaluation point by name: ``given`` laid over plain defaults.

    Raises
    ------
    DualityError
        A name in ``given`` that is none of the model's prices and levels (the message
        lists them).
    """
    point = {str(s): float(i + 1) for i, s in enumerate(model.prices)}
    if model.is_technology:
        point.update({str(model.level): DEFAULT_OUTPUT,
                      str(model.output_price): DEFAULT_OUTPUT_PRICE})
    else:
        point[str(model.income)] = DEFAULT_INCOME
    given = dict(given or {})
    known = set(point) | {str(model.level)}
    unknown = sorted(set(given) - known)
    if unknown:
        raise DualityError(f"unknown name(s) {', '.join(unknown)}; the model's prices and "
                           f"levels are {', '.join(sorted(known))}")
    point.update({k: float(v) for k, v in given.items()})
    return point


def value_at(d: Derived, point: Mapping[str, float]) -> float | None:
    """``d`` at the named point (extra names ignored), or None where a name is missing or
    ``d`` cannot be evaluated there (outside its domain, not finite)."""
    names = [str(a) for a in d.args]
    if not all(n in point for n in names):
        return None
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            v = float(d(**{n: float(point[n]) for n in names}))
        except (DualityError, ArithmeticError, ValueError, TypeError):
            return None
    return v if math.isfinite(v) else None


def complete_point(model: Model, point: Mapping[str, float],
                   duals: Mapping[str, object]) -> dict[str, float]:
    """``point`` (by name) completed for a preference: the utility level that income buys,
    u = v(p, m), when no level is given, or the income that a given level costs,
    m = e(p, u).  ``duals`` maps kinds to :class:`~duality.solve.result.Derived` or, for a
    dual that does not exist, :class:`~duality.solve.result.Unavailable`.  A technology's
    point is returned as it is."""
    pt = {k: float(v) for k, v in point.items()}
    if model.is_technology:
        return pt
    u, m = str(model.level), str(model.income)
    v, e = duals.get("indirect_utility"), duals.get("expenditure")
    if u not in pt and isinstance(v, Derived) and m in pt:
        val = value_at(v, pt)
        if val is not None:
            pt[u] = val
    if m not in pt and isinstance(e, Derived) and u in pt:
        val = value_at(e, pt)
        if val is not None:
            pt[m] = val
    return pt


__all__ = ["sample_points", "sample_primal_points", "PrimalSample", "default_point", "complete_point", "value_at"]

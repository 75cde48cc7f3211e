"""The entry point :func:`recover`."""
from __future__ import annotations

import math

import numpy as np
import sympy as sp

from ...errors import DualityError, NoSolutionError
from ...model.base import Model
from ...model.lambdas import numpy_function
from ...model.roles import ROLES
from ...solve.derive import cost, expenditure
from ...solve.result import Derived
from .dual import _check_concave, _check_homogeneous, _rationalise
from .numeric import _Engine
from .result import _ROLE_OF_KIND, SYMBOLIC_METHODS, Recovered
from .symbolic import _Context, _symbolic





# -- entry point ------------------------------------------------------------------------------
def recover(model_or_dual, *, budget: float | None = 5.0,
            price_ratios: tuple[float, float] | None = None) -> Recovered:
    """Recover the production function (from a cost function) or the utility function
    (from an expenditure function).

    Parameters
    ----------
    model_or_dual : Model or Derived
        A technology or preference (primal or dual side; its cost / expenditure function is
        derived first with :func:`duality.cost` / :func:`duality.expenditure`), or a
        derived cost or expenditure function with a closed form.
    budget : float or None
        Wall-clock seconds for the symbolic route (``0`` skips it; ``None``: no limit).
    price_ratios : (low, high), optional
        Restrict the prices the formula ranges over to ratios w_i/w_1 in [low, high]
        (default: all positive prices).  Flexible forms such as the translog are cost
        functions only locally; outside their regularity region they are not monotone or
        not concave, and the max–min over all prices would see that.

    Returns
    -------
    Recovered

    Raises
    ------
    DualityError
        Input of the wrong kind; a dual that is not homogeneous of degree one in prices.
    NoSolutionError
        The dual has no closed form, or no closed form for the primal was found and the
        numeric route needs a value for every parameter.
    """

    notes: list[str] = []
    if price_ratios is None:
        zb = (-_Engine.ZMAX, _Engine.ZMAX)
    else:
        try:
            lo, hi = (float(v) for v in price_ratios)
        except (TypeError, ValueError):
            raise DualityError("price_ratios must be a pair (low, high) of numbers") from None
        if not (0 < lo < hi < np.inf):
            raise DualityError(f"price_ratios must satisfy 0 < low < high < inf; got "
                               f"({lo:g}, {hi:g})")
        zb = (math.log(lo), math.log(hi))
        notes.append(f"prices restricted to ratios w_i/w_1 in [{lo:g}, {hi:g}]")
    if isinstance(model_or_dual, Model):
        m = model_or_dual
        dual = cost(m, budget=budget) if m.role == "technology" else \
            expenditure(m, budget=budget)
        if m.is_primal:
            notes.append(f"the {m.given.label} was given; recovered from its "
                         f"{m.role_info.main_function.label} (a round trip)")
    elif isinstance(model_or_dual, Derived):
        dual = model_or_dual
    else:
        raise DualityError("recover() needs a technology or preference model, or a cost or "
                           f"expenditure function from cost()/expenditure(), not "
                           f"{type(model_or_dual).__name__}")
    if dual.kind not in _ROLE_OF_KIND:
        raise DualityError(f"recover() works from a cost or an expenditure function; this is "
                           f"a {dual.label} — derive the cost or expenditure function first")
    role = _ROLE_OF_KIND[dual.kind]
    words = ROLES[role]
    label, head = words.main_function.label, words.main_function.letter
    if dual.expr is None:
        raise NoSolutionError(f"the {label} has no closed form (numeric only); recovering "
                              "the primal needs the dual as a formula")
    prices, level = tuple(dual.args[:-1]), dual.args[-1]
    xs = tuple(sp.Symbol(q, positive=True) for q in dual.demands)
    if len(xs) != len(prices):  # pragma: no cover - Derived always pairs them
        raise DualityError("the dual's demands do not match its prices")
    c_expr = dual.expr_at_values
    free = tuple(sorted(c_expr.free_symbols - set(prices) - {level}, key=str))

    # level domain: positive for a technology, and for a preference whose dual is not
    # positive at a negative level
    positive_level = role == "technology"
    if not positive_level and not free:
        fn = numpy_function(list(prices) + [level], c_expr)
        with np.errstate(all="ignore"):
            try:
                v = complex(fn(*np.ones(len(prices)), -1.0))
                ok = np.isfinite(v) and abs(v.imag) < 1e-12 and v.real > 0
            except (ArithmeticError, ValueError, TypeError):
                ok = False
        positive_level = not ok
    levels = [0.5, 1.0, 2.0] if positive_level else [-1.0, 0.5, 2.0]

    engine = None
    concave: bool | None = None
    if free:
        notes.append("concavity in prices not checked: free parameter(s) "
                     + ", ".join(map(str, free)))
    else:
        _check_homogeneous(c_expr, prices, level, levels, label)
        concave, where = _check_concave(c_expr, prices, level, levels, *zb)
        if not concave:
            notes.append(f"the {label} is {where[0]}; the recovered "
                         f"{words.primal_function.label} is that of its concave hull in "
                         "prices (the max–min formula sees only the hull)")
        engine = _Engine(c_expr, prices, level, positive_level, concave, zb)

    exact = {sym: _rationalise(sp.Float(v)) for sym, v in dual.params.items()}
    c_exact = _rationalise(dual.expr.xreplace(exact))
    ctx = _Context(c_expr, c_exact, prices, level, xs, free, positive_level, engine)
    found = None
    if concave is False:
        notes.append("symbolic route skipped: inverting Shephard's lemma on a dual that is "
                     "not concave would give a wrong primal")
    elif budget is not None and budget <= 0:
        notes.append("symbolic route skipped (budget 0)")
    else:
        found = _symbolic(ctx, budget, notes)
    if found is not None:
        method, expr = found
        return Recovered(role, xs, prices, level, expr, "symbolic",
                         f"Shephard's lemma x = ∇{head}(w, level) with w1 = 1 "
                         f"solved for prices and level ({method} route); verified numerically",
                         tuple(notes), concave, dual, engine, free, zb)
    if free:
        raise NoSolutionError(
            "no closed form for the primal was found (" + "; ".join(notes) + "), and the "
            "numeric route needs a value for every parameter: give "
            + ", ".join(map(str, free)))
    return Recovered(role, xs, prices, level, None, "numeric",
                     f"max–min formula: level = max {{y : min_w (w·x − "
                     f"{head}(w, y)) >= 0}} (Brent's method on the level; inner "
                     "minimisation over normalised prices by grid + L-BFGS-B with analytic "
                     "gradients)", tuple(notes), concave, dual, engine, free, zb)


__all__ = ["recover", "Recovered", "SYMBOLIC_METHODS"]

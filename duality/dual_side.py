"""Models given on the dual side: a cost, profit, expenditure or indirect utility function.

Applied work often starts here — a translog or generalized Leontief cost function, an
Almost Ideal expenditure function — and derives the demand system from it (Shephard,
Hotelling, Roy).  The constructors below build the same frozen :class:`~duality.model.Model`
as :func:`~duality.model.technology` and :func:`~duality.model.preference`, with
``side`` set to the kind of function given; every stage (duals, demands, elasticities,
checks) accepts it.

Quantity names default from the price names: ``w1 → x1``, ``p_food → food``.
"""
from __future__ import annotations

import re
from typing import Mapping, Sequence

import numpy as np
import sympy as sp

from .errors import ModelError
from .model import Model, Parameter, _names_and_parameters, _read_formula, _safe_eval

#: side -> (role, level kind, what the formula may contain besides prices and params)
SIDES = {
    "cost": "technology",
    "profit": "technology",
    "expenditure": "preference",
    "indirect_utility": "preference",
}


def cost_function(formula, prices: Sequence[str], quantities: Sequence[str] | None = None, *,
                  output: str = "y", output_price: str = "p",
                  params: Mapping[str, float | None] | None = None,
                  assume: Mapping[str, str] | None = None, name: str = "",
                  form: str = "") -> Model:
    """A technology given by its cost function c(w, y).

    Parameters
    ----------
    formula : str or sympy.Expr
        The cost function in the prices, the output and parameters.
    prices : sequence of str
        Input price names; the input names default from them (``w1 → x1``).
    """
    return _build_dual("cost", formula, prices, quantities, level=output,
                       output_price=output_price, income=None, params=params, assume=assume,
                       name=name, form=form)


def profit_function(formula, prices: Sequence[str], quantities: Sequence[str] | None = None, *,
                    output: str = "y", output_price: str = "p",
                    params: Mapping[str, float | None] | None = None,
                    assume: Mapping[str, str] | None = None, name: str = "",
                    form: str = "") -> Model:
    """A technology given by its profit function π(p, w) (output price ``p`` first)."""
    return _build_dual("profit", formula, prices, quantities, level=output,
                       output_price=output_price, income=None, params=params, assume=assume,
                       name=name, form=form)


def expenditure_function(formula, prices: Sequence[str], goods: Sequence[str] | None = None, *,
                         utility: str = "u", income: str = "m",
                         params: Mapping[str, float | None] | None = None,
                         assume: Mapping[str, str] | None = None, name: str = "",
                         form: str = "") -> Model:
    """A preference given by its expenditure function e(p, u)."""
    return _build_dual("expenditure", formula, prices, goods, level=utility, output_price=None,
                       income=income, params=params, assume=assume, name=name, form=form)


def indirect_utility_function(formula, prices: Sequence[str], goods: Sequence[str] | None = None,
                              *, income: str = "m", utility: str = "u",
                              params: Mapping[str, float | None] | None = None,
                              assume: Mapping[str, str] | None = None, name: str = "",
                              form: str = "") -> Model:
    """A preference given by its indirect utility function v(p, m)."""
    return _build_dual("indirect_utility", formula, prices, goods, level=utility,
                       output_price=None, income=income, params=params, assume=assume,
                       name=name, form=form)


def _default_quantities(prices: Sequence[str]) -> list[str]:
    out = []
    for p in prices:
        m = re.fullmatch(r"[A-Za-z]+?(\d+)", p)
        if m:
            out.append(f"x{m.group(1)}")
        elif re.fullmatch(r"[A-Za-z]+_(\w+)", p):
            out.append(p.split("_", 1)[1])
        else:
            out.append(f"x_{p}")
    return out


def _build_dual(side: str, formula, prices, quantities, *, level: str,
                output_price: str | None, income: str | None, params, assume, name: str,
                form: str) -> Model:
    role = SIDES[side]
    if isinstance(prices, str) or isinstance(quantities, str):
        raise ModelError("prices and quantities are lists of names, e.g. ['w1', 'w2']")
    prices = list(prices)
    if not prices:
        raise ModelError("at least one price is required")
    quantities = list(quantities) if quantities is not None else _default_quantities(prices)
    if len(quantities) != len(prices):
        raise ModelError(f"{len(prices)} prices but {len(quantities)} quantities; give one "
                         "quantity name per price")
    qword = "input" if role == "technology" else "good"
    values, psyms = _names_and_parameters(role, [("price", prices), (qword, quantities)],
                                          level, output_price, income, params, assume)
    price_syms = {p: sp.Symbol(p, positive=True) for p in prices}
    level_sym = (sp.Symbol(level, positive=True) if role == "technology"
                 else sp.Symbol(level, real=True))
    out_p = sp.Symbol(output_price, positive=True) if output_price else None
    inc = sp.Symbol(income, positive=True) if income else None
    # what the formula may use, by side
    allowed = dict(price_syms)
    if side == "cost":
        allowed[level] = level_sym
    elif side == "profit":
        allowed[output_price] = out_p
    elif side == "expenditure":
        allowed[level] = level_sym
    else:
        allowed[income] = inc
    table = {**allowed, **psyms}
    expr, text = _read_formula(formula, table)
    what = side.replace("_", " ") + " function"
    for s in sorted(expr.free_symbols, key=str):
        if s not in table.values():
            hint = (f" (a {what} is written in prices"
                    + {"cost": " and the output", "profit": " and the output price",
                       "expenditure": " and the utility level",
                       "indirect_utility": " and income"}[side] + ")")
            raise ModelError(f"unknown symbol '{s.name}' in the {what}: declare it in params"
                             + (hint if s.name in quantities or s.name in
                                (level, output_price, income) else ""))
    missing = [p for p in prices if price_syms[p] not in expr.free_symbols]
    if missing:
        raise ModelError(f"price '{missing[0]}' does not appear in the {what}")
    model = Model(
        role=role, side=side, expr=expr,
        quantities=tuple(sp.Symbol(q, positive=True) for q in quantities),
        prices=tuple(price_syms[p] for p in prices), level=level_sym,
        output_price=out_p, income=inc,
        params=tuple(Parameter(k, psyms[k], values[k]) for k in values),
        text=text, name=name, form=form,
        _key=(role, side, form, sp.srepr(expr), tuple(quantities), tuple(prices), level,
              output_price, income,
              tuple((k, values[k], str(psyms[k].assumptions0)) for k in values)),
    )
    _check_finite(model, what)
    return model


def _check_finite(model: Model, what: str) -> None:
    """The function must have real, finite values somewhere in the positive orthant."""
    if model.free_params:
        return
    e = model.numeric_expr
    syms = sorted(e.free_symbols, key=str)
    from .lambdas import numpy_function
    fn = numpy_function(syms, e)
    rng = np.random.default_rng(0)
    for _ in range(8):
        if _safe_eval(fn, rng.uniform(0.5, 3.0, len(syms))) is not None:
            return
    raise ModelError(f"the {what} has no real, finite value at any point tried (all "
                     "arguments between 0.5 and 3)")


__all__ = ["cost_function", "profit_function", "expenditure_function",
           "indirect_utility_function", "SIDES"]

"""Models given on the dual side: a cost, profit, expenditure or indirect utility function.

Applied work often starts here — a translog or generalized Leontief cost function, an
Almost Ideal expenditure function — and derives the demand system from it (Shephard,
Hotelling, Roy).  The constructors below build the same frozen :class:`~duality.model.base.Model`
as :func:`~duality.model.base.technology` and :func:`~duality.model.base.preference`, with
``side`` set to the kind of function given; every stage (duals, demands, elasticities,
checks) accepts it.

Quantity names default from the price names: ``w1 → x1``, ``p_food → food``.
"""
from __future__ import annotations

from typing import Mapping, Sequence

from .base import SIDES, Model, _build_dual


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


#: side -> the constructor of a model given on that side
BUILDERS = {"cost": cost_function, "profit": profit_function,
            "expenditure": expenditure_function,
            "indirect_utility": indirect_utility_function}

__all__ = ["cost_function", "profit_function", "expenditure_function",
           "indirect_utility_function", "SIDES", "BUILDERS"]

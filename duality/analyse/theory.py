"""Theory restrictions of a model's parameters, derived from its dual formula.

Thin layer over :mod:`duality.analyse.restrictions` that knows, for each dual side, which prices
the function is homogeneous in and of what degree:

=================  ==========================  ======
side               homogeneous in              degree
=================  ==========================  ======
cost c(w, y)       input prices w              1
expenditure e(p,u) prices p                    1
profit π(p, w)     output and input prices     1
indirect v(p, m)   prices and income (p, m)    0
=================  ==========================  ======
"""
from __future__ import annotations

from ..errors import DualityError
from ..model.base import Model, _build_dual
from .restrictions import Restriction, check_values, derive_restrictions, impose


def _setup(model: Model):
    if not isinstance(model, Model):
        raise DualityError(f"restrictions need a model, not {type(model).__name__}")
    if model.is_primal:
        raise DualityError("theory restrictions are derived for parametric dual functions "
                           "(cost_function, translog_cost, aids_expenditure, ...); the duals "
                           "of a production or utility function satisfy them by construction")
    ps = tuple(model.prices)
    if model.side == "cost":
        return ps, 1, (model.level,), "cost"
    if model.side == "expenditure":
        return ps, 1, (model.level,), "expenditure"
    if model.side == "profit":
        return (model.output_price,) + ps, 1, (), "profit"
    return ps + (model.income,), 0, (), "indirect utility"


def restrictions(model: Model) -> list[Restriction]:
    """The homogeneity, adding-up and symmetry restrictions on the model's parameters."""
    prices, degree, others, name = _setup(model)
    return derive_restrictions(model.expr, prices, list(model.param_symbols), degree=degree,
                               others=others, name=name)


def violations(model: Model, *, tol: float = 1e-9) -> list[tuple[Restriction, float]]:
    """Restrictions the model's parameter values break, with their residuals."""
    if model.free_params:
        raise DualityError("checking restrictions needs a value for every parameter; give "
                           + ", ".join(str(s) for s in model.free_params))
    return check_values(restrictions(model), model.values, tol=tol)


def impose_restrictions(model: Model, *, keep=None) -> Model:
    """A new model with the restrictions imposed: dependent parameters eliminated.

    ``keep`` names parameters that must stay free to estimate; the others are eliminated
    as the linear restrictions require (the last ones first).
    """
    rs = [r for r in restrictions(model) if r.linear]
    sym = {p.name: p.symbol for p in model.params}
    keep_syms = None
    if keep is not None:
        unknown = [k for k in keep if k not in sym]
        if unknown:
            raise DualityError(f"unknown parameter(s) {', '.join(unknown)} in keep")
        keep_syms = [sym[k] for k in keep]
    reduced, mapping, kept = impose(model.expr, rs, list(model.param_symbols), keep=keep_syms)
    values = {p.name: p.value for p in model.params if p.symbol in kept}
    return _build_dual(model.side, reduced, [str(p) for p in model.prices],
                       [str(q) for q in model.quantities], level=str(model.level),
                       output_price=None if model.output_price is None
                       else str(model.output_price),
                       income=None if model.income is None else str(model.income),
                       params=values, assume=None,
                       name=(model.name + " (restricted)").strip(), form=model.form)


__all__ = ["restrictions", "violations", "impose_restrictions"]

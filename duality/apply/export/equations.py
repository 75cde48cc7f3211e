"""Estimating equations as export items (``export(model, target, equations=True)``).

The equations are those :func:`duality.estimate` fits (:mod:`duality.apply.estimation`): the
log cost equation and the share equations of a cost function, or the budget shares of an
Almost Ideal model, with the theory restrictions imposed, one share dropped and fixed
parameters substituted, so the exported functions hold only the parameters to estimate.
The log cost equation is exported as the cost level ``exp(rhs)`` — written in logs, so it
stays finite for a negative coefficient — whose logarithm is fitted to the log of the
observed cost; each share function is fitted to its observed share column.
"""
from __future__ import annotations

from typing import Mapping

import sympy as sp

from ...errors import DualityError
from ...model.base import Model
from ...solve.result import Derived
from ..estimation.equations import derive_system
from ._collect import Collection, _item


def estimating_collection(what, *, fixed: Mapping[str, float] | None = None) -> Collection:
    """The estimating equations of a model as a :class:`Collection` of export items."""
    if not isinstance(what, Model):
        raise DualityError("estimating equations are derived from a model; give the model, "
                           f"not a {type(what).__name__}")
    qs = [str(q) for q in what.quantities]
    aids = what.form in ("aids_expenditure", "quaids_expenditure")
    system = derive_system(what, equations="shares" if aids else "cost+shares", shares=qs,
                           fixed=dict(fixed or {}), index="exact")
    order = list(system.data.values())
    starts = {p.symbol: p.value for p in what.params
              if p.value is not None and p.symbol in set(system.free)}
    items = []
    for e in system.equations:
        args = tuple(s for s in order if s in e.rhs.free_symbols)
        imposed = "; ".join(system.imposed) or "none"
        notes = (f"estimating equation {e.name}: {sp.sstr(e.dependent)} = "
                 f"{'log of ' if e.name.startswith('ln ') else ''}this function; the "
                 f"dependent variable is the observed column for {e.observed}",
                 f"restrictions imposed: {imposed}",
                 f"dropped for adding-up: {system.dropped or 'none'}") + tuple(
                     f"fixed: {p.name} = {v:g}" for p, v in system.fixed.items())
        if e.name.startswith("ln "):
            d = Derived(kind=system.side, args=args, expr=sp.exp(e.rhs), route="symbolic",
                        method="estimating equation (log form)", params=starts,
                        source=None, notes=notes, name="", positive_args=frozenset(args))
            name = f"{system.side}_equation"
        else:
            q = e.observed[2:]
            d = Derived(kind="share", args=args, expr=e.rhs, route="symbolic",
                        method="estimating equation (share)", params=starts, source=None,
                        notes=notes, name=f"s_{q}", positive_args=frozenset(args))
            name = f"share_{q}_equation"
        it = _item(name, d)
        it.dependent = e.observed
        items.append(it)
    return Collection(items, what)


__all__ = ["estimating_collection"]

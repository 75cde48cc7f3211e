"""Demand systems from dual functions: Shephard's and Hotelling's lemmas, Roy's identity.

Each function takes a derived dual (:class:`~duality.solve.result.Derived`) and returns its
demand system *by differentiation*, keyed by quantity name — a second, independent path
to the demands that :attr:`Derived.demands` gives from the optimisation itself (the
checks compare the two).  Shares (cost shares w_i x_i / c, budget shares p_i x_i / m)
follow the same pattern.
"""
from __future__ import annotations

import numpy as np
import sympy as sp

from ..solve.calculus import Fn
from ..errors import DualityError
from ..solve.result import Derived


def _wrap(parent: Derived, kind: str, name: str, fn: Fn, method: str) -> Derived:
    common = dict(kind=kind, args=parent.args, route=parent.route, params=parent.params,
                  source=parent.source, notes=parent.notes, conditions=parent.conditions,
                  name=name, positive_args=parent.positive_args)
    if fn.sym is not None:
        return Derived(expr=fn.sym, method=method, **common)
    args = parent.args

    def numeric(point):
        shape = np.broadcast(*[np.asarray(point[a]) for a in args]).shape
        flat = {k: np.broadcast_to(np.asarray(v, dtype=float), shape).reshape(-1)
                for k, v in point.items()}
        out = np.array([fn({k: float(v[i]) for k, v in flat.items()})
                        for i in range(int(np.prod(shape)) if shape else 1)])
        return out.reshape(shape)
    return Derived(expr=None, method=method + " (finite differences)", numeric=numeric,
                   **common)


def _need(d: Derived, kinds: tuple[str, ...], what: str) -> None:
    if not isinstance(d, Derived) or d.kind not in kinds:
        got = d.kind if isinstance(d, Derived) else type(d).__name__
        raise DualityError(f"{what} needs a {' or '.join(k.replace('_', ' ') for k in kinds)}"
                           f" function, not {got}")


def _quantity_names(d: Derived) -> list[str]:
    return list(d.demands)[-(len(_prices(d))):]


def _prices(d: Derived) -> tuple[sp.Symbol, ...]:
    if d.kind == "profit":
        return d.args[1:]
    return d.args[:-1]


def shephard(d: Derived) -> dict[str, Derived]:
    """x_i = ∂c/∂w_i (cost) or h_i = ∂e/∂p_i (expenditure): Shephard's lemma."""
    _need(d, ("cost", "expenditure"), "Shephard's lemma")
    kind = "conditional_demand" if d.kind == "cost" else "hicksian_demand"
    f = Fn.of(d)
    return {name: _wrap(d, kind, name, f.diff(w), f"Shephard's lemma: ∂{d.kind}/∂{w}")
            for name, w in zip(_quantity_names(d), _prices(d))}


def hotelling(d: Derived) -> dict[str, Derived]:
    """y = ∂π/∂p and x_i = −∂π/∂w_i: Hotelling's lemma (output first, under its name)."""
    _need(d, ("profit",), "Hotelling's lemma")
    f = Fn.of(d)
    names = list(d.demands)
    out = {names[0]: _wrap(d, "supply", names[0], f.diff(d.args[0]),
                           f"Hotelling's lemma: ∂π/∂{d.args[0]}")}
    for name, w in zip(names[1:], d.args[1:]):
        out[name] = _wrap(d, "factor_demand", name, -f.diff(w),
                          f"Hotelling's lemma: −∂π/∂{w}")
    return out


def roy(d: Derived) -> dict[str, Derived]:
    """x_i = −(∂v/∂p_i) / (∂v/∂m): Roy's identity."""
    _need(d, ("indirect_utility",), "Roy's identity")
    f = Fn.of(d)
    m = d.args[-1]
    vm = f.diff(m)
    return {name: _wrap(d, "marshallian_demand", name, -f.diff(p) / vm,
                        f"Roy's identity: −(∂v/∂{p})/(∂v/∂{m})")
            for name, p in zip(_quantity_names(d), _prices(d))}


def shares(d: Derived) -> dict[str, Derived]:
    """Cost shares w_i x_i / c (cost), budget shares p_i x_i / m (indirect utility) or
    p_i h_i / e (expenditure), from the attached demands."""
    _need(d, ("cost", "expenditure", "indirect_utility"), "shares")
    prices = _prices(d)
    total = Fn(d.args[-1]) if d.kind == "indirect_utility" else Fn.of(d)
    out = {}
    for (name, x), p in zip(d.demands.items(), prices):
        out[name] = _wrap(d, "share", f"s_{name}", Fn.of(x) * Fn(p) / total,
                          f"share of {name}: {p}·{name} / "
                          f"{'m' if d.kind == 'indirect_utility' else d.kind}")
    return out


__all__ = ["shephard", "hotelling", "roy", "shares"]

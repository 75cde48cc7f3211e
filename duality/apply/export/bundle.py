"""Estimation bundle: the share equations of a cost or expenditure function, as JSON.

Schema (``"format": "duality-estimation-bundle"``, ``"version": 1``)::

    {
      "format", "version", "duality_version", "name", "disclaimer",
      "system": "cost shares" | "budget shares",
      "dual": {<function record, see duality.apply.export.jsonfmt>, "function": "cost"},
      "equations": [{<function record>, "function": "share_x1", "quantity": "x1",
                     "dependent": "<data column of the share>"}],   # n - 1 equations
      "dropped": {<function record>, "function": "share_x3", "quantity", "dependent",
                  "reason": str},
      "parameters": [{"name", "start": float | null, "fixed": bool,
                      "value": float | null, "in_equations": bool}],
      "columns": {symbol or share name: data column},
      "restrictions": [{"kind", "lhs", "rhs", "text", "reason"}],
      "restrictions_note": str,
      "imposed": null | {"eliminated": {param: formula}, "kept": [param],
                          "equations": {function: formula}},
      "adding_up_at_values": true | false | null,
      "estimating_equations": null | {"equations": [{"name", "dependent", "rhs",
                                      "observed"}], "free": [param], "fixed": {param: v},
                                      "eliminated": {param: formula}, "dropped": str | null},
      "notes": [str]
    }

``estimating_equations`` (for a model) are the equations :func:`duality.estimate` fits: the
log cost equation and the share equations of a cost function (or an Almost Ideal model's
budget shares), each ``dependent = rhs`` with the theory restrictions and the fixed values
substituted, so that ``rhs`` holds only the free parameters and observed names.

Shares are ``w_i x_i / c`` (cost) or ``p_i h_i / e`` (expenditure) or ``p_i x_i / m``
(indirect utility), from :func:`duality.shares`; for an Almost Ideal model they are its
Marshallian budget shares in prices and total expenditure ``m`` (exact price index), which
hold no unobserved utility.  A parameter named in ``fixed`` is marked ``"fixed": true``
with its ``value`` (to hold, not to estimate); any other value is a start value.  They add up to one for every price
vector, so the disturbances of all n equations are linearly dependent and their
covariance matrix singular; one equation (the last, by convention) is dropped and its
parameters recovered from the adding-up restrictions.  Maximum-likelihood estimates do not
depend on which equation is dropped (Barten, 'Maximum likelihood estimation of a complete
system of demand equations', European Economic Review 1 (1969), from memory).
"""
from __future__ import annotations

import json
from typing import Mapping

import numpy as np
import sympy as sp

from ...errors import DualityError
from ...texts import CAUTION
from ...model.base import Model
from ...analyse.demand import shares as shares_of
from ...analyse.restrictions import derive_restrictions, impose
from ...solve.derive import cost, expenditure
from ...solve.dual_forms import aids_share_equations
from ..estimation.equations import derive_system
from ...solve.result import Derived
from ._collect import _item, check_names, no_closed_form, tidy
from .code import _version
from .jsonfmt import function_record, text_of

FORMAT = "duality-estimation-bundle"
VERSION = 1
_DUALS = ("cost", "expenditure", "indirect_utility")


def _pick(what) -> Derived:
    if isinstance(what, Model):
        d = cost(what) if what.is_technology else expenditure(what)
        if d.expr is None:
            raise no_closed_form(d)
        return d
    if isinstance(what, Derived):
        if what.kind not in _DUALS:
            raise DualityError(f"the bundle export needs a cost, expenditure or indirect "
                               f"utility function (for its shares), not a {what.label}")
        return what
    if isinstance(what, Mapping):
        what = list(what.values())
    if isinstance(what, (list, tuple)):
        for x in what:
            if isinstance(x, Derived) and x.kind in _DUALS:
                return x
            if isinstance(x, Model):
                return _pick(x)
    raise DualityError("the bundle export needs a model, or a cost, expenditure or indirect "
                       "utility function (for its share equations)")


def _restrictions(dual: Derived, params: tuple):
    """(records, note, imposed-mapping-or-None, kept) derived by duality.analyse.restrictions."""
    if dual.kind == "indirect_utility":
        prices, degree, shares = dual.args, 0, False
    else:
        prices, degree, shares = dual.args[:-1], 1, True
    try:
        rs = derive_restrictions(dual.expr, prices, list(params), degree=degree,
                                 shares=shares, name=dual.kind.replace("_", " "))
    except DualityError as exc:
        return [], f"restrictions could not be derived: {exc}", None
    recs = [{"kind": r.kind, "lhs": text_of(r.equation.lhs, "bundle"),
             "rhs": text_of(r.equation.rhs, "bundle"), "text": sp.sstr(r.equation),
             "reason": r.reason} for r in rs]
    note = (f"derived from the formula by duality.analyse.restrictions ({len(rs)} restriction(s); "
            "homogeneity of degree "
            f"{degree} in ({', '.join(map(str, prices))})"
            + (", adding-up and symmetry" if shares else " and symmetry") + ")")
    imposed = None
    if rs:
        try:
            _, mapping, kept = impose(dual.expr, rs, list(params))
            imposed = (mapping, kept)
        except DualityError as exc:
            note += f"; not imposed: {exc}"
    return recs, note, imposed


def _adding_up(shares: list, params: Mapping) -> bool | None:
    """Do the shares sum to one at the model's values (random points)? None if unknown."""
    if any(v is None for v in params.values()):
        return None
    rng = np.random.default_rng(12345)
    args = shares[0].args
    point = {str(a): rng.uniform(0.5, 3.0, 8) for a in args}
    with np.errstate(all="ignore"):
        total = sum(np.asarray(s(**point), dtype=float) for s in shares)
    return bool(np.all(np.abs(total - 1.0) <= 1e-9))


def _aids_shares(what, dual: Derived) -> list | None:
    """Marshallian budget shares of an Almost Ideal model as derived functions of (p, m)."""
    model = what if isinstance(what, Model) else None
    if model is None or model.form != "aids_expenditure":
        return None
    args = tuple(model.prices) + (model.income,)
    return [(str(q), Derived(kind="share", args=args, expr=e, route=dual.route,
                             method="Marshallian budget share (exact translog price index)",
                             params=dual.params, source=dual.source, notes=dual.notes,
                             name=f"s_{q}", positive_args=frozenset(args)))
            for q, e in zip(model.quantities, aids_share_equations(model, index="exact"))]


def _estimating(what, fixed: Mapping, notes: list) -> dict | None:
    """The equations duality.estimate fits, in text, or None (with a note) when the model
    has none."""
    if not isinstance(what, Model):
        return None
    qs = [str(q) for q in what.quantities]
    equations = "shares" if what.form == "aids_expenditure" else "cost+shares"
    try:
        system = derive_system(what, equations=equations, shares=qs, fixed=dict(fixed),
                               index="exact")
    except DualityError as exc:
        notes.append(f"no estimating equations: {exc}")
        return None
    return {"equations": [{"name": e.name, "dependent": text_of(e.dependent, "bundle"),
                           "rhs": text_of(e.rhs, "bundle"), "observed": e.observed}
                          for e in system.equations],
            "free": [p.name for p in system.free],
            "fixed": {p.name: v for p, v in system.fixed.items()},
            "eliminated": {p.name: text_of(e, "bundle") for p, e in system.derived.items()},
            "dropped": system.dropped}


def export_bundle(what, *, name: str, values: bool = True,
                  columns: Mapping[str, str] | None = None,
                  fixed: Mapping[str, float] | None = None) -> str:
    """The share equations of a dual, one dropped, with parameters and restrictions.

    ``what`` is a model (technology: its cost function; preference: its expenditure
    function), a cost, expenditure or indirect utility function, or a list/dict holding
    one.  ``columns`` maps symbol or share names (``w1``, ``s_x1``) to data columns
    (default: the same names).  ``values=False`` leaves the start values out.  ``fixed``
    names parameters held at values (marked fixed, not start values).
    """
    dual = _pick(what)
    if dual.expr is None:
        raise no_closed_form(dual)
    marshallian = _aids_shares(what, dual)
    share_d = dict(marshallian) if marshallian else shares_of(dual)
    items = [_item(f"share_{q}", s) for q, s in share_d.items()]
    for it in items:
        if it.derived.expr is None:
            raise no_closed_form(it.derived)
    dual_item = _item(dual.kind, dual)
    dep = {it.name: it.derived.name for it in items}        # share_x1 -> s_x1
    share_args = items[0].derived.args if items else dual.args
    observed = [str(a) for a in (share_args if marshallian else dual.args)]
    known = set(observed) | set(dep.values())
    columns = dict(columns or {})
    unknown = sorted(set(columns) - known)
    if unknown:
        raise DualityError(f"columns given for unknown name(s) {', '.join(unknown)}; the "
                           f"bundle uses {', '.join(sorted(known))}")
    for k, v in columns.items():
        if not isinstance(v, str) or not v:
            raise DualityError(f"the data column for '{k}' must be a non-empty name")
    colmap = {n: columns.get(n, n) for n in observed + list(dep.values())}
    check_names([it.name for it in items], "bundle", ())

    params = dual_item.params
    values_map = {p: dual_item.values.get(p) for p in params}
    fixed = dict(fixed or {})
    by_name = {p.name: p for p in params}
    bad = sorted(set(fixed) - set(by_name))
    if bad:
        raise DualityError(f"fixed parameter {bad[0]} is not a parameter of the "
                           f"{dual.label} (it has {', '.join(by_name)})")
    for k, v in fixed.items():
        if not isinstance(v, (int, float)) or not np.isfinite(v):
            raise DualityError(f"fixed parameter {k}: the value must be a finite number, "
                               f"not {v!r}")
    kept, dropped = items[:-1], items[-1]
    in_eq = set().union(*(it.expr.free_symbols for it in kept)) if kept else set()
    what_share = {"cost": "cost shares", "expenditure": "budget shares",
                  "indirect_utility": "budget shares"}[dual.kind]
    reason = (f"the {what_share} add up to one for every price vector "
              f"(Σ_i {'w' if dual.kind == 'cost' else 'p'}_i x_i = "
              f"{'c' if dual.kind == 'cost' else ('e' if dual.kind == 'expenditure' else 'm')}),"
              " so the disturbances of all equations are linearly dependent and their "
              "covariance matrix is singular; the last equation is dropped by convention "
              "(maximum-likelihood estimates do not depend on which one: Barten, European "
              "Economic Review 1 (1969), from memory) and its parameters follow from the "
              "adding-up restrictions")
    recs, note, imposed = _restrictions(dual, params)
    notes = []
    in_dropped = dropped.expr.free_symbols
    missing = [p.name for p in params if p not in in_eq and p not in in_dropped]
    if missing:
        notes.append(f"parameter(s) {', '.join(missing)} do not appear in the estimated share "
                     "equations and are not identified from them alone (estimate the "
                     f"{dual.label} itself jointly, or fix them)")

    def rec(it):
        r = function_record(it, "bundle")
        r.update(function=it.name, quantity=it.quantity, dependent=colmap[dep[it.name]])
        return r

    imposed_rec = None
    if imposed is not None:
        mapping, kept_params = imposed
        imposed_rec = {
            "eliminated": {p.name: text_of(e, "bundle") for p, e in mapping.items()},
            "kept": [p.name for p in kept_params],
            "equations": {it.name: text_of(tidy(it.expr.xreplace(mapping)), "bundle")
                          for it in kept}}
    doc = {
        "format": FORMAT, "version": VERSION, "duality_version": _version(), "name": name,
        "disclaimer": CAUTION, "system": what_share,
        "dual": {**function_record(dual_item, "bundle"), "function": dual_item.name},
        "equations": [rec(it) for it in kept],
        "dropped": {**rec(dropped), "reason": reason},
        "parameters": [{"name": p.name,
                        "start": None if p.name in fixed or not values else values_map[p],
                        "fixed": p.name in fixed,
                        "value": float(fixed[p.name]) if p.name in fixed else None,
                        "in_equations": p in in_eq} for p in params],
        "params": {p.name: values_map[p] for p in params},
        "columns": colmap,
        "restrictions": recs, "restrictions_note": note, "imposed": imposed_rec,
        "adding_up_at_values": _adding_up([it.derived for it in items], values_map),
        "estimating_equations": _estimating(what, fixed, notes),
        "notes": notes,
    }
    return json.dumps(doc, indent=2, ensure_ascii=False, allow_nan=False) + "\n"


__all__ = ["export_bundle", "FORMAT", "VERSION"]

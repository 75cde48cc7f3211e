"""The JSON export and :func:`load_json`.

Schema (``"format": "duality-export"``, ``"version": 1``)::

    {
      "format": "duality-export", "version": 1, "duality_version": "0.1.0",
      "name": "model",                      # the export name
      "disclaimer": "...",
      "model": null | {                     # when a Model was exported
        "role": "technology" | "preference", "side": "primal" | "cost" | ...,
        "name": str, "form": str,
        "formula": str,                     # duality.model.formula.to_text of the model
        "text": str,                        # the formula as typed ("" if built from sympy)
        "quantities": [str], "prices": [str], "level": str,
        "output_price": str | null, "income": str | null,
        "parameters": [{"name": str, "value": float | null, "assumption": str | null}]
      },
      "params": {name: float | null},       # every parameter of every function
      "functions": {
        "<function name>": {
          "kind": "cost" | "conditional_demand" | "share" | ...,
          "label": str, "name": str,        # name: the quantity (demands), s_<q> (shares)
          "args": [str], "positive_args": [str],
          "expr": str,                      # to_text of the closed form (parameters symbolic)
          "params": {name: float},          # values used by this function
          "free_params": [str],
          "assumptions": {symbol: str},     # sign assumption of each symbol, if any
          "route": str, "method": str, "source": str | null,
          "conditions": [{"text": str, "lhs": str, "rel": str, "rhs": str}],  # lhs/rhs/rel
                                            # only when the condition is a readable relation
          "notes": [str]
        }
      },
      "omitted": [str],                     # duals of the model not exported, and why
      "restrictions": [ {"kind", "lhs", "rhs", "reason"} ]   # empty here; filled by bundle
    }

Expressions are written with :func:`duality.model.formula.to_text` and read back with
:func:`duality.model.formula.parse` — never ``eval`` or ``sympify`` — so a file from elsewhere
cannot run code.  Parameter values are JSON numbers (doubles, written exactly).  The
``values`` option has no effect: values are always recorded and expressions always keep
parameters symbolic.
"""
from __future__ import annotations

import json

import sympy as sp

from ...errors import DualityError
from ...texts import CAUTION
from ...model.formula import MAX_LENGTH, parse, to_text
from ...solve.result import Derived
from ._collect import Collection, Item, construct_name
from .code import _version

FORMAT = "duality-export"
VERSION = 1
_ASSUME = ("positive", "negative", "nonnegative", "nonpositive", "real")


def _assumption(sym) -> str | None:
    for a in _ASSUME:
        if sym.assumptions0.get(a):
            return a
    return None


def text_of(expr, target: str = "json", where: str = "") -> str:
    """to_text, with the refusal reworded to name the target and the construct."""
    try:
        return to_text(expr)
    except DualityError as exc:
        bad = next((n for n in sp.preorder_traversal(expr)
                    if isinstance(n, sp.Basic) and not isinstance(
                        n, (sp.Add, sp.Mul, sp.Pow, sp.Symbol, sp.Rational, sp.Float, sp.exp,
                            sp.log, sp.Abs, sp.Min, sp.Max, type(sp.E)))), None)
        what = construct_name(bad) if bad is not None else "this expression"
        raise DualityError(f"the {target} export cannot express {what}"
                           + (f" (in {where})" if where else "") + f": {exc}") from None


def _condition(c) -> dict:
    out = {"text": sp.sstr(c)}
    if isinstance(c, sp.core.relational.Relational) and c.rel_op in ("<", "<=", ">", ">=",
                                                                        "==", "!="):
        try:
            out.update(lhs=to_text(c.lhs), rel=c.rel_op, rhs=to_text(c.rhs))
        except DualityError:
            pass
    return out


def function_record(it: Item, target: str = "json") -> dict:
    d = it.derived
    syms = list(it.args) + list(it.params)
    return {
        "kind": d.kind, "label": d.label, "name": d.name,
        "args": [str(a) for a in it.args],
        "positive_args": [str(a) for a in it.args if a in d.positive_args],
        "expr": text_of(it.expr, target, it.name),
        "params": {s.name: it.values[s] for s in it.valued},
        "free_params": [s.name for s in it.free],
        "assumptions": {s.name: _assumption(s) for s in syms if _assumption(s)},
        "route": d.route, "method": d.method, "source": d.source,
        "conditions": [_condition(c) for c in d.conditions],
        "notes": list(d.notes),
    }


def model_record(m) -> dict | None:
    if m is None:
        return None
    return {
        "role": m.role, "side": m.side, "name": m.name, "form": m.form,
        "formula": text_of(m.expr, "json", "the model"), "text": m.text,
        "quantities": [str(q) for q in m.quantities], "prices": [str(p) for p in m.prices],
        "level": str(m.level),
        "output_price": None if m.output_price is None else str(m.output_price),
        "income": None if m.income is None else str(m.income),
        "parameters": [{"name": p.name, "value": p.value, "assumption": _assumption(p.symbol)}
                       for p in m.params],
    }


def export_json(col: Collection, *, name: str, values: bool = True) -> str:
    doc = {
        "format": FORMAT, "version": VERSION, "duality_version": _version(), "name": name,
        "disclaimer": CAUTION,
        "model": model_record(col.model),
        "params": {p.name: v for p, v in col.params.items()},
        "functions": {it.name: function_record(it) for it in col.items},
        "omitted": list(col.omitted),
        "restrictions": [],
    }
    return json.dumps(doc, indent=2, ensure_ascii=False, allow_nan=False) + "\n"


# ---------------------------------------------------------------------------- reading

def _read(text: str, table: dict, where: str) -> sp.Expr:
    if not isinstance(text, str):
        raise DualityError(f"{where}: expected formula text, got {type(text).__name__}")
    return parse(text, symbols=table, max_length=max(MAX_LENGTH, len(text) + 1),
                 max_depth=200)


def _symbols(rec: dict) -> dict:
    table = {}
    assumptions = rec.get("assumptions") or {}
    names = list(rec.get("args", [])) + list(rec.get("params", {})) + list(
        rec.get("free_params", []))
    for n in names:
        a = assumptions.get(n)
        if a is not None and a not in _ASSUME:
            raise DualityError(f"unknown assumption {a!r} for '{n}'")
        table[n] = sp.Symbol(n, **({a: True} if a else {}))
    return table


def load_function(fname: str, rec: dict) -> Derived:
    """A :class:`Derived` rebuilt from one function record (no demands attached)."""
    if not isinstance(rec, dict):
        raise DualityError(f"function '{fname}': expected an object")
    table = _symbols(rec)
    expr = _read(rec.get("expr"), table, f"function '{fname}'")
    stray = sorted(s.name for s in expr.free_symbols if s.name not in table)
    if stray:
        raise DualityError(f"function '{fname}' uses undeclared name(s) {', '.join(stray)}")
    conditions = []
    for c in rec.get("conditions", []):
        if {"lhs", "rel", "rhs"} <= set(c):
            lhs = _read(c["lhs"], table, f"a condition of '{fname}'")
            rhs = _read(c["rhs"], table, f"a condition of '{fname}'")
            conditions.append(sp.Rel(lhs, rhs, c["rel"]))
    args = tuple(table[a] for a in rec["args"])
    params = {table[k]: float(v) for k, v in (rec.get("params") or {}).items()}
    route = rec.get("route", "symbolic")
    return Derived(kind=rec.get("kind", "cost"), args=args, expr=expr, route=route,
                   method=rec.get("method", ""), params=params, source=rec.get("source"),
                   notes=tuple(rec.get("notes", ())), conditions=tuple(conditions),
                   name=rec.get("name", ""),
                   positive_args=frozenset(table[a] for a in rec.get("positive_args", ())))


def load_json(text: str) -> dict:
    """Read a JSON export (or an estimation bundle) back.

    Returns ``{"functions": {name: Derived}, "params": {name: value}, "provenance":
    {name: {"route", "method", "source", "notes", "conditions"}}, "restrictions": [...],
    "model": {...} | None, "omitted": [...]}``.  Every function is callable with the same
    numbers as the engine's.  Expressions are read with :func:`duality.model.formula.parse`.
    """
    try:
        doc = json.loads(text)
    except (TypeError, ValueError) as exc:
        raise DualityError(f"not a JSON export: {exc}") from None
    if not isinstance(doc, dict):
        raise DualityError("not a JSON export: the top level is not an object")
    fmt = doc.get("format")
    if fmt == "duality-estimation-bundle":
        parts = ([doc["dual"]] if doc.get("dual") else []) + list(doc.get("equations", [])) \
            + ([doc["dropped"]] if doc.get("dropped") else [])
        recs = {e.get("function", e.get("name")): e for e in parts}
    elif fmt == FORMAT:
        recs = doc.get("functions", {})
    else:
        raise DualityError(f"not a duality JSON export (format {fmt!r})")
    if doc.get("version") != VERSION:
        raise DualityError(f"JSON export version {doc.get('version')!r} is not supported "
                           f"(this reader knows version {VERSION})")
    functions = {k: load_function(k, r) for k, r in recs.items()}
    provenance = {k: {"route": r.get("route"), "method": r.get("method"),
                      "source": r.get("source"), "notes": list(r.get("notes", [])),
                      "conditions": [c.get("text") for c in r.get("conditions", [])]}
                  for k, r in recs.items()}
    restrictions = []
    for r in doc.get("restrictions") or []:
        table = {n: sp.Symbol(n) for n in doc.get("params", {})}
        eq = sp.Eq(_read(r["lhs"], table, "a restriction"), _read(r["rhs"], table,
                                                                  "a restriction"),
                   evaluate=False)
        restrictions.append({"kind": r.get("kind"), "equation": eq, "reason": r.get("reason")})
    return {"functions": functions, "params": dict(doc.get("params", {})),
            "provenance": provenance, "restrictions": restrictions,
            "model": doc.get("model"), "omitted": list(doc.get("omitted", []))}


__all__ = ["export_json", "load_json", "FORMAT", "VERSION"]

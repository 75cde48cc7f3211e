"""Gathering the functions to export, and the checks every target shares.

:func:`collect` turns what the user gives (a model, a derived function, a list or dict of
them) into an ordered list of :class:`Item` — one exported function each, with a name
that is a valid identifier in every target language (``cost``, ``demand_x1``,
``share_x1`` ...), its closed form and its parameters in a fixed order.
"""
from __future__ import annotations

import keyword
import re
from dataclasses import dataclass, field
from typing import Iterable, Mapping

import sympy as sp

from ...errors import DualityError, NoSolutionError
from ...model.base import Model
from ...model.formula import to_text
from ...model.roles import FUNCTIONS
from ...solve.derive import cost, expenditure, indirect_utility, profit
from ...solve.result import KINDS, Derived

_IDENT = re.compile(r"^[A-Za-z][A-Za-z0-9_]*$")

#: kind -> how the exported function is named (``{q}`` is the quantity name)
NAMING = {
    "cost": "cost", "profit": "profit", "expenditure": "expenditure",
    "indirect_utility": "indirect_utility",
    "conditional_demand": "demand_{q}", "factor_demand": "factor_demand_{q}",
    "supply": "supply_{q}", "marshallian_demand": "marshallian_{q}",
    "hicksian_demand": "hicksian_{q}", "share": "share_{q}",
}

_DEMAND_KINDS = ("conditional_demand", "factor_demand", "marshallian_demand",
                 "hicksian_demand", "supply", "share")


@dataclass
class Item:
    """One function to export."""

    name: str
    derived: Derived
    expr: sp.Expr
    args: tuple
    free: tuple                  # parameters without a value (sorted by name)
    valued: tuple                # parameters with a value (sorted by name)
    values: dict = field(default_factory=dict)   # Symbol -> float for ``valued``
    dependent: str = ""          # observed variable it is fitted to (estimating equations)

    @property
    def params(self) -> tuple:
        """Every parameter: free ones first, then those with values."""
        return self.free + self.valued

    @property
    def quantity(self) -> str:
        d = self.derived
        if d.kind == "share":
            return d.name[2:] if d.name.startswith("s_") else d.name
        return d.name if d.kind in _DEMAND_KINDS else ""

    @property
    def head(self) -> str:
        """Conventional letter of the function (``c``, ``x1``, ``s_x1`` ...)."""
        d = self.derived
        if d.kind in _DEMAND_KINDS and d.name:
            return d.name
        return FUNCTIONS[d.kind].code if d.kind in FUNCTIONS else KINDS[d.kind][1]


@dataclass
class Collection:
    """What one export holds."""

    items: list
    model: Model | None = None
    omitted: list = field(default_factory=list)   # plain-words notes on skipped duals

    @property
    def params(self) -> dict:
        """Parameter symbol -> value (None when free), over every function, by name."""
        out: dict = {}
        for it in self.items:
            for p in it.free:
                out.setdefault(p, None)
            for p in it.valued:
                out[p] = it.values[p]
        return dict(sorted(out.items(), key=lambda kv: kv[0].name))

    def names(self) -> set:
        out = {it.name for it in self.items}
        for it in self.items:
            out |= {s.name for s in it.args + it.params}
        return out


def no_closed_form(d: Derived) -> DualityError:
    return DualityError(
        f"the {d.label}{' of ' + d.name if d.name and d.kind in _DEMAND_KINDS else ''} has no "
        f"closed form (route: {d.route}; it is computed numerically), so there is no formula "
        "to export; evaluate it with duality itself (evaluate, evaluate_file) instead")


#: the most terms a distributed product may have for :func:`tidy` to form it
TIDY_TERMS = 2000


def _expanded_terms(e: sp.Basic) -> int:
    """How many terms distributing every product of sums in ``e`` gives, at most (a sum adds
    the counts of its terms, a product multiplies those of its factors; a sum inside a
    function's argument is expanded there, which adds its count)."""
    if isinstance(e, sp.Add):
        return sum(_expanded_terms(a) for a in e.args)
    if isinstance(e, sp.Mul):
        out = 1
        for a in e.args:
            out *= _expanded_terms(a)
            if out > 10 * TIDY_TERMS:
                break
        return out
    inner = sum(_expanded_terms(a) for a in e.args if isinstance(a, sp.Expr)) if e.args else 0
    return max(1, inner)


def tidy(expr: sp.Expr) -> sp.Expr:
    """An equivalent, shorter form when a cheap rewrite finds one.

    ``exp(a)*exp(b) -> exp(a + b)`` and distributing products (never powers of sums); e.g. a
    translog share ``w1*(a1/w1 + ...)*exp(-S)*exp(S)`` becomes ``a1 + ...``.  Both rewrites
    are identities for every value of the symbols, so numbers do not change beyond rounding.
    """
    best, size = expr, sp.count_ops(expr)
    try:
        e1 = sp.powsimp(expr, combine="exp")
        # distributing a product of long sums multiplies their lengths: skipped when the
        # result would have more than TIDY_TERMS terms (it could not be shorter, and would
        # take minutes, as for the Marshallian demands of a quadratic Almost Ideal system)
        e2 = (sp.expand(e1, mul=True, multinomial=False, power_exp=False, power_base=False,
                        log=False) if _expanded_terms(e1) <= TIDY_TERMS else e1)
    except Exception:  # noqa: BLE001 - tidying is optional
        return expr
    for cand in (e1, e2):
        n = sp.count_ops(cand)
        if n < size:
            best, size = cand, n
    return best


def _name_for(d: Derived) -> str:
    pattern = NAMING.get(d.kind)
    if pattern is None:  # pragma: no cover - every kind is listed
        raise DualityError(f"cannot export a function of kind {d.kind!r}")
    q = d.name
    if d.kind == "share" and q.startswith("s_"):
        q = q[2:]
    return pattern.format(q=q)


def _item(name: str, d: Derived) -> Item:
    if d.expr is None:
        raise no_closed_form(d)
    expr = tidy(d.expr)
    args = tuple(d.args)
    values = {p: float(v) for p, v in d.params.items() if p in expr.free_symbols}
    free = tuple(sorted(expr.free_symbols - set(args) - set(values), key=lambda s: s.name))
    valued = tuple(sorted(values, key=lambda s: s.name))
    return Item(name, d, expr, args, free, valued, values)


def _derived_with_demands(d: Derived) -> list[Derived]:
    out = [d]
    if d.demand_factory is not None:
        out.extend(d.demands.values())
    return out


def _from_model(model: Model) -> tuple[list[Derived], list[str]]:
    omitted: list[str] = []
    if model.is_technology:
        first, second = cost(model), None
        try:
            second = profit(model)
        except NoSolutionError as exc:
            omitted.append(f"profit function: {exc.reason}")
    else:
        first, second = indirect_utility(model), None
        try:
            second = expenditure(model)
        except NoSolutionError as exc:
            omitted.append(f"expenditure function: {exc.reason}")
    if first.expr is None:
        raise no_closed_form(first)
    out = _derived_with_demands(first)
    if second is not None:
        if second.expr is None:
            omitted.append(f"{second.label}: no closed form (computed numerically only)")
        else:
            try:
                extra = _derived_with_demands(second)
            except DualityError as exc:  # pragma: no cover - demands of a closed form
                omitted.append(f"{second.label}: {exc}")
                extra = []
            bad = [x for x in extra if x.expr is None]
            if bad:
                omitted.append(f"{second.label}: some demands have no closed form")
            else:
                out.extend(extra)
    return out, omitted


def _flatten(what) -> tuple[list[Derived], list[str], Model | None]:
    if isinstance(what, Model):
        ds, omitted = _from_model(what)
        return ds, omitted, what
    if isinstance(what, Derived):
        return _derived_with_demands(what), [], None
    if isinstance(what, Mapping):
        what = list(what.values())
    if isinstance(what, (str, bytes)) or not isinstance(what, Iterable):
        raise DualityError(f"cannot export a {type(what).__name__}; give a model, a derived "
                           "function, or a list or dict of derived functions")
    ds: list[Derived] = []
    omitted: list[str] = []
    model = None
    for x in what:
        if isinstance(x, (Model, Derived, Mapping, list, tuple)):
            more, om, m = _flatten(x)
            ds.extend(more)
            omitted.extend(om)
            model = model or m
        else:
            raise DualityError(f"cannot export a {type(x).__name__} inside a list; give "
                               "derived functions or models")
    return ds, omitted, model


def collect(what) -> Collection:
    """The functions of ``what`` as :class:`Item` records, in a fixed order.

    A model contributes every dual it has (see :func:`duality.apply.export.export`); a derived
    function itself and its demands; a list or dict its entries (dict keys are not used:
    names always come from the kind and the quantity).  The same function given twice is
    exported once; two different functions that would get the same name are numbered
    (``cost``, ``cost_2``).
    """
    ds, omitted, model = _flatten(what)
    if not ds:
        raise DualityError("nothing to export: no derived functions were given")
    items: list[Item] = []
    seen: dict[str, Derived] = {}
    for d in ds:
        if not isinstance(d, Derived):
            raise DualityError(f"cannot export a {type(d).__name__}")
        if any(d is s for s in seen.values()):
            continue
        base = _name_for(d)
        name, k = base, 1
        while name in seen:
            k += 1
            name = f"{base}_{k}"
        seen[name] = d
        items.append(_item(name, d))
    return Collection(items, model, omitted)


# ------------------------------------------------------------------------ strictness

#: what each construct is called in error messages
_CONSTRUCTS = {
    "Piecewise": "Piecewise (a function defined by cases)", "Min": "min", "Max": "max",
    "Heaviside": "Heaviside step", "DiracDelta": "DiracDelta", "ImaginaryUnit": "the imaginary unit I",
    "Pi": "the constant pi", "ComplexInfinity": "complex infinity (zoo)", "NaN": "nan",
    "Infinity": "infinity", "NegativeInfinity": "infinity", "Derivative": "an unevaluated derivative",
    "Integral": "an unevaluated integral", "Abs": "abs", "Sum": "an unevaluated sum",
}

#: node types every numeric target understands
BASE_ALLOWED: tuple = (sp.Add, sp.Mul, sp.Pow, sp.Symbol, sp.Integer, sp.Rational, sp.Float,
                       sp.exp, sp.log, sp.Abs, type(sp.E))
#: extra node types for targets that can print cases and kinks
CASES_ALLOWED: tuple = (sp.Min, sp.Max, sp.Piecewise, sp.logic.boolalg.BooleanTrue,
                        sp.logic.boolalg.BooleanFalse, sp.And, sp.Or, sp.Not,
                        sp.core.relational.Relational, sp.functions.elementary.piecewise.ExprCondPair,
                        sp.Tuple)


def construct_name(node) -> str:
    name = type(node).__name__
    return _CONSTRUCTS.get(name, name)


def check_supported(expr, target: str, allowed: tuple, where: str = "") -> None:
    """Raise DualityError naming ``target`` and the first construct it cannot express."""
    for node in sp.preorder_traversal(expr):
        if not isinstance(node, allowed) or (isinstance(node, sp.Float)
                                             and not sp.Float(node).is_finite):
            raise DualityError(
                f"the {target} export cannot express {construct_name(node)}"
                + (f" (in {where})" if where else "")
                + "; nothing was written for this target")
        if isinstance(node, sp.Symbol) and not _IDENT.match(node.name):
            raise DualityError(f"the {target} export needs plain names; '{node.name}' is not one")


def check_names(names: Iterable[str], target: str, reserved: Iterable[str],
                max_len: int | None = None, patterns: Iterable[str] = ()) -> None:
    """Refuse a name the target cannot use: not an identifier, a reserved word or a name
    its standard library or headers define (``reserved``), a name matching one of the
    regular expressions ``patterns`` (whole families such as C's ``M_*`` macros), or
    longer than ``max_len``."""
    reserved = set(reserved)
    families = [re.compile(p) for p in patterns]
    for n in names:
        if not _IDENT.match(n):
            raise DualityError(f"the {target} export cannot use the name '{n}' (it must start "
                               "with a letter and hold only letters, digits and _)")
        if n in reserved or any(f.fullmatch(n) for f in families):
            raise DualityError(f"the {target} export cannot use the name '{n}': it is a "
                               f"reserved word or built-in name in {target}; rename it")
        if max_len is not None and len(n) > max_len:
            raise DualityError(f"the {target} export cannot use the name '{n}': names are at "
                               f"most {max_len} characters in {target}")


def check_export_name(name: str) -> str:
    if not isinstance(name, str) or not _IDENT.match(name) or keyword.iskeyword(name):
        raise DualityError(f"export name {name!r} must be a plain identifier (letters, digits "
                           "and _, starting with a letter)")
    return name


def cse_prefix(taken: Iterable[str]) -> str:
    """A prefix ``t``, ``tt``, ... such that no name ``<prefix><digits>`` is taken."""
    taken = set(taken)
    prefix = "t"
    while any(re.fullmatch(prefix + r"\d+", n) for n in taken):
        prefix += "t"
    return prefix


def cse(expr, taken: Iterable[str]):
    """(list of (Symbol, subexpression), reduced expression) with safe temporary names."""
    syms = sp.numbered_symbols(cse_prefix(taken))
    repl, red = sp.cse([expr], symbols=syms)
    return repl, red[0]


def fmt_float(v: float) -> str:
    """Shortest text that reads back as the same double."""
    return repr(float(v))


def condition_text(c) -> str:
    try:
        if isinstance(c, sp.core.relational.Relational):
            return f"{to_text(c.lhs)} {c.rel_op} {to_text(c.rhs)}"
        return to_text(c)
    except DualityError:
        return sp.sstr(c)


def formula_text(expr) -> str:
    try:
        return to_text(expr)
    except DualityError:
        return sp.sstr(expr)

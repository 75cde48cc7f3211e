"""What every view of the app shows, computed by plain functions (no Streamlit here).

Each function takes a :class:`~duality.model.base.Model` (frozen and hashable) or a
:class:`~duality.apply.scenario.Scenario` and returns plain data: cards of LaTeX with their
provenance, DataFrames, check records, export texts.  Results that cost symbolic work are
cached by model (``functools.lru_cache``), so a rerun of the page with the same model is
free and a parameter edit only pays for evaluation.  The symbolic solving itself runs in
budgeted worker processes inside the library (:mod:`duality.solve.budget`).

Errors from the library arrive as :class:`~duality.errors.DualityError` with a readable
message; functions here turn them into "not available" entries instead of raising, so a
view can show every part that does work.
"""
from __future__ import annotations

import dataclasses
import math
import re
from dataclasses import dataclass
from functools import lru_cache

import numpy as np
import pandas as pd
import sympy as sp

import duality as dy
from duality.solve.derive import DEFAULT_BUDGET, duals
from duality.solve.display import decimals, lines, log_form, terms
from duality.analyse import theory
from duality.analyse.restrictions import check_values, describe_violation, impose
from duality.errors import DualityError
from duality.apply.export import REGISTRY, export, file_name
from duality.model.base import Model
from duality.model.roles import ROLES
from duality.solve.points import complete_point, value_at
from duality.solve.result import Derived, Unavailable

#: seconds of symbolic work allowed per dual before the numeric route takes over; the
#: library's default, so the app, the exports and the checks share one cached derivation
BUDGET = DEFAULT_BUDGET
ROUTE_TEXT = {
    "catalogue": "closed form from the catalogue",
    "symbolic": "closed form derived by the engine",
    "numeric": "numeric (no closed form found)",
}


@dataclass(frozen=True)
class Card:
    """One function for display: LaTeX, route and source, value at the baseline."""

    title: str
    latex: str
    route: str
    method: str = ""
    source: str | None = None
    conditions: tuple[str, ...] = ()
    notes: tuple[str, ...] = ()
    value: float | None = None
    demands: tuple["Card", ...] = ()
    #: parameter values the formula is evaluated with (``A = 1.8, a = 0.3``), if it names any
    parameters: str = ""


@dataclass(frozen=True)
class UnavailableCard:
    """A dual the model does not have, with the reason."""

    title: str
    reason: str


#: display titles of the duals, in the order shown
TITLES = {"cost": "Cost function", "profit": "Profit function",
          "indirect_utility": "Indirect utility function",
          "expenditure": "Expenditure function"}


@lru_cache(maxsize=64)
def derive_all(model: Model) -> dict[str, Derived | Unavailable]:
    """Each dual of ``model``; a dual that does not exist maps to :class:`Unavailable`.

    Derived once per model *structure* (:func:`structure`: every parameter left free),
    then evaluated with the parameter values (:func:`bind`), so an edit of a value
    derives nothing.  The first model of a structure is also derived with its values, and
    the structure is used only where both agree (same duals, same routes, closed forms):
    the existence of a dual can depend on the values (a translog cost with constant
    returns has no profit function).  Where the structure carries conditions on the
    parameters alone that these values break, the values are derived as given.
    """
    if not model.params:
        return duals(model, budget=BUDGET)
    shape = structure(model)
    free = _structural(shape)
    if shape not in _AGREES:
        valued = duals(model, budget=BUDGET)
        _AGREES[shape] = _agree(free, valued)
        if not _AGREES[shape]:
            return valued
    if not _AGREES[shape]:
        return duals(model, budget=BUDGET)
    values = model.values
    bound = {k: d if isinstance(d, Unavailable) else bind(d, values) for k, d in free.items()}
    if not all(_holds(d, values) for d in bound.values() if isinstance(d, Derived)):
        return duals(model, budget=BUDGET)
    return bound


#: structure -> whether its free-parameter duals agree with a derivation at values
_AGREES: dict = {}


def instant(model: Model) -> bool:
    """Whether the duals of ``model`` come without symbolic work: its structure was
    derived before and is evaluated with the values (a parameter or price edit)."""
    return bool(model.params) and bool(_AGREES.get(structure(model)))


def structure(model: Model) -> Model:
    """``model`` with every parameter left free (same formula, names and assumptions):
    the key under which the app derives once."""
    if not model.params or all(p.value is None for p in model.params):
        return model
    out = dataclasses.replace(
        model, params=tuple(dataclasses.replace(p, value=None) for p in model.params))
    out.__dict__.pop("_identity", None)
    out.__dict__.pop("numeric_expr", None)
    return out


@lru_cache(maxsize=32)
def _structural(shape: Model) -> dict[str, Derived | Unavailable]:
    return duals(shape, budget=BUDGET)


def _agree(free: dict, valued: dict) -> bool:
    if set(free) != set(valued):
        return False
    for k, d in free.items():
        v = valued[k]
        if isinstance(d, Unavailable) or isinstance(v, Unavailable):
            if not (isinstance(d, Unavailable) and isinstance(v, Unavailable)):
                return False
            continue
        if d.route != v.route or d.expr is None or v.expr is None:
            return False
    return True


def bind(d: Derived, values: dict) -> Derived:
    """The free-parameter function ``d`` evaluated with ``values`` (symbol -> value):
    same closed form, compiled code shared with ``d`` (nothing is derived or compiled
    again); its demands bound alike."""
    factory = None
    if d.demand_factory is not None:
        def factory(d=d):
            return {k: bind(x, values) for k, x in d.demands.items()}
    out = dataclasses.replace(d, params=dict(values), demand_factory=factory)
    for key in ("_lambda", "_condition_fns", "_beyond_float"):
        out.__dict__[key] = getattr(d, key)
    return out


def _holds(d: Derived, values: dict) -> bool:
    """Whether the conditions of ``d`` that name parameters only hold at ``values``."""
    args = set(d.args)
    for c in d.conditions:
        syms = c.free_symbols
        if syms and not syms & args and syms <= set(values):
            try:
                if not bool(c.xreplace(values)):
                    return False
            except TypeError:
                return False
    return True


def point_for(d: Derived, point: dict) -> dict[str, float]:
    """The part of ``point`` that ``d`` takes as arguments."""
    names = {str(a) for a in d.args}
    return {k: float(v) for k, v in point.items() if k in names}


def _card(title: str, d: Derived, point: dict, with_demands: bool) -> Card:
    demands: tuple[Card, ...] = ()
    if with_demands and d.demand_factory is not None:
        try:
            dem = d.demands
        except DualityError:
            dem = {}
        demands = tuple(_card(name, x, point, False) for name, x in dem.items())
    return Card(title=title, latex=latex_of(d), parameters=parameter_text(d),
                route=d.route, method=d.method or "",
                source=d.source, conditions=tuple(sp.latex(c) for c in d.conditions),
                notes=tuple(d.notes), value=value_at(d, point), demands=demands)


def cards(model: Model, base: dict) -> tuple[list, dict[str, float]]:
    """Display cards for every dual (with its demands) at the baseline point.

    Returns the cards (:class:`Card` or :class:`UnavailableCard`) and the completed point.
    """
    found = derive_all(model)
    pt = complete_point(model, base, found)
    out = [UnavailableCard(TITLES[kind], d.reason) if isinstance(d, Unavailable) else
           _card(TITLES[kind], d, pt, True) for kind, d in found.items()]
    return out, pt


_GREEK = {"alpha", "beta", "gamma", "delta", "epsilon", "zeta", "eta", "theta", "iota",
          "kappa", "lambda", "mu", "nu", "xi", "pi", "rho", "sigma", "tau", "upsilon", "phi",
          "chi", "psi", "omega"}


def _word(text: str) -> str:
    if len(text) > 1 and text.lower() not in _GREEK and not text[1:].isdigit():
        return r"\mathrm{" + text.replace("_", r"\_") + "}"
    return sp.latex(sp.Symbol(text))


def _symbol_tex(sym: sp.Symbol) -> str:
    base, _, sub = sym.name.partition("_")
    if not sub:
        return _word(base)
    return _word(base) + "_{" + _word(sub) + "}"


def tex(expr) -> str:
    """LaTeX with an explicit product dot and upright multi-letter names (names here are
    often words: A·clay^0.3, w_clay)."""
    names = {s: _symbol_tex(s) for s in getattr(expr, "free_symbols", ())}
    return sp.latex(expr, mul_symbol="dot", symbol_names=names, ln_notation=True)


def _args_tex(args) -> str:
    return ", ".join(tex(a) for a in args)


def latex_of(d: Derived) -> str:
    """``head(args) = closed form`` of a derived function, or a note that it is numeric.

    Numeric constants built from roots and powers print as decimals (six figures), a
    function of the form ``exp(…)`` prints in log form, ``ln c(…) = …``, and a long sum
    is broken over lines.
    """
    if d.expr is None:
        return d.latex()
    return _latex_of(d.kind, d.name, d.args, d.expr)


@lru_cache(maxsize=512)
def _latex_of(kind: str, name: str, args: tuple, expr) -> str:
    # cached by formula: a function bound to new parameter values (:func:`bind`) keeps
    # its structural formula, so an edit prints nothing again
    head = Derived(kind=kind, args=args, expr=expr, route="symbolic", method="",
                   name=name).latex().split("(", 1)[0]
    if name and head == sp.latex(sp.Symbol(name)):
        head = tex(sp.Symbol(name))
    lhs, out = log_form(f"{head}({_args_tex(args)})", decimals(expr), ln=r"\ln ")
    return broken(lhs, out)


def parameter_text(d: Derived) -> str:
    """The parameter values a structural formula of ``d`` is evaluated with, as
    ``A = 1.8, a = 0.3`` (empty when its formula names none)."""
    if d.expr is None:
        return ""
    named = sorted((s for s in d.params if s in d.expr.free_symbols), key=str)
    return ", ".join(f"{s} = {float(d.params[s]):.6g}" for s in named)


#: rough width of one displayed line, in characters of LaTeX source
LINE = 180


def broken(lhs: str, expr) -> str:
    """``lhs = expr`` in LaTeX; a long sum goes over several aligned lines, one break
    between terms."""
    full = f"{lhs} = {tex(expr)}"
    if len(full) <= LINE or not expr.is_Add:
        return full
    rows = lines(terms(expr, tex), LINE)
    return (r"\begin{aligned} " + lhs + " &= " + r" \\ &\quad ".join(rows)
            + r" \end{aligned}")


def model_latex(model: Model) -> str:
    """The model as an equation: ``y = f(x)``, ``u = U(x)`` or the given dual (its
    parameters as symbols: printed once per structure)."""
    return _model_latex(structure(model))


@lru_cache(maxsize=64)
def _model_latex(model: Model) -> str:
    head = model.given.latex
    if model.is_primal:
        return f"{tex(model.level)} = {head}({_args_tex(model.quantities)}) = {tex(model.expr)}"
    return broken(*log_form(f"{head}({_args_tex(model.dual_args)})", model.expr,
                            ln=r"\ln "))


# -- elasticities -------------------------------------------------------------------------
def elasticity_tables(model: Model, point: dict) -> dict[str, pd.DataFrame] | Unavailable:
    """Elasticity matrices at ``point`` as labelled DataFrames, or :class:`Unavailable`
    with the reason there are none.  Keys: ``shares``, ``price``, (``compensated``),
    ``level``, ``allen_uzawa``, ``morishima``; plus ``meta`` (route, returns to scale,
    notes)."""
    try:
        tab = _elasticities(model, tuple(sorted(point.items())))
    except DualityError as exc:
        return Unavailable(str(exc))
    names = list(tab.names)
    lvl = ROLES[tab.role].shifter + " elasticity"
    out = {"shares": pd.DataFrame({"share": tab.shares, lvl: tab.level}, index=names),
           "price": pd.DataFrame(tab.price, index=names, columns=names),
           "allen_uzawa": pd.DataFrame(tab.allen_uzawa, index=names, columns=names),
           "morishima": pd.DataFrame(tab.morishima, index=names, columns=names)}
    if tab.compensated is not None:
        out["compensated"] = pd.DataFrame(tab.compensated, index=names, columns=names)
    out["meta"] = pd.DataFrame({"value": [tab.route, "" if tab.returns_to_scale is None
                                          else f"{tab.returns_to_scale:.6g}",
                                          "; ".join(tab.notes)]},
                               index=["route", "returns to scale", "notes"])
    return out


@lru_cache(maxsize=256)
def _elasticities(model: Model, items: tuple):
    names = {str(s) for s in model.prices} | {str(model.shifter)}
    return dy.elasticities(model, budget=BUDGET, **{k: v for k, v in items if k in names})


#: axis titles of each matrix's heat map: (rows, columns)
ELASTICITY_AXES = {
    "price": ("demand for (row i)", "price that changes (column j)"),
    "compensated": ("demand for (row i)", "price that changes (column j)"),
    "allen_uzawa": ("quantity i", "quantity j"),
    "morishima": ("price that changes (row i)", "ratio x_j / x_i (column j)"),
}

ELASTICITY_TITLES = {
    "price": "own- and cross-price elasticities",
    "compensated": "compensated (Hicksian) price elasticities",
    "allen_uzawa": "Allen–Uzawa elasticities of substitution",
    "morishima": "Morishima elasticities of substitution",
}


# -- checks -------------------------------------------------------------------------------
@lru_cache(maxsize=32)
def checks(model: Model, symbolic: bool = True) -> tuple:
    """The model's check records (cached by model); ``symbolic=False`` skips the proof
    attempts and only samples points (quicker)."""
    return tuple(dy.check(model, budget=BUDGET, symbolic=symbolic))


def checks_frame(records) -> pd.DataFrame:
    """One row per check; a missing number is NaN (shown as a dash, never 'None')."""
    rows = []
    for r in records:
        rows.append({"check": r.name, "status": r.status, "evidence": r.evidence,
                     "largest error": np.nan if r.max_error is None else r.max_error,
                     "points": r.points or np.nan,
                     "counterexample": ", ".join(
                         f"{k} = {_short(v)}" for k, v in
                         counterexample_frame(r.counterexample)["value"].items())})
    return pd.DataFrame(rows)


def counterexample_frame(point) -> pd.DataFrame:
    """A check's counterexample as a small table: one row per name (nested entries
    named ``outer.inner``), one ``value`` column."""
    if not point:
        return pd.DataFrame({"value": []})
    flat = pd.json_normalize(point, sep=".").iloc[0]
    frame = flat.to_frame("value")
    frame.index.name = "name"
    return frame


def _short(v) -> str:
    try:
        return f"{float(v):.4g}"
    except (TypeError, ValueError):
        return str(v)


# -- theory restrictions -----------------------------------------------------------------
_RESTRICTIONS: dict = {}


def _restrictions(model: Model) -> list:
    """The model's theory restrictions, derived once per formula (not per value)."""
    key = (model.side, model.expr, tuple(model.prices), tuple(model.param_symbols))
    if key not in _RESTRICTIONS:
        try:
            _RESTRICTIONS[key] = theory.restrictions(model)
        except DualityError:
            _RESTRICTIONS[key] = []
    return _RESTRICTIONS[key]


@dataclass(frozen=True)
class Broken:
    """Theory restrictions the parameter values break, and the values that impose them
    (dependent parameters replaced, the others kept)."""

    messages: tuple[str, ...]
    imposed: dict


@lru_cache(maxsize=256)
def broken_restrictions(model: Model) -> Broken | None:
    """The restrictions (homogeneity, adding-up, symmetry) of a model given on the dual
    side that its parameter values break, or None when they hold or do not apply."""
    if model.is_primal or model.free_params:
        return None
    rs = _restrictions(model)
    if not rs:
        return None
    known = {s.name for r in rs for s in tuple(r.parameters) + r.symbols}
    values = {p.name: p.value for p in model.params if p.name in known}
    bad = check_values(rs, values, tol=1e-8)
    if not bad:
        return None
    imposed: dict = {}
    linear = [r for r in rs if r.linear]
    if linear:
        try:
            _reduced, mapping, _kept = impose(model.expr, linear, list(model.param_symbols))
        except DualityError:
            mapping = {}
        at = {p.symbol: p.value for p in model.params}
        # twelve figures: the sums of decimal parameters carry rounding noise otherwise
        now = {p.name: p.value for p in model.params}
        imposed = {str(p): float(f"{float(e.xreplace(at)):.12g}") for p, e in mapping.items()}
        imposed = {k: v for k, v in imposed.items() if abs(v - now[k]) > 1e-12}
    return Broken(tuple(describe_violation(r, res) for r, res in bad), imposed)


# -- recovery -----------------------------------------------------------------------------
@lru_cache(maxsize=16)
def recovered(model: Model, point: tuple):
    """The technology or preference behind a cost or expenditure function
    (:func:`duality.recover`, numeric route), over price ratios w_i/w_1 within a factor
    of three of those at ``point`` (sorted items): flexible forms are regular only near
    their data, and the recovery must not range over prices where they are not."""
    pt = dict(point)
    ps = [str(p) for p in model.prices]
    ratios = [pt[p] / pt[ps[0]] for p in ps[1:]]
    return dy.recover(model, budget=0, price_ratios=(min(ratios) / 3, max(ratios) * 3))


# -- price scenarios ----------------------------------------------------------------------
def welfare(scenario) -> pd.DataFrame | Unavailable:
    """The scenario's comparison table (variants against the baseline), or
    :class:`Unavailable` with the reason there is none."""
    if not scenario.variants:
        return Unavailable("the scenario has no price variants; add one to compare")
    try:
        return dy.scenario_table(scenario)
    except DualityError as exc:
        return Unavailable(str(exc))


#: measures drawn as welfare bars, by role
WELFARE_MEASURES = {
    "technology": ["total cost", "profit"],
    "preference": ["compensating variation", "equivalent variation",
                   "consumer surplus change"],
}


#: what a bar's measure is, where its name alone does not say it
BAR_LABELS = {"profit": "maximum profit (output chosen at the variant's prices)",
              "total cost": "total cost (at the variant's output)"}


def welfare_bars_data(table: pd.DataFrame, role: str) -> pd.DataFrame:
    """Variant × measure changes for the bar chart (long format)."""
    rows = []
    for (variant, measure), row in table.iterrows():
        if measure in WELFARE_MEASURES[role] and pd.notna(row["change"]):
            rows.append({"variant": variant, "measure": BAR_LABELS.get(measure, measure),
                         "change": float(row["change"])})
    return pd.DataFrame(rows, columns=["variant", "measure", "change"])


# -- comparison ---------------------------------------------------------------------------
def key_values(scenario) -> dict[tuple[str, str], float]:
    """The numbers a comparison shows for one scenario, keyed by (section, item): each
    dual and its demands at the baseline, own-price elasticities, and every price
    variant's figures."""
    model = scenario.build_model()
    found, pt = cards(model, scenario.points()[0])
    out: dict[tuple[str, str], float] = {}
    for c in found:
        if isinstance(c, UnavailableCard):
            continue
        out[("at the baseline", c.title)] = c.value
        for d in c.demands:
            out[("at the baseline", f"{c.title}: demand {d.title}")] = d.value
    tabs = elasticity_tables(model, pt)
    if not isinstance(tabs, Unavailable):
        for q in tabs["price"].index:
            out[("own-price elasticity", q)] = float(tabs["price"].loc[q, q])
    table = welfare(scenario)
    if not isinstance(table, Unavailable):
        for (variant, measure), row in table.iterrows():
            out[("price scenarios", f"{variant}: {measure}")] = float(row["variant"])
    return out


def comparison(first, second, names: tuple[str, str]) -> pd.DataFrame:
    """Two scenarios side by side: columns ``section``, ``item``, one per scenario
    (``names``), ``difference`` (first − second; NaN where either lacks the item) and
    ``change %`` (the difference in per cent of the second; NaN where that is 0)."""
    a, b = key_values(first), key_values(second)
    keys = list(a) + [k for k in b if k not in a]
    frame = pd.DataFrame([{"section": k[0], "item": k[1],
                           names[0]: a.get(k), names[1]: b.get(k)} for k in keys],
                         columns=["section", "item", *names])
    frame[list(names)] = frame[list(names)].astype(float)
    frame["difference"] = frame[names[0]] - frame[names[1]]
    base = frame[names[1]].abs().where(frame[names[1]] != 0)
    frame["change %"] = 100.0 * frame["difference"] / base
    return frame


# -- regularity ---------------------------------------------------------------------------
def regularity(model: Model, data: pd.DataFrame, columns: dict | None = None):
    """Regularity report over ``data`` (library report object)."""
    return dy.regularity(model, data, columns=columns or None, budget=BUDGET,
                         restrictions="warn")


# -- estimation ---------------------------------------------------------------------------
NONE = "(not in the data)"


def estimation_names(model: Model) -> list[tuple[str, str]]:
    """The names an estimate can read from data, each with what it is: prices, output or
    income, the observed cost, each observed share, and each quantity."""
    out = [(str(p), "price") for p in model.prices]
    if model.form == "aids_expenditure":
        out.append((str(model.income), "total expenditure"))
    else:
        out.append((str(model.level), "output"))
        out.append(("c", "observed cost"))
    out += [(f"s_{q}", f"share of {q}") for q in model.quantities]
    if model.form != "aids_expenditure":
        out += [(str(q), f"quantity {q}") for q in model.quantities]
    return out


def mapping_table(model: Model, data_columns: list[str],
                  given: dict | None = None) -> pd.DataFrame:
    """The mapping table a user edits: model name, what it is, and the data column
    (guessed when a column has the model's name)."""
    given = dict(given or {})
    rows = []
    for name, what in estimation_names(model):
        col = given.get(name, name if name in data_columns else NONE)
        rows.append({"name": name, "meaning": what, "column": col})
    return pd.DataFrame(rows)


def _split(mapping: pd.DataFrame) -> tuple[dict, dict]:
    """(columns, shares) from the mapping table; rows without a column are left out."""
    columns, shares = {}, {}
    for _, row in mapping.iterrows():
        col = row["column"]
        if col is None or col in ("", NONE) or (isinstance(col, float) and math.isnan(col)):
            continue
        name = str(row["name"])
        if name.startswith("s_"):
            shares[name[2:]] = col
        else:
            columns[name] = col
    return columns, shares


def estimate_from_mapping(model: Model, data: pd.DataFrame, mapping: pd.DataFrame, *,
                          impose: bool = True, curvature: str = "check", **kw):
    """``duality.estimate`` with the columns chosen in the mapping table (``kw``:
    equations, method, fixed, index)."""
    columns, shares = _split(mapping)
    return dy.estimate(model, data, columns=columns, shares=shares, impose=impose,
                       curvature=curvature, budget=BUDGET, **kw)


def restriction_test(model: Model, data: pd.DataFrame, mapping: pd.DataFrame, **kw):
    """Wald test of the theory restrictions, from an estimate that does not impose them;
    or the reason there is none (a message)."""
    try:
        free = estimate_from_mapping(model, data, mapping, impose=False,
                                     curvature="none", **kw)
        return free.test()
    except DualityError as exc:
        return str(exc)


def regularity_rows(result, data: pd.DataFrame, mapping: pd.DataFrame):
    """Per-row regularity of the fitted model (library report), or the reason."""
    cols, _ = _split(mapping)
    names = {str(p) for p in result.model.prices} | {str(result.system.level)}
    try:
        return dy.regularity(result.model, data,
                             columns={k: v for k, v in cols.items() if k in names},
                             budget=BUDGET, restrictions="ignore")
    except DualityError as exc:
        return str(exc)


# -- exports ------------------------------------------------------------------------------
def export_name(title: str) -> str:
    """A name usable by every export target, from a scenario title."""
    words = re.findall(r"[A-Za-z0-9]+", title.lower())[:4]
    name = "_".join(words) or "model"
    return name if name[0].isalpha() else "m_" + name


@lru_cache(maxsize=64)
def exports(model: Model, name: str) -> dict[str, tuple[str, str | Unavailable]]:
    """Every export target: ``{target: (file name, text)}``, the text being
    :class:`Unavailable` with the reason for a target that cannot express this model."""
    out = {}
    for target in (t.name for t in REGISTRY):
        fname = file_name(name, target)
        try:
            out[target] = (fname, export(model, target, name=name))
        except DualityError as exc:
            out[target] = (fname, Unavailable(str(exc)))
    return out


# -- conjugate ---------------------------------------------------------------------------
@lru_cache(maxsize=64)
def closed_conjugate(formula: str, var: str) -> str | None:
    """``f^*(s) = …`` in LaTeX when the conjugate has a closed form, else None."""
    c = dy.conjugate(formula, var, "s", budget=3.0)
    if c.expr is None:
        return None
    dom = ""
    if getattr(c, "domain", None) not in (None, sp.S.Reals, True):
        dom = r" \quad \text{on } " + sp.latex(c.domain)
    return r"f^*(s) = " + sp.latex(c.expr) + dom + rf" \quad \text{{({c.route})}}"


# -- numbers ------------------------------------------------------------------------------
def fmt(v) -> str:
    if v is None or (isinstance(v, float) and not np.isfinite(v)):
        return "—"
    return f"{v:.6g}"

"""The model: one frozen description of a technology or a preference.

Every stage of the package (derivation, demand, elasticities, checks, exports) takes a
:class:`Model` and returns new objects; nothing mutates it.  Build one with
:func:`technology` or :func:`preference`, which validate everything up front and raise a
:class:`~duality.errors.ModelError` naming the problem.
"""
from __future__ import annotations

import math
import numbers
import re
from dataclasses import dataclass
from functools import cached_property
from typing import Iterable, Mapping, Sequence

import numpy as np
import sympy as sp

from ..errors import DualityError, FormulaError, ModelError
from .formula import number_problem, parse, substitute
from .lambdas import numpy_function
from .roles import DUAL_KINDS, FUNCTIONS, ROLE_OF, ROLES as _ROLES, Function, Role

ROLES = tuple(_ROLES)
#: dual side -> the role it belongs to
SIDES = {kind: ROLE_OF[kind] for kind in DUAL_KINDS}
_NAME = re.compile(r"^[A-Za-z_][A-Za-z0-9_]*$")
_ASSUMPTIONS = ("positive", "negative", "nonnegative", "nonpositive", "real")


@dataclass(frozen=True)
class Parameter:
    """A named constant of a model: its symbol, its value (None when left free)."""

    name: str
    symbol: sp.Symbol
    value: float | None = None


@dataclass(frozen=True)
class Model:
    """A technology (production function) or a preference (utility function).

    Attributes
    ----------
    role : {"technology", "preference"}
    side : str
        Which function was given: ``"primal"`` (production or utility function), or on the
        dual side ``"cost"``, ``"profit"``, ``"expenditure"``, ``"indirect_utility"``
        (see :mod:`duality.model.dual_side`).
    expr : sympy.Expr
        The function, in the symbols below.
    quantities : tuple of Symbol
        Inputs (technology) or goods (preference); positive symbols.
    prices : tuple of Symbol
        One price per quantity, in the same order; positive symbols.
    level : Symbol
        Output ``y`` (technology) or utility level ``u`` (preference).
    output_price : Symbol or None
        Price of output ``p`` (technology only).
    income : Symbol or None
        Income ``m`` (preference only).
    params : tuple of Parameter
    text : str
        The formula as the user typed it (empty when built from sympy).
    name : str
        A short label for reports.
    """

    role: str
    side: str
    expr: sp.Expr
    quantities: tuple[sp.Symbol, ...]
    prices: tuple[sp.Symbol, ...]
    level: sp.Symbol
    output_price: sp.Symbol | None = None
    income: sp.Symbol | None = None
    params: tuple[Parameter, ...] = ()
    text: str = ""
    name: str = ""
    form: str = ""

    # -- derived views --------------------------------------------------------------
    @property
    def values(self) -> dict[sp.Symbol, float]:
        """Parameter symbol -> value, for parameters that have one."""
        return {p.symbol: p.value for p in self.params if p.value is not None}

    @property
    def free_params(self) -> tuple[sp.Symbol, ...]:
        """Parameters left without a value."""
        return tuple(p.symbol for p in self.params if p.value is None)

    @property
    def param_symbols(self) -> tuple[sp.Symbol, ...]:
        return tuple(p.symbol for p in self.params)

    @property
    def symbols(self) -> dict[str, sp.Symbol]:
        """Every declared name -> its symbol."""
        out = {str(s): s for s in self.quantities + self.prices + (self.level,)}
        for s in (self.output_price, self.income):
            if s is not None:
                out[str(s)] = s
        out.update({p.name: p.symbol for p in self.params})
        return out

    @property
    def is_technology(self) -> bool:
        return self.role == "technology"

    @property
    def role_info(self) -> Role:
        """The role in words: primal function, duals, level, quantity, level curve
        (:mod:`duality.model.roles`)."""
        return _ROLES[self.role]

    @property
    def shifter(self) -> sp.Symbol | None:
        """What moves demand besides prices: the output level of a technology, the income
        of a preference (``role_info.shifter`` names it)."""
        return self.level if self.is_technology else self.income

    @property
    def given(self) -> Function:
        """The function this model was given as (production or utility function, or a
        dual), with its label and head letters."""
        return FUNCTIONS[self.role_info.primal if self.is_primal else self.side]

    @cached_property
    def numeric_expr(self) -> sp.Expr:
        """The function with every parameter value substituted (size-checked: a term
        that would grow without bound or divide by zero raises ModelError)."""
        try:
            return substitute(self.expr, self.values)
        except FormulaError as exc:
            raise ModelError(f"the formula cannot take these parameter values: "
                             f"{exc.reason}") from None

    def with_values(self, **values: float) -> "Model":
        """A copy with some parameter values replaced (new object; this one unchanged)."""
        known = {p.name for p in self.params}
        unknown = sorted(set(values) - known)
        if unknown:
            raise ModelError(f"unknown parameter(s) {', '.join(unknown)}; "
                             f"the model has {', '.join(sorted(known)) or 'none'}")
        params = {p.name: (values[p.name] if p.name in values else p.value) for p in self.params}
        if not self.is_primal:
            return _build_dual(self.side, self.expr if not self.text else self.text,
                               [str(p) for p in self.prices], [str(q) for q in self.quantities],
                               level=str(self.level),
                               output_price=None if self.output_price is None
                               else str(self.output_price),
                               income=None if self.income is None else str(self.income),
                               params=params, assume=None, name=self.name, form=self.form)
        return _build(self.role, self.expr if not self.text else self.text,
                      [str(q) for q in self.quantities], [str(p) for p in self.prices],
                      level=str(self.level),
                      output_price=None if self.output_price is None else str(self.output_price),
                      income=None if self.income is None else str(self.income),
                      params=params, assume=None, name=self.name)

    @property
    def identity(self) -> tuple:
        """What the model is, as a tuple: two models are equal (and share cached results)
        exactly when these agree, however they were built.  The formula's text and the
        label are left out; symbols count with their assumptions."""
        key = self.__dict__.get("_identity")
        if key is None:
            def rep(s):
                return None if s is None else sp.srepr(s)
            key = (self.role, self.side, self.form, sp.srepr(self.expr),
                   tuple(map(rep, self.quantities)), tuple(map(rep, self.prices)),
                   rep(self.level), rep(self.output_price), rep(self.income),
                   tuple((p.name, rep(p.symbol), None if p.value is None else float(p.value))
                         for p in self.params))
            object.__setattr__(self, "_identity", key)  # frozen: computed once
        return key

    def __hash__(self) -> int:
        return hash(self.identity)

    def __eq__(self, other: object) -> bool:
        return isinstance(other, Model) and self.identity == other.identity

    def __getstate__(self) -> dict:
        state = dict(self.__dict__)
        state.pop("_identity", None)
        return state

    @property
    def is_primal(self) -> bool:
        return self.side == "primal"

    @property
    def dual_args(self) -> tuple[sp.Symbol, ...]:
        """Arguments of the given dual function, in the usual order."""
        ps = tuple(self.prices)
        return {"cost": ps + (self.level,), "profit": (self.output_price,) + ps,
                "expenditure": ps + (self.level,),
                "indirect_utility": ps + (self.income,)}.get(self.side, ())

    def describe(self) -> str:
        """One line: role, formula and parameter values."""
        vals = ", ".join(f"{p.name}={p.value:g}" if p.value is not None else f"{p.name} free"
                         for p in self.params)
        f = self.given
        lhs = str(self.level) if self.is_primal else \
            f"{f.letter}({', '.join(map(str, self.dual_args))})"
        return f"{f.label} {lhs} = {self.expr}" + (f"  ({vals})" if vals else "")


# -- constructors --------------------------------------------------------------------
def technology(formula: str | sp.Expr, inputs: Sequence[str], prices: Sequence[str] | None = None,
               *, output: str = "y", output_price: str = "p",
               params: Mapping[str, float | None] | None = None,
               assume: Mapping[str, str] | None = None, name: str = "") -> Model:
    """A technology given by its production function y = f(x).

    Parameters
    ----------
    formula : str or sympy.Expr
        The production function, e.g. ``"A*x1**a*x2**b"`` (see :mod:`duality.model.formula`).
    inputs : sequence of str
        Input quantity names, in order.
    prices : sequence of str, optional
        Input price names (default ``w1, w2, ...`` for ``x1, x2, ...``, else ``w_<input>``).
    output, output_price : str
        Names of the output quantity and its price.
    params : mapping, optional
        Parameter name -> value (``None`` leaves it free, i.e. symbolic only).
    assume : mapping, optional
        Parameter name -> sign assumption for free parameters
        (``positive``, ``negative``, ``nonnegative``, ``nonpositive``, ``real``).
    """
    _need_list(inputs, prices)
    prices = list(prices) if prices is not None else _default_prices(inputs, "w")
    return _build("technology", formula, list(inputs), prices, level=output,
                  output_price=output_price, income=None, params=params, assume=assume,
                  name=name)


def preference(formula: str | sp.Expr, goods: Sequence[str], prices: Sequence[str] | None = None,
               *, income: str = "m", utility: str = "u",
               params: Mapping[str, float | None] | None = None,
               assume: Mapping[str, str] | None = None, name: str = "") -> Model:
    """A preference given by its utility function u = U(x).

    Parameters are as in :func:`technology`; prices default to ``p1, p2, ...`` and the
    income and utility-level names to ``m`` and ``u``.
    """
    _need_list(goods, prices)
    prices = list(prices) if prices is not None else _default_prices(goods, "p")
    return _build("preference", formula, list(goods), prices, level=utility, output_price=None,
                  income=income, params=params, assume=assume, name=name)


def _need_list(quantities, prices) -> None:
    if isinstance(quantities, str) or isinstance(prices, str):
        raise ModelError("quantities and prices are lists of names, e.g. ['x1', 'x2']")


def _default_prices(quantities: Sequence[str], letter: str) -> list[str]:
    qs = [str(q) for q in quantities]
    m = [re.fullmatch(r"[A-Za-z]+(\d+)", q) for q in qs]
    if qs and all(m) and len({q.rstrip("0123456789") for q in qs}) == 1:
        return [letter + mm.group(1) for mm in m]
    return [f"{letter}_{q}" for q in qs]


def _check_names(groups: Iterable[tuple[str, Sequence[str]]]) -> None:
    seen: dict[str, str] = {}
    for what, names in groups:
        for n in names:
            if not isinstance(n, str) or not _NAME.match(n):
                raise ModelError(f"{what} name {n!r} is not a valid name "
                                 "(letters, digits and _, not starting with a digit)")
            if n in seen:
                same = "twice as " + what if seen[n] == what else f"both as {seen[n]} and as {what}"
                raise ModelError(f"name '{n}' is used {same}; every name must be distinct")
            seen[n] = what


def _param_symbol(name: str, value: float | None, assume: str | None) -> sp.Symbol:
    if assume is not None:
        if assume not in _ASSUMPTIONS:
            raise ModelError(f"assumption {assume!r} for parameter '{name}' is not one of "
                             f"{', '.join(_ASSUMPTIONS)}")
        return sp.Symbol(name, **{assume: True})
    if value is None:
        return sp.Symbol(name, real=True)
    if value > 0:
        return sp.Symbol(name, positive=True)
    if value < 0:
        return sp.Symbol(name, negative=True)
    return sp.Symbol(name, real=True)


def _check_value(name: str, value: object) -> float | None:
    if value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise ModelError(f"parameter '{name}' has value {value!r}; a real number is required")
    problem = number_problem(value)
    if problem:
        shown = f"{float(value):g}" if not isinstance(value, int) or \
            abs(value).bit_length() < 1000 else f"of {len(str(abs(value)))} digits"
        raise ModelError(f"parameter '{name}' has value {shown}; {problem}")
    return float(value)


def _build(role: str, formula: str | sp.Expr, quantities: list[str], prices: list[str], *,
           level: str, output_price: str | None, income: str | None,
           params: Mapping[str, float | None] | None, assume: Mapping[str, str] | None,
           name: str) -> Model:
    if role not in ROLES:
        raise ModelError(f"role {role!r} is not one of {', '.join(ROLES)}")
    if isinstance(quantities, str) or isinstance(prices, str):
        raise ModelError("quantities and prices are lists of names, e.g. ['x1', 'x2']")
    if not quantities:
        raise ModelError("at least one quantity (input or good) is required")
    if len(prices) != len(quantities):
        raise ModelError(f"{len(quantities)} quantities but {len(prices)} prices; "
                         "give one price per quantity")
    qword = _ROLES[role].quantity
    values, psyms = _names_and_parameters(role, [(qword, quantities), ("price", prices)],
                                          level, output_price, income, params, assume)
    qsyms = {q: sp.Symbol(q, positive=True) for q in quantities}
    table = {**qsyms, **psyms}
    expr, text = _read_formula(formula, table)

    others = {level, *(x for x in (output_price, income) if x)} | set(prices)
    for s in sorted(expr.free_symbols, key=str):
        if s.name in others:
            raise ModelError(f"'{s.name}' appears in the formula but is declared as a price or "
                             "level; the formula may only use quantities and parameters")
        if s not in table.values():
            raise ModelError(f"unknown symbol '{s.name}' in the formula: declare it as a "
                             f"{qword} or give it in params")
    for q in quantities:
        if qsyms[q] not in expr.free_symbols:
            raise ModelError(f"{qword} '{q}' does not appear in the formula")
    level_sym = sp.Symbol(level, positive=True) if role == "technology" else sp.Symbol(level, real=True)
    model = Model(
        role=role, side="primal", expr=expr,
        quantities=tuple(qsyms[q] for q in quantities),
        prices=tuple(sp.Symbol(p, positive=True) for p in prices),
        level=level_sym,
        output_price=sp.Symbol(output_price, positive=True) if output_price else None,
        income=sp.Symbol(income, positive=True) if income else None,
        params=tuple(Parameter(k, psyms[k], values[k]) for k in values),
        text=text, name=name,
    )
    _check_monotone(model)
    return model


def _names_and_parameters(role: str, groups: list, level: str, output_price: str | None,
                          income: str | None, params, assume) -> tuple[dict, dict]:
    """Check every name (valid, used once) and the parameters; their values and symbols.

    ``groups`` lists the quantity and price names, in the order messages should name them.
    """
    params = dict(params or {})
    assume = dict(assume or {})
    extra = [(_ROLES[role].level, [level])]
    if output_price is not None:
        extra.append(("output price", [output_price]))
    if income is not None:
        extra.append(("income", [income]))
    _check_names([*groups, *extra, ("parameter", list(params))])
    for k in assume:
        if k not in params:
            raise ModelError(f"assumption given for '{k}', which is not a parameter")
    values = {k: _check_value(k, v) for k, v in params.items()}
    psyms = {k: _param_symbol(k, values[k], assume.get(k)) for k in params}
    for k, v in values.items():
        if v is not None and assume.get(k) and not _satisfies(v, assume[k]):
            raise ModelError(f"parameter '{k}' = {v:g} contradicts its assumption '{assume[k]}'")
    return values, psyms


def _read_formula(formula, table: Mapping[str, sp.Symbol]) -> tuple[sp.Expr, str]:
    """The formula as sympy in the declared symbols, and its text ("" for sympy input)."""
    if isinstance(formula, sp.Basic):
        return formula.xreplace({s: table[s.name] for s in formula.free_symbols
                                 if s.name in table}), ""
    if isinstance(formula, str):
        return parse(formula, symbols=table), formula
    raise ModelError(f"formula must be text or a sympy expression, not {type(formula).__name__}")


def _satisfies(v: float, assumption: str) -> bool:
    return {"positive": v > 0, "negative": v < 0, "nonnegative": v >= 0,
            "nonpositive": v <= 0, "real": True}[assumption]


def _check_monotone(model: Model) -> None:
    """Refuse a function that falls as a quantity rises (wrong sign of a share, say).

    Checked numerically at a few quantity points when every parameter has a value;
    a function must be non-decreasing in each quantity to be a technology or a utility.
    """
    if model.free_params:
        return
    f = model.numeric_expr
    if f.free_symbols - set(model.quantities):
        return
    try:
        fn = numpy_function(model.quantities, f)
    except Exception:  # pragma: no cover - lambdify failures are reported at use
        return
    n = len(model.quantities)
    rng = np.random.default_rng(0)
    points = [np.full(n, v) for v in (1.0, 2.0, 5.0, 10.0)] + list(rng.uniform(1, 10, (4, n)))
    any_real, values, overflow = False, [], False
    for x in points:
        base = _safe_eval(fn, x)
        if base is None:
            overflow = overflow or _overflows(fn, x)
            continue
        any_real = True
        values.append(base)
        for i in range(n):
            h = 1e-6 * x[i]
            up = x.copy()
            up[i] += h
            val = _safe_eval(fn, up)
            if val is not None and val < base - 1e-9 * max(1.0, abs(base)):
                where = ", ".join(f"{q}={v:g}" for q, v in zip(model.quantities, x))
                what = model.given.label
                raise ModelError(
                    f"the {what} decreases in {model.quantities[i]} at {where}; it must be "
                    "non-decreasing in every quantity (check the sign of its parameters)")
    if not any_real:
        if overflow:
            raise ModelError("the formula overflows: its values are beyond the range of "
                             "floating-point numbers (about 1e308) at the quantity points "
                             "tried (all quantities 1, 2, 5, 10 and random points in "
                             "[1, 10]); rescale its constants")
        raise ModelError("the formula has no real, finite value at any quantity point tried "
                         "(all quantities 1, 2, 5, 10 and random points in [1, 10])")
    spread = max(values) - min(values)
    if spread <= 1e-12 * max(1.0, max(abs(v) for v in values)):
        # the same value everywhere (up to rounding, as in log(x1*x2) - log(x1) - log(x2))
        what = model.given.label
        shown = 0.0 if abs(values[0]) < 1e-12 else values[0]
        raise ModelError(f"the {what} takes the same value ({shown:g}) at every "
                         "quantity point tried (all quantities 1, 2, 5, 10 and random points "
                         "in [1, 10]); no quantity changes it (check its parameters)")


def _overflows(fn, x) -> bool:
    """Whether ``fn`` at ``x`` is infinite or raises an overflow (not merely undefined)."""
    with np.errstate(all="ignore"):
        try:
            v = complex(fn(*x))
        except OverflowError:
            return True
        except (ArithmeticError, ValueError, TypeError):
            return False
    return math.isinf(v.real) or math.isinf(v.imag)


def _safe_eval(fn, x) -> float | None:
    with np.errstate(all="ignore"):
        try:
            v = complex(fn(*x))
        except (ArithmeticError, ValueError, TypeError):
            return None
    if abs(v.imag) > 1e-12 or not math.isfinite(v.real):
        return None
    return v.real


__all__ = ["Model", "Parameter", "technology", "preference", "DualityError"]


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
    qword = _ROLES[role].quantity
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
    )
    _check_finite(model, what)
    return model


def _check_finite(model: Model, what: str) -> None:
    """The function must have real, finite values somewhere in the positive orthant."""
    if model.free_params:
        return
    e = model.numeric_expr
    syms = sorted(e.free_symbols, key=str)
    fn = numpy_function(syms, e)
    rng = np.random.default_rng(0)
    for _ in range(8):
        if _safe_eval(fn, rng.uniform(0.5, 3.0, len(syms))) is not None:
            return
    raise ModelError(f"the {what} has no real, finite value at any point tried (all "
                     "arguments between 0.5 and 3)")

"""What a catalogue form is, and how a typed function is reduced to one.

A catalogue form knows the closed-form solution of the *core* problem

    min_x  w·x   subject to   g(x) = g0,

for its core function g (e.g. a product of powers for Cobb–Douglas), as published.  A
typed function is first peeled of monotone outer layers f = T(g) — a positive scale, an
added constant, a power, log or exp — because the cost and expenditure problems depend
only on the level sets: f(x) >= y  <=>  g(x) >= T^{-1}(y) (or <= when T is decreasing,
which leaves the tangency solution unchanged).  Any symbol names work, since matching
looks at the structure only.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable, Mapping, Sequence

import sympy as sp


@dataclass(frozen=True)
class CoreSolution:
    """Closed-form solution of the core problem at core level ``g0``.

    ``value`` is the minimal spending, ``demands`` the minimisers in quantity order,
    ``conditions`` where the closed form holds, ``notes`` anything a user must know.
    """

    value: sp.Expr
    demands: tuple[sp.Expr, ...]
    conditions: tuple = ()
    notes: tuple[str, ...] = ()


@dataclass(frozen=True)
class Layer:
    """One monotone outer layer T of f = T(g): forward map and inverse."""

    label: str
    forward: Callable[[sp.Expr], sp.Expr]
    inverse: Callable[[sp.Expr], sp.Expr]
    conditions: tuple = ()


@dataclass(frozen=True)
class Match:
    """A catalogue form recognised in a function: the form, its pieces, the layers."""

    form: "Form"
    pieces: Mapping[str, object]
    layers: tuple[Layer, ...] = ()
    conditions: tuple = ()   # parameter conditions the form needs (e.g. exponents > 0)

    def to_core(self, level: sp.Expr) -> sp.Expr:
        """g0 = T^{-1}(level), undoing the outer layers from the outside in."""
        for layer in self.layers:
            level = layer.inverse(level)
        return level

    def from_core(self, g0: sp.Expr) -> sp.Expr:
        """level = T(g0)."""
        for layer in reversed(self.layers):
            g0 = layer.forward(g0)
        return g0

    def level_condition(self, level: sp.Expr, values: Mapping[sp.Symbol, float],
                        what: str) -> tuple[tuple, dict]:
        """The condition that ``level`` lies in the range of the function (core level
        above 0) for a form with :attr:`Form.positive_core`, and a sentence saying so.

        Returns ``(conditions, reasons)`` with reasons keyed by the condition's text."""
        if not self.form.positive_core:
            return (), {}
        conds = positive_condition(self.to_core(level))
        if not conds or conds == [sp.false]:
            return (), {}
        floor = sp.sympify(sp.sympify(self.from_core(sp.Integer(0))).xreplace(dict(values)))
        one = sp.sympify(sp.sympify(self.from_core(sp.Integer(1))).xreplace(dict(values)))
        at = ""
        if floor.is_number and floor.is_finite and floor.is_real and one.is_number:
            side = "above" if bool(one > floor) else "below"
            at = f" (every bundle gives a level {side} {float(floor):.6g})"
        return tuple(conds), {str(conds[0]): (
            f"the {what} level {level} lies outside the range of the {what} "
            f"function{at}: no bundle reaches it")}

    @property
    def description(self) -> str:
        outer = " of ".join(layer.label for layer in self.layers)
        return self.form.title + (f" (inside {outer})" if outer else "")


class Form:
    """Base class of a catalogue form; subclasses fill in the hooks below.

    Attributes
    ----------
    key : str
        Registry key (e.g. ``"cobb_douglas"``).
    title : str
        Name shown to users.
    source : str
        Published source of the closed forms.
    roles : tuple of str
        ``technology`` and/or ``preference``.
    """

    key: str = ""
    title: str = ""
    source: str = ""
    roles: tuple[str, ...] = ("technology", "preference")
    #: True when the core takes every positive value and only those on the positive
    #: orthant (products and sums of positive terms): a core level g0 <= 0 is reached by
    #: no bundle, so a level below the function's range is refused, not solved.
    positive_core: bool = False

    def match(self, core: sp.Expr, xs: Sequence[sp.Symbol]) -> dict | None:
        """The form's pieces if ``core`` has this form in ``xs``, else None."""
        raise NotImplementedError

    def requirements(self, pieces: Mapping, xs: Sequence[sp.Symbol]) -> list:
        """Parameter conditions (sympy relationals) the closed forms need."""
        return []

    def solve(self, pieces: Mapping, xs: Sequence[sp.Symbol], ws: Sequence[sp.Symbol],
              g0: sp.Expr) -> CoreSolution:
        """Minimal spending and minimisers at core level ``g0`` (prices ``ws``)."""
        raise NotImplementedError

    def level(self, pieces: Mapping, xs: Sequence[sp.Symbol], ws: Sequence[sp.Symbol],
              spend: sp.Expr) -> tuple[sp.Expr, tuple]:
        """Core level reached with spending ``spend``: the inverse of ``solve().value``.

        Returns the level and the conditions under which it holds.
        """
        raise NotImplementedError

    def marshallian(self, pieces: Mapping, xs: Sequence[sp.Symbol], ws: Sequence[sp.Symbol],
                    m: sp.Expr) -> tuple[sp.Expr, ...] | None:
        """Published Marshallian demands, if the form has a neater one than h(p, v(p, m))."""
        return None

    def __repr__(self) -> str:
        return f"<catalogue form {self.key}: {self.title}>"


def free_of(expr: sp.Expr, xs: Sequence[sp.Symbol]) -> bool:
    return not (expr.free_symbols & set(xs))


def positive_condition(expr: sp.Expr) -> list:
    """``[expr > 0]`` unless sympy already knows it is positive (or it is a number > 0)."""
    if expr.is_positive:
        return []
    if expr.is_number and expr.is_positive is False:
        return [sp.false]
    return [sp.StrictGreaterThan(expr, 0)]


def sign_of(expr: sp.Expr, values: Mapping[sp.Symbol, float]) -> int:
    """+1 / −1 when the sign of a quantity-free expression is known (with values), else 0."""
    if expr.is_positive:
        return 1
    if expr.is_negative:
        return -1
    v = sp.sympify(expr.xreplace(dict(values)))  # a bare symbol comes back as a float
    if v.is_number:
        c = complex(v)
        if abs(c.imag) < 1e-12 and c.real != 0:
            return 1 if c.real > 0 else -1
    return 0


def peel(expr: sp.Expr, xs: Sequence[sp.Symbol], values: Mapping[sp.Symbol, float],
         *, transforms: bool = True) -> tuple[sp.Expr, tuple[Layer, ...]]:
    """Split f = T(g) into monotone outer layers T and a core g.

    Layers peeled: positive scale c*g, added constant g + c, power g**k (k of known
    sign), and, when ``transforms`` is true, log(g) and exp(g).  Returns the core and
    the layers from the outside in.
    """
    layers: list[Layer] = []
    e = expr
    for _ in range(20):
        if isinstance(e, sp.Mul):
            const, rest = e.as_independent(*xs, as_Add=False)
            if const != 1 and sign_of(const, values) >= 0:
                layers.append(Layer(f"scale {const}", lambda g, c=const: c * g,
                                    lambda y, c=const: y / c, tuple(positive_condition(const))))
                e = rest
                continue
        if isinstance(e, sp.Add):
            const, rest = e.as_independent(*xs, as_Add=True)
            if const != 0:
                layers.append(Layer(f"shift {const}", lambda g, c=const: g + c,
                                    lambda y, c=const: y - c))
                e = rest
                continue
        if isinstance(e, sp.Pow) and free_of(e.exp, xs) and not free_of(e.base, xs):
            k = e.exp
            cond = () if sign_of(k, values) else (sp.Ne(k, 0),)
            layers.append(Layer(f"power {k}", lambda g, k=k: g ** k,
                                lambda y, k=k: y ** (1 / k), cond))
            e = e.base
            continue
        if transforms and isinstance(e, sp.log):
            layers.append(Layer("log", sp.log, sp.exp))
            e = e.args[0]
            continue
        if transforms and isinstance(e, sp.exp):
            layers.append(Layer("exp", sp.exp, sp.log))
            e = e.args[0]
            continue
        break
    return e, tuple(layers)


@dataclass
class Registry:
    """Catalogue forms by key, tried in order."""

    forms: dict[str, Form] = field(default_factory=dict)

    def register(self, form: Form) -> Form:
        if form.key in self.forms:
            raise ValueError(f"catalogue form {form.key!r} registered twice")
        self.forms[form.key] = form
        return form

    def __getitem__(self, key: str) -> Form:
        try:
            return self.forms[key]
        except KeyError:
            raise KeyError(f"no catalogue form {key!r}; known: {', '.join(self.forms)}") from None

    def __iter__(self):
        return iter(self.forms.values())

    def __len__(self) -> int:
        return len(self.forms)

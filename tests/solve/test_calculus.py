"""Symbolic-or-numeric functions (:mod:`duality.solve.calculus`): both sides give the same
numbers, derivatives agree with sympy's and with textbook demand formulas, and numeric
derivatives count their finite-difference layers."""
from __future__ import annotations

import math

import numpy as np
import pytest
import sympy as sp

from duality.solve.calculus import FD_STEP, Fn, symbol
from duality.solve.result import Derived

w1, w2, y, x, t, a = sp.symbols("w1 w2 y x t a", positive=True)

# CES cost function: y = (x1^ρ + x2^ρ)^{1/ρ} has c = y (w1^r + w2^r)^{1/r}, r = ρ/(ρ−1), and
# conditional demand x1 = y (w1^r + w2^r)^{1/r − 1} w1^{r−1} (Varian, Microeconomic Analysis,
# 3rd ed. (1992), ch. 4–5; from memory)
RHO = 0.5
R = RHO / (RHO - 1)


def ces_cost(w1_, w2_, y_):
    return y_ * (w1_ ** R + w2_ ** R) ** (1 / R)


def ces_demand_1(w1_, w2_, y_):
    return y_ * (w1_ ** R + w2_ ** R) ** (1 / R - 1) * w1_ ** (R - 1)


CES = y * (w1 ** R + w2 ** R) ** (1 / R)
POINT = {w1: 1.3, w2: 0.7, y: 2.5}


def _numeric_only(expr, args):
    """An Fn with no expression: evaluation through plain Python math, as a numeric dual."""
    fn = sp.lambdify(args, expr, "math")
    return Fn(None, lambda pt: fn(*(pt[s] for s in args)))


def test_a_closed_form_evaluates_like_the_textbook_formula():
    f = Fn(CES)
    assert f(POINT) == pytest.approx(ces_cost(1.3, 0.7, 2.5), rel=1e-14)
    assert f.depth == 0 and f.sym == CES


def test_symbolic_derivative_is_shephards_demand():
    d = Fn(CES).diff(w1)
    assert d.sym is not None and d.depth == 0
    assert d(POINT) == pytest.approx(ces_demand_1(1.3, 0.7, 2.5), rel=1e-13)


def test_numeric_derivative_is_a_central_difference_with_its_depth_counted():
    f = _numeric_only(CES, [w1, w2, y])
    d = f.diff(w1)
    assert d.sym is None and d.depth == 1
    # central differences with relative step 1e-5: error O(h²) plus rounding (common
    # practice, no source)
    assert d(POINT) == pytest.approx(ces_demand_1(1.3, 0.7, 2.5), rel=1e-8)
    d2 = d.diff(w2)
    assert d2.depth == 2
    # ∂x1/∂w2 by sympy as the oracle; two layers of differences lose accuracy
    want = float(sp.diff(CES, w1, w2).xreplace(POINT))
    assert d2(POINT) == pytest.approx(want, rel=1e-4)


def test_numeric_step_is_relative_and_floored():
    seen = []

    def f(pt):
        seen.append(pt[x])
        return pt[x] ** 2

    d = Fn(None, f).diff(x)
    assert d({x: 4.0}) == pytest.approx(8.0, rel=1e-10)
    assert seen[-2:] == [4.0 + FD_STEP * 4.0, 4.0 - FD_STEP * 4.0]
    d({x: 0.0})     # at zero the step is FD_STEP × 1e-3, never zero
    assert seen[-2:] == [FD_STEP * 1e-3, -FD_STEP * 1e-3]


def test_arithmetic_keeps_the_symbolic_side_when_both_have_one():
    f, g = Fn(w1 * y), Fn(sp.sqrt(w2))
    for h, want in [(f + g, 1.3 * 2.5 + math.sqrt(0.7)), (f - g, 1.3 * 2.5 - math.sqrt(0.7)),
                    (f * g, 1.3 * 2.5 * math.sqrt(0.7)), (f / g, 1.3 * 2.5 / math.sqrt(0.7)),
                    (2 + f, 2 + 1.3 * 2.5), (2 - f, 2 - 1.3 * 2.5), (3 * g, 3 * math.sqrt(0.7)),
                    (1 / g, 1 / math.sqrt(0.7)), (-f, -1.3 * 2.5)]:
        assert h.sym is not None
        assert h(POINT) == pytest.approx(want, rel=1e-14)


def test_arithmetic_with_a_numeric_side_becomes_numeric_and_keeps_the_deepest_layer():
    f = Fn(w1 * y)
    g = _numeric_only(sp.sqrt(w2), [w2]).diff(w2)        # depth 1
    h = f * g + f
    assert h.sym is None and h.depth == 1
    want = 1.3 * 2.5 * 0.5 / math.sqrt(0.7) + 1.3 * 2.5
    assert h(POINT) == pytest.approx(want, rel=1e-8)


def test_substitution_is_composition():
    # f(x) = x² composed with x = sin t: symbolic when both are, numeric otherwise
    f = Fn(x ** 2)
    sym = f.subs({x: Fn(sp.sin(t))})
    assert sym.sym == sp.sin(t) ** 2
    num = f.subs({x: _numeric_only(sp.sin(t), [t]).diff(t)})   # x = cos t, numerically
    assert num.sym is None and num.depth == 1
    assert num({t: 0.4}) == pytest.approx(math.cos(0.4) ** 2, rel=1e-9)
    assert f.subs({x: 3})({}) == 9


def test_parameters_are_substituted_when_evaluating():
    f = Fn(a * x ** 2, params={a: 2.0})
    assert f({x: 3.0}) == 18.0
    assert f.diff(x)({x: 3.0}) == 12.0            # the derivative keeps the values
    assert (f + Fn(x))({x: 1.0}) == 21.0 / 7


def test_values_outside_the_real_domain_are_nan_not_complex():
    assert math.isnan(Fn(sp.sqrt(x - 2))({x: 1.0}))
    assert math.isnan(Fn(sp.log(x - 2))({x: 1.0}))
    assert Fn(sp.sqrt(x - 2))({x: 6.0}) == 2.0


def test_a_missing_value_is_named():
    with pytest.raises(KeyError, match="no value for w2"):
        Fn(w1 * w2)({w1: 1.0})


def test_a_function_needs_one_side_at_least():
    with pytest.raises(ValueError, match="expression or a numeric evaluator"):
        Fn(None)


def test_of_a_derived_function_uses_its_closed_form_or_its_evaluator():
    closed = Derived(kind="cost", args=(w1, w2, y), expr=CES, route="catalogue",
                     method="CES")
    f = Fn.of(closed)
    assert f.sym == CES
    evals = []

    def numeric(point):
        evals.append(point)
        return np.asarray(ces_cost(point[w1], point[w2], point[y]))

    numeric_only = Derived(kind="cost", args=(w1, w2, y), expr=None, route="numeric",
                           method="numeric", numeric=numeric)
    g = Fn.of(numeric_only)
    assert g.sym is None
    assert g(POINT) == pytest.approx(ces_cost(1.3, 0.7, 2.5), rel=1e-14)
    assert g.diff(w1)(POINT) == pytest.approx(ces_demand_1(1.3, 0.7, 2.5), rel=1e-8)
    assert len(evals) == 3


def test_symbol_and_constant():
    assert symbol(x)({x: 2.5}) == 2.5
    assert Fn.const(4)({}) == 4.0

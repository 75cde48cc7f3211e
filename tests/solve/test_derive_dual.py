"""Duals of models given on the dual side (:mod:`duality.solve.derive_dual`): the given
function with its lemma's demands, closed-form inversions, and the numeric inversion checked
against scipy's root finder as an independent oracle."""
from __future__ import annotations

import math

import numpy as np
import pytest
import sympy as sp
from scipy import optimize

import duality as dy
from duality.errors import NoSolutionError
from duality.solve import derive_dual as dd


def _num(expr, model, **at):
    """A sympy expression of a model at named argument values (parameters substituted)."""
    e = sp.sympify(expr).xreplace(model.values)
    names = {s.name: s for s in e.free_symbols}
    return float(e.xreplace({names[k]: v for k, v in at.items() if k in names}))


# -- the given function and its lemma ---------------------------------------------------------
def test_given_cost_function_has_shephard_demands():
    # y = x1^0.3 x2^0.5 has c = K w1^{3/8} w2^{5/8} y^{5/4}, conditional demands
    # x_i = (a_i / s) c / w_i (Varian, Microeconomic Analysis, 3rd ed. (1992), ch. 4–5,
    # Cobb–Douglas cost function; Shephard's lemma: Mas-Colell, Whinston & Green (1995),
    # Prop. 5.C.2; from memory)
    model = dy.cost_function("y^1.25*w1^0.375*w2^0.625", ["w1", "w2"])
    sol = dd.given(model)
    assert sol.value == model.expr
    assert sol.route == "symbolic" and "Shephard's lemma" in sol.method
    assert sol.source is None and dd.dual_source(model) is None
    pt = dict(w1=1.4, w2=0.6, y=2.0)
    c = _num(sol.value, model, **pt)
    assert _num(sol.demands[0], model, **pt) == pytest.approx(0.375 * c / 1.4, rel=1e-13)
    assert _num(sol.demands[1], model, **pt) == pytest.approx(0.625 * c / 0.6, rel=1e-13)


def test_given_profit_function_has_hotelling_demands():
    # y = x1^½ + x2^½: x_i = p² / (4 w_i²), π = p²/(4 w1) + p²/(4 w2), supply p/(2 w1) +
    # p/(2 w2) (first-order conditions p / (2 √x_i) = w_i; common practice, no source);
    # demands −∂π/∂w_i by Hotelling's lemma (Mas-Colell, Whinston & Green (1995),
    # Prop. 5.C.1; from memory)
    model = dy.profit_function("p^2/(4*w1) + p^2/(4*w2)", ["w1", "w2"])
    sol = dd.given(model)
    assert "Hotelling's lemma" in sol.method
    p, w1, w2 = 3.0, 1.5, 0.5
    for i, w in enumerate((w1, w2)):
        assert _num(sol.demands[i], model, p=p, w1=w1, w2=w2) == pytest.approx(
            p ** 2 / (4 * w ** 2), rel=1e-13)
    # supply through the public API (Hotelling: ∂π/∂p)
    supply = dy.profit(model).demands["y"]
    assert supply(p=p, w1=w1, w2=w2) == pytest.approx(p / (2 * w1) + p / (2 * w2), rel=1e-13)


def test_given_indirect_utility_has_roy_demands():
    # v = m / (p1^0.3 p2^0.7) is Cobb–Douglas; x_1 = 0.3 m / p1, x_2 = 0.7 m / p2
    # (Varian 1992, ch. 7; Roy's identity: Mas-Colell, Whinston & Green (1995), Prop. 3.G.4;
    # from memory)
    model = dy.indirect_utility_function("m/(p1^0.3*p2^0.7)", ["p1", "p2"])
    sol = dd.given(model)
    assert "Roy's identity" in sol.method
    pt = dict(p1=2.0, p2=0.5, m=12.0)
    assert _num(sol.demands[0], model, **pt) == pytest.approx(0.3 * 12 / 2.0, rel=1e-13)
    assert _num(sol.demands[1], model, **pt) == pytest.approx(0.7 * 12 / 0.5, rel=1e-13)


def test_given_catalogue_form_is_tagged_with_its_source():
    model = dy.generalized_leontief_cost(2)
    sol = dd.given(model)
    assert sol.route == "catalogue"
    assert sol.source == dd.dual_source(model) == dy.DUAL_CATALOGUE[model.form]["source"]
    assert sol.method == ("given as a generalized Leontief cost function; demands by "
                          "Shephard's lemma")


# -- closed-form inversion ----------------------------------------------------------------------
def test_invert_finds_the_cobb_douglas_expenditure_function():
    # v = m / (p1^0.3 p2^0.7) = u  ⇔  m = u p1^0.3 p2^0.7 (Varian 1992, ch. 7; from memory)
    model = dy.indirect_utility_function("m/(p1^0.3*p2^0.7)", ["p1", "p2"])
    notes: list[str] = []
    e = dd.invert(model, model.expr, model.income, model.level, 30, notes, "v = u for m")
    assert e is not None and notes == []
    assert _num(e, model, p1=2.0, p2=0.5, u=3.0) == pytest.approx(
        3.0 * 2.0 ** 0.3 * 0.5 ** 0.7, rel=1e-13)


def test_invert_without_a_closed_form_returns_none_and_says_why():
    model = dy.expenditure_function("(u + u^3/3 + exp(u/5))*p1^0.4*p2^0.6", ["p1", "p2"])
    notes: list[str] = []
    got = dd.invert(model, model.expr, model.level, model.income, 2, notes, "e = m for u")
    assert got is None
    assert len(notes) == 1 and "e = m for u" in notes[0]


# -- numeric inversion -------------------------------------------------------------------------
def test_bisection_agrees_with_brentq():
    # an increasing function with no closed-form inverse; scipy's brentq as the oracle
    def f(x):
        return x ** 3 + x + np.sinh(x / 3)

    targets = np.array([-40.0, -1.0, 0.0, 0.3, 7.0, 1e3])
    got = dd.bisect_increasing(f, targets, -1.0, 1.0)
    want = [optimize.brentq(lambda x, t=t: f(x) - t, -50, 50, xtol=1e-15) for t in targets]
    assert np.allclose(got, want, rtol=1e-13, atol=1e-14)


def test_bisection_in_logs_and_unbracketed_targets():
    # log=True searches x = exp(z) > 0; targets an increasing bounded function never reaches
    # come back as NaN, never as a number
    got = dd.bisect_increasing(lambda x: x / (1 + x), np.array([0.25, 0.5, 0.9, 1.5]),
                               0.0, 1.0, log=True)
    assert np.allclose(got[:3], [1 / 3, 1.0, 9.0], rtol=1e-12)
    assert np.isnan(got[3])


def test_numeric_inverse_value_and_demands_against_brentq(rng):
    model = dy.expenditure_function("(u + u^3/3 + exp(u/5))*p1^0.4*p2^0.6", ["p1", "p2"])
    p1s, p2s = sp.Symbol("p1", positive=True), sp.Symbol("p2", positive=True)
    m, u = model.income, model.level
    hicks = list(dd.given(model).demands)
    value, demands = dd.numeric_inverse(model, model.expr, u, m, hicks, log=False)
    P1, P2 = np.exp(rng.uniform(-1, 1, 5)), np.exp(rng.uniform(-1, 1, 5))
    M = np.exp(rng.uniform(0, 3, 5))
    pt = {p1s: P1, p2s: P2, m: M}
    v = value(pt)
    x1 = demands[0](pt)
    for k in range(5):
        index = P1[k] ** 0.4 * P2[k] ** 0.6
        want = optimize.brentq(lambda t: (t + t ** 3 / 3 + math.exp(t / 5)) * index - M[k],
                               -20, 20, xtol=1e-15)
        assert v[k] == pytest.approx(want, rel=1e-11, abs=1e-12)
        # Marshallian demand = Hicksian at u = v(p, m); Cobb–Douglas index share 0.4
        # (Varian 1992, ch. 7; from memory)
        assert x1[k] == pytest.approx(0.4 * M[k] / P1[k], rel=1e-10)


def test_numeric_cost_from_a_profit_function_agrees_with_scipy():
    # π = s g(p / s), s = w1 + w2, g(t) = t² + t³/3 + exp(t/5): homogeneous of degree one and
    # convex in p, and its supply g'(p / s) = y has no closed-form solution for p.  The
    # oracle is the definition c(w, y) = max_p p·y − π(p, w) (Varian 1992, ch. 6, from
    # memory), maximised by scipy's bounded scalar search
    model = dy.profit_function("(w1+w2)*((p/(w1+w2))^2 + (p/(w1+w2))^3/3 + exp(p/(5*(w1+w2))))",
                               ["w1", "w2"])
    c = dy.cost(model, budget=1)
    assert c.route == "numeric"     # sympy has no algorithm for p + exp(p) mixtures
    w1, w2 = 1.2, 0.8
    s = w1 + w2
    for y in (0.5, 2.0, 9.0):
        res = optimize.minimize_scalar(
            lambda p: -(p * y - s * ((p / s) ** 2 + (p / s) ** 3 / 3 + math.exp(p / (5 * s)))),
            bounds=(1e-9, 50), method="bounded", options={"xatol": 1e-12})
        assert c(w1=w1, w2=w2, y=y) == pytest.approx(-res.fun, rel=1e-9)


# -- monotonicity in the level -----------------------------------------------------------------
def test_a_function_falling_in_its_level_cannot_be_inverted():
    model = dy.expenditure_function("exp(-u)*p1^0.5*p2^0.5", ["p1", "p2"])
    with pytest.raises(NoSolutionError, match="does not increase in u at"):
        dd.check_monotone_level(model, model.expr, model.level)
    with pytest.raises(NoSolutionError, match="falls"):
        dd.check_monotone_level(model, model.expr, model.level, "e falls in u at {at}")
    # an increasing one passes silently
    ok = dy.expenditure_function("exp(u)*p1^0.5*p2^0.5", ["p1", "p2"])
    assert dd.check_monotone_level(ok, ok.expr, ok.level) is None

"""Recovering the technology / preference from a cost / expenditure function.

Reference values: the round trips compare with the primal the dual was derived from;
the other closed forms are derived by hand below from the max–min formula
f(x) = max {y : w·x >= c(w, y) for all w > 0} (Shephard (1953) duality theorem; Varian,
Microeconomic Analysis, 3rd ed. (1992), ch. 6 (recovering the technology from the cost
function) (from memory)).
"""
from __future__ import annotations

import numpy as np
import pytest
import sympy as sp

import duality as dy
from duality.errors import DualityError, NoSolutionError
from duality.analyse.recovery import Recovered, recover

X1, X2, X3 = sp.symbols("x1 x2 x3", positive=True)
def _points(rng, k=6, n=2):
    return rng.uniform(0.3, 4.0, (k, n))


def _grid_w(m=801, lo=-9.0, hi=9.0):
    r = np.exp(np.linspace(lo, hi, m))
    return np.stack([np.ones_like(r), r], axis=1)


# -- symbolic round trips ------------------------------------------------------------------
def test_cobb_douglas_technology_round_trip(rng):
    # Cobb–Douglas cost/production pair, Varian (1992), ch. 4 and ch. 6 (from memory)
    t = dy.technology("A*x1^a*x2^b", ["x1", "x2"], params={"A": 2, "a": 0.3, "b": 0.5})
    r = recover(dy.cost(t))
    assert isinstance(r, Recovered)
    assert r.route == "symbolic" and r.role == "technology"
    assert r.concave_in_prices is True
    assert [str(q) for q in r.quantities] == ["x1", "x2"]
    for x1, x2 in _points(rng):
        assert r(x1=x1, x2=x2) == pytest.approx(2 * x1 ** 0.3 * x2 ** 0.5, rel=1e-10)
    expected = 2 * X1 ** sp.Rational(3, 10) * X2 ** sp.Rational(1, 2)
    assert sp.simplify(r.expr - expected) == 0


def test_model_is_accepted_directly_and_noted_as_round_trip():
    t = dy.technology("x1^0.2*x2^0.3*x3^0.4", ["x1", "x2", "x3"])
    r = recover(t)
    assert r.route == "symbolic"
    assert any("round trip" in n for n in r.notes)
    # Cobb–Douglas, three inputs (common practice, no source)
    expected = X1 ** sp.Rational(1, 5) * X2 ** sp.Rational(3, 10) * X3 ** sp.Rational(2, 5)
    assert sp.simplify(r.expr - expected) == 0


def test_cobb_douglas_with_free_parameters_comes_back_symbolically():
    t = dy.technology("A*x1^a*x2^b", ["x1", "x2"], params={"A": None, "a": None, "b": None},
                      assume={"A": "positive", "a": "positive", "b": "positive"})
    r = recover(t)
    A, a, b = (s for s in sorted(r.expr.free_symbols - {X1, X2}, key=str))
    assert sp.simplify(r.expr - A * X1 ** a * X2 ** b) == 0
    assert r.concave_in_prices is None
    assert r(x1=2.0, x2=3.0, A=1.5, a=0.4, b=0.3) == pytest.approx(
        1.5 * 2 ** 0.4 * 3 ** 0.3, rel=1e-12)
    with pytest.raises(DualityError, match="no value for parameter"):
        r(x1=2.0, x2=3.0)


@pytest.mark.parametrize("rho", [0.5, -1.0])
def test_ces_round_trip(rho, rng):
    # CES, Arrow, Chenery, Minhas and Solow (1961) (from memory)
    t = dy.technology("(x1^r + 2*x2^r)^(1/r)", ["x1", "x2"], params={"r": rho})
    r = recover(dy.cost(t))
    assert r.route == "symbolic"
    for x1, x2 in _points(rng):
        assert r(x1=x1, x2=x2) == pytest.approx((x1 ** rho + 2 * x2 ** rho) ** (1 / rho),
                                                rel=1e-10)


def test_cobb_douglas_utility_from_expenditure_function(rng):
    p = dy.preference("x1^a*x2^(1-a)", ["x1", "x2"], params={"a": 0.3})
    e = dy.expenditure(p)
    r = recover(e)
    assert r.role == "preference" and r.route == "symbolic"
    # same ordinal representation as the expenditure function: U(h(p, u)) = u
    h1, h2 = e.demands["x1"], e.demands["x2"]
    for p1, p2, u in rng.uniform(0.5, 3.0, (5, 3)):
        x1, x2 = h1(p1=p1, p2=p2, u=u), h2(p1=p1, p2=p2, u=u)
        assert r(x1=x1, x2=x2) == pytest.approx(u, rel=1e-10)
        assert e(p1=p1, p2=p2, u=r(x1=x1, x2=x2)) == pytest.approx(p1 * x1 + p2 * x2,
                                                                   rel=1e-10)
    assert sp.simplify(r.expr - X1 ** sp.Rational(3, 10) * X2 ** sp.Rational(7, 10)) == 0


def test_dual_side_ces_cost_function(rng):
    cf = dy.cost_function("y*(w1^0.5 + w2^0.5)^2", ["w1", "w2"])
    c = dy.cost(cf)
    r = recover(cf)
    for w1, w2, y in rng.uniform(0.5, 3.0, (5, 3)):
        x1 = c.demands["x1"](w1=w1, w2=w2, y=y)
        x2 = c.demands["x2"](w1=w1, w2=w2, y=y)
        assert r(x1=x1, x2=x2) == pytest.approx(y, rel=1e-10)
    # by hand: x2/x1 = (w1/w2)^(1/2), then c = w·x gives f = x1 x2 / (x1 + x2), the CES
    # with ρ = −1 (derived in the test; CES pair as in Varian (1992), ch. 4 (from memory))
    assert r.route == "symbolic"
    assert sp.simplify(r.expr - X1 * X2 / (X1 + X2)) == 0


# -- numeric route --------------------------------------------------------------------------
def test_numeric_route_agrees_with_the_closed_form(rng):
    t = dy.technology("A*x1^a*x2^b", ["x1", "x2"], params={"A": 2, "a": 0.3, "b": 0.5})
    r = recover(t, budget=0)
    assert r.route == "numeric" and r.expr is None
    assert any("skipped" in n for n in r.notes)
    pts = _points(rng, 4)
    got = r(x1=pts[:, 0], x2=pts[:, 1])
    np.testing.assert_allclose(got, 2 * pts[:, 0] ** 0.3 * pts[:, 1] ** 0.5, rtol=1e-10)


def test_numeric_route_three_inputs_and_isoquant_in_a_plane():
    t = dy.technology("x1^0.2*x2^0.3*x3^0.4", ["x1", "x2", "x3"])
    r = recover(t, budget=0)
    assert r(x1=1.2, x2=0.7, x3=2.0) == pytest.approx(1.2 ** 0.2 * 0.7 ** 0.3 * 2 ** 0.4,
                                                      rel=1e-9)
    pts = r.isoquant(1.0, n=6, other={"x3": 2.0})
    assert pts.shape == (6, 3)
    np.testing.assert_allclose(pts[:, 2], 2.0)
    np.testing.assert_allclose(pts[:, 0] ** 0.2 * pts[:, 1] ** 0.3 * pts[:, 2] ** 0.4, 1.0,
                               rtol=1e-8)
    surf = r.isoquant(1.0, n=6)
    np.testing.assert_allclose(surf[:, 0] ** 0.2 * surf[:, 1] ** 0.3 * surf[:, 2] ** 0.4,
                               1.0, rtol=1e-10)


def test_isoquant_points_are_shephard_bundles_sorted_by_x1():
    t = dy.technology("A*x1^a*x2^b", ["x1", "x2"], params={"A": 2, "a": 0.3, "b": 0.5})
    c = dy.cost(t)
    r = recover(c)
    pts, ws = r.isoquant(3.0, n=20, with_prices=True)
    assert pts.shape == (20, 2)
    assert np.all(np.diff(pts[:, 0]) > 0)
    np.testing.assert_allclose(2 * pts[:, 0] ** 0.3 * pts[:, 1] ** 0.5, 3.0, rtol=1e-10)
    for (x1, x2), (w1, w2) in zip(pts, ws):
        assert c.demands["x1"](w1=w1, w2=w2, y=3.0) == pytest.approx(x1, rel=1e-10)


# -- duals that are not concave in prices -------------------------------------------------------
def test_non_concave_cost_recovers_the_concave_hull(rng):
    cf = dy.cost_function("y*(w1^2 + w2^2)/(w1 + w2)", ["w1", "w2"])
    c = dy.cost(cf)
    r = recover(cf)
    assert r.concave_in_prices is False
    assert r.route == "numeric"
    assert any("not concave in prices" in n for n in r.notes)
    # by hand: on the simplex c(t, 1−t) = y(2t² − 2t + 1) is convex, so its concave hull
    # is the chord y(w1 + w2), the cost function of f = min(x1, x2) (Leontief); derived in
    # the test from the max–min formula, Shephard (1953) duality theorem (from memory)
    for x1, x2 in _points(rng, 4):
        assert r(x1=x1, x2=x2) == pytest.approx(min(x1, x2), rel=1e-9)
    y = 1.5
    pts, ws = r.isoquant(y, n=15, with_prices=True)
    assert len(pts) == 15
    W = _grid_w()
    for x, w in zip(pts, ws):
        slack = W @ x - c(w1=W[:, 0], w2=W[:, 1], y=y)
        assert slack.min() >= -1e-9 * (W @ x).max()
        # equality at the supporting price (a corner of the simplex, up to e^-30)
        assert w @ x - c(w1=w[0], w2=w[1], y=y) == pytest.approx(0.0, abs=1e-9 * x.sum())
    # the Shephard bundle at w = (1, 1) lies on the non-concave part: not on the isoquant
    xb = np.array([c.demands["x1"](w1=1.0, w2=1.0, y=y), c.demands["x2"](w1=1.0, w2=1.0, y=y)])
    assert xb == pytest.approx([0.75, 0.75])
    assert r(x1=xb[0], x2=xb[1]) == pytest.approx(0.75, rel=1e-9)
    assert not r(x1=xb[0], x2=xb[1]) == pytest.approx(y, rel=1e-3)
    assert (W @ xb - c(w1=W[:, 0], w2=W[:, 1], y=y)).min() < -0.1


def test_generalized_leontief_with_negative_cross_term_is_flagged():
    # Diewert (1971): concave iff b12 >= 0 for two inputs (from memory); the hull of
    # y(b11 w1 + 2 b12 (w1 w2)^½ + b22 w2) with b12 < 0 is y(b11 w1 + b22 w2): Leontief
    # with x1 >= b11 y, x2 >= b22 y (derived in the test)
    gl = dy.generalized_leontief_cost(2, params={"b11": 1.0, "b12": -0.2, "b22": 2.0})
    r = recover(gl)
    assert r.concave_in_prices is False
    assert r(x1=3.0, x2=9.0) == pytest.approx(min(3.0 / 1.0, 9.0 / 2.0), rel=1e-6)


# -- flexible forms ---------------------------------------------------------------------------
TRANSLOG = dict(a0=0.1, a1=0.4, a2=0.6, g11=0.05, g12=-0.05, g22=0.05, ay=1.0, gyy=0.0,
                g1y=0.05, g2y=-0.05)


def test_translog_isoquant_within_its_regularity_region():
    tl = dy.translog_cost(2, params=TRANSLOG)
    c = dy.cost(tl)
    r = recover(tl, budget=0, price_ratios=(0.01, 100.0))
    assert r.concave_in_prices is True and r.route == "numeric"
    y = 2.0
    pts, ws = r.isoquant(y, n=9, with_prices=True)
    assert len(pts) == 9
    W = _grid_w(401, np.log(0.01), np.log(100.0))
    for x, w in zip(pts, ws):
        slack = W @ x - c(w1=W[:, 0], w2=W[:, 1], y=y)
        assert slack.min() >= -1e-9 * (W @ x).max()
        assert w @ x == pytest.approx(c(w1=w[0], w2=w[1], y=y), rel=1e-10)
    np.testing.assert_allclose(r(x1=pts[::3, 0], x2=pts[::3, 1]), y, rtol=1e-8)


def test_translog_over_all_prices_is_not_concave():
    # the translog is a local approximation (Christensen, Jorgenson and Lau 1973, from
    # memory): at extreme price ratios its Hessian is not negative semi-definite
    r = recover(dy.translog_cost(2, params=TRANSLOG), budget=0)
    assert r.concave_in_prices is False
    assert any("not concave" in n for n in r.notes)


def test_generalized_leontief_isoquant_and_demands():
    gl = dy.generalized_leontief_cost(2, params={"b11": 1.0, "b12": 0.5, "b22": 2.0})
    c = dy.cost(gl)
    r = recover(gl, budget=0)
    assert r.concave_in_prices is True
    y = 1.7
    pts, ws = r.isoquant(y, n=11, with_prices=True)
    W = _grid_w()
    for x, w in zip(pts, ws):
        slack = W @ x - c(w1=W[:, 0], w2=W[:, 1], y=y)
        assert slack.min() >= -1e-9 * (W @ x).max()
        assert w @ x == pytest.approx(c(w1=w[0], w2=w[1], y=y), rel=1e-10)
    for w1, w2 in [(1.0, 2.0), (3.0, 0.5)]:
        x1 = c.demands["x1"](w1=w1, w2=w2, y=y)
        x2 = c.demands["x2"](w1=w1, w2=w2, y=y)
        assert r(x1=x1, x2=x2) == pytest.approx(y, rel=1e-9)


# -- errors ---------------------------------------------------------------------------------------
def test_non_homogeneous_cost_is_refused():
    with pytest.raises(DualityError, match="not homogeneous of degree one"):
        recover(dy.cost_function("y*(w1^2 + w2)", ["w1", "w2"]))


def test_wrong_inputs_are_refused():
    with pytest.raises(DualityError, match="needs a technology or preference"):
        recover("A*x1^a")
    p = dy.preference("x1^0.5*x2^0.5", ["x1", "x2"])
    with pytest.raises(DualityError, match="cost or an expenditure function"):
        recover(dy.indirect_utility(p))
    r = recover(dy.technology("x1^0.5*x2^0.5", ["x1", "x2"]))
    with pytest.raises(DualityError, match="must be positive"):
        r(x1=-1.0, x2=2.0)
    with pytest.raises(DualityError, match="no value for x2"):
        r(x1=1.0)
    with pytest.raises(DualityError, match="unknown argument"):
        r(x1=1.0, x2=1.0, z=3.0)
    with pytest.raises(DualityError, match="must be positive"):
        r.isoquant(-1.0)
    with pytest.raises(DualityError, match="price_ratios"):
        recover(dy.technology("x1^0.5*x2^0.5", ["x1", "x2"]), price_ratios=(2.0, 1.0))


def test_free_parameters_without_closed_form_need_values():
    cf = dy.cost_function("y*(a*w1^0.5 + w2^0.5)^2", ["w1", "w2"], params={"a": None})
    with pytest.raises(NoSolutionError, match="needs a value for every parameter"):
        recover(cf, budget=0)

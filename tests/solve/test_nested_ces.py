"""Nested CES in the catalogue, against the two-level closed form of Sato (1967) and
against scipy as an independent oracle."""
from __future__ import annotations


import numpy as np
import pytest
from scipy import optimize

import duality as dy


def sato_unit_cost(w, a, r, b, s):
    """Unit cost of y = [b1 (a1 x1^r + a2 x2^r)^(s/r) + b2 x3^s]^(1/s): the inner nest's
    unit cost c1 = (Σ a_i^σ1 w_i^(1−σ1))^(1/(1−σ1)), σ1 = 1/(1−r), then the outer CES of
    c1 and w3, c = (b1^σ c1^(1−σ) + b2^σ w3^(1−σ))^(1/(1−σ)), σ = 1/(1−s).
    Sato, Rev. Econ. Stud. 34 (1967), two-level CES (from memory)."""
    s1, s0 = 1 / (1 - r), 1 / (1 - s)
    c1 = (a[0] ** s1 * w[0] ** (1 - s1) + a[1] ** s1 * w[1] ** (1 - s1)) ** (1 / (1 - s1))
    return (b[0] ** s0 * c1 ** (1 - s0) + b[1] ** s0 * w[2] ** (1 - s0)) ** (1 / (1 - s0))


def oracle_cost(f, w, y, x0):
    """min w·x s.t. f(x) = y by SLSQP in log-quantities (tight tolerances; oracle)."""
    w = np.asarray(w, float)
    res = optimize.minimize(lambda z: w @ np.exp(z), np.log(x0), jac=lambda z: w * np.exp(z),
                            constraints=[{"type": "eq", "fun": lambda z: f(np.exp(z)) - y}],
                            method="SLSQP", options={"ftol": 1e-15, "maxiter": 1000})
    return res.fun, np.exp(res.x)


@pytest.mark.parametrize("a, r, b, s, k", [
    ((0.3, 0.7), 0.5, (0.4, 0.6), -1.0, 1.0),
    ((0.5, 0.5), -2.0, (0.7, 0.3), 0.3, 0.8),
    ((0.2, 0.9), 0.6, (0.5, 0.5), 0.6, 1.2),   # same elasticity at both levels
])
def test_two_level_ces_cost_matches_sato(a, r, b, s, k):
    t = dy.technology(f"({b[0]}*({a[0]}*x1^({r}) + {a[1]}*x2^({r}))^({s}/{r}) "
                      f"+ {b[1]}*x3^({s}))^({k}/{s})", ["x1", "x2", "x3"])
    c = dy.cost(t)
    assert c.route == "catalogue"
    if r != s:   # with one elasticity at both levels the nest is a plain CES
        assert c.method.startswith("recognised as nested CES") and "Sato" in c.source

    def f(x):
        inner = (a[0] * x[0] ** r + a[1] * x[1] ** r) ** (s / r)
        return (b[0] * inner + b[1] * x[2] ** s) ** (k / s)
    for w, y in (((1.0, 2.0, 0.5), 3.0), ((0.7, 0.4, 1.9), 0.6)):
        pt = {"w1": w[0], "w2": w[1], "w3": w[2], "y": y}
        # y = X^k with X constant returns: c = y^(1/k) c_X(w)
        want = y ** (1 / k) * sato_unit_cost(w, a, r, b, s)
        assert c(**pt) == pytest.approx(want, rel=1e-10)
        x = np.array([c.demands[f"x{i}"](**pt) for i in (1, 2, 3)])
        assert f(x) == pytest.approx(y, rel=1e-10)
        assert np.dot(w, x) == pytest.approx(want, rel=1e-10)
        val, xo = oracle_cost(f, w, y, x * 1.3)
        assert c(**pt) == pytest.approx(val, rel=1e-7)
        np.testing.assert_allclose(x, xo, rtol=1e-4)


def test_cobb_douglas_nest_inside_ces_and_ces_inside_cobb_douglas():
    # CES of a Cobb–Douglas aggregate and an input: c = (b1^σ c_CD^(1−σ) + b2^σ w3^(1−σ))
    # ^(1/(1−σ)) with c_CD = (w1/α)^α (w2/(1−α))^(1−α) (Varian 3rd ed. ch. 4, from memory)
    t = dy.technology("(0.5*(x1^0.3*x2^0.7)^0.5 + 0.5*x3^0.5)^2", ["x1", "x2", "x3"])
    c = dy.cost(t)
    assert c.route == "catalogue"
    w, y = (1.0, 1.3, 1.6), 2.0
    sig = 1 / (1 - 0.5)
    ccd = (w[0] / 0.3) ** 0.3 * (w[1] / 0.7) ** 0.7
    want = y * (0.5 ** sig * ccd ** (1 - sig) + 0.5 ** sig * w[2] ** (1 - sig)) ** (1 / (1 - sig))
    assert c(w1=w[0], w2=w[1], w3=w[2], y=y) == pytest.approx(want, rel=1e-10)
    # Cobb–Douglas of an input and a CES aggregate, checked against scipy
    t2 = dy.technology("x1^0.4*(x2^(-1) + x3^(-1))^(-0.6)", ["x1", "x2", "x3"])
    c2 = dy.cost(t2)
    assert c2.route == "catalogue"
    f2 = lambda x: x[0] ** 0.4 * (1 / x[1] + 1 / x[2]) ** -0.6
    val, _ = oracle_cost(f2, (1.0, 1.3, 1.6), 2.0, [1.0, 1.0, 1.0])
    assert c2(w1=1.0, w2=1.3, w3=1.6, y=2.0) == pytest.approx(val, rel=1e-7)


def test_nested_ces_preference_duality():
    # e(p, v(p, m)) = m and Roy's identity (Varian 3rd ed. ch. 7, from memory)
    u = dy.preference("(0.4*(0.3*x1^0.5 + 0.7*x2^0.5)^(-1) + 0.6*x3^(-0.5))^(-2)",
                      ["x1", "x2", "x3"])
    v, e = dy.indirect_utility(u), dy.expenditure(u)
    assert v.route == e.route == "catalogue"
    pt = dict(p1=1.1, p2=0.7, p3=2.0)
    level = v(**pt, m=10.0)
    assert e(**pt, u=level) == pytest.approx(10.0, rel=1e-10)
    x = [v.demands[f"x{i}"](**pt, m=10.0) for i in (1, 2, 3)]
    assert np.dot([1.1, 0.7, 2.0], x) == pytest.approx(10.0, rel=1e-10)


def test_a_plain_ces_is_not_taken_for_a_nest():
    t = dy.technology("(x1^0.5 + x2^0.5 + x3^0.5)^2", ["x1", "x2", "x3"])
    assert "nested" not in dy.cost(t).method

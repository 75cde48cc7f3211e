"""Additively separable functions through the symbolic route: inverse marginal functions
and one equation in the multiplier (duality.solve.additive), checked against solutions
worked by hand and scipy."""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import optimize

import duality as dy
from duality.solve import additive

# u = log(x1 − 2) + 0.5 log x2 + x3^0.5: an additively separable preference with a
# subsistence level in good 1 (the example of the issue on domain-safe numerics)
ADDITIVE = "log(x1-2) + 0.5*log(x2) + x3^0.5"


def _additive_by_hand(p1, p2, p3, m):
    """Marshallian demands worked by hand: the first-order conditions give
    x1 = 2 + t/p1, x2 = 0.5 t/p2, x3 = t²/(4 p3²) with t = 1/λ, and the budget
    2 p1 + 1.5 t + t²/(4 p3) = m is a quadratic in t with one positive root
    (Lagrangian of an additive utility; Varian, Microeconomic Analysis 3rd ed., ch. 7,
    from memory)."""
    a, b, c = 1 / (4 * p3), 1.5, 2 * p1 - m
    t = (-b + math.sqrt(b * b - 4 * a * c)) / (2 * a)
    return np.array([2 + t / p1, 0.5 * t / p2, t * t / (4 * p3 * p3)])


def _scipy_utility(p, m):
    """max U s.t. p·x = m by SLSQP from several starts inside the domain (oracle)."""
    p = np.asarray(p, float)
    best = None
    L = np.array([2.0, 0.0, 0.0])
    left = m - p @ L
    for share in ([1 / 3] * 3, [0.6, 0.2, 0.2], [0.2, 0.6, 0.2], [0.2, 0.2, 0.6]):
        x0 = L + left * np.asarray(share) / p
        res = optimize.minimize(
            lambda x: -(np.log(x[0] - 2) + 0.5 * np.log(x[1]) + np.sqrt(x[2])), x0,
            constraints=[{"type": "eq", "fun": lambda x: p @ x - m}],
            bounds=[(2 + 1e-12, None), (1e-12, None), (0, None)], method="SLSQP",
            options={"ftol": 1e-15, "maxiter": 1000})
        if best is None or res.fun < best.fun:
            best = res
    return best.x


def test_split_reads_the_separable_parts():
    u = dy.preference(ADDITIVE, ["x1", "x2", "x3"])
    const, phis = additive.split(u.expr, list(u.quantities))
    assert const == 0 and len(phis) == 3
    cd = dy.preference("x1*x2 + x1", ["x1", "x2"])
    assert additive.split(cd.expr, list(cd.quantities)) is None


def test_additive_preference_gets_closed_form_marshallian_demands():
    v = dy.indirect_utility(dy.preference(ADDITIVE, ["x1", "x2", "x3"]), budget=30)
    assert v.route == "symbolic" and v.method.startswith("additive"), v.notes
    assert v.expr is not None
    # near the subsistence boundary (m just above 2 p1) and well inside; the hand solution
    # is the positive root of a quadratic in 1/λ (see _additive_by_hand)
    for p1, p2, p3, m in ((1.0, 1.0, 1.0, 6.0), (1.0, 1.0, 1.0, 2.001), (0.5, 2.0, 1.5, 1.02),
                          (2.0, 0.5, 0.8, 4.3), (1.3, 0.9, 1.2, 2.603), (0.7, 1.1, 2.5, 8.4)):
        got = np.array([v.demands[f"x{i}"](p1=p1, p2=p2, p3=p3, m=m) for i in (1, 2, 3)])
        np.testing.assert_allclose(got, _additive_by_hand(p1, p2, p3, m), rtol=1e-9)
        np.testing.assert_allclose(got, _scipy_utility([p1, p2, p3], m), rtol=1e-4,
                                   atol=1e-7)
        x = got
        assert v(p1=p1, p2=p2, p3=p3, m=m) == pytest.approx(
            math.log(x[0] - 2) + 0.5 * math.log(x[1]) + math.sqrt(x[2]), rel=1e-9)


def test_additive_technology_cost_by_the_symbolic_route():
    # f = √x1 + 2 x2^(1/3): x1 = t²/(4 w1²), x2 = (2t/(3 w2))^(3/2), and the level
    # t/(2 w1) + 2 √(2t/(3 w2)) = y is a quadratic in √t (worked by hand)
    t = dy.technology("x1^0.5 + 2*x2^(1/3)", ["x1", "x2"])
    c = dy.cost(t, budget=30)
    assert c.route == "symbolic" and c.method == "additive", c.notes
    for w1, w2, y in ((1.0, 2.0, 3.0), (0.4, 1.7, 0.5), (3.0, 0.6, 7.0)):
        a, b, k = 0.5 / w1, 2 * math.sqrt(2 / (3 * w2)), -y
        s = (-b + math.sqrt(b * b - 4 * a * k)) / (2 * a)
        tt = s * s
        x = (tt * tt / (4 * w1 * w1), (2 * tt / (3 * w2)) ** 1.5)
        assert c(w1=w1, w2=w2, y=y) == pytest.approx(w1 * x[0] + w2 * x[1], rel=1e-10)
        assert c.demands["x1"](w1=w1, w2=w2, y=y) == pytest.approx(x[0], rel=1e-10)
        # scipy oracle: min w·x s.t. f(x) = y
        res = optimize.minimize(lambda z: w1 * math.exp(z[0]) + w2 * math.exp(z[1]),
                                np.log([max(x[0], 1e-3), max(x[1], 1e-3)]) + 0.3,
                                constraints=[{"type": "eq", "fun": lambda z: math.exp(
                                    z[0] / 2) + 2 * math.exp(z[1] / 3) - y}],
                                method="SLSQP", options={"ftol": 1e-14, "maxiter": 500})
        assert c(w1=w1, w2=w2, y=y) == pytest.approx(res.fun, rel=1e-7)


def test_transcendental_multiplier_equation_is_declined_quickly():
    # √x1 + log(1 + x2): the level equation mixes t and log t (no closed-form root)
    t = dy.technology("x1^0.5 + log(1+x2)", ["x1", "x2"])
    out = additive.candidates("spending", t)
    assert not out and "logarithm" in out.reason

"""Domain-safe numerics: the numeric route starts inside the function's domain, checks every
point it returns, and gives a reason instead of a number where a point fails.

References are solved by hand (named beside each value) or by scipy as an independent
oracle.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import optimize

import duality as dy
from duality.errors import DomainError
from duality.solve import domain
from duality.solve.numeric import Batch

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


def test_domain_is_read_off_the_formula():
    u = dy.preference(ADDITIVE, ["x1", "x2", "x3"])
    d = domain.model_domain(u)
    x1 = u.quantities[0]
    assert (x1 - 2, True) in d.conditions
    assert d.bounds == (2, 0, 0)
    X = np.array([[2.0, 1, 1], [2.5, 1, 1], [1.9, 1, 1]])
    assert list(d.contains(X, [])) == [False, True, False]


def test_additive_preference_demands_match_the_hand_solution_near_subsistence():
    u = dy.preference(ADDITIVE, ["x1", "x2", "x3"])
    b = Batch(u, "utility")
    # incomes from just above subsistence spending 2·p1 up
    p1 = np.array([1.0, 1.0, 1.0, 0.5, 2.0, 1.3, 0.7, 1.0])
    p2 = np.array([1.0, 1.0, 1.0, 2.0, 0.5, 0.9, 1.1, 3.0])
    p3 = np.array([1.0, 1.0, 1.0, 1.5, 0.8, 1.2, 2.5, 0.4])
    m = 2 * p1 + np.array([0.5, 4.0, 0.01, 0.02, 1.0, 0.003, 7.0, 0.3])
    pt = {s: v for s, v in zip(u.prices, (p1, p2, p3))}
    pt[u.income] = m
    out = b(pt)
    assert out.converged.all()
    X = np.stack(out.quantities, axis=1)
    for k in range(len(m)):
        hand = _additive_by_hand(p1[k], p2[k], p3[k], m[k])
        np.testing.assert_allclose(X[k], hand, rtol=1e-8)
        oracle = _scipy_utility([p1[k], p2[k], p3[k]], m[k])
        np.testing.assert_allclose(X[k], oracle, rtol=1e-4, atol=1e-7)
    assert np.all(X[:, 0] > 2)


def test_the_issue_points_get_the_interior_optimum():
    # m = 6 at p = (1, 1, 1): t² + 6t − 16 = 0, t = 2, x = (4, 1, 1) (by hand, as above)
    v = dy.indirect_utility(dy.preference(ADDITIVE, ["x1", "x2", "x3"]), budget=2)
    for m, x in ((6.0, (4.0, 1.0, 1.0)), (2.5, tuple(_additive_by_hand(1, 1, 1, 2.5)))):
        got = [v.demands[f"x{i}"](p1=1, p2=1, p3=1, m=m) for i in (1, 2, 3)]
        assert got == pytest.approx(x, rel=1e-8)
        assert v(p1=1, p2=1, p3=1, m=m) == pytest.approx(
            math.log(x[0] - 2) + 0.5 * math.log(x[1]) + math.sqrt(x[2]), rel=1e-10)


def test_income_below_subsistence_is_a_reason_not_a_number():
    u = dy.preference(ADDITIVE, ["x1", "x2", "x3"])
    b = Batch(u, "utility")
    with pytest.warns(dy.NumericWarning, match="does not buy the least bundle"):
        out = b({u.prices[0]: np.array([1.0, 1.0]), u.prices[1]: 1.0, u.prices[2]: 1.0,
                 u.income: np.array([1.5, 3.0])})
    assert np.isnan(out.value[0]) and out.converged[1]
    assert domain.CODES[out.reasons[0]] == "income_short"


def test_expenditure_below_the_range_is_a_reason():
    # log(x1) + log(x2) + x1*x2 is not a catalogue form; its range on the domain is all
    # reals, so every level is reachable, but x1*x2 + x1 + x2 has range (0, ∞)
    t = dy.technology("x1*x2 + x1 + x2 + x1^0.5", ["x1", "x2"])
    b = Batch(t, "spending")
    with pytest.warns(dy.NumericWarning, match="below the lowest value"):
        out = b({t.prices[0]: 1.0, t.prices[1]: 1.0, t.level: np.array([-1.0, 3.0])})
    assert domain.CODES[out.reasons[0]] == "below_range"
    assert out.converged[1]


# -- profit: the shut-down option ----------------------------------------------------------
S_SHAPED = "(x1*x2)^1.5/(1+(x1*x2)^1.5)"


def _s_profit_multistart(p, w):
    """max p f(x) − w·x over x >= 0 by L-BFGS-B from a grid of starts, and x = 0 (oracle;
    the definition of the profit function with shut-down, Varian, Microeconomic Analysis
    3rd ed., ch. 2, from memory)."""
    w = np.asarray(w, float)

    def neg(x):
        s = (x[0] * x[1]) ** 1.5
        return -(p * s / (1 + s) - w @ x)
    best = -neg(np.zeros(2))
    for a in (0.2, 0.5, 1.0, 2.0, 4.0):
        for b in (0.2, 0.5, 1.0, 2.0, 4.0):
            res = optimize.minimize(neg, [a, b], bounds=[(0, 50), (0, 50)],
                                    method="L-BFGS-B", options={"ftol": 1e-15,
                                                                "gtol": 1e-12})
            best = max(best, -res.fun)
    return best


@pytest.mark.parametrize("price", [3.0, 4.0, 8.0])
def test_s_shaped_profit_includes_shut_down(price):
    t = dy.technology(S_SHAPED, ["x1", "x2"])
    b = Batch(t, "profit")
    out = b({t.output_price: price, t.prices[0]: 1.0, t.prices[1]: 1.0})
    assert out.converged
    assert float(out.value) >= 0.0
    assert float(out.value) == pytest.approx(_s_profit_multistart(price, [1, 1]),
                                                abs=1e-7)
    if price == 3.0:  # the interior critical point earns −0.487 < 0: shut down
        assert float(out.output) == 0.0 and float(out.quantities[0]) == 0.0


def test_profit_without_interior_maximum_is_a_reason():
    t = dy.technology(S_SHAPED, ["x1", "x2"])
    b = Batch(t, "profit")
    with pytest.warns(dy.NumericWarning, match="lower bound"):
        out = b({t.output_price: 1.0, t.prices[0]: 1.0, t.prices[1]: 1.0})
    assert np.isnan(out.value)
    assert domain.CODES[int(out.reasons)] == "no_interior_max"


def test_reason_codes_cover_every_message():
    assert set(domain.CODES) == set(domain.REASONS)
    with pytest.raises(KeyError, match="known: ok"):
        domain.code("nonsense")
    assert "2 the solver" in domain.explain(np.array([0, 1, 1]))


# -- levels outside the range of the function -----------------------------------------------
@pytest.mark.parametrize("formula, floor", [
    ("x1^0.5*x2^0.5", 0.0), ("(x1^0.5+x2^0.5)^2", 0.0), ("min(x1,x2)", 0.0),
    ("3*x1^0.5*x2^0.5 + 1", 1.0), ("x1 + 2*x2", 0.0)])
def test_utility_below_the_range_is_refused(formula, floor):
    # each of these takes only values above `floor` at positive quantities, so
    # e(p, u) = min {p·x : U(x) >= u} is not a (negative) number below it: the definition
    # of the expenditure function (Varian, Microeconomic Analysis 3rd ed., ch. 7, from memory)
    e = dy.expenditure(dy.preference(formula, ["x1", "x2"]))
    with pytest.raises(DomainError, match="outside the range of the utility function"):
        e(p1=1, p2=1, u=floor - 1.0)
    with pytest.raises(DomainError, match="no bundle reaches it"):
        e.demands["x1"](p1=1, p2=1, u=floor - 1.0)
    with pytest.warns(dy.NumericWarning):
        out = e(p1=1.0, p2=1.0, u=np.array([floor - 2.0, floor + 2.0]))
    assert np.isnan(out[0]) and out[1] > 0


def test_a_level_anywhere_in_the_range_stays_valid():
    # log x1 + log x2 takes every real value: u = −1 is reached, e = 2 e^(−1/2) at p = (1, 1)
    # (Cobb–Douglas expenditure, Varian 3rd ed., ch. 7, from memory)
    e = dy.expenditure(dy.preference("log(x1)+log(x2)", ["x1", "x2"]))
    assert e(p1=1, p2=1, u=-1.0) == pytest.approx(2 * math.exp(-0.5), rel=1e-12)


# -- corners ---------------------------------------------------------------------------------
def test_quasi_linear_corner_worked_by_hand():
    # U = x1 + 2 log x2. Kuhn–Tucker (MWG §3.D; Varian 3rd ed. ch. 7, from memory), by hand:
    # interior when m > 2 p1: x2 = 2 p1/p2, x1 = m/p1 − 2; else x1 = 0, x2 = m/p2.
    q = dy.preference("x1 + 2*log(x2)", ["x1", "x2"])
    v, e = dy.indirect_utility(q), dy.expenditure(q)
    for p1, p2, m in ((1.0, 1.0, 1.0), (2.0, 0.5, 3.9), (1.0, 1.0, 5.0), (0.5, 2.0, 1.5)):
        if m > 2 * p1:
            x = (m / p1 - 2, 2 * p1 / p2)
        else:
            x = (0.0, m / p2)
        got = (v.demands["x1"](p1=p1, p2=p2, m=m), v.demands["x2"](p1=p1, p2=p2, m=m))
        assert got == pytest.approx(x, rel=1e-12, abs=1e-14)
        assert v(p1=p1, p2=p2, m=m) == pytest.approx(x[0] + 2 * math.log(x[1]), rel=1e-12,
                                                     abs=1e-14)
    # Hicksian corner: when u <= 2 log(2 p1/p2), x1 = 0 and x2 = exp(u/2), e = p2 exp(u/2)
    for p1, p2, u in ((1.0, 1.0, 0.5), (1.0, 1.0, 3.0), (2.0, 0.5, 1.0)):
        x2i = 2 * p1 / p2
        h = (u - 2 * math.log(x2i), x2i) if u > 2 * math.log(x2i) else (0.0, math.exp(u / 2))
        assert e(p1=p1, p2=p2, u=u) == pytest.approx(p1 * h[0] + p2 * h[1], rel=1e-12)
        assert e.demands["x1"](p1=p1, p2=p2, u=u) == pytest.approx(h[0], abs=1e-12)
        assert e.demands["x2"](p1=p1, p2=p2, u=u) == pytest.approx(h[1], rel=1e-12)


def test_a_closed_form_profit_below_shut_down_is_rejected():
    # for f = √x1, f(0) = 0, so profit is never below 0 (shut down; Varian 3rd ed., ch. 2,
    # from memory): the true profit p²/(4 w1) passes, a candidate p − 2 w1 (negative at
    # low p) is rejected by the numeric check
    from duality.solve import derive
    from duality.solve.result import Solution

    t = dy.technology("x1^0.5", ["x1"])
    p, w1 = t.output_price, t.prices[0]
    demand = (p ** 2 / (4 * w1 ** 2),)
    good = Solution(value=p ** 2 / (4 * w1), demands=demand, route="symbolic", method="hand")
    bad = Solution(value=p - 2 * w1, demands=demand, route="symbolic", method="wrong")
    assert derive._verify_profit(t, good)[0]
    ok, why = derive._verify_profit(t, bad)
    assert not ok and "shut-down" in why


def test_quasi_linear_good_not_bought_when_its_marginal_utility_at_zero_is_low():
    # U = x1 + log(1 + x2): φ'(0) = 1, so x2 = max(0, p1/p2 − 1) while the numeraire is
    # bought, and x2 = m/p2 when income runs out first (Kuhn–Tucker, by hand; MWG §3.D,
    # from memory)
    q = dy.preference("x1 + log(1+x2)", ["x1", "x2"])
    v = dy.indirect_utility(q)
    for p2, m, x in ((0.5, 0.2, (0.0, 0.4)), (0.5, 5.0, (4.5, 1.0)), (2.0, 0.2, (0.2, 0.0)),
                     (2.0, 5.0, (5.0, 0.0))):
        got = (v.demands["x1"](p1=1.0, p2=p2, m=m), v.demands["x2"](p1=1.0, p2=p2, m=m))
        assert got == pytest.approx(x, abs=1e-12)
        assert v(p1=1.0, p2=p2, m=m) == pytest.approx(x[0] + math.log1p(x[1]), abs=1e-12)

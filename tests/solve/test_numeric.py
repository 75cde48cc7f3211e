"""The numeric route (:mod:`duality.solve.numeric`): the careful one-point solvers against
textbook closed forms and scipy as an independent optimiser, points that have no interior
optimum reported as such, and the batch front's rescue of points the batched Newton left."""
from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
import sympy as sp
from scipy import optimize

import duality as dy
from duality.solve import numeric


def fns(model) -> numeric._Fns:
    """f, ∇f and ∇²f of a model with its parameter values (the one-point solvers' input)."""
    comp = numeric.compile_model(model)
    return numeric._Fns(comp, tuple(float(model.values[p]) for p in comp.params))


# -- compiled derivatives ---------------------------------------------------------------------
def test_compiled_gradient_and_hessian_are_sympys(rng):
    model = dy.technology("A*x1^0.3*x2^0.5 + log(1 + x1)", ["x1", "x2"], params={"A": 1.7})
    comp = numeric.compile_model(model)
    assert numeric.compile_model(model) is comp            # once per model
    assert [str(p) for p in comp.params] == ["A"]
    x1, x2 = model.quantities
    f = model.expr.xreplace(model.values)
    F = fns(model)
    for x in np.exp(rng.uniform(-1, 1, (4, 2))):
        at = {x1: x[0], x2: x[1]}
        assert F.f(x) == pytest.approx(float(f.xreplace(at)), rel=1e-14)
        want_g = [float(sp.diff(f, q).xreplace(at)) for q in (x1, x2)]
        assert np.allclose(F.g(x), want_g, rtol=1e-13)
        want_h = [[float(sp.diff(f, a, b).xreplace(at)) for b in (x1, x2)] for a in (x1, x2)]
        assert np.allclose(F.h(x), want_h, rtol=1e-12)


# -- spending: min w·x s.t. f(x) = y ----------------------------------------------------------
def test_spending_point_is_the_ces_cost_function():
    # y = (x1^½ + x2^½)² has c = y (w1^{-1} + w2^{-1})^{-1} = y w1 w2 / (w1 + w2), conditional
    # demand x1 = y (w2 / (w1 + w2))² (Varian, Microeconomic Analysis, 3rd ed. (1992), ch. 4,
    # CES with ρ = ½, r = ρ/(ρ−1) = −1; from memory)
    F = fns(dy.technology("(x1^0.5 + x2^0.5)^2", ["x1", "x2"]))
    for w1, w2, y in [(1.0, 1.0, 1.0), (0.4, 2.5, 3.0), (7.0, 0.2, 0.05)]:
        value, x, ok = numeric.spending_point(F, np.array([w1, w2]), y)
        assert ok
        assert value == pytest.approx(y * w1 * w2 / (w1 + w2), rel=1e-11)
        assert x[0] == pytest.approx(y * (w2 / (w1 + w2)) ** 2, rel=1e-9)


@pytest.mark.filterwarnings("ignore:delta_grad == 0.0:UserWarning")
def test_spending_point_of_a_non_homothetic_technology_agrees_with_scipy():
    # f = x1^0.4 x2^0.4 + 0.3 x1 is concave (a sum of concave functions), so the interior
    # tangency is the minimum; scipy's trust-constr with exact gradients is the oracle
    F = fns(dy.technology("x1^0.4*x2^0.4 + 0.3*x1", ["x1", "x2"]))

    def f(x):
        return x[0] ** 0.4 * x[1] ** 0.4 + 0.3 * x[0]

    def grad(x):
        return np.array([[0.4 * x[0] ** -0.6 * x[1] ** 0.4 + 0.3,
                          0.4 * x[0] ** 0.4 * x[1] ** -0.6]])

    for w, y in [(np.array([1.0, 1.0]), 2.0), (np.array([2.0, 0.5]), 0.7)]:
        value, x, ok = numeric.spending_point(F, w, y)
        ref = optimize.minimize(lambda z: w @ z, [1.0, 1.0], jac=lambda z: w,
                                constraints=[optimize.NonlinearConstraint(f, y, y, jac=grad)],
                                bounds=[(1e-9, None)] * 2, method="trust-constr",
                                options={"xtol": 1e-14, "gtol": 1e-13, "maxiter": 5000})
        assert ok
        assert value == pytest.approx(ref.fun, rel=1e-8)
        assert f(x) == pytest.approx(y, rel=1e-10)


def test_spending_with_convex_isoquants_is_refused_not_answered():
    # f = x1² + x2²: the tangency is a cost maximum on the isoquant, the minimum a corner
    # (Varian 1992, ch. 4 — second-order condition; from memory)
    F = fns(dy.technology("x1^2 + x2^2", ["x1", "x2"]))
    value, x, ok = numeric.spending_point(F, np.array([1.0, 1.5]), 4.0)
    assert not ok and math.isnan(value) and np.isnan(x).all()


# -- utility: max f(x) s.t. p·x = m -----------------------------------------------------------
def test_utility_point_is_the_cobb_douglas_indirect_utility():
    # U = x1^0.3 x2^0.7: x1 = 0.3 m / p1, v = (0.3 m / p1)^0.3 (0.7 m / p2)^0.7
    # (Varian 1992, ch. 7; from memory)
    F = fns(dy.preference("x1^0.3*x2^0.7", ["x1", "x2"]))
    for p1, p2, m in [(1.0, 1.0, 1.0), (2.0, 0.5, 12.0), (0.3, 4.0, 100.0)]:
        value, x, ok = numeric.utility_point(F, np.array([p1, p2]), m)
        assert ok
        assert value == pytest.approx((0.3 * m / p1) ** 0.3 * (0.7 * m / p2) ** 0.7,
                                      rel=1e-11)
        assert x == pytest.approx([0.3 * m / p1, 0.7 * m / p2], rel=1e-9)


def test_utility_point_agrees_with_a_one_dimensional_search():
    # U = log(x1) + 2 log(1 + x2) + sqrt(x1 x2): no catalogue form; with the budget
    # substituted, a bounded scalar search over x2 is the oracle
    F = fns(dy.preference("log(x1) + 2*log(1 + x2) + sqrt(x1*x2)", ["x1", "x2"]))
    p1, p2, m = 1.5, 0.8, 10.0

    def u_of(x2):
        x1 = (m - p2 * x2) / p1
        return math.log(x1) + 2 * math.log1p(x2) + math.sqrt(x1 * x2)

    ref = optimize.minimize_scalar(lambda t: -u_of(t), bounds=(1e-9, m / p2 - 1e-9),
                                   method="bounded", options={"xatol": 1e-12})
    value, x, ok = numeric.utility_point(F, np.array([p1, p2]), m)
    assert ok
    assert value == pytest.approx(-ref.fun, rel=1e-10)
    assert x[1] == pytest.approx(ref.x, rel=1e-5)
    assert p1 * x[0] + p2 * x[1] == pytest.approx(m, rel=1e-12)      # Walras' law


def test_utility_with_convex_indifference_curves_is_refused():
    F = fns(dy.preference("x1^2 + x2^2", ["x1", "x2"]))
    value, _, ok = numeric.utility_point(F, np.array([1.0, 2.0]), 3.0)
    assert not ok and math.isnan(value)


# -- profit: max p f(x) − w·x -----------------------------------------------------------------
def test_profit_point_is_the_cobb_douglas_profit_function():
    # y = x1^¼ x2^¼: c = 2 (w1 w2)^½ y², so π = p² / (8 (w1 w2)^½) and y* = p / (4 (w1 w2)^½)
    # (Varian 1992, ch. 4–5; from memory)
    F = fns(dy.technology("x1^0.25*x2^0.25", ["x1", "x2"]))
    for p, w1, w2 in [(4.0, 1.5, 0.6), (1.0, 1.0, 1.0), (10.0, 0.3, 2.0)]:
        value, y, x, ok = numeric.profit_point(F, p, np.array([w1, w2]))
        k = math.sqrt(w1 * w2)
        assert ok
        assert value == pytest.approx(p ** 2 / (8 * k), rel=1e-10)
        assert y == pytest.approx(p / (4 * k), rel=1e-10)


def test_profit_point_of_a_separable_technology():
    # y = log(1 + x1) + x2^½: p/(1 + x1) = w1 and p/(2 x2^½) = w2 give x1 = p/w1 − 1,
    # x2 = p²/(4 w2²), π = p ln(p/w1) − p + w1 + p²/(4 w2) (first-order conditions; common
    # practice, no source)
    F = fns(dy.technology("log(1 + x1) + sqrt(x2)", ["x1", "x2"]))
    p, w1, w2 = 3.0, 1.2, 0.9
    value, y, x, ok = numeric.profit_point(F, p, np.array([w1, w2]))
    assert ok
    assert x == pytest.approx([p / w1 - 1, p ** 2 / (4 * w2 ** 2)], rel=1e-9)
    assert value == pytest.approx(p * math.log(p / w1) - p + w1 + p ** 2 / (4 * w2), rel=1e-10)


def test_profit_under_increasing_returns_is_refused():
    # y = x1 x2 (degree 2): profit is unbounded (Varian 1992, ch. 2; from memory)
    F = fns(dy.technology("x1*x2", ["x1", "x2"]))
    value, y, x, ok = numeric.profit_point(F, 2.0, np.array([1.0, 1.0]))
    assert not ok and math.isnan(value) and math.isnan(y)


# -- the batch front --------------------------------------------------------------------------
# a technology with no closed-form cost function (see test_batch.py): the numeric route
NON_HOMOTHETIC = "x1^0.3*x2^0.5 + log(1 + x1) + {k}*sqrt(x1*x2)"


def _numeric_cost(k):
    t = dy.technology(NON_HOMOTHETIC.format(k=k), ["x1", "x2"])
    c = dy.cost(t, budget=1)
    assert c.route == "numeric" and "Newton" in c.method
    return t, c


def _fail_everywhere(real):
    """A batched solver that hands every point to the one-by-one rescue."""
    def run(*args):
        res = real(*args)
        n = res.converged.size
        return dataclasses.replace(res, value=np.full(n, np.nan),
                                   quantities=np.full(res.quantities.shape, np.nan),
                                   converged=np.zeros(n, dtype=bool))
    return run


def test_points_the_batched_newton_leaves_are_rescued_one_by_one(monkeypatch, rng):
    t, c = _numeric_cost(0.45)
    W1, W2 = rng.uniform(0.5, 3.0, 4), rng.uniform(0.5, 3.0, 4)
    Y = rng.uniform(1.0, 4.0, 4)
    # the batched engine's answer, asked in reverse order (a new batch, not the cached one)
    want = c(w1=W1[::-1], w2=W2[::-1], y=Y[::-1])[::-1]
    monkeypatch.setattr(numeric.batch, "solve_spending",
                        _fail_everywhere(numeric.batch.solve_spending))
    got = c(w1=W1, w2=W2, y=Y)
    F = fns(t)
    for k in range(4):
        value, _, ok = numeric.spending_point(F, np.array([W1[k], W2[k]]), Y[k])
        assert ok and got[k] == value
    assert np.allclose(got, want, rtol=1e-10)


def test_rescue_is_limited_and_the_rest_is_reported(monkeypatch, rng):
    _, c = _numeric_cost(0.46)
    monkeypatch.setattr(numeric.batch, "solve_spending",
                        _fail_everywhere(numeric.batch.solve_spending))
    monkeypatch.setattr(numeric, "RESCUE_LIMIT", 2)
    W1 = rng.uniform(0.5, 3.0, 5)
    with pytest.warns(dy.NumericWarning, match="did not converge at 3 of 5 point"):
        got = c(w1=W1, w2=1.0, y=2.0)
    assert np.isfinite(got[:2]).all() and np.isnan(got[2:]).all()
    report = c.solver_report(w1=W1, w2=1.0, y=2.0)
    assert list(report.converged) == [True, True, False, False, False]


def test_one_batch_is_solved_once_for_the_value_and_every_demand(monkeypatch):
    t, c = _numeric_cost(0.47)
    calls = []
    real = numeric.batch.solve_spending

    def counting(*args):
        calls.append(1)
        return real(*args)

    monkeypatch.setattr(numeric.batch, "solve_spending", counting)
    pt = dict(w1=np.array([1.0, 2.0]), w2=np.array([1.5, 0.5]), y=2.0)
    value = c(**pt)
    x1 = c.demands["x1"](**pt)
    x2 = c.demands["x2"](**pt)
    assert len(calls) == 1
    # adding-up on the numeric result: cost = w·x (Varian 1992, ch. 5; from memory)
    assert np.allclose(value, pt["w1"] * x1 + pt["w2"] * x2, rtol=1e-12)

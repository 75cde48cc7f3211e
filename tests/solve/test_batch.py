"""Batched numeric duals against closed forms and an independent optimizer."""
from __future__ import annotations

import numpy as np
import pytest
from scipy import optimize

import duality as dy
from duality.solve import batch


def _cols(W):
    return {f"w{i + 1}": W[:, i] for i in range(W.shape[1])}


# closed forms come from the catalogue, whose published sources are tested in
# test_catalogue.py; here the numeric engine must reproduce them to near machine precision
@pytest.mark.parametrize("formula, n", [
    ("x1^0.3*x2^0.5", 2),
    ("2*x1^0.2*x2^0.3*x3^0.4", 3),
    ("(x1^0.5 + 2*x2^0.5 + 3*x3^0.5)^2", 3),       # CES rho = 0.5
    ("(x1^-2 + 2*x2^-2 + 3*x3^-2)^(-1/2)", 3),     # CES rho = -2
    ("(x1^-0.5 + x2^-0.5)^(-1.6)", 2),             # CES, decreasing returns
])
def test_numeric_cost_equals_catalogue_closed_form(formula, n, rng):
    t = dy.technology(formula, [f"x{i + 1}" for i in range(n)])
    c = dy.cost(t)
    assert c.route == "catalogue"
    N = 400
    W = rng.uniform(0.2, 5.0, (N, n))
    Y = rng.uniform(0.2, 5.0, N)
    res = batch.solve_spending(t, W, Y, [])
    assert res.converged.all()
    ref = c(**_cols(W), y=Y)
    assert np.max(np.abs(res.value / ref - 1)) < 1e-10
    for i, x in enumerate(c.demands.values()):
        assert np.max(np.abs(res.quantities[:, i] / x(**_cols(W), y=Y) - 1)) < 1e-9


@pytest.mark.parametrize("formula, goods, m_lo", [
    ("x1^0.3*x2^0.7", 2, 1.0),
    ("0.4*log(x1 - 1) + 0.6*log(x2 - 2)", 2, 20.0),   # Stone–Geary: income above p·gamma
    ("x1 + 3*log(x2)", 2, 20.0),                       # quasi-linear, interior
    ("(x1^0.5 + x2^0.5 + x3^0.5)^2", 3, 1.0),
])
def test_numeric_indirect_utility_and_expenditure_equal_closed_forms(formula, goods, m_lo,
                                                                      rng):
    p = dy.preference(formula, [f"x{i + 1}" for i in range(goods)])
    v, e = dy.indirect_utility(p), dy.expenditure(p)
    N = 300
    Pr = rng.uniform(0.5, 3.0, (N, goods))
    M = rng.uniform(m_lo, 3 * m_lo + 30, N)
    prices = {f"p{i + 1}": Pr[:, i] for i in range(goods)}
    res = batch.solve_utility(p, Pr, M, [])
    assert res.converged.all()
    ref = v(**prices, m=M)
    assert np.max(np.abs(res.value - ref) / np.maximum(1, np.abs(ref))) < 1e-10
    U = ref
    res_e = batch.solve_spending(p, Pr, U, [])
    assert res_e.converged.all()
    assert np.max(np.abs(res_e.value / e(**prices, u=U) - 1)) < 1e-10


def test_numeric_profit_equals_closed_form(rng):
    t = dy.technology("x1^0.3*x2^0.5", ["x1", "x2"])
    pi = dy.profit(t)
    N = 200
    W = rng.uniform(0.5, 3.0, (N, 2))
    price = rng.uniform(1.0, 4.0, N)
    res = batch.solve_profit(t, price, W, [])
    assert res.converged.all()
    assert np.max(np.abs(res.value / pi(p=price, **_cols(W)) - 1)) < 1e-10
    assert np.max(np.abs(res.output / pi.demands["y"](p=price, **_cols(W)) - 1)) < 1e-9


@pytest.mark.filterwarnings("ignore:delta_grad == 0.0:UserWarning")
def test_non_homothetic_technology_against_a_tight_independent_optimizer(rng):
    t = dy.technology("x1^0.3*x2^0.5 + log(1 + x1) + 0.5*sqrt(x1*x2)", ["x1", "x2"])
    c = dy.cost(t, budget=1)
    assert c.route == "numeric"

    def f(x):
        return x[0] ** 0.3 * x[1] ** 0.5 + np.log1p(x[0]) + 0.5 * np.sqrt(x[0] * x[1])

    def grad(x):
        return np.array([0.3 * x[0] ** -0.7 * x[1] ** 0.5 + 1 / (1 + x[0])
                         + 0.25 * np.sqrt(x[1] / x[0]),
                         0.5 * x[0] ** 0.3 * x[1] ** -0.5 + 0.25 * np.sqrt(x[0] / x[1])])

    W = rng.uniform(0.5, 3.0, (6, 2))
    Y = rng.uniform(1.0, 4.0, 6)
    got = c(**_cols(W), y=Y)
    for k in range(6):
        w = W[k]
        # trust-constr with exact gradients and tight tolerances (common practice)
        res = optimize.minimize(lambda x: w @ x, [1.0, 1.0], jac=lambda x: w,
                                constraints=[optimize.NonlinearConstraint(
                                    f, Y[k], Y[k], jac=lambda x: grad(x)[None, :])],
                                bounds=[(1e-9, None)] * 2, method="trust-constr",
                                options={"xtol": 1e-14, "gtol": 1e-13, "maxiter": 5000})
        assert got[k] == pytest.approx(res.fun, rel=1e-8)


def test_non_convergent_points_are_reported_not_returned(rng):
    # convex isoquants: the cost minimum is a corner the interior solver must not claim
    t = dy.technology("x1^2 + x2^2", ["x1", "x2"])
    res = batch.solve_spending(t, rng.uniform(1, 2, (5, 2)), np.full(5, 4.0), [])
    assert not res.converged.any()
    assert np.isnan(res.value).all()
    assert list(res.failed) == [0, 1, 2, 3, 4]
    # the numeric route then solves with the bounds x >= 0 and keeps the corner where the
    # Kuhn-Tucker conditions hold: only the cheaper input, x = sqrt(y), c = sqrt(y) min(w)
    # (hand working: with f convex the cost minimum is at a vertex; at (0, 2) with
    # w = (2, 1), mu = w2 / f2 = 1/4 and mu f1(0) = 0 <= w1)
    c = dy.cost(t, budget=1)
    rep = c.solver_report(w1=np.array([1.5, 2.0]), w2=1.0, y=4.0)
    assert rep.converged.all() and rep.corners.all()
    assert rep.iterations.shape == rep.residual.shape == (2,)
    assert c(w1=np.array([1.5, 2.0]), w2=1.0, y=4.0) == pytest.approx([2.0, 2.0], rel=1e-9)
    assert c.demands["x1"](w1=2.0, w2=1.0, y=4.0) == pytest.approx(0.0, abs=1e-12)


def test_kinked_catalogue_forms_are_never_given_a_wrong_number():
    # Leontief and linear are corners/kinks: the interior Newton engine must report failure
    # (their closed forms come from the catalogue instead)
    for formula in ("min(x1/2, x2/3)", "2*x1 + 3*x2"):
        t = dy.technology(formula, ["x1", "x2"])
        res = batch.solve_spending(t, np.array([[1.0, 2.0], [2.0, 1.0]]), np.array([1.0, 2.0]),
                                   [])
        ok = res.converged
        if ok.any():  # a converged point must be right
            c = dy.cost(t)
            assert np.allclose(res.value[ok], c(w1=np.array([1.0, 2.0]), w2=np.array([2.0, 1.0]),
                                                 y=np.array([1.0, 2.0]))[ok], rtol=1e-10)
        assert np.isnan(res.value[~ok]).all()


def test_homothetic_shortcut_for_repeated_prices_agrees(rng):
    t = dy.technology("(x1^0.5 + 2*x2^0.5)^1.6", ["x1", "x2"])
    assert batch.is_homothetic(t)
    W = np.repeat(rng.uniform(0.5, 2.0, (5, 2)), 40, axis=0)   # 5 price rows, 40 levels each
    Y = rng.uniform(0.5, 10.0, 200)
    res = batch.solve_spending(t, W, Y, [])
    assert any("homothetic" in n for n in res.notes)
    ref = dy.cost(t)(**_cols(W), y=Y)
    assert np.max(np.abs(res.value / ref - 1)) < 1e-10
    assert not batch.is_homothetic(dy.technology("x1^0.3*x2^0.5 + x1", ["x1", "x2"]))


def test_small_batched_solver_matches_lapack(rng):
    A = rng.normal(size=(500, 4, 4))
    A[:, 0, 0] = 0.0                       # forces pivoting
    b = rng.normal(size=(500, 4))
    ref = np.linalg.solve(A, b[..., None])[..., 0]
    assert np.allclose(batch.solve_small(A, b), ref, rtol=1e-9, atol=1e-9)


def test_parameters_may_vary_by_point(rng):
    t = dy.technology("x1^a*x2^0.5", ["x1", "x2"], params={"a": None},
                      assume={"a": "positive"})
    a = rng.uniform(0.2, 0.4, 50)
    W = rng.uniform(0.5, 2.0, (50, 2))
    res = batch.solve_spending(t, W, np.full(50, 2.0), [a])
    # Cobb–Douglas cost (Varian 1992, ch. 4; from memory)
    k = a + 0.5
    ref = k * 2.0 ** (1 / k) * (W[:, 0] / a) ** (a / k) * (W[:, 1] / 0.5) ** (0.5 / k)
    assert np.max(np.abs(res.value / ref - 1)) < 1e-10


# -- the block engine against the array path ------------------------------------------------
# Both paths solve the same first-order conditions; the array path is forced by hiding the
# buffered kernels, so every comparison below is between two routes of this package.
def _array_path(monkeypatch):
    monkeypatch.setattr(batch.Compiled, "kernels", property(lambda self: None))


def _agree(fast, slow):
    assert np.array_equal(fast.converged, slow.converged)
    ok = fast.converged
    assert np.all(fast.residual[ok] <= batch.TOL)
    assert np.all(fast.iterations <= batch.MAXITER)
    assert np.max(np.abs(fast.value[ok] / slow.value[ok] - 1), initial=0.0) < 1e-10
    assert np.max(np.abs(fast.quantities[ok] / slow.quantities[ok] - 1), initial=0.0) < 1e-9
    assert np.max(np.abs(fast.multiplier[ok] / slow.multiplier[ok] - 1), initial=0.0) < 1e-9
    assert np.isnan(fast.value[~ok]).all() and np.isnan(fast.quantities[~ok]).all()


@pytest.mark.parametrize("formula, n, params", [
    ("(x1^0.5 + 2*x2^0.5 + 3*x3^0.5)^2", 3, {}),
    ("x1^0.3*x2^0.5 + log(1 + x1) + 0.5*sqrt(x1*x2)", 2, {}),
    ("x1^0.5 + log(1 + x1)", 1, {}),                                  # no tangent space
    ("(x1^-0.5 + x2^-0.5 + 2*x3^-0.5 + x4^-0.5)^(-1.5)", 4, {}),     # 3x3 reduced system
    ("x1^2 + x2^2", 2, {}),                                           # corners: all fail
    ("x1^a*x2^0.5*x3^0.2", 3, {"a": None}),
])
def test_block_engine_agrees_with_the_array_path(formula, n, params, rng, monkeypatch):
    t = dy.technology(formula, [f"x{i + 1}" for i in range(n)], params=params or None,
                      assume={k: "positive" for k in params} or None)
    N = 300
    W = rng.uniform(0.05, 20.0, (N, n))
    Y = rng.uniform(0.1, 10.0, N)
    P = [rng.uniform(0.2, 0.6, N) for _ in params]
    W[0, 0], W[1, -1], Y[2], Y[3] = 0.0, -1.0, 0.0, np.nan      # points the engine leaves
    fast = batch.solve_spending(t, W, Y, P)
    _array_path(monkeypatch)
    slow = batch.solve_spending(t, W, Y, P)
    _agree(fast, slow)
    assert not fast.converged[[0, 1, 3]].any()   # (y = 0 may be met with x near 0)


def test_block_engine_hands_unfinished_points_to_the_array_path(rng, monkeypatch):
    # nearly Leontief at some price ratios: full Newton steps get rejected there
    t = dy.technology("x1*x2/(x1 + x2) + 0.01*x1", ["x1", "x2"])
    comp = batch.compiled(t)
    N = 400
    W = np.exp(rng.uniform(-6.0, 6.0, (N, 2)))
    Y = np.exp(rng.uniform(-4.0, 4.0, N))
    flags = batch.block._spend_blocks(comp, W, Y, [], batch.TOL, batch.MAXITER)
    assert flags[7].any()                       # some points did need the damped path
    fast = batch.solve_spending(t, W, Y, [])
    _array_path(monkeypatch)
    _agree(fast, batch.solve_spending(t, W, Y, []))


def test_blocks_of_any_length_give_the_same_answers(rng, monkeypatch):
    t = dy.technology("(x1^-2 + 2*x2^-2 + 3*x3^-2)^(-1/2)", ["x1", "x2", "x3"])
    W = rng.uniform(0.2, 5.0, (103, 3))
    Y = rng.uniform(0.2, 5.0, 103)
    whole = batch.solve_spending(t, W, Y, [])
    monkeypatch.setattr(batch.block, "BLOCK", 10)                           # 10 blocks + 3 points
    pieces = batch.solve_spending(t, W, Y, [])
    assert np.array_equal(whole.value, pieces.value)
    assert np.array_equal(whole.iterations, pieces.iterations)


def test_second_order_shortcut_agrees_with_the_full_check(rng):
    # a quasi-concave and a not quasi-concave technology: the final iterate's reduced
    # matrix must give the same verdict as second_order on the solutions
    for formula in ("(x1^0.5 + 2*x2^0.5 + 3*x3^0.5)^2", "x1*x2*x3 + x1^2 + x2^2 + x3^2"):
        t = dy.technology(formula, ["x1", "x2", "x3"])
        comp = batch.compiled(t)
        W = rng.uniform(0.2, 5.0, (200, 3))
        Y = rng.uniform(0.5, 5.0, 200)
        X, lam, value, iters, norm, conv, start_fail, unfinished = batch.block._spend_blocks(
            comp, W, Y, [], batch.TOL, batch.MAXITER)
        done = (norm <= batch.TOL) & ~start_fail & ~unfinished
        assert np.array_equal(conv[done], batch.second_order(comp, X[done], []))

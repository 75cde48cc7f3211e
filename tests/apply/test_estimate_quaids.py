"""``dy.estimate`` on the quadratic Almost Ideal system (Banks, Blundell and Lewbel, 'Quadratic
Engel curves and consumer demand', Review of Economics and Statistics 79 (1997), from
memory): nonlinear SUR of the budget shares with the exact price index, on invented data
simulated from the published share equation written out here in numpy."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import duality as dy

A = np.array([0.3, 0.5, 0.2])
B = np.array([0.1, -0.06, -0.04])
LAM = np.array([0.03, -0.01, -0.02])
G = np.array([[0.08, -0.05, -0.03], [-0.05, 0.09, -0.04], [-0.03, -0.04, 0.07]])
SHARES = {"x1": "w1", "x2": "w2", "x3": "w3"}


def _published_shares(P, m):
    """w_i = a_i + Σ_j g_ij ln p_j + b_i ln(m/a(p)) + (l_i/b(p))·(ln(m/a(p)))²,
    ln a(p) = Σ a_k ln p_k + ½ ΣΣ g_kj ln p_k ln p_j (a0 = 0), b(p) = Π p_k^{b_k}."""
    L = np.log(P)
    lna = L @ A + 0.5 * np.einsum("ni,ij,nj->n", L, G, L)
    x = np.log(m) - lna
    return A + L @ G + np.outer(x, B) + np.outer(x ** 2 / np.exp(L @ B), LAM), x


@pytest.fixture(scope="module")
def fitted():
    rng = np.random.default_rng(1997)
    N = 400
    P = np.exp(rng.normal(0, 0.3, (N, 3)))
    m = np.exp(rng.normal(1.0, 0.6, N))
    W, _ = _published_shares(P, m)
    W = W + rng.normal(0, 0.005, (N, 3))
    W[:, 2] = 1 - W[:, 0] - W[:, 1]          # observed shares add up
    df = pd.DataFrame({"p1": P[:, 0], "p2": P[:, 1], "p3": P[:, 2], "m": m,
                       "w1": W[:, 0], "w2": W[:, 1], "w3": W[:, 2]})
    return dy.estimate(dy.quaids_expenditure(3), df, shares=SHARES, fixed={"a0": 0})


def test_estimates_recover_the_parameters_of_the_simulated_truth(fitted):
    truth = {f"a{i + 1}": A[i] for i in range(3)}
    truth.update({f"b{i + 1}": B[i] for i in range(3)})
    truth.update({f"l{i + 1}": LAM[i] for i in range(3)})
    truth.update({f"g{i + 1}{j + 1}": G[i, j] for i in range(3) for j in range(i, 3)})
    for k, v in truth.items():
        assert fitted.params[k] == pytest.approx(v, abs=0.004), k
    # adding-up is imposed (Banks, Blundell and Lewbel 1997): Σ l_i = 0, Σ b_i = 0, Σ a_i = 1
    assert sum(fitted.params[f"l{i}"] for i in (1, 2, 3)) == pytest.approx(0, abs=1e-12)
    assert sum(fitted.params[f"b{i}"] for i in (1, 2, 3)) == pytest.approx(0, abs=1e-12)
    assert sum(fitted.params[f"a{i}"] for i in (1, 2, 3)) == pytest.approx(1, abs=1e-12)
    assert "nonlinear SUR" in fitted.estimator


def test_income_elasticities_follow_the_published_formula(fitted):
    """e_i = 1 + μ_i / w_i with μ_i = ∂w_i/∂ln m = b_i + 2 (l_i / b(p)) ln(m/a(p))
    (Banks, Blundell and Lewbel 1997, from memory), at the fitted parameters."""
    pt = {"p1": 1.2, "p2": 0.8, "p3": 1.1, "m": 4.0}
    e = fitted.elasticities(at=pt, kinds=["income"]).set_index("elasticity")["estimate"]
    p = fitted.params
    a = np.array([p[f"a{i}"] for i in (1, 2, 3)])
    b = np.array([p[f"b{i}"] for i in (1, 2, 3)])
    lam = np.array([p[f"l{i}"] for i in (1, 2, 3)])
    g = np.array([[p["g%d%d" % tuple(sorted((i, j)))] for j in (1, 2, 3)] for i in (1, 2, 3)])
    L = np.log([pt["p1"], pt["p2"], pt["p3"]])
    x = np.log(pt["m"]) - (L @ a + 0.5 * L @ g @ L)
    w = a + g @ L + b * x + lam / np.exp(L @ b) * x ** 2
    mu = b + 2 * lam / np.exp(L @ b) * x
    for i in range(3):
        assert e[f"income x{i + 1}"] == pytest.approx(1 + mu[i] / w[i], rel=1e-10)


def test_stone_index_is_refused_for_the_quadratic_system():
    data = {"p1": [1.0] * 20, "p2": [1.0] * 20, "p3": [1.0] * 20, "m": [1.0] * 20,
            "w1": [0.2] * 20, "w2": [0.3] * 20, "w3": [0.5] * 20}
    with pytest.raises(dy.DualityError, match="exact price index"):
        dy.estimate(dy.quaids_expenditure(3), data, shares=SHARES, fixed={"a0": 0},
                    index="stone")

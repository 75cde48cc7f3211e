"""Elasticities against closed forms from the literature."""
from __future__ import annotations

import numpy as np
import pytest
import sympy as sp

import duality as dy


@pytest.mark.parametrize("rho", [-2.0, -0.5, 0.5])
def test_ces_substitution_elasticities_equal_sigma(rho):
    # CES: Allen–Uzawa sigma_ij = 1/(1-rho) for all i != j (Arrow, Chenery, Minhas and Solow
    # 1961; Uzawa 1962), and the Morishima elasticity equals it too (Blackorby and Russell,
    # AER 1989: the two coincide for CES; from memory)
    t = dy.technology(f"(x1^{rho} + 2*x2^{rho} + 3*x3^{rho})^(1/{rho})", ["x1", "x2", "x3"])
    E = dy.elasticities(t, w1=1.0, w2=2.0, w3=0.5, y=4.0)
    sigma = 1 / (1 - rho)
    off = ~np.eye(3, dtype=bool)
    assert np.allclose(E.allen_uzawa[off], sigma, rtol=1e-10)
    assert np.allclose(E.morishima[off], sigma, rtol=1e-10)
    assert E.returns_to_scale == pytest.approx(1.0, rel=1e-12)
    # price elasticity = share_j * sigma_ij (common practice, no source)
    assert np.allclose(E.price[off], (E.allen_uzawa * E.shares[None, :])[off], rtol=1e-10)
    assert np.allclose(E.price.sum(axis=1), 0, atol=1e-12)  # homogeneity of degree 0


def test_cobb_douglas_demand_elasticities():
    # Marshallian demands x_i = a_i m / p_i: own-price -1, cross 0, income 1; Hicksian
    # own-price -(1 - a_i) (Varian 1992, ch. 7 and 8; from memory)
    p = dy.preference("x1^0.3*x2^0.7", ["x1", "x2"])
    E = dy.elasticities(p, p1=1.3, p2=0.4, m=11.0)
    assert np.allclose(E.price, -np.eye(2), atol=1e-12)
    assert np.allclose(E.level, 1.0)
    assert np.allclose(np.diag(E.compensated), [-0.7, -0.3])
    assert np.allclose(E.shares, [0.3, 0.7])


def test_returns_to_scale_of_cobb_douglas():
    t = dy.technology("x1^0.3*x2^0.45", ["x1", "x2"])
    E = dy.elasticities(t, w1=1.0, w2=1.0, y=2.0)
    assert E.returns_to_scale == pytest.approx(0.75, rel=1e-12)
    assert np.allclose(E.level, 1 / 0.75)  # conditional demand output elasticity 1/RTS


def test_symbolic_allen_uzawa_matrix_of_cobb_douglas_is_one():
    c = dy.cost(dy.technology("x1^a*x2^b", ["x1", "x2"], params={"a": None, "b": None},
                              assume={"a": "positive", "b": "positive"}))
    M = dy.allen_uzawa(c)
    assert sp.simplify(M[0, 1] - 1) == 0


def test_numeric_route_elasticities_match_the_symbolic_route():
    formula = "(x1^0.3*x2^0.5)^2 + 3*x1^0.3*x2^0.5"
    sym = dy.elasticities(dy.technology(formula, ["x1", "x2"]), budget=20,
                          w1=1.0, w2=2.0, y=5.0)
    num = dy.elasticities(dy.technology(formula, ["x1", "x2"]), budget=0.01,
                          w1=1.0, w2=2.0, y=5.0)
    assert sym.route == "symbolic" and num.route == "numeric"
    assert np.allclose(num.allen_uzawa, sym.allen_uzawa, rtol=1e-4)
    assert num.returns_to_scale == pytest.approx(sym.returns_to_scale, rel=1e-6)


def test_missing_point_values_are_named():
    with pytest.raises(dy.DualityError, match="need a value for y"):
        dy.elasticities(dy.technology("x1^0.3*x2^0.5", ["x1", "x2"]), w1=1, w2=1)


def test_one_function_gives_substitution_elasticities_at_points_rows_and_in_closed_form(rng):
    # Cobb–Douglas cost c = y prod_i w_i^a_i (sum a_i = 1): c_i = a_i c / w_i,
    # c_ij = a_i a_j c / (w_i w_j), c_ii = a_i (a_i - 1) c / w_i^2, hence σ_ij = 1 and
    # σ_ii = (a_i - 1) / a_i, M_ij = 1 and ε_ij = a_j − δ_ij (Blackorby and Russell, AER 79
    # (1989); Varian, Microeconomic Analysis, 3rd ed. (1992), ch. 4; from memory)
    from duality.analyse.elasticity import substitution_elasticities
    a = np.array([0.2, 0.3, 0.5])
    w = rng.uniform(0.5, 3.0, (40, 3))
    c = rng.uniform(1.0, 9.0, 40) * np.prod(w ** a, axis=1)
    g = a * c[:, None] / w
    H = (a[:, None] * a[None, :]) * c[:, None, None] / (w[:, :, None] * w[:, None, :])
    idx = np.arange(3)
    H[:, idx, idx] = a * (a - 1) * c[:, None] / w ** 2
    rows = substitution_elasticities(c, g, H, w)
    off = ~np.eye(3, dtype=bool)
    assert np.allclose(rows.allen_uzawa[:, off], 1.0, rtol=1e-12)
    assert np.allclose(np.diagonal(rows.allen_uzawa, axis1=1, axis2=2), (a - 1) / a)
    assert np.allclose(rows.morishima[:, off], 1.0, rtol=1e-12)
    assert np.all(np.diagonal(rows.morishima, axis1=1, axis2=2) == 0)
    assert np.allclose(rows.price, a[None, None, :] - np.eye(3)[None], atol=1e-12)
    # one point gives the same numbers as its row
    one = substitution_elasticities(c[7], g[7], H[7], w[7])
    assert np.array_equal(one.allen_uzawa, rows.allen_uzawa[7])
    assert np.array_equal(one.morishima, rows.morishima[7])
    # and the closed-form matrices of dy.morishima come from the same function
    cd = dy.cost(dy.technology("x1^0.2*x2^0.3*x3^0.5", ["x1", "x2", "x3"]))
    M = dy.morishima(cd)
    assert all(sp.simplify(M[i, j] - (0 if i == j else 1)) == 0
               for i in range(3) for j in range(3))

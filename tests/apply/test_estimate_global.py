"""``dy.estimate(..., curvature="global")``: concavity at every price imposed on the normalized
quadratic and symmetric generalized McFadden cost functions by the Cholesky-type
reparametrisation B = −AAᵀ of Diewert and Wales, 'Flexible functional forms and global
curvature conditions', Econometrica 55 (1987) (from memory).

Data are invented: prices and output drawn at random, quantities from Shephard's lemma
applied to the published cost formula written out here in numpy (not the engine's), times a
small multiplicative error."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import sympy as sp

import duality as dy
from duality.analyse.regularity import regularity

CONCAVE = dict(b1=0.5, b2=0.8, b3=0.6, s11=-0.16, s12=-0.04, s22=-0.10)  # = −AAᵀ, A=[[.4,0],[.1,.3]]
NOT_CONCAVE = dict(b1=0.5, b2=0.8, b3=0.6, s11=0.30, s12=0.0, s22=-0.20)


def _published_demands(params, W, y):
    """x_i = y·[b_i + (Sw)_i/(θ·w) − ½ θ_i wᵀSw/(θ·w)²] + c_i + byy θ_i y², θ = 1/3 each and
    w* = 1 (the catalogue defaults), S from its block by S w* = 0 (Diewert and Wales 1987)."""
    B = np.array([[params["s11"], params["s12"]], [params["s12"], params["s22"]]])
    T = np.array([[1.0, 0.0, -1.0], [0.0, 1.0, -1.0]])      # v = T w, v_i = w_i − w_3
    S = T.T @ B @ T
    th = np.full(3, 1 / 3)
    b = np.array([params[f"b{i}"] for i in (1, 2, 3)])
    c = np.array([params.get(f"c{i}", 0.0) for i in (1, 2, 3)])
    tw = W @ th
    q = np.einsum("ni,ij,nj->n", W, S, W)
    return (y[:, None] * (b + (W @ S) / tw[:, None] - 0.5 * th * (q / tw ** 2)[:, None])
            + c + params.get("byy", 0.0) * th * (y ** 2)[:, None])


def _data(params, seed=17, N=200, noise=0.02):
    rng = np.random.default_rng(seed)
    W = np.exp(rng.normal(0, 0.3, (N, 3)))
    y = np.exp(rng.normal(0, 0.3, N))
    X = _published_demands(params, W, y) * np.exp(rng.normal(0, noise, (N, 3)))
    return pd.DataFrame({"w1": W[:, 0], "w2": W[:, 1], "w3": W[:, 2], "y": y,
                         "x1": X[:, 0], "x2": X[:, 1], "x3": X[:, 2]})


def _max_hessian_eigenvalue(model, rng, points=100):
    """Largest eigenvalue of the Hessian in w of the engine's cost function at random prices
    (numpy's eigvalsh as the oracle of definiteness)."""
    c = dy.cost(model)
    ws = list(c.args[:-1])
    H = sp.lambdify(list(c.args), sp.hessian(c.expr_at_values, ws), "numpy")
    top = -np.inf
    for _ in range(points):
        w = np.exp(rng.uniform(-2.0, 2.0, 3))
        top = max(top, float(np.linalg.eigvalsh(np.array(H(*w, 1.3), float)).max()))
    return top


def test_concave_truth_is_recovered_with_curvature_imposed():
    est = dy.estimate(dy.normalized_quadratic_cost(3), _data(CONCAVE), curvature="global")
    for k, v in CONCAVE.items():
        assert est.params[k] == pytest.approx(v, abs=0.02), k
    assert {"q11", "q21", "q22"} <= set(est.params)
    # the block is −AAᵀ of the factor estimated (the reparametrisation of Diewert and Wales)
    A = np.array([[est.params["q11"], 0.0], [est.params["q21"], est.params["q22"]]])
    B = -A @ A.T
    assert est.params["s11"] == pytest.approx(B[0, 0], rel=1e-10)
    assert est.params["s12"] == pytest.approx(B[0, 1], rel=1e-10)
    assert est.params["s22"] == pytest.approx(B[1, 1], rel=1e-10)
    assert "every price" in est.curvature["imposed"]
    # the truth is concave, so imposing changes the estimates only within their noise
    free = dy.estimate(dy.normalized_quadratic_cost(3), _data(CONCAVE), curvature="none")
    for k in CONCAVE:
        assert est.params[k] == pytest.approx(free.params[k], abs=1e-3), k


def test_non_concave_truth_gives_a_fit_concave_at_every_price():
    rng = np.random.default_rng(1987)
    data = _data(NOT_CONCAVE)
    free = dy.estimate(dy.normalized_quadratic_cost(3), data, curvature="check")
    # without the imposition the fit follows the non-concave truth ...
    assert free.params["s11"] == pytest.approx(0.30, abs=0.03)
    assert _max_hessian_eigenvalue(free.model, rng) > 1e-3
    est = dy.estimate(dy.normalized_quadratic_cost(3), data, curvature="global")
    # ... with it, the engine's Hessian in w is negative semidefinite at random prices far
    # outside the sample (Diewert and Wales 1987: global concavity)
    assert _max_hessian_eigenvalue(est.model, rng) <= 1e-9
    assert est.curvature["rows violating before"] == "200 of 200"
    assert est.curvature["rows violating after"] == "0 of 200"
    W = np.exp(rng.uniform(-2, 2, (300, 3)))
    far = pd.DataFrame({"w1": W[:, 0], "w2": W[:, 1], "w3": W[:, 2], "y": 1.0})
    assert regularity(est.model, far, restrictions="ignore").violations("curvature") == []
    # the imposed fit is worse than the free one but uses the same equations
    assert est.loglik < free.loglik


def test_symmetric_generalized_mcfadden_with_curvature_imposed():
    truth = dict(CONCAVE, c1=0.2, c2=0.1, c3=0.05, byy=0.04)
    model = dy.symmetric_generalized_mcfadden_cost(3)
    est = dy.estimate(model, _data(truth, noise=0.01), curvature="global")
    for k, v in truth.items():
        assert est.params[k] == pytest.approx(v, abs=0.03), k
    bad = dict(NOT_CONCAVE, c1=0.2, c2=0.1, c3=0.05, byy=0.04)
    est = dy.estimate(model, _data(bad, noise=0.01), curvature="global")
    assert _max_hessian_eigenvalue(est.model, np.random.default_rng(5)) <= 1e-9


def test_global_curvature_refuses_other_forms_and_fixed_blocks():
    data = _data(CONCAVE)
    with pytest.raises(dy.DualityError, match="curvature='global' is available for the "
                                              "normalized quadratic"):
        dy.estimate(dy.generalized_leontief_cost(3), data.assign(c=1.0), curvature="global")
    with pytest.raises(dy.DualityError, match="needs s12 free"):
        dy.estimate(dy.normalized_quadratic_cost(3), data, curvature="global",
                    fixed={"s12": 0.0})

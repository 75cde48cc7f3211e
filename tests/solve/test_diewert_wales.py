"""Normalized quadratic and symmetric generalized McFadden cost functions (Diewert and
Wales, 'Flexible functional forms and global curvature conditions', Econometrica 55 (1987),
from memory): the engine's cost and Shephard demands against the published formula written
out here in numpy, homogeneity by construction, and global concavity after the
Cholesky-type reparametrisation S = −L Lᵀ."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import duality as dy
from duality.analyse.regularity import regularity

THETA = [0.2, 0.3, 0.5]        # fixed weights θ (invented)
REF = [1.0, 2.0, 0.5]          # reference prices w* (invented)
BLOCK = dict(s11=-0.4, s12=0.1, s22=-0.3)
SGM = dict(b1=0.5, b2=0.8, b3=0.3, **BLOCK, c1=0.2, c2=0.1, c3=0.05, byy=0.04)


@pytest.fixture
def rng():
    return np.random.default_rng(1987)


def _full_S(block, ref):
    """S from its leading (n−1) block by the identification S w* = 0 (Diewert and Wales
    1987): the last column solves S_{·,n} w*_n = −Σ_{j<n} S_{·,j} w*_j, and S is symmetric."""
    k = len(ref) - 1
    B = np.array([[block["s" + "".join(sorted(f"{i + 1}{j + 1}"))] for j in range(k)]
                  for i in range(k)])
    r = np.asarray(ref, float)
    col = -B @ r[:k] / r[k]
    S = np.zeros((k + 1, k + 1))
    S[:k, :k], S[:k, k], S[k, :k] = B, col, col
    S[k, k] = -col @ r[:k] / r[k]
    return S


def _published(params, W, y, theta, ref):
    """c(w, y) = y·[Σ b_i w_i + ½ wᵀSw/(θ·w)] + Σ c_i w_i + byy (θ·w) y² and its gradient
    x_i = y·[b_i + (Sw)_i/(θ·w) − ½ θ_i wᵀSw/(θ·w)²] + c_i + byy θ_i y²
    (Diewert and Wales 1987, from memory)."""
    n = W.shape[1]
    b = np.array([params[f"b{i + 1}"] for i in range(n)])
    c = np.array([params.get(f"c{i + 1}", 0.0) for i in range(n)])
    byy = params.get("byy", 0.0)
    S, th = _full_S(params, ref), np.asarray(theta, float)
    tw = W @ th
    q = np.einsum("ni,ij,nj->n", W, S, W)
    cost = y * (W @ b + 0.5 * q / tw) + W @ c + byy * tw * y ** 2
    x = (y[:, None] * (b + (W @ S) / tw[:, None] - 0.5 * th * (q / tw ** 2)[:, None])
         + c + byy * th * (y ** 2)[:, None])
    return cost, x, S


def _draw(rng, N):
    W = np.exp(rng.uniform(-1.0, 1.0, (N, 3)))
    return W, np.exp(rng.uniform(-0.5, 1.0, N))


@pytest.mark.parametrize("form", ["normalized_quadratic_cost",
                                  "symmetric_generalized_mcfadden_cost"])
def test_cost_and_demands_match_the_published_formula(rng, form):
    build = getattr(dy, form)
    params = SGM if form.startswith("symmetric") else {
        k: v for k, v in SGM.items() if k[0] in "bs" and k != "byy"}
    model = build(3, params=params, weights=THETA, reference=REF)
    c = dy.cost(model)
    assert c.route == "catalogue" and "Diewert and Wales" in c.source
    W, y = _draw(rng, 100)
    cost, x, S = _published(params, W, y, THETA, REF)
    assert np.allclose(S @ np.array(REF), 0, atol=1e-14)     # the identification holds
    pt = dict(w1=W[:, 0], w2=W[:, 1], w3=W[:, 2], y=y)
    assert np.allclose(c(**pt), cost, rtol=1e-12)
    for i in range(3):
        assert np.allclose(c.demands[f"x{i + 1}"](**pt), x[:, i], rtol=1e-10, atol=1e-12)


@pytest.mark.parametrize("form", ["normalized_quadratic_cost",
                                  "symmetric_generalized_mcfadden_cost"])
def test_homogeneous_of_degree_one_by_construction(rng, form):
    model = getattr(dy, form)(3)
    # linear homogeneity is built into the form (Diewert and Wales 1987, from memory): the
    # engine finds no restriction to impose
    assert dy.restrictions(model) == []
    valued = getattr(dy, form)(3, params={k: v for k, v in SGM.items()
                                          if k in {p.name for p in model.params}})
    c = dy.cost(valued)
    W, y = _draw(rng, 20)
    t = np.exp(rng.uniform(-1, 1, 20))
    pt = dict(w1=W[:, 0], w2=W[:, 1], w3=W[:, 2], y=y)
    scaled = dict(w1=t * W[:, 0], w2=t * W[:, 1], w3=t * W[:, 2], y=y)
    assert np.allclose(c(**scaled), t * c(**pt), rtol=1e-12)


def test_concave_block_gives_global_concavity_at_random_prices(rng):
    for trial in range(5):
        L = np.tril(rng.normal(size=(2, 2)))
        params = dict(b1=0.5, b2=0.8, b3=0.3, **dy.concave_block(L))
        model = dy.normalized_quadratic_cost(3, params=params, weights=THETA, reference=REF)
        W, y = _draw(rng, 200)
        _, _, S = _published(params, W, y, THETA, REF)
        # the full S is negative semidefinite (numpy's eigvalsh as the oracle) ...
        assert np.linalg.eigvalsh(S).max() <= 1e-12
        # ... so the cost function is concave in w at every price (Diewert and Wales 1987,
        # from memory): the engine's own curvature check finds no violation
        data = pd.DataFrame({"w1": W[:, 0], "w2": W[:, 1], "w3": W[:, 2], "y": y})
        rep = regularity(model, data, restrictions="ignore")
        assert rep.violations("curvature") == [], trial


def test_a_block_that_is_not_negative_semidefinite_is_found_non_concave(rng):
    params = dict(b1=0.5, b2=0.8, b3=0.3, s11=0.4, s12=0.0, s22=-0.3)
    model = dy.normalized_quadratic_cost(3, params=params)
    W, y = _draw(rng, 200)
    data = pd.DataFrame({"w1": W[:, 0], "w2": W[:, 1], "w3": W[:, 2], "y": y})
    assert len(regularity(model, data, restrictions="ignore").violations("curvature")) > 0


def test_every_negative_semidefinite_block_comes_from_a_lower_triangular_one(rng):
    A = rng.normal(size=(3, 3))
    S = -(A @ A.T)
    L = np.linalg.cholesky(-S)          # numpy as the independent oracle
    got = dy.concave_block(L)
    for i in range(3):
        for j in range(i, 3):
            assert got[f"s{i + 1}{j + 1}"] == pytest.approx(S[i, j], rel=1e-12, abs=1e-12)
    with pytest.raises(dy.DualityError, match="square lower-triangular"):
        dy.concave_block(np.ones((2, 3)))


def test_bad_weights_and_reference_are_named():
    with pytest.raises(dy.DualityError, match="weights: 2 numbers for 3 prices"):
        dy.normalized_quadratic_cost(3, weights=[1, 2])
    with pytest.raises(dy.DualityError, match="must be positive"):
        dy.symmetric_generalized_mcfadden_cost(2, reference=[1, -1])

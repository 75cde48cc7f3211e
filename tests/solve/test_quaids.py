"""Quadratic Almost Ideal demand system (Banks, Blundell and Lewbel, 'Quadratic Engel curves
and consumer demand', Review of Economics and Statistics 79 (1997), from memory): the
engine's indirect utility, shares and elasticities against the published equations written
out here in numpy, restrictions against the published ones, and the Almost Ideal system as
the case λ = 0."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import sympy as sp

import duality as dy
from duality.analyse.regularity import regularity

# adding-up (Σ a = 1, Σ b = 0, Σ l = 0, columns of g sum to zero), homogeneity (rows of g
# sum to zero) and symmetry (built in); invented numbers
Q = dict(a0=0.5, a1=0.3, a2=0.4, a3=0.3, g11=0.05, g12=-0.02, g13=-0.03, g22=0.04,
         g23=-0.02, g33=0.05, b1=0.1, b2=-0.05, b3=-0.05, l1=0.02, l2=-0.015, l3=-0.005)


@pytest.fixture
def rng():
    return np.random.default_rng(19970101)


def _data(rng, N):
    d = pd.DataFrame({f"p{i}": np.exp(rng.uniform(-0.5, 0.5, N)) for i in (1, 2, 3)})
    d["m"] = np.exp(rng.uniform(0.5, 2.0, N))
    return d


def _published(params, P, m):
    """Banks, Blundell and Lewbel (1997), from memory:
    ln a(p) = a0 + Σ a_k ln p_k + ½ ΣΣ g_kj ln p_k ln p_j, b(p) = Π p_k^{b_k},
    λ(p) = Σ l_k ln p_k; shares w_i = a_i + Σ_j g_ij ln p_j + b_i ln(m/a)
    + (l_i/b(p)) (ln(m/a))²; indirect utility ln V = {[ln(m/a)/b(p)]⁻¹ + λ(p)}⁻¹."""
    a = np.array([params[f"a{i}"] for i in (1, 2, 3)])
    b = np.array([params[f"b{i}"] for i in (1, 2, 3)])
    lam_c = np.array([params.get(f"l{i}", 0.0) for i in (1, 2, 3)])
    G = np.array([[params["g" + "".join(sorted(f"{i}{j}"))] for j in (1, 2, 3)]
                  for i in (1, 2, 3)])
    lp = np.log(P)
    lna = params["a0"] + lp @ a + 0.5 * np.einsum("ni,ij,nj->n", lp, G, lp)
    bp = np.exp(lp @ b)
    lam = lp @ lam_c
    z = np.log(m) - lna
    w = a + lp @ G.T + b * z[:, None] + lam_c * (z ** 2 / bp)[:, None]
    lnV = 1.0 / (1.0 / (z / bp) + lam)
    return dict(w=w, lnV=lnV, z=z, bp=bp, a=a, b=b, l=lam_c, G=G, lp=lp, lna=lna)


def test_indirect_utility_and_shares_match_the_published_equations(rng):
    model = dy.quaids_expenditure(3, params=Q)
    v = dy.indirect_utility(model)
    assert v.route == "catalogue" and "Banks, Blundell and Lewbel" in v.source
    data = _data(rng, 200)
    P, m = data[["p1", "p2", "p3"]].to_numpy(), data["m"].to_numpy()
    pub = _published(Q, P, m)
    got_v = v(p1=P[:, 0], p2=P[:, 1], p3=P[:, 2], m=m)
    assert np.allclose(got_v, pub["lnV"], rtol=1e-12, atol=1e-12)
    # Marshallian demands by the engine, as budget shares
    for i in range(3):
        x = v.demands[f"x{i + 1}"](p1=P[:, 0], p2=P[:, 1], p3=P[:, 2], m=m)
        assert np.allclose(x * P[:, i] / m, pub["w"][:, i], rtol=1e-10, atol=1e-12)
    # expenditure at that utility gives back the income (e(p, v(p, m)) = m)
    e = dy.expenditure(model)
    assert e.route == "catalogue"
    assert np.allclose(e(p1=P[:, 0], p2=P[:, 1], p3=P[:, 2], u=got_v), m, rtol=1e-12)


def test_elasticities_match_the_published_formulas(rng):
    model = dy.quaids_expenditure(3, params=Q)
    data = _data(rng, 150)
    # the restrictions are tested on their own below; here only the elasticities
    rep = regularity(model, data, restrictions="ignore")
    P, m = data[["p1", "p2", "p3"]].to_numpy(), data["m"].to_numpy()
    pub = _published(Q, P, m)
    w, z, bp, a, b, lc, G, lp = (pub[k] for k in ("w", "z", "bp", "a", "b", "l", "G", "lp"))
    assert (w > 0).all()
    # Banks, Blundell and Lewbel (1997), from memory: μ_i = ∂w_i/∂ln m = b_i + 2 l_i z / b(p);
    # μ_ij = ∂w_i/∂ln p_j = g_ij − μ_i (a_j + Σ_k g_jk ln p_k) − l_i b_j z² / b(p);
    # income elasticity 1 + μ_i / w_i; Marshallian price elasticity μ_ij / w_i − δ_ij
    mu = b + 2 * lc * (z / bp)[:, None]
    for i in range(3):
        assert np.allclose(rep.rows[f"share_x{i + 1}"], w[:, i], rtol=1e-10, atol=1e-12)
        assert np.allclose(rep.rows[f"income_elast_x{i + 1}"], 1 + mu[:, i] / w[:, i],
                           rtol=1e-9, atol=1e-9)
        for j in range(3):
            mu_ij = (G[i, j] - mu[:, i] * (a[j] + lp @ G[j])
                     - lc[i] * b[j] * z ** 2 / bp)
            eps = mu_ij / w[:, i] - (i == j)
            assert np.allclose(rep.rows[f"eps_x{i + 1}_p{j + 1}"], eps, rtol=1e-9,
                               atol=1e-9)


def test_with_no_quadratic_term_it_is_the_almost_ideal_system(rng):
    q = {**Q, "l1": 0.0, "l2": 0.0, "l3": 0.0}
    aids = {k: v for k, v in Q.items() if not k.startswith("l")} | {"b0": 1.0}
    qm, am = dy.quaids_expenditure(3, params=q), dy.aids_expenditure(3, params=aids)
    data = _data(rng, 50)
    pt = {k: data[k].to_numpy() for k in data}
    # Banks, Blundell and Lewbel (1997): λ(p) = 0 gives Deaton and Muellbauer's (1980)
    # Almost Ideal system (from memory)
    vq, va = dy.indirect_utility(qm), dy.indirect_utility(am)
    assert np.allclose(vq(**pt), va(**pt), rtol=1e-12)
    for i in range(3):
        assert np.allclose(vq.demands[f"x{i + 1}"](**pt), va.demands[f"x{i + 1}"](**pt),
                           rtol=1e-11)
    u = vq(**pt)
    prices = {k: pt[k] for k in ("p1", "p2", "p3")}
    assert np.allclose(dy.expenditure(qm)(**prices, u=u), dy.expenditure(am)(**prices, u=u),
                       rtol=1e-12)


def test_adding_up_and_homogeneity_at_random_points(rng):
    model = dy.quaids_expenditure(3, params=Q)
    v = dy.indirect_utility(model)
    for _ in range(20):
        p = np.exp(rng.uniform(-0.7, 0.7, 3))
        m = float(np.exp(rng.uniform(0.3, 2.0)))
        t = float(np.exp(rng.uniform(-1.0, 1.0)))
        pt = dict(p1=p[0], p2=p[1], p3=p[2], m=m)
        scaled = {k: t * x for k, x in pt.items()}
        x = np.array([v.demands[f"x{i}"](**pt) for i in (1, 2, 3)])
        # adding-up: p·x = m; homogeneity of degree zero of demands and of v in (p, m)
        # (Varian, Microeconomic Analysis, 3rd ed. (1992), ch. 7, from memory)
        assert p @ x == pytest.approx(m, rel=1e-12)
        xs = np.array([v.demands[f"x{i}"](**scaled) for i in (1, 2, 3)])
        assert np.allclose(xs, x, rtol=1e-11)
        assert v(**scaled) == pytest.approx(v(**pt), rel=1e-11, abs=1e-12)


def _span_equal(derived, published, params):
    def rows(eqs):
        out = []
        for e in eqs:
            expr = sp.expand(e.lhs - e.rhs)
            out.append([expr.coeff(p) for p in params] + [-expr.subs({p: 0 for p in params})])
        return sp.Matrix(out)
    A, B = rows(derived), rows(published)
    return A.rank() == B.rank() == A.col_join(B).rank()


def test_restrictions_equal_the_published_ones():
    # two goods keep the symbolic derivation short; the pattern is the same for n goods
    model = dy.quaids_expenditure(2)
    s = {p.name: p.symbol for p in model.params}
    # Banks, Blundell and Lewbel (1997), from memory: adding-up Σ a = 1, Σ_k g_kj = 0,
    # Σ b = 0, Σ l = 0; homogeneity Σ_j g_ij = 0; symmetry g_ij = g_ji (built in)
    published = [sp.Eq(s["a1"] + s["a2"], 1),
                 sp.Eq(s["g11"] + s["g12"], 0),
                 sp.Eq(s["g12"] + s["g22"], 0),
                 sp.Eq(s["b1"] + s["b2"], 0),
                 sp.Eq(s["l1"] + s["l2"], 0)]
    derived = [r.equation for r in dy.restrictions(model)]
    assert _span_equal(derived, published, list(model.param_symbols))
    two = dict(a0=0.5, a1=0.4, a2=0.6, g11=0.05, g12=-0.05, g22=0.05, b1=0.1, b2=-0.1,
               l1=0.02, l2=-0.02)
    [(r, res)] = dy.violations(dy.quaids_expenditure(2, params={**two, "l2": 0.0}))
    assert "l2" in {p.name for p in r.parameters} and abs(res) == pytest.approx(0.02)


def test_a_published_solution_that_fails_its_check_is_not_used():
    # a wrong closed form must never be returned (common practice, no source): the check
    # in derivation rejects a candidate that does not solve e(p, u) = m
    from duality.solve import derive_dual
    model = dy.quaids_expenditure(2)
    u, m = model.level, model.income
    right = dy.quaids_indirect_utility(model)
    assert derive_dual._passes(model, model.expr, u, m, right)
    assert not derive_dual._passes(model, model.expr, u, m, 2 * right)

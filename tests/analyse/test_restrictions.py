"""Tests of duality.analyse.restrictions: restrictions derived from the formula, checked, imposed.

The published restriction sets below are reference values (written from memory, with
their sources named beside them); the derived sets are compared with them by the span
of their augmented coefficient matrices, never by hard-coding the derived output.
"""
from __future__ import annotations

import pytest
import sympy as sp

from duality.errors import DualityError
from duality.analyse.restrictions import (
    Restriction,
    check_values,
    derive_restrictions,
    derive_share_restrictions,
    describe_violation,
    homogeneous_by_construction,
    impose,
)

N = 3
HALF = sp.Rational(1, 2)


# --------------------------------------------------------------------------------------
# helpers
# --------------------------------------------------------------------------------------
def augmented(eqs, order):
    """Augmented matrix [A | b] of linear equations A x = b over the symbols ``order``."""
    rows = []
    for eq in eqs:
        e = sp.expand(eq.lhs - eq.rhs)
        assert e.free_symbols <= set(order), f"{eq} has symbols outside {order}"
        coeffs = [sp.diff(e, s) for s in order]
        assert all(not c.free_symbols for c in coeffs), f"{eq} is not linear"
        const = e.xreplace({s: 0 for s in order})
        rows.append(coeffs + [-const])
    return sp.Matrix(rows) if rows else sp.zeros(0, len(order) + 1)


def same_span(derived, published, order):
    A = augmented(derived, order)
    B = augmented(published, order)
    ra, rb = A.rank(), B.rank()
    rab = A.col_join(B).rank()
    return ra == rb == rab


def eqs(restrictions, kind):
    return [r.equation for r in restrictions if r.kind == kind]


def pos(names):
    return sp.symbols(names, positive=True)


def real(names):
    return sp.symbols(names, real=True)


@pytest.fixture(scope="module")
def translog():
    w = pos("w1:4")
    y = sp.Symbol("y", positive=True)
    a0 = sp.Symbol("a0", real=True)
    a = real("a1:4")
    g = [[sp.Symbol(f"g{i}{j}", real=True) for j in range(1, N + 1)] for i in range(1, N + 1)]
    ay, gyy = real("ay gyy")
    gy = real("g1y g2y g3y")
    lw = [sp.log(x) for x in w]
    lnc = (a0 + sum(a[i] * lw[i] for i in range(N))
           + HALF * sum(g[i][j] * lw[i] * lw[j] for i in range(N) for j in range(N))
           + ay * sp.log(y) + HALF * gyy * sp.log(y) ** 2
           + sum(gy[i] * lw[i] * sp.log(y) for i in range(N)))
    gflat = [g[i][j] for i in range(N) for j in range(N)]
    params = (a0, *a, *gflat, ay, gyy, *gy)
    cost = sp.exp(lnc)
    R = derive_restrictions(cost, w, params, name="cost")
    return dict(w=w, y=y, a0=a0, a=a, g=g, ay=ay, gyy=gyy, gy=gy, lnc=lnc, cost=cost,
                params=params, R=R)


# --------------------------------------------------------------------------------------
# translog cost
# --------------------------------------------------------------------------------------
def test_translog_homogeneity_spans_published_set(translog):
    t = translog
    a, g, gy = t["a"], t["g"], t["gy"]
    # Christensen, Jorgenson and Lau (1973), Review of Economics and Statistics 55:
    # translog restrictions for linear homogeneity in prices (from memory):
    # sum_i a_i = 1, sum_j (g_ij + g_ji)/2 = 0 for each i, sum_i g_iy = 0.
    published = [sp.Eq(sum(a), 1)]
    published += [sp.Eq(sum((g[i][j] + g[j][i]) / 2 for j in range(N)), 0) for i in range(N)]
    published += [sp.Eq(sum(gy), 0)]
    derived = eqs(t["R"], "homogeneity")
    assert derived, "translog cost needs homogeneity restrictions"
    assert same_span(derived, published, t["params"])
    # and the check is not vacuous: dropping one published equation changes the span
    assert not same_span(derived, published[1:], t["params"])


def test_translog_symmetry_is_gamma_ij_equals_gamma_ji(translog):
    t = translog
    g = t["g"]
    # Christensen, Jorgenson and Lau (1973), Review of Economics and Statistics 55:
    # symmetry g_ij = g_ji, i < j (from memory).
    published = [sp.Eq(g[i][j], g[j][i]) for i in range(N) for j in range(i + 1, N)]
    derived = eqs(t["R"], "symmetry")
    assert len(derived) == len(published)
    assert same_span(derived, published, t["params"])
    for r in t["R"]:
        if r.kind == "symmetry":
            assert "only through their sum" in r.reason


def test_translog_reasons_and_latex(translog):
    for r in translog["R"]:
        assert isinstance(r, Restriction)
        assert r.kind in ("homogeneity", "adding-up", "symmetry")
        assert r.reason
        assert r.linear
        assert isinstance(r.latex(), str) and "=" in r.latex()
    hom = [r for r in translog["R"] if r.kind == "homogeneity"]
    assert all("homogeneous of degree 1" in r.reason for r in hom)
    # adding-up of the cost shares coincides with homogeneity for a degree-1 dual
    assert all("adding-up" in r.reason for r in hom)


def _published_translog_values(t, rng):
    """Random parameter values satisfying the CJL (1973) restrictions (from memory)."""
    a, g, gy = t["a"], t["g"], t["gy"]
    vals = {t["a0"]: rng.normal(), t["ay"]: rng.normal(), t["gyy"]: rng.normal()}
    a_v = rng.uniform(0.1, 0.5, N - 1)
    for i in range(N - 1):
        vals[a[i]] = a_v[i]
    vals[a[N - 1]] = 1 - a_v.sum()
    G = rng.normal(size=(N, N)) * 0.1
    G = (G + G.T) / 2
    G -= G.mean(axis=1, keepdims=True) + G.mean(axis=0, keepdims=True) - G.mean()
    for i in range(N):
        for j in range(N):
            vals[g[i][j]] = G[i, j]
    gyv = rng.normal(size=N)
    gyv -= gyv.mean()
    for i in range(N):
        vals[gy[i]] = gyv[i]
    return vals


def test_check_values_pass_and_single_violation(translog, rng):
    t = translog
    vals = _published_translog_values(t, rng)
    assert check_values(t["R"], vals) == []
    named = {s.name: v for s, v in vals.items()}
    assert check_values(t["R"], named) == []

    bumped = dict(named)
    bumped["a2"] += 0.03
    bad = check_values(t["R"], bumped)
    assert len(bad) == 1
    r, res = bad[0]
    assert r.kind == "homogeneity"
    assert t["a"][1] in r.equation.free_symbols
    # the equation sum a_i = 1 (any scaling) has residual = scale * perturbation
    e = sp.expand(r.equation.lhs - r.equation.rhs)
    scale = float(sp.diff(e, t["a"][1]))
    assert res == pytest.approx(0.03 * scale, abs=1e-12)
    msg = describe_violation(r, res)
    assert "a2" in msg and "homogeneity" in msg


def test_impose_gives_homogeneous_translog_whose_shares_add_up(translog, rng):
    t = translog
    reduced, mapping, kept = impose(t["cost"], t["R"], t["params"])
    assert set(mapping) | set(kept) == set(t["params"])
    assert not set(mapping) & set(kept)
    assert not reduced.free_symbols & set(mapping)
    # the mapping satisfies every restriction identically
    for r in t["R"]:
        assert sp.expand((r.equation.lhs - r.equation.rhs).xreplace(mapping)) == 0

    w, y = t["w"], t["y"]
    tt = sp.Symbol("t", positive=True)
    f = sp.lambdify([*w, y, tt, *kept],
                    [reduced.xreplace({x: tt * x for x in w}), tt * reduced], "numpy")
    for _ in range(5):
        kv = rng.normal(scale=0.3, size=len(kept))
        wv = rng.uniform(0.5, 3.0, N)
        lhs, rhs = f(*wv, rng.uniform(0.5, 2.0), rng.uniform(0.3, 4.0), *kv)
        assert lhs == pytest.approx(rhs, rel=1e-12)

    lnc = sp.expand_log(sp.log(reduced), force=True)
    share_sum = sum(sp.diff(lnc, x) * x for x in w)
    assert sp.simplify(share_sum - 1) == 0


def test_impose_respects_keep(translog):
    t = translog
    a = t["a"]
    _, mapping, kept = impose(t["cost"], t["R"], t["params"], keep=(a[2],))
    assert a[2] in kept
    assert any(s in mapping for s in a[:2])
    with pytest.raises(DualityError, match="a1|a2|a3"):
        impose(t["cost"], t["R"], t["params"], keep=tuple(a))


# --------------------------------------------------------------------------------------
# AIDS
# --------------------------------------------------------------------------------------
def _aids_symbols():
    p = pos("p1:4")
    a0 = sp.Symbol("a0", real=True)
    a = real("a1:4")
    b0 = sp.Symbol("b0", real=True)
    b = real("b1:4")
    g = [[sp.Symbol(f"g{i}{j}", real=True) for j in range(1, N + 1)] for i in range(1, N + 1)]
    lp = [sp.log(x) for x in p]
    lnP = (a0 + sum(a[k] * lp[k] for k in range(N))
           + HALF * sum(g[k][j] * lp[k] * lp[j] for k in range(N) for j in range(N)))
    return p, a0, a, b0, b, g, lp, lnP


def test_aids_expenditure_homogeneity():
    p, a0, a, b0, b, g, lp, lnP = _aids_symbols()
    u = sp.Symbol("u", positive=True)
    lne = lnP + u * b0 * sp.Mul(*[p[k] ** b[k] for k in range(N)])
    gflat = [g[i][j] for i in range(N) for j in range(N)]
    params = (a0, *a, *gflat, b0, *b)
    R = derive_restrictions(sp.exp(lne), p, params, name="expenditure")
    # Deaton and Muellbauer (1980), American Economic Review 70: homogeneity of the AIDS
    # cost function, sum a_k = 1, sum_k g*_kj = 0, sum b_k = 0 (from memory).
    published = [sp.Eq(sum(a), 1), sp.Eq(sum(b), 0)]
    published += [sp.Eq(sum((g[k][j] + g[j][k]) / 2 for k in range(N)), 0) for j in range(N)]
    assert same_span(eqs(R, "homogeneity"), published, params)
    beta_eq = [r for r in R if r.kind == "homogeneity" and b[0] in r.equation.free_symbols]
    assert len(beta_eq) == 1 and "b0" in beta_eq[0].reason  # the b0 != 0 assumption is stated
    # symmetry of g (Deaton and Muellbauer 1980, from memory)
    published_sym = [sp.Eq(g[i][j], g[j][i]) for i in range(N) for j in range(i + 1, N)]
    assert same_span(eqs(R, "symmetry"), published_sym, params)


def test_aids_expenditure_given_as_log_matches_level_input():
    p, a0, a, b0, b, g, lp, lnP = _aids_symbols()
    u = sp.Symbol("u", positive=True)
    lne = lnP + u * b0 * sp.Mul(*[p[k] ** b[k] for k in range(N)])
    params = (a0, *a, *[g[i][j] for i in range(N) for j in range(N)], b0, *b)
    R1 = derive_restrictions(sp.exp(lne), p, params, symmetry=False)
    R2 = derive_restrictions(lne, p, params, is_log=True, symmetry=False)
    assert same_span([r.equation for r in R1], [r.equation for r in R2], params)


@pytest.fixture(scope="module")
def aids_shares():
    p, a0, a, b0, b, g, lp, lnP = _aids_symbols()
    m = sp.Symbol("m", positive=True)
    shares = [a[i] + sum(g[i][j] * lp[j] for j in range(N)) + b[i] * (sp.log(m) - lnP)
              for i in range(N)]
    params = (a0, *a, *[g[i][j] for i in range(N) for j in range(N)], *b)
    R = derive_share_restrictions(shares, p, params, income=m)
    return dict(p=p, a=a, b=b, g=g, m=m, params=params, R=R, shares=shares)


def test_aids_shares_adding_up(aids_shares):
    s = aids_shares
    a, b, g = s["a"], s["b"], s["g"]
    # Deaton and Muellbauer (1980), American Economic Review 70: adding-up
    # sum_i a_i = 1, sum_i g_ij = 0 for each j, sum_i b_i = 0 (from memory).
    published = [sp.Eq(sum(a), 1), sp.Eq(sum(b), 0)]
    published += [sp.Eq(sum(g[i][j] for i in range(N)), 0) for j in range(N)]
    assert same_span(eqs(s["R"], "adding-up"), published, s["params"])


def test_aids_shares_homogeneity(aids_shares):
    s = aids_shares
    g = s["g"]
    # Deaton and Muellbauer (1980), American Economic Review 70: homogeneity
    # sum_j g_ij = 0 for each i (from memory).
    published = [sp.Eq(sum(g[i][j] for j in range(N)), 0) for i in range(N)]
    assert same_span(eqs(s["R"], "homogeneity"), published, s["params"])


def test_aids_shares_symmetry(aids_shares):
    s = aids_shares
    g = s["g"]
    # Deaton and Muellbauer (1980), American Economic Review 70: symmetry g_ij = g_ji
    # (from memory).
    published = [sp.Eq(g[i][j], g[j][i]) for i in range(N) for j in range(i + 1, N)]
    assert same_span(eqs(s["R"], "symmetry"), published, s["params"])
    assert all("Slutsky" in r.reason for r in s["R"] if r.kind == "symmetry")


def test_aids_shares_restricted_are_homogeneous_and_add_up(aids_shares):
    s = aids_shares
    _, mapping, kept = impose(0, s["R"], s["params"])
    shares = [sh.xreplace(mapping) for sh in s["shares"]]
    assert sp.simplify(sp.expand_log(sum(shares), force=True) - 1) == 0
    tt = sp.Symbol("t", positive=True)
    scale = {x: tt * x for x in (*s["p"], s["m"])}
    for sh in shares:
        assert sp.simplify(sp.expand_log(sh.xreplace(scale) - sh, force=True)) == 0


# --------------------------------------------------------------------------------------
# generalized Leontief and Cobb-Douglas
# --------------------------------------------------------------------------------------
def test_generalized_leontief():
    w = pos("w1:4")
    y = sp.Symbol("y", positive=True)
    B = [[sp.Symbol(f"b{i}{j}", real=True) for j in range(1, N + 1)] for i in range(1, N + 1)]
    params = [B[i][j] for i in range(N) for j in range(N)]
    cost = y * sum(B[i][j] * sp.sqrt(w[i] * w[j]) for i in range(N) for j in range(N))
    R = derive_restrictions(cost, w, params, name="cost")
    # Diewert (1971), Journal of Political Economy 79: the generalized Leontief cost
    # function is linearly homogeneous in prices for all parameter values, and b_ij = b_ji
    # (from memory).
    assert homogeneous_by_construction(cost, w)
    assert eqs(R, "homogeneity") == [] and eqs(R, "adding-up") == []
    published_sym = [sp.Eq(B[i][j], B[j][i]) for i in range(N) for j in range(i + 1, N)]
    assert same_span(eqs(R, "symmetry"), published_sym, params)


def test_homogeneous_by_construction_detects_failure():
    w1, w2 = pos("w1 w2")
    assert not homogeneous_by_construction(w1 + w2 ** 2, (w1, w2))
    assert homogeneous_by_construction(w1 ** sp.Rational(1, 3) * w2 ** sp.Rational(2, 3),
                                       (w1, w2))
    # CES cost y (a1 w1^r + a2 w2^r)^(1/r): homogeneous of degree 1 for all parameters
    # (Arrow, Chenery, Minhas and Solow (1961), Review of Economics and Statistics 43;
    # from memory), so no homogeneity restriction is derived.
    y, r = pos("y r")
    a1, a2 = real("a1 a2")
    ces = y * (a1 * w1 ** r + a2 * w2 ** r) ** (1 / r)
    assert homogeneous_by_construction(ces, (w1, w2))
    assert eqs(derive_restrictions(ces, (w1, w2), (a1, a2, r)), "homogeneity") == []


def test_cobb_douglas_in_logs():
    w = pos("w1:4")
    y = sp.Symbol("y", positive=True)
    k, r = real("k r")
    a = real("a1:4")
    lnc = k + sum(a[i] * sp.log(w[i]) for i in range(N)) + r * sp.log(y)
    params = (k, *a, r)
    R = derive_restrictions(lnc, w, params, is_log=True, name="cost")
    # Cobb-Douglas cost is homogeneous of degree 1 in prices iff the price exponents sum
    # to one (e.g. Diewert (1971), Journal of Political Economy 79; from memory).
    assert same_span([x.equation for x in R], [sp.Eq(sum(a), 1)], params)
    assert eqs(R, "symmetry") == []
    # and the same from the level form
    R2 = derive_restrictions(sp.exp(lnc), w, params)
    assert same_span([x.equation for x in R2], [sp.Eq(sum(a), 1)], params)


def test_indirect_utility_degree_zero():
    p1, p2, m = pos("p1 p2 m")
    a1, a2, c = real("a1 a2 c")
    # Cobb-Douglas indirect utility v = m^c p1^-a1 p2^-a2 is homogeneous of degree 0 in
    # (p, m) iff the price exponents sum to the income exponent, a1 + a2 = c (Deaton and
    # Muellbauer (1980), Economics and Consumer Behavior, Cambridge UP; from memory).
    v = sp.exp(c * sp.log(m) - a1 * sp.log(p1) - a2 * sp.log(p2))
    R = derive_restrictions(v, (p1, p2, m), (a1, a2, c), degree=0, name="indirect utility")
    assert same_span([x.equation for x in R], [sp.Eq(a1 + a2, c)], (a1, a2, c))


# --------------------------------------------------------------------------------------
# bad input
# --------------------------------------------------------------------------------------
def test_price_not_in_expression():
    w1, w2, w3 = pos("w1 w2 w3")
    a1, a2 = real("a1 a2")
    with pytest.raises(DualityError, match="w3"):
        derive_restrictions(w1 ** a1 * w2 ** a2, (w1, w2, w3), (a1, a2))


def test_unknown_parameter_in_values(translog):
    vals = {s.name: 0.0 for s in translog["params"]}
    vals["a9"] = 1.0
    with pytest.raises(DualityError, match="a9"):
        check_values(translog["R"], vals)


def test_missing_value_named(translog):
    vals = {s.name: 0.0 for s in translog["params"] if s.name != "a3"}
    with pytest.raises(DualityError, match="a3"):
        check_values(translog["R"], vals)


def test_parameter_not_in_expression_and_price_parameter_clash():
    w1, w2 = pos("w1 w2")
    a1, a2, z = real("a1 a2 z")
    with pytest.raises(DualityError, match="z"):
        derive_restrictions(w1 ** a1 * w2 ** a2, (w1, w2), (a1, a2, z))
    with pytest.raises(DualityError, match="w1"):
        derive_restrictions(w1 ** a1 * w2 ** a2, (w1, w2), (a1, a2, w1))


def test_inconsistent_restrictions_rejected_by_impose():
    a1, a2 = real("a1 a2")
    bad = [Restriction("homogeneity", sp.Eq(a1 + a2, 1), "x"),
           Restriction("homogeneity", sp.Eq(a1 + a2, 2), "y")]
    with pytest.raises(DualityError, match="inconsistent"):
        impose(a1 + a2, bad, (a1, a2))


def test_share_count_mismatch():
    p1, p2 = pos("p1 p2")
    a1, a2 = real("a1 a2")
    with pytest.raises(DualityError, match="shares"):
        derive_share_restrictions([a1 + a2 * sp.log(p1 / p2)], (p1, p2), (a1, a2))

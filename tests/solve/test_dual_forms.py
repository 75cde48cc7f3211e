"""The dual-side catalogue (:mod:`duality.solve.dual_forms`): each builder gives the published
formula, reduces to the textbook closed form it nests, and names its parameters as documented.

Independent oracles: the published formulas written out again here in numpy, and the primal
catalogue's Cobb–Douglas and Leontief cost functions (themselves checked against Varian in
``test_catalogue.py``).
"""
from __future__ import annotations

import math

import numpy as np
import pytest
import sympy as sp

import duality as dy
from duality.errors import ModelError
from duality.solve import dual_forms


def _values(model, **vals):
    """Substitute named parameter values and evaluate at named arguments."""
    sym = {p.name: p.symbol for p in model.params}
    args = {s.name: s for s in model.expr.free_symbols}
    sub = {sym[k] if k in sym else args[k]: v for k, v in vals.items()}
    return float(model.expr.xreplace(sub))


def _random_symmetric(rng, n, scale):
    G = rng.normal(0.0, scale, (n, n))
    return (G + G.T) / 2


# -- the formulas as published ------------------------------------------------------------------
@pytest.mark.parametrize("n", [2, 3, 4])
def test_translog_is_the_published_formula(n, rng):
    # ln c = a0 + Σ a_i ln w_i + ½ ΣΣ g_ij ln w_i ln w_j + ay ln y + ½ gyy (ln y)²
    #        + Σ g_iy ln w_i ln y
    # (Christensen, Jorgenson and Lau, Review of Economics and Statistics 55 (1973); from memory)
    model = dy.translog_cost(n)
    for _ in range(3):
        a0, ay, gyy = rng.normal(0, 0.5, 3)
        a, gy = rng.normal(0, 0.5, n), rng.normal(0, 0.2, n)
        G = _random_symmetric(rng, n, 0.2)
        w, y = np.exp(rng.uniform(-1, 1, n)), math.exp(rng.uniform(-1, 1))
        lw, ly = np.log(w), math.log(y)
        want = math.exp(a0 + a @ lw + 0.5 * lw @ G @ lw + ay * ly + 0.5 * gyy * ly ** 2
                        + (gy @ lw) * ly)
        vals = {"a0": a0, "ay": ay, "gyy": gyy, "y": y}
        for i in range(n):
            vals[f"a{i + 1}"], vals[f"g{i + 1}y"], vals[f"w{i + 1}"] = a[i], gy[i], w[i]
            for j in range(i, n):
                vals[f"g{i + 1}{j + 1}"] = G[i, j]
        assert _values(model, **vals) == pytest.approx(want, rel=1e-12)


@pytest.mark.parametrize("n", [2, 3])
def test_generalized_leontief_is_the_published_formula(n, rng):
    # c = y ΣΣ b_ij (w_i w_j)^½ with b_ij = b_ji (Diewert, Journal of Political Economy 79
    # (1971); from memory)
    model = dy.generalized_leontief_cost(n)
    B = np.abs(_random_symmetric(rng, n, 1.0))
    w, y = np.exp(rng.uniform(-1, 1, n)), 1.7
    want = y * float(np.sqrt(w) @ B @ np.sqrt(w))
    vals = {"y": y, **{f"w{i + 1}": w[i] for i in range(n)},
            **{f"b{i + 1}{j + 1}": B[i, j] for i in range(n) for j in range(i, n)}}
    assert _values(model, **vals) == pytest.approx(want, rel=1e-12)


@pytest.mark.parametrize("n", [2, 3])
def test_aids_is_the_published_formula(n, rng):
    # ln e = ln a(p) + u b(p), ln a = a0 + Σ a_k ln p_k + ½ ΣΣ g_kj ln p_k ln p_j,
    # b = b0 Π p_k^{b_k} (Deaton and Muellbauer, American Economic Review 70 (1980), the
    # cost function of the Almost Ideal system; from memory)
    model = dy.aids_expenditure(n)
    a0, b0 = 0.3, 0.8
    a, b = rng.uniform(0.1, 0.5, n), rng.normal(0, 0.1, n)
    G = _random_symmetric(rng, n, 0.1)
    p, u = np.exp(rng.uniform(-1, 1, n)), 1.3
    lp = np.log(p)
    want = math.exp(a0 + a @ lp + 0.5 * lp @ G @ lp + u * b0 * np.prod(p ** b))
    vals = {"a0": a0, "b0": b0, "u": u, **{f"p{i + 1}": p[i] for i in range(n)},
            **{f"a{i + 1}": a[i] for i in range(n)}, **{f"b{i + 1}": b[i] for i in range(n)},
            **{f"g{i + 1}{j + 1}": G[i, j] for i in range(n) for j in range(i, n)}}
    assert _values(model, **vals) == pytest.approx(want, rel=1e-12)


# -- the closed forms each flexible form nests -------------------------------------------------
def test_translog_without_second_order_terms_is_the_cobb_douglas_cost_function():
    # y = x1^α x2^β has c = K w1^{α/s} w2^{β/s} y^{1/s}, s = α + β,
    # K = (α/β)^{β/s} + (α/β)^{-α/s} (Varian, Microeconomic Analysis, 3rd ed. (1992), ch. 4,
    # the Cobb–Douglas cost function; from memory): a translog with every g = 0
    al, be = 0.3, 0.5
    s = al + be
    K = (al / be) ** (be / s) + (al / be) ** (-al / s)
    zero = {k: 0.0 for k in ("g11", "g12", "g22", "gyy", "g1y", "g2y")}
    tl = dy.cost(dy.translog_cost(2, params={"a0": math.log(K), "a1": al / s, "a2": be / s,
                                              "ay": 1 / s, **zero}))
    cd = dy.cost(dy.technology("x1^0.3*x2^0.5", ["x1", "x2"]))
    for w1, w2, y in [(1.0, 1.0, 1.0), (0.7, 2.3, 1.9), (3.1, 0.4, 0.25)]:
        want = K * w1 ** (al / s) * w2 ** (be / s) * y ** (1 / s)
        assert tl(w1=w1, w2=w2, y=y) == pytest.approx(want, rel=1e-12)
        assert cd(w1=w1, w2=w2, y=y) == pytest.approx(want, rel=1e-12)
        for q in ("x1", "x2"):
            assert tl.demands[q](w1=w1, w2=w2, y=y) == pytest.approx(
                cd.demands[q](w1=w1, w2=w2, y=y), rel=1e-12)


def test_generalized_leontief_without_cross_terms_is_the_fixed_proportions_cost():
    # b_ij = 0 for i != j: c = y Σ b_ii w_i, the cost function of y = min(x_i / b_ii)
    # (Diewert 1971, from memory; Leontief cost c = y(a1 w1 + a2 w2): Varian 1992, ch. 4,
    # from memory)
    gl = dy.cost(dy.generalized_leontief_cost(2, params={"b11": 2.0, "b12": 0.0, "b22": 3.0}))
    le = dy.cost(dy.technology("min(x1/2, x2/3)", ["x1", "x2"]))
    for w1, w2, y in [(1.0, 1.0, 1.0), (0.7, 2.3, 1.9)]:
        assert gl(w1=w1, w2=w2, y=y) == pytest.approx(y * (2 * w1 + 3 * w2), rel=1e-13)
        assert le(w1=w1, w2=w2, y=y) == pytest.approx(y * (2 * w1 + 3 * w2), rel=1e-13)
        assert gl.demands["x1"](w1=w1, w2=w2, y=y) == pytest.approx(2 * y, rel=1e-13)
        assert gl.demands["x2"](w1=w1, w2=w2, y=y) == pytest.approx(3 * y, rel=1e-13)


def test_generalized_leontief_demands_are_diewerts(rng):
    # x_i = y Σ_j b_ij (w_j / w_i)^½ (Diewert 1971, from memory)
    B = np.array([[1.0, 0.4, 0.2], [0.4, 0.8, 0.3], [0.2, 0.3, 2.0]])
    params = {f"b{i + 1}{j + 1}": B[i, j] for i in range(3) for j in range(i, 3)}
    c = dy.cost(dy.generalized_leontief_cost(3, params=params))
    w, y = np.exp(rng.uniform(-1, 1, 3)), 2.2
    pt = {"w1": w[0], "w2": w[1], "w3": w[2], "y": y}
    for i in range(3):
        want = y * float(B[i] @ np.sqrt(w / w[i]))
        assert c.demands[f"x{i + 1}"](**pt) == pytest.approx(want, rel=1e-12)


def test_aids_without_price_terms_in_b_and_g_has_cobb_douglas_shares():
    # with every b_k = 0 and g = 0, e = exp(a0 + b0 u) Π p_k^{a_k}: Cobb–Douglas preferences,
    # budget shares a_k (Deaton and Muellbauer 1980, from memory; Cobb–Douglas demand
    # x_i = a_i m / p_i: Varian 1992, ch. 7, from memory)
    vals = dict(a0=0.2, a1=0.35, a2=0.65, g11=0.0, g12=0.0, g22=0.0, b0=1.5, b1=0.0, b2=0.0)
    model = dy.aids_expenditure(2, params=vals)
    e = dy.expenditure(model)
    for p1, p2, u in [(1.0, 1.0, 0.5), (2.5, 0.4, 1.7)]:
        spend = e(p1=p1, p2=p2, u=u)
        assert spend == pytest.approx(math.exp(0.2 + 1.5 * u) * p1 ** 0.35 * p2 ** 0.65,
                                      rel=1e-12)
        assert p1 * e.demands["x1"](p1=p1, p2=p2, u=u) / spend == pytest.approx(0.35, rel=1e-12)
    shares = dy.aids_share_equations(model)
    sym = {p.name: p.symbol for p in model.params}
    fixed = {sym[k]: v for k, v in vals.items()}
    for i, want in enumerate((0.35, 0.65)):
        assert float(shares[i].xreplace(fixed)) == pytest.approx(want, abs=1e-15)


# -- the AIDS share equations ---------------------------------------------------------------------
AIDS = dict(a0=0.5, a1=0.3, a2=0.4, a3=0.3, g11=0.05, g12=-0.02, g13=-0.03, g22=0.04,
            g23=-0.02, g33=0.05, b0=1.0, b1=0.1, b2=-0.05, b3=-0.05)


def _gmat(vals, n):
    return np.array([[vals[f"g{min(i, j) + 1}{max(i, j) + 1}"] for j in range(n)]
                     for i in range(n)])


def test_aids_share_equations_are_deaton_muellbauer(rng):
    # w_i = a_i + Σ_j g_ij ln p_j + b_i ln(m / P), ln P = ln a(p) (exact) or Stone's
    # ln P* = Σ_k w_k ln p_k (Deaton and Muellbauer 1980, the share equations and their
    # linear approximation; from memory)
    model = dy.aids_expenditure(3, params=AIDS)
    sym = {p.name: p.symbol for p in model.params}
    fixed = {sym[k]: v for k, v in AIDS.items()}
    exact = [e.xreplace(fixed) for e in dy.aids_share_equations(model)]
    stone = [e.xreplace(fixed) for e in
             dy.aids_share_equations(model, index="stone", observed=["sf", "sr", "sc"])]
    a = np.array([AIDS[f"a{i}"] for i in (1, 2, 3)])
    b = np.array([AIDS[f"b{i}"] for i in (1, 2, 3)])
    G = _gmat(AIDS, 3)
    p, m = np.exp(rng.uniform(-0.5, 0.5, 3)), 4.0
    s_obs = np.array([0.2, 0.5, 0.3])
    lp = np.log(p)
    lna = AIDS["a0"] + a @ lp + 0.5 * lp @ G @ lp
    args = {sp.Symbol(f"p{i + 1}", positive=True): p[i] for i in range(3)}
    args[sp.Symbol("m", positive=True)] = m
    obs = {sp.Symbol(n, real=True): v for n, v in zip(["sf", "sr", "sc"], s_obs)}
    for i in range(3):
        want_exact = a[i] + G[i] @ lp + b[i] * (math.log(m) - lna)
        want_stone = a[i] + G[i] @ lp + b[i] * (math.log(m) - s_obs @ lp)
        assert float(exact[i].xreplace(args)) == pytest.approx(want_exact, rel=1e-12)
        assert float(stone[i].xreplace({**args, **obs})) == pytest.approx(want_stone, rel=1e-12)
    # adding-up (Σa = 1, Σb = 0, columns of g sum to zero): the shares sum to one
    total = float(sum(exact).xreplace(args))
    assert total == pytest.approx(1.0, rel=1e-12)


@pytest.mark.parametrize("call, message", [
    (lambda: dy.aids_share_equations(dy.translog_cost(2)), "aids_expenditure()"),
    (lambda: dy.aids_share_equations(dy.aids_expenditure(2), index="laspeyres"),
     "index 'laspeyres' is not one of exact, stone"),
    (lambda: dy.aids_share_equations(dy.aids_expenditure(3), index="stone",
                                     observed=["s1", "s2"]), "3 goods but 2 observed"),
    (lambda: dy.generalized_leontief_cost(["w1"]), "at least two prices"),
    (lambda: dy.aids_expenditure(2, params={"g21": 0.1}), "unknown parameter(s) g21"),
])
def test_bad_calls_are_named(call, message):
    with pytest.raises(ModelError) as err:
        call()
    assert message in str(err.value)


# -- naming scheme and the catalogue table ----------------------------------------------------
@pytest.mark.parametrize("n", [2, 3, 5])
def test_parameter_names_follow_the_scheme(n):
    # symmetric second-order terms are one parameter each (i <= j): n(n+1)/2 of them
    idx = [str(i + 1) for i in range(n)]
    second = [f"g{i}{j}" for k, i in enumerate(idx) for j in idx[k:]]
    tl = {p.name for p in dy.translog_cost(n).params}
    assert tl == ({"a0", "ay", "gyy"} | {f"a{i}" for i in idx} | set(second)
                  | {f"g{i}y" for i in idx})
    gl = {p.name for p in dy.generalized_leontief_cost(n).params}
    assert gl == {"b" + s[1:] for s in second}
    aids = {p.name for p in dy.aids_expenditure(n).params}
    assert aids == ({"a0", "b0"} | {f"a{i}" for i in idx} | {f"b{i}" for i in idx}
                    | set(second))
    assert len(second) == n * (n + 1) // 2


def test_parameters_not_given_stay_free():
    model = dy.translog_cost(2, params={"a0": 0.1, "a1": 0.4})
    values = {p.name: p.value for p in model.params}
    assert values["a0"] == 0.1 and values["a1"] == 0.4
    assert values["g12"] is None and values["ay"] is None


def test_named_prices_give_named_quantities():
    model = dy.translog_cost(["w_lab", "w_cap"], output="q")
    assert [str(s) for s in model.prices] == ["w_lab", "w_cap"]
    assert [str(s) for s in model.quantities] == ["lab", "cap"]
    assert str(model.level) == "q"
    aids = dy.aids_expenditure(["p_food", "p_rent"], goods=["food", "rent"], utility="U",
                               income="y")
    assert [str(s) for s in aids.quantities] == ["food", "rent"]
    assert (str(aids.level), str(aids.income)) == ("U", "y")


@pytest.mark.parametrize("key, author", [("translog_cost", "Christensen"),
                                         ("generalized_leontief_cost", "Diewert"),
                                         ("aids_expenditure", "Deaton")])
def test_derived_functions_carry_the_published_source(key, author):
    entry = dy.DUAL_CATALOGUE[key]
    assert author in entry["source"] and entry["title"]
    model = dual_forms.get_form(key).build(2)
    d = dy.cost(model) if model.is_technology else dy.expenditure(model)
    assert d.route == "catalogue" and d.source == entry["source"]
    assert dual_forms.DUAL_CATALOGUE is dy.DUAL_CATALOGUE


def test_aids_indirect_utility_is_the_published_closed_form():
    # Deaton and Muellbauer (1980), from memory: ln e = ln a(p) + u b0 prod p_k^b_k, so
    # v(p, m) = (ln m - ln a(p)) / (b0 prod p_k^b_k); worked at one point by hand
    vals = {"a0": 0.5, "a1": 0.4, "a2": 0.6, "g11": 0.1, "g12": -0.1, "g22": 0.1,
            "b0": 2.0, "b1": 0.2, "b2": -0.2}
    m = dual_forms.aids_expenditure(2, params=vals)
    v = dy.indirect_utility(m)
    assert v.route == "catalogue"
    p1, p2, inc = 2.0, 3.0, 10.0
    l1, l2 = math.log(p1), math.log(p2)
    lna = 0.5 + 0.4 * l1 + 0.6 * l2 + 0.5 * (0.1 * l1 * l1 - 0.2 * l1 * l2 + 0.1 * l2 * l2)
    want = (math.log(inc) - lna) / (2.0 * p1 ** 0.2 * p2 ** -0.2)
    assert v(p1=p1, p2=p2, m=inc) == pytest.approx(want, rel=1e-12)
    assert dy.expenditure(m)(p1=p1, p2=p2, u=want) == pytest.approx(inc, rel=1e-12)

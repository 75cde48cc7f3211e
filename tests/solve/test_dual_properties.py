"""Property tests: duality identities at random parameter points of the dual-side catalogue.

``STRATEGIES`` maps every key of :data:`duality.DUAL_CATALOGUE` to a hypothesis strategy of
cases ``(form, n, params, point)``; the meta-test below fails until a new dual-side form gets
one.  Parameters are drawn inside the theory restrictions of each form (homogeneity of degree
one in prices; for the Almost Ideal system also adding-up; symmetry is built into the
builders), so the identities below must hold at every draw:

* the given function is homogeneous of degree one in prices, its demands of degree zero;
* Shephard's lemma: the demands are the price derivatives of the given function;
* adding-up: the shares w_i x_i / c sum to one;
* symmetry: ∂x_i/∂w_j = ∂x_j/∂w_i (checked by differences of the demand functions);
* each form's demands or shares are its published formula;
* Almost Ideal: Roy's identity gives Deaton and Muellbauer's budget shares, which sum to
  one, and e(p, v(p, m)) = m.

Homogeneity, adding-up and symmetry are also checked symbolically (the difference simplifies
to zero under the published restrictions, and homogeneity fails without them).

Duality theory: Varian, Microeconomic Analysis, 3rd ed. (1992), ch. 5–8; Mas-Colell,
Whinston & Green (1995), §3.G and §5.C (from memory).  Each model is derived once with its
parameters free and evaluated with the drawn values as keywords, so the examples are cheap.
"""
from __future__ import annotations

import math
from functools import lru_cache

import numpy as np
import pytest
import sympy as sp
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import duality as dy
from duality.solve.dual_forms import get_form

REL = 1e-10           # identities that hold exactly up to rounding
FD_REL = 1e-6         # identities checked with central finite differences
SETTINGS = settings(max_examples=25, deadline=None,
                    suppress_health_check=[HealthCheck.too_slow])
SIZES = st.sampled_from([2, 3])
#: symbolic work allowed for the one inversion per size (AIDS indirect utility); generous so
#: that a busy machine still finds the closed form
BUDGET = 60


def _floats(lo, hi):
    return st.floats(lo, hi, allow_nan=False, allow_infinity=False)


def _vector(draw, n, lo, hi):
    return np.array(draw(st.lists(_floats(lo, hi), min_size=n, max_size=n)))


def _weights(draw, n):
    """Positive first-order coefficients summing to one."""
    w = _vector(draw, n, 0.1, 1.0)
    return w / w.sum()


def _summing_to_zero(draw, n, scale):
    v = _vector(draw, n - 1, -scale, scale)
    return np.append(v, -v.sum())


def _symmetric_zero_rows(draw, n, scale):
    """Symmetric second-order coefficients whose rows (and so columns) sum to zero."""
    G = np.zeros((n, n))
    for i in range(n):
        for j in range(i + 1, n):
            G[i, j] = G[j, i] = draw(_floats(-scale, scale))
    G[np.diag_indices(n)] = -G.sum(axis=1)
    return G


def _upper(G, prefix):
    n = len(G)
    return {f"{prefix}{i + 1}{j + 1}": float(G[i, j]) for i in range(n) for j in range(i, n)}


def _named(letter, v):
    return {f"{letter}{i + 1}": float(x) for i, x in enumerate(v)}


# =========================================================================================
# Strategies, one per dual-side catalogue form
# =========================================================================================
@st.composite
def translog_cases(draw):
    n = draw(SIZES)
    params = {"a0": draw(_floats(-1.0, 1.0)), "ay": draw(_floats(0.5, 1.5)),
              "gyy": draw(_floats(-0.1, 0.1)), **_named("a", _weights(draw, n)),
              **_upper(_symmetric_zero_rows(draw, n, 0.1), "g")}
    params.update({f"g{i + 1}y": float(v)
                   for i, v in enumerate(_summing_to_zero(draw, n, 0.05))})
    point = {**_named("w", np.exp(_vector(draw, n, -1.0, 1.0))),
             "y": math.exp(draw(_floats(-1.0, 1.0)))}
    return "translog_cost", n, params, point


@st.composite
def generalized_leontief_cases(draw):
    n = draw(SIZES)
    B = np.zeros((n, n))
    for i in range(n):
        for j in range(i, n):
            B[i, j] = B[j, i] = draw(_floats(0.05, 2.0))
    point = {**_named("w", np.exp(_vector(draw, n, -1.0, 1.0))),
             "y": math.exp(draw(_floats(-1.0, 1.0)))}
    return "generalized_leontief_cost", n, _upper(B, "b"), point


@st.composite
def aids_cases(draw):
    n = draw(SIZES)
    params = {"a0": draw(_floats(0.0, 1.0)), "b0": draw(_floats(0.5, 2.0)),
              **_named("a", _weights(draw, n)), **_named("b", _summing_to_zero(draw, n, 0.1)),
              **_upper(_symmetric_zero_rows(draw, n, 0.05), "g")}
    point = {**_named("p", np.exp(_vector(draw, n, -0.5, 0.5))),
             "u": draw(_floats(0.1, 2.0)), "m": math.exp(draw(_floats(0.5, 2.5)))}
    return "aids_expenditure", n, params, point


STRATEGIES = {
    "translog_cost": translog_cases(),
    "generalized_leontief_cost": generalized_leontief_cases(),
    "aids_expenditure": aids_cases(),
}
FORMS = sorted(STRATEGIES)


#: forms whose identities are tested in test_dual_form_properties.py (every form there, with
#: its own meta-test) and against their papers in test_quaids.py and test_diewert_wales.py
ELSEWHERE = {"quaids_expenditure", "normalized_quadratic_cost",
             "symmetric_generalized_mcfadden_cost"}


def test_every_dual_side_form_has_a_strategy():
    # a new form fails here until it has a strategy in STRATEGIES or is named in ELSEWHERE
    assert set(STRATEGIES) | ELSEWHERE == set(dy.DUAL_CATALOGUE)
    assert not set(STRATEGIES) & ELSEWHERE


# =========================================================================================
# Derivation (once per form and size, parameters free) and helpers
# =========================================================================================
@lru_cache(maxsize=None)
def model_of(form: str, n: int) -> dy.Model:
    return get_form(form).build(n)


@lru_cache(maxsize=None)
def spending(form: str, n: int):
    """The given cost or expenditure function, and its demands in quantity order."""
    model = model_of(form, n)
    d = dy.cost(model) if model.is_technology else dy.expenditure(model)
    return d, [d.demands[str(q)] for q in model.quantities]


@lru_cache(maxsize=None)
def indirect(n: int):
    v = dy.indirect_utility(model_of("aids_expenditure", n), budget=BUDGET)
    return v, [v.demands[f"x{i + 1}"] for i in range(n)]


def _spending_point(case):
    form, n, params, point = case
    model = model_of(form, n)
    names = [str(p) for p in model.prices]
    level = str(model.level)
    return {k: point[k] for k in names + [level]}, names, params


def call(fn, pt, params):
    """``fn`` at the point with the drawn values of the parameters it depends on (a demand
    need not depend on every parameter of its cost function)."""
    own = {str(s) for s in fn.free_params}
    return fn(**pt, **{k: v for k, v in params.items() if k in own})


def central_diff(fn, pt, name, params, rel=1e-5):
    h = rel * pt[name]
    return (call(fn, {**pt, name: pt[name] + h}, params)
            - call(fn, {**pt, name: pt[name] - h}, params)) / (2 * h)


def _gmat(params, n, prefix="g"):
    return np.array([[params[f"{prefix}{min(i, j) + 1}{max(i, j) + 1}"] for j in range(n)]
                     for i in range(n)])


# =========================================================================================
# Every form: the given cost or expenditure function and its Shephard demands
# =========================================================================================
@pytest.mark.parametrize("form", FORMS)
def test_catalogue_route_with_source(form):
    d, _ = spending(form, 2)
    assert d.route == "catalogue" and d.source == dy.DUAL_CATALOGUE[form]["source"]


@pytest.mark.parametrize("form", FORMS)
def test_homogeneous_of_degree_one_in_prices(form):
    @SETTINGS
    @given(STRATEGIES[form], _floats(0.1, 10.0))
    def run(case, t):
        d, demands = spending(*case[:2])
        pt, prices, params = _spending_point(case)
        scaled = {**pt, **{w: t * pt[w] for w in prices}}
        value = call(d, pt, params)
        assert call(d, scaled, params) == pytest.approx(t * value, rel=REL)
        for x in demands:          # demands homogeneous of degree zero
            assert call(x, scaled, params) == pytest.approx(call(x, pt, params), rel=REL,
                                                          abs=REL * value / pt[prices[0]])
    run()


@pytest.mark.parametrize("form", FORMS)
def test_shephard_lemma(form):
    @SETTINGS
    @given(STRATEGIES[form])
    def run(case):
        d, demands = spending(*case[:2])
        pt, prices, params = _spending_point(case)
        value = call(d, pt, params)
        for x, w in zip(demands, prices):
            fd = central_diff(d, pt, w, params)
            assert abs(fd - call(x, pt, params)) <= FD_REL * value / pt[w]
    run()


@pytest.mark.parametrize("form", FORMS)
def test_shares_sum_to_one(form):
    @SETTINGS
    @given(STRATEGIES[form])
    def run(case):
        d, demands = spending(*case[:2])
        pt, prices, params = _spending_point(case)
        value = call(d, pt, params)
        spent = sum(pt[w] * call(x, pt, params) for x, w in zip(demands, prices))
        assert spent / value == pytest.approx(1.0, rel=REL)
    run()


@pytest.mark.parametrize("form", FORMS)
def test_cross_price_derivatives_are_symmetric(form):
    @SETTINGS
    @given(STRATEGIES[form])
    def run(case):
        d, demands = spending(*case[:2])
        pt, prices, params = _spending_point(case)
        value = call(d, pt, params)
        n = len(prices)
        for i in range(n):
            for j in range(i + 1, n):
                dij = central_diff(demands[i], pt, prices[j], params)
                dji = central_diff(demands[j], pt, prices[i], params)
                scale = value / (pt[prices[i]] * pt[prices[j]])
                assert abs(dij - dji) <= FD_REL * scale, (i, j, dij, dji)
    run()


# =========================================================================================
# Each form's published demand system
# =========================================================================================
@SETTINGS
@given(translog_cases())
def test_translog_shares_are_christensen_jorgenson_lau(case):
    # s_i = a_i + Σ_j g_ij ln w_j + g_iy ln y (Christensen, Jorgenson and Lau, Review of
    # Economics and Statistics 55 (1973); from memory)
    _, n, params, _ = case
    d, demands = spending("translog_cost", n)
    pt, prices, _ = _spending_point(case)
    lw = np.log([pt[w] for w in prices])
    G = _gmat(params, n)
    value = call(d, pt, params)
    for i in range(n):
        want = params[f"a{i + 1}"] + G[i] @ lw + params[f"g{i + 1}y"] * math.log(pt["y"])
        got = pt[prices[i]] * call(demands[i], pt, params) / value
        assert got == pytest.approx(want, rel=REL, abs=REL)


@SETTINGS
@given(generalized_leontief_cases())
def test_generalized_leontief_demands_are_diewerts(case):
    # x_i = y Σ_j b_ij (w_j / w_i)^½ (Diewert, Journal of Political Economy 79 (1971);
    # from memory)
    _, n, params, _ = case
    _, demands = spending("generalized_leontief_cost", n)
    pt, prices, _ = _spending_point(case)
    w = np.array([pt[p] for p in prices])
    B = _gmat(params, n, "b")
    for i in range(n):
        want = pt["y"] * float(B[i] @ np.sqrt(w / w[i]))
        assert call(demands[i], pt, params) == pytest.approx(want, rel=REL)


@SETTINGS
@given(aids_cases())
def test_aids_marshallian_shares_are_deaton_muellbauer_and_add_up(case):
    # w_i = a_i + Σ_j g_ij ln p_j + b_i ln(m / a(p)), ln a(p) = a0 + Σ a_k ln p_k
    # + ½ ΣΣ g_kj ln p_k ln p_j (Deaton and Muellbauer, American Economic Review 70 (1980),
    # the budget-share equations; from memory); adding-up: Σ w_i = 1
    _, n, params, point = case
    v, marshallian = indirect(n)
    prices = [f"p{i + 1}" for i in range(n)]
    ipt = {**{p: point[p] for p in prices}, "m": point["m"]}
    lp = np.log([point[p] for p in prices])
    a = np.array([params[f"a{i + 1}"] for i in range(n)])
    G = _gmat(params, n)
    lna = params["a0"] + a @ lp + 0.5 * lp @ G @ lp
    shares = [point[p] * call(x, ipt, params) / point["m"]
              for x, p in zip(marshallian, prices)]
    for i in range(n):
        want = a[i] + G[i] @ lp + params[f"b{i + 1}"] * (math.log(point["m"]) - lna)
        assert shares[i] == pytest.approx(want, rel=REL, abs=REL)
    assert sum(shares) == pytest.approx(1.0, rel=REL)
    # e(p, v(p, m)) = m (Varian 1992, ch. 7; from memory)
    e, _ = spending("aids_expenditure", n)
    u = call(v, ipt, params)
    back = call(e, {**{p: point[p] for p in prices}, "u": u}, params)
    assert back == pytest.approx(point["m"], rel=REL)


# =========================================================================================
# The same identities symbolically: the difference simplifies to zero under the published
# restrictions (and homogeneity fails without them where the form needs them)
# =========================================================================================
def published_restrictions(form: str, n: int, sym: dict) -> dict:
    """Homogeneity (and for AIDS adding-up) solved for the last coefficients: Σ a_i = 1,
    rows of g summing to zero, Σ g_iy = 0 (Christensen, Jorgenson and Lau 1973); Σ a_i = 1,
    Σ b_i = 0, Σ_j g_ij = 0 (Deaton and Muellbauer 1980); none for the generalized Leontief
    form, homogeneous by construction (Diewert 1971); all from memory."""
    def g(i, j):
        return sym[f"g{min(i, j)}{max(i, j)}"]
    sub = {}
    if form in ("translog_cost", "aids_expenditure"):
        sub[sym[f"a{n}"]] = 1 - sum(sym[f"a{i}"] for i in range(1, n))
        for i in range(1, n + 1):
            sub[g(i, i)] = -sum(g(i, j) for j in range(1, n + 1) if j != i)
    if form == "translog_cost":
        sub[sym[f"g{n}y"]] = -sum(sym[f"g{i}y"] for i in range(1, n))
    if form == "aids_expenditure":
        sub[sym[f"b{n}"]] = -sum(sym[f"b{i}"] for i in range(1, n))
    return sub


def _vanishes(expr) -> bool:
    e = sp.expand(sp.expand_log(expr, force=True))
    return sp.simplify(sp.powsimp(sp.expand_power_base(e, force=True), force=True)) == 0


@pytest.mark.parametrize("n", [2, 3])
@pytest.mark.parametrize("form", FORMS)
def test_homogeneity_and_adding_up_symbolically(form, n):
    model = model_of(form, n)
    d, demands = spending(form, n)
    sym = {p.name: p.symbol for p in model.params}
    sub = published_restrictions(form, n, sym)
    t = sp.Symbol("t", positive=True)
    c = d.expr.xreplace(sub)
    scaled = c.xreplace({p: t * p for p in model.prices})
    assert _vanishes(sp.log(scaled) - sp.log(c) - sp.log(t))
    if sub:   # the restrictions matter: without them homogeneity fails
        raw = d.expr.xreplace({p: t * p for p in model.prices})
        assert not _vanishes(sp.log(raw) - sp.log(d.expr) - sp.log(t))
    spent = sum(p * x.expr.xreplace(sub) for p, x in zip(model.prices, demands))
    assert _vanishes(sp.expand(spent / c) - 1)


@pytest.mark.parametrize("form", FORMS)
def test_cross_price_derivatives_symmetric_symbolically(form):
    model = model_of(form, 3)
    _, demands = spending(form, 3)
    ps = model.prices
    for i in range(3):
        for j in range(i + 1, 3):
            diff = sp.diff(demands[i].expr, ps[j]) - sp.diff(demands[j].expr, ps[i])
            assert sp.simplify(diff) == 0

"""Property tests: duality identities at random valid parameter points, per catalogue form.

``STRATEGIES`` maps every catalogue form key to a hypothesis strategy of (model, point)
pairs over valid parameters.  A technology point holds input prices ``w1..wn`` and an
output ``y``; a preference point holds prices ``p1..pn``, an income ``m`` and a utility
level ``u`` (the utility of a drawn affordable bundle, so that every identity is evaluated
where the closed forms are valid, e.g. above subsistence for Stone–Geary and with a
positive numeraire for quasi-linear preferences).

The identities tested (Shephard's lemma, Roy's identity, homogeneity, adding-up, the
duality between e and v) are textbook duality theory: Varian, Microeconomic Analysis,
3rd ed. (1992), ch. 5–8; Mas-Colell, Whinston & Green (1995), §3.E–3.G (from memory).
"""
from __future__ import annotations

import math
from functools import lru_cache

import numpy as np
import pytest
import sympy as sp
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

import duality as dy

REL = 1e-8            # identities that hold exactly up to rounding
FD_REL = 1e-6         # identities checked with central finite differences
SETTINGS = settings(max_examples=25, deadline=None,
                    suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much])


def _floats(lo, hi):
    return st.floats(lo, hi, allow_nan=False, allow_infinity=False)


PRICE = _floats(0.2, 5.0)
LEVEL = _floats(0.2, 5.0)
EXPONENT = _floats(0.1, 0.9)


# =========================================================================================
# Model construction (cached: one build and one derivation per parameter draw)
# =========================================================================================
@lru_cache(maxsize=None)
def build(form: str, role: str, params: tuple, variant: str = "") -> dy.Model:
    """A model of catalogue form ``form``; ``params`` is a tuple of (name, value)."""
    pv = dict(params)
    n = int(pv.pop("n"))
    xs = sp.symbols(" ".join(f"x{i + 1}" for i in range(n)), seq=True)
    S = sp.Symbol
    if form == "cobb_douglas":
        expr = S("A") * sp.Mul(*[x ** S(f"a{i + 1}") for i, x in enumerate(xs)])
    elif form == "ces":
        expr = S("A") * sp.Add(*[S(f"d{i + 1}") * x ** S("r") for i, x in enumerate(xs)]) \
            ** (S("k") / S("r"))
    elif form == "nested_ces":  # two-level CES (Sato 1967): x1, x2 nested, x3 alone
        inner = (S("d1") * xs[0] ** S("r") + S("d2") * xs[1] ** S("r")) ** (S("s") / S("r"))
        expr = S("A") * (S("b1") * inner + S("b2") * xs[2] ** S("s")) ** (S("k") / S("s"))
    elif form == "leontief":
        expr = sp.Min(*[x / S(f"a{i + 1}") for i, x in enumerate(xs)])
    elif form == "linear":
        expr = sp.Add(*[S(f"a{i + 1}") * x for i, x in enumerate(xs)])
    elif form == "stone_geary":
        terms = [(x - S(f"g{i + 1}"), S(f"b{i + 1}")) for i, x in enumerate(xs)]
        expr = (sp.Add(*[b * sp.log(t) for t, b in terms]) if variant == "log"
                else sp.Mul(*[t ** b for t, b in terms]))
    elif form == "quasi_linear":
        expr = xs[0] + sp.Add(*[S(f"c{i + 1}") * sp.log(x) for i, x in enumerate(xs)
                                if i > 0])
    else:  # pragma: no cover - a new form needs a builder (and a strategy)
        raise KeyError(form)
    names = [str(x) for x in xs]
    make = dy.technology if role == "technology" else dy.preference
    return make(expr, names, params=pv)


@lru_cache(maxsize=None)
def duals(model: dy.Model) -> dict:
    if model.is_technology:
        c = dy.cost(model)
        return {"spend": c, "spend_demands": dict(c.demands)}
    e, v = dy.expenditure(model), dy.indirect_utility(model)
    return {"spend": e, "spend_demands": dict(e.demands), "v": v, "marsh": dict(v.demands)}


@lru_cache(maxsize=None)
def primal(model: dy.Model):
    """The user's own function, evaluated with numpy (no package derivation involved)."""
    return sp.lambdify(model.quantities, model.numeric_expr, modules="numpy")


def _params(prefix, values):
    return tuple((f"{prefix}{i + 1}", float(v)) for i, v in enumerate(values))


def _prices(letter, w):
    return {f"{letter}{i + 1}": float(v) for i, v in enumerate(w)}


# =========================================================================================
# Strategies, one per catalogue form
# =========================================================================================
@st.composite
def _role_point(draw, form, role, n, params, utility, variant="", bundle=None):
    """Draw prices and a level/income for a model; ``utility(x)`` is the primal in numpy."""
    model = build(form, role, (("n", n),) + params, variant)
    w = np.array(draw(st.lists(PRICE, min_size=n, max_size=n)))
    if role == "technology":
        point = {**_prices("w", w), "y": draw(LEVEL)}
        return model, point, w
    x0 = np.array(bundle if bundle is not None
                  else draw(st.lists(LEVEL, min_size=n, max_size=n)))
    point = {**_prices("p", w), "m": float(w @ x0), "u": float(utility(x0))}
    return model, point, w


def _roles(draw):
    return draw(st.sampled_from(["technology", "preference"]))


@st.composite
def cobb_douglas_cases(draw):
    n = draw(st.sampled_from([2, 3]))
    A = draw(_floats(0.5, 3.0))
    a = draw(st.lists(EXPONENT, min_size=n, max_size=n))
    params = (("A", A),) + _params("a", a)
    model, point, _ = draw(_role_point("cobb_douglas", _roles(draw), n, params,
                                       lambda x: A * np.prod(x ** np.array(a))))
    return model, point


@st.composite
def ces_cases(draw):
    n = draw(st.sampled_from([2, 3]))
    A = draw(_floats(0.5, 2.0))
    rho = draw(_floats(-3.0, 0.9).filter(lambda r: abs(r) >= 0.05))
    k = draw(_floats(0.5, 1.5))
    d = draw(st.lists(_floats(0.1, 1.0), min_size=n, max_size=n))
    params = (("A", A), ("r", rho), ("k", k)) + _params("d", d)
    model, point, _ = draw(_role_point(
        "ces", _roles(draw), n, params,
        lambda x: A * np.sum(np.array(d) * x ** rho) ** (k / rho)))
    return model, point


@st.composite
def nested_ces_cases(draw):
    A = draw(_floats(0.5, 2.0))
    r = draw(_floats(-3.0, 0.9).filter(lambda v: abs(v) >= 0.05))
    s_ = draw(_floats(-3.0, 0.9).filter(lambda v: abs(v) >= 0.05))
    k = draw(_floats(0.5, 1.5))
    d = draw(st.lists(_floats(0.1, 1.0), min_size=2, max_size=2))
    b = draw(st.lists(_floats(0.1, 1.0), min_size=2, max_size=2))
    params = ((("A", A), ("r", r), ("s", s_), ("k", k)) + _params("d", d)
              + _params("b", b))

    def f(x):
        inner = (d[0] * x[0] ** r + d[1] * x[1] ** r) ** (s_ / r)
        return A * (b[0] * inner + b[1] * x[2] ** s_) ** (k / s_)
    model, point, _ = draw(_role_point("nested_ces", _roles(draw), 3, params, f))
    return model, point


@st.composite
def leontief_cases(draw):
    n = draw(st.sampled_from([2, 3]))
    a = np.array(draw(st.lists(_floats(0.2, 5.0), min_size=n, max_size=n)))
    model, point, _ = draw(_role_point("leontief", _roles(draw), n, _params("a", a),
                                       lambda x: np.min(x / a)))
    return model, point


def _clear_winner(ratios, gap=1e-3):
    """The cheapest ratio beats the runner-up by a relative gap (no tie within FD steps)."""
    r = np.sort(np.asarray(ratios))
    return r[1] > r[0] * (1 + gap)


@st.composite
def linear_cases(draw):
    n = draw(st.sampled_from([2, 3]))
    a = np.array(draw(st.lists(_floats(0.2, 5.0), min_size=n, max_size=n)))
    model, point, w = draw(_role_point("linear", _roles(draw), n, _params("a", a),
                                       lambda x: a @ x))
    assume(_clear_winner(w / a))   # away from ties: the demand is a unique corner
    return model, point


@st.composite
def stone_geary_cases(draw):
    n = draw(st.sampled_from([2, 3]))
    variant = draw(st.sampled_from(["log", "product"]))
    b = np.array(draw(st.lists(_floats(0.1, 0.9), min_size=n, max_size=n)))
    # subsistence levels: zero or of a usable size (the package refuses numbers below
    # about 1e-301 in size, so subnormal draws count as zero)
    g = np.array(draw(st.lists(_floats(0.0, 3.0).map(lambda v: v if v > 1e-300 else 0.0),
                               min_size=n, max_size=n)))
    surplus = np.array(draw(st.lists(LEVEL, min_size=n, max_size=n)))

    def utility(x):
        s = b @ np.log(x - g)
        return s if variant == "log" else math.exp(s)
    model, point, _ = draw(_role_point("stone_geary", "preference", n,
                                       _params("b", b) + _params("g", g), utility,
                                       variant, bundle=g + surplus))
    return model, point


@st.composite
def quasi_linear_cases(draw):
    # one non-numeraire good: see test_catalogue.QL_BUG for two or more log terms
    c = draw(_floats(0.2, 5.0))
    p = np.array(draw(st.lists(PRICE, min_size=2, max_size=2)))
    model = build("quasi_linear", "preference", (("n", 2), ("c2", c)))
    # interior bundle: x2 at its optimal level c p1/p2 (MWG §3.E, from memory) and a
    # positive numeraire; m and u are then on the interior branch of v and e
    x1 = draw(LEVEL)
    x2 = c * p[0] / p[1]
    point = {**_prices("p", p), "m": float(p @ [x1, x2]),
             "u": float(draw(LEVEL) + c * math.log(x2))}
    return model, point


STRATEGIES = {
    "cobb_douglas": cobb_douglas_cases(),
    "ces": ces_cases(),
    "nested_ces": nested_ces_cases(),
    "leontief": leontief_cases(),
    "linear": linear_cases(),
    "stone_geary": stone_geary_cases(),
    "quasi_linear": quasi_linear_cases(),
}
FORMS = sorted(STRATEGIES)


def test_every_catalogue_form_has_a_strategy():
    assert set(STRATEGIES) == set(dy.CATALOGUE.forms)


# =========================================================================================
# Helpers
# =========================================================================================
def spending_point(model, point):
    names = [str(p) for p in model.prices]
    lvl = "y" if model.is_technology else "u"
    return {k: point[k] for k in names + [lvl]}, names, lvl


def income_point(model, point):
    names = [str(p) for p in model.prices]
    return {k: point[k] for k in names + ["m"]}, names


def qnames(model):
    return [str(q) for q in model.quantities]


def central_diff(fn, pt, name, rel=1e-5):
    h = rel * pt[name]
    return (fn(**{**pt, name: pt[name] + h}) - fn(**{**pt, name: pt[name] - h})) / (2 * h)


def rel_err(got, want, scale=None):
    scale = abs(want) if scale is None else scale
    return abs(got - want) / max(scale, 1e-300)


# =========================================================================================
# Spending side: cost (technology) and expenditure (preference)
# =========================================================================================
@pytest.mark.parametrize("form", FORMS)
def test_draws_are_recognised_as_their_form(form):
    @SETTINGS
    @given(STRATEGIES[form])
    def run(case):
        model, _ = case
        d = duals(model)["spend"]
        assert d.route == "catalogue"
        assert dy.CATALOGUE.forms[form].title in d.method
    run()


@pytest.mark.parametrize("form", FORMS)
def test_shephard_lemma(form):
    @SETTINGS
    @given(STRATEGIES[form])
    def run(case):
        model, point = case
        d = duals(model)
        pt, prices, _ = spending_point(model, point)
        S = d["spend"]
        value = S(**pt)
        for q, w in zip(qnames(model), prices):
            x = d["spend_demands"][q](**pt)
            fd = central_diff(S, pt, w)
            # scale: value/w bounds every w_i x_i, and keeps tiny corner demands meaningful
            assert abs(fd - x) <= FD_REL * (abs(x) + value / pt[w]), (q, fd, x)
    run()


@pytest.mark.parametrize("form", FORMS)
def test_spending_homogeneous_of_degree_one_in_prices(form):
    @SETTINGS
    @given(STRATEGIES[form], _floats(0.1, 10.0))
    def run(case, t):
        model, point = case
        d = duals(model)
        pt, prices, _ = spending_point(model, point)
        scaled = {**pt, **{w: t * pt[w] for w in prices}}
        S = d["spend"]
        assert rel_err(S(**scaled), t * S(**pt)) <= REL
        for q in qnames(model):       # demands homogeneous of degree zero
            x = d["spend_demands"][q]
            assert abs(x(**scaled) - x(**pt)) <= REL * (abs(x(**pt)) + S(**pt) / pt[prices[0]])
    run()


@pytest.mark.parametrize("form", FORMS)
def test_demands_reach_the_level(form):
    @SETTINGS
    @given(STRATEGIES[form])
    def run(case):
        model, point = case
        d = duals(model)
        pt, _, lvl = spending_point(model, point)
        x = [d["spend_demands"][q](**pt) for q in qnames(model)]
        got = float(primal(model)(*x))
        assert abs(got - pt[lvl]) <= REL * max(1.0, abs(pt[lvl]))
    run()


@pytest.mark.parametrize("form", FORMS)
def test_spending_equals_price_times_demand(form):
    @SETTINGS
    @given(STRATEGIES[form])
    def run(case):
        model, point = case
        d = duals(model)
        pt, prices, _ = spending_point(model, point)
        x = np.array([d["spend_demands"][q](**pt) for q in qnames(model)])
        w = np.array([pt[p] for p in prices])
        assert np.all(x >= 0)
        assert rel_err(w @ x, d["spend"](**pt)) <= REL
    run()


# =========================================================================================
# Preferences: e and v are inverse, Roy's identity, Walras' law, Marshall = Hicks at v
# =========================================================================================
def _preference(case):
    model, point = case
    assume(not model.is_technology)
    return model, point, duals(model)


@pytest.mark.parametrize("form", FORMS)
def test_expenditure_at_indirect_utility_is_income(form):
    @SETTINGS
    @given(STRATEGIES[form])
    def run(case):
        model, point, d = _preference(case)
        ipt, prices = income_point(model, point)
        u = d["v"](**ipt)
        e = d["spend"](**{k: ipt[k] for k in prices}, u=u)
        assert rel_err(e, ipt["m"]) <= REL
    run()


@pytest.mark.parametrize("form", FORMS)
def test_indirect_utility_at_expenditure_is_level(form):
    @SETTINGS
    @given(STRATEGIES[form])
    def run(case):
        model, point, d = _preference(case)
        spt, prices, _ = spending_point(model, point)
        m = d["spend"](**spt)
        v = d["v"](**{k: spt[k] for k in prices}, m=m)
        assert abs(v - spt["u"]) <= REL * max(1.0, abs(spt["u"]))
    run()


@pytest.mark.parametrize("form", FORMS)
def test_roy_identity(form):
    @SETTINGS
    @given(STRATEGIES[form])
    def run(case):
        model, point, d = _preference(case)
        ipt, prices = income_point(model, point)
        V = d["v"]
        dvdm = central_diff(V, ipt, "m")
        assert dvdm > 0
        for q, p in zip(qnames(model), prices):
            x = d["marsh"][q](**ipt)
            roy = -central_diff(V, ipt, p) / dvdm
            assert abs(roy - x) <= FD_REL * (abs(x) + ipt["m"] / ipt[p]), (q, roy, x)
    run()


@pytest.mark.parametrize("form", FORMS)
def test_walras_law(form):
    @SETTINGS
    @given(STRATEGIES[form])
    def run(case):
        model, point, d = _preference(case)
        ipt, prices = income_point(model, point)
        x = np.array([d["marsh"][q](**ipt) for q in qnames(model)])
        p = np.array([ipt[k] for k in prices])
        assert np.all(x >= 0)
        assert rel_err(p @ x, ipt["m"]) <= REL
    run()


@pytest.mark.parametrize("form", FORMS)
def test_marshallian_equals_hicksian_at_indirect_utility(form):
    @SETTINGS
    @given(STRATEGIES[form])
    def run(case):
        model, point, d = _preference(case)
        ipt, prices = income_point(model, point)
        u = d["v"](**ipt)
        hpt = {**{k: ipt[k] for k in prices}, "u": u}
        for q, p in zip(qnames(model), prices):
            x = d["marsh"][q](**ipt)
            h = d["spend_demands"][q](**hpt)
            assert abs(x - h) <= REL * (abs(x) + ipt["m"] / ipt[p]), (q, x, h)
    run()


# =========================================================================================
# Profit under decreasing returns: Hotelling's lemma and homogeneity
# =========================================================================================
@st.composite
def drs_cases(draw):
    """Cobb–Douglas with Σa < 1 or CES of degree k < 1 (decreasing returns)."""
    n = draw(st.sampled_from([2, 3]))
    if draw(st.booleans()):
        a = draw(st.lists(_floats(0.05, 0.9 / n), min_size=n, max_size=n))
        model = build("cobb_douglas", "technology",
                      (("n", n), ("A", draw(_floats(0.5, 3.0)))) + _params("a", a))
    else:
        rho = draw(_floats(-3.0, 0.9).filter(lambda r: abs(r) >= 0.05))
        d = draw(st.lists(_floats(0.1, 1.0), min_size=n, max_size=n))
        model = build("ces", "technology",
                      (("n", n), ("A", draw(_floats(0.5, 2.0))), ("r", rho),
                       ("k", draw(_floats(0.3, 0.9)))) + _params("d", d))
    w = draw(st.lists(PRICE, min_size=n, max_size=n))
    return model, {"p": draw(_floats(0.5, 5.0)), **_prices("w", w)}


@lru_cache(maxsize=None)
def profit_of(model):
    prof = dy.profit(model)
    return prof, dict(prof.demands)


@SETTINGS
@given(drs_cases(), _floats(0.1, 10.0))
def test_profit_hotelling_and_homogeneity(case, t):
    model, pt = case
    prof, dem = profit_of(model)
    assert prof.route == "catalogue"
    pi = prof(**pt)
    assert pi > 0
    y = dem["y"](**pt)
    # Hotelling: ∂π/∂p = y, −∂π/∂w_i = x_i (Hotelling 1932; Varian ch. 5, from memory)
    assert abs(central_diff(prof, pt, "p") - y) <= FD_REL * (y + pi / pt["p"])
    for q in qnames(model):
        w = "w" + q[1:]
        x = dem[q](**pt)
        assert abs(-central_diff(prof, pt, w) - x) <= FD_REL * (x + pi / pt[w])
    # supply is what the factor demands produce, and profit = p y − w·x
    x = np.array([dem[q](**pt) for q in qnames(model)])
    assert rel_err(float(primal(model)(*x)), y) <= REL
    w = np.array([pt[f"w{i + 1}"] for i in range(len(x))])
    assert rel_err(pt["p"] * y - w @ x, pi) <= REL
    # π homogeneous of degree 1 in (p, w)
    assert rel_err(prof(**{k: t * v for k, v in pt.items()}), t * pi) <= REL


# =========================================================================================
# dy.check: no record fails, one model per form
# =========================================================================================
CHECK_MODELS = {
    "cobb_douglas": build("cobb_douglas", "technology", (("n", 2), ("A", 1.5), ("a1", 0.3),
                                                         ("a2", 0.5))),
    "ces": build("ces", "technology", (("n", 3), ("A", 1.5), ("r", -0.7), ("k", 0.8),
                                       ("d1", 0.3), ("d2", 0.2), ("d3", 0.5))),
    "nested_ces": build("nested_ces", "technology",
                        (("n", 3), ("A", 1.2), ("r", 0.5), ("s", -1.0), ("k", 0.8),
                         ("d1", 0.3), ("d2", 0.7), ("b1", 0.4), ("b2", 0.6))),
    "leontief": build("leontief", "preference", (("n", 2), ("a1", 2.0), ("a2", 3.0))),
    "linear": build("linear", "technology", (("n", 3), ("a1", 2.0), ("a2", 3.0), ("a3", 1.0))),
    "stone_geary": build("stone_geary", "preference",
                         (("n", 2), ("b1", 0.4), ("b2", 0.6), ("g1", 0.2), ("g2", 0.1)), "log"),
    "quasi_linear": build("quasi_linear", "preference", (("n", 2), ("c2", 2.0))),
}

def test_check_models_cover_every_form():
    assert set(CHECK_MODELS) == set(dy.CATALOGUE.forms)


@pytest.mark.slow
@pytest.mark.parametrize("form", sorted(CHECK_MODELS))
def test_check_reports_no_failure(form):
    # numeric pass only (symbolic=False): symbolic proofs cost ~9 s per CES/CD model
    records = dy.check(CHECK_MODELS[form], symbolic=False)
    assert records
    failed = [r.line() for r in records if r.status == "failed"]
    assert not failed
    assert sum(r.ok for r in records) >= 5


@pytest.mark.slow
@pytest.mark.parametrize("variant", ["log", "product"])
def test_check_stone_geary_with_subsistence_above_sampling_range(variant):
    """Regression: dy.check samples bundles in [0.5, 3]^n; with γ_1 = 1 some lie below
    subsistence, where the utility is undefined.  This used to crash with
    KeyError('no value for u') (checks.py::_sample / _numeric_pass)."""
    model = build("stone_geary", "preference",
                  (("n", 2), ("b1", 0.4), ("b2", 0.6), ("g1", 1.0), ("g2", 0.5)), variant)
    records = dy.check(model, symbolic=False)
    assert not [r.line() for r in records if r.status == "failed"]
    assert sum(r.ok for r in records) >= 5


def test_check_proves_identities_symbolically_for_leontief():
    records = dy.check(build("leontief", "technology", (("n", 2), ("a1", 2.0), ("a2", 3.0))))
    assert not [r.line() for r in records if r.status == "failed"]
    assert any(r.status == "proved" for r in records)

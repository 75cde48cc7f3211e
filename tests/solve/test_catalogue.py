"""Catalogue forms against their published closed forms and against independent optimisers.

Every expected value below is computed in the test itself with plain numpy from the
published formula (the source is named beside each formula), and checked a second time
against a primal optimisation solved by scipy (SLSQP / BFGS with hand-written analytic
gradients, or an LP for the kinked and corner forms).  The package is never used to
produce an expected value.

Models are built from sympy expressions so the tests do not depend on the text parser.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
import sympy as sp
from scipy.optimize import linprog, minimize

import duality as dy

RTOL = 1e-10          # closed form vs closed form (both exact up to rounding)
ORACLE_RTOL = 1e-7    # closed form vs numerical optimum


def syms(names: str):
    return sp.symbols(names, seq=True)


def close(got, want, rtol=RTOL, atol=0.0):
    np.testing.assert_allclose(np.asarray(got, dtype=float), np.asarray(want, dtype=float),
                               rtol=rtol, atol=atol)


def demand_vector(derived, names, **pt):
    dem = derived.demands
    assert set(names) <= set(dem), f"demands {sorted(dem)} lack some of {names}"
    return np.array([dem[n](**pt) for n in names])


def price_kw(letter, w, n=None):
    return {f"{letter}{i + 1}": float(v) for i, v in enumerate(w)}


# =========================================================================================
# Published closed forms, computed independently with numpy
# =========================================================================================
def cd_spending(w, level, A, a):
    """Cobb–Douglas A·Π x_i^{a_i}: c = k (y/A)^{1/k} Π (w_i/a_i)^{a_i/k}, k = Σa,
    x_i = (a_i/w_i) c/k.  Varian, Microeconomic Analysis, 3rd ed. (1992), ch. 4,
    Cobb–Douglas cost function; MWG (1995) Example 3.E.1 (from memory)."""
    w, a = np.asarray(w, float), np.asarray(a, float)
    k = a.sum()
    c = k * (level / A) ** (1 / k) * np.prod((w / a) ** (a / k))
    return c, a / w * c / k


def ces_spending(w, level, A, d, rho, k=1.0):
    """CES A·(Σ d_i x_i^ρ)^{k/ρ}: σ = 1/(1−ρ), S = Σ d_i^σ w_i^{1−σ},
    c = (y/A)^{1/k} S^{1/(1−σ)}, x_i = (y/A)^{1/k} (d_i/w_i)^σ S^{σ/(1−σ)}.
    Arrow, Chenery, Minhas & Solow (1961); Varian ch. 4 CES cost (from memory); the
    degree-k version is the same problem with the level (y/A)^{1/k}."""
    w, d = np.asarray(w, float), np.asarray(d, float)
    s = 1 / (1 - rho)
    S = np.sum(d ** s * w ** (1 - s))
    base = (level / A) ** (1 / k)
    return base * S ** (1 / (1 - s)), base * (d / w) ** s * S ** (s / (1 - s))


def cd_profit(p, w, A, a):
    """π = (1−k) (pA)^{1/(1−k)} Π (a_i/w_i)^{a_i/(1−k)}, k = Σa < 1; supply y = π/(p(1−k));
    factor demands x_i = a_i p y / w_i.  Varian, Microeconomic Analysis, 3rd ed. (1992),
    ch. 5, Cobb–Douglas profit function (from memory)."""
    w, a = np.asarray(w, float), np.asarray(a, float)
    k = a.sum()
    pi = (1 - k) * (p * A) ** (1 / (1 - k)) * np.prod((a / w) ** (a / (1 - k)))
    y = pi / (p * (1 - k))
    return pi, y, a * p * y / w


def ces_profit(p, w, A, d, rho, k):
    """CES of degree k < 1: c = K y^{1/k} with K = A^{-1/k} S^{1/(1−σ)}; p = ∂c/∂y gives
    y = (p k / K)^{k/(1−k)}, π = (1−k) p y.  Varian ch. 5 (profit from the cost function,
    from memory) with the ACMS (1961) CES cost function."""
    c1, _ = ces_spending(w, 1.0, A, d, rho, k)          # K = c(w, 1)
    y = (p * k / c1) ** (k / (1 - k))
    _, x = ces_spending(w, y, A, d, rho, k)
    return (1 - k) * p * y, y, x


def ces_marshallian(p, m, d, rho):
    """CES utility (Σ d_i x_i^ρ)^{1/ρ}: x_i = m d_i^σ p_i^{−σ} / S, v = m / S^{1/(1−σ)}.
    Varian ch. 7 / ACMS (1961) (from memory)."""
    p, d = np.asarray(p, float), np.asarray(d, float)
    s = 1 / (1 - rho)
    S = np.sum(d ** s * p ** (1 - s))
    return m / S ** (1 / (1 - s)), m * d ** s * p ** (-s) / S


def les_marshallian(p, m, beta, gamma):
    """Linear expenditure system (Stone 1954; Geary 1950, from memory).  With the shares
    b_i = β_i/Σβ summing to one, x_i = γ_i + b_i (m − Σ_j p_j γ_j) / p_i: subsistence
    first, then the supernumerary income split in fixed shares."""
    p, beta, gamma = (np.asarray(v, float) for v in (p, beta, gamma))
    b = beta / beta.sum()
    return gamma + b * (m - p @ gamma) / p


def les_expenditure(p, u, beta, gamma):
    """Invert v of Π(x_i − γ_i)^{β_i} at the LES demands (derived here from Stone 1954):
    v = (m − Σpγ)^B Π (β_i/(B p_i))^{β_i}, B = Σβ, hence
    e = Σ p_i γ_i + u^{1/B} Π (p_i/β_i)^{β_i/B} · B."""
    p, beta, gamma = (np.asarray(v, float) for v in (p, beta, gamma))
    B = beta.sum()
    e = p @ gamma + u ** (1 / B) * np.prod((p / beta) ** (beta / B)) * B
    h = les_marshallian(p, e, beta, gamma)
    return e, h


# =========================================================================================
# Independent numerical oracles (analytic gradients written by hand)
# =========================================================================================
# With default settings SLSQP can report success while being several percent off on a
# 3-input CES cost minimisation, hence analytic gradients, log-quantities, ftol 1e-14 and a
# large maxiter below.
SLSQP = dict(ftol=1e-14, maxiter=5000)


def _accept(res, grad_obj, grad_con, slack):
    """Accept an SLSQP result only if the KKT conditions hold tightly: the constraint is
    active and the two gradients are parallel.  With ftol 1e-14 SLSQP sometimes stops with
    "Positive directional derivative for linesearch" (status 8) once it is already at
    machine precision; such a point is accepted only when it passes this test."""
    assert res.success or res.status == 8, res.message
    assert abs(slack) < 1e-9, (slack, res.message)
    g, h = np.asarray(grad_obj, float), np.asarray(grad_con, float)
    lam = (g @ h) / (h @ h)
    assert lam > 0 and np.max(np.abs(g - lam * h)) < 1e-7 * np.max(np.abs(g)), res.message


def spending_oracle(w, lvl, dlvl, target, z0, shift=None):
    """min w·x s.t. L(z) >= target with x = shift + exp(z) (L, dL analytic in z)."""
    w = np.asarray(w, float)
    shift = np.zeros_like(w) if shift is None else np.asarray(shift, float)
    scale = float(w @ (shift + np.exp(z0)))
    res = minimize(lambda z: w @ (shift + np.exp(z)) / scale, z0,
                   jac=lambda z: w * np.exp(z) / scale, method="SLSQP",
                   constraints=[{"type": "ineq", "fun": lambda z: lvl(z) - target,
                                 "jac": dlvl}], options=SLSQP)
    _accept(res, w * np.exp(res.x), dlvl(res.x), lvl(res.x) - target)
    x = shift + np.exp(res.x)
    return float(w @ x), x


def utility_oracle(p, m, lvl, dlvl, z0, shift=None):
    """max L(z) s.t. p·x <= m with x = shift + exp(z); returns (max L, x)."""
    p = np.asarray(p, float)
    shift = np.zeros_like(p) if shift is None else np.asarray(shift, float)
    res = minimize(lambda z: -lvl(z), z0, jac=lambda z: -dlvl(z), method="SLSQP",
                   constraints=[{"type": "ineq", "fun": lambda z: (m - p @ (shift + np.exp(z))) / m,
                                 "jac": lambda z: -p * np.exp(z) / m}], options=SLSQP)
    _accept(res, dlvl(res.x), p * np.exp(res.x), (m - p @ (shift + np.exp(res.x))) / m)
    return float(lvl(res.x)), shift + np.exp(res.x)


def profit_oracle(p, w, logf, dlogf, z0):
    """max p f(x) − w·x over x = exp(z) by BFGS with the analytic gradient."""
    w = np.asarray(w, float)
    scale = abs(p * math.exp(logf(z0)) - w @ np.exp(z0)) + 1.0

    def obj(z):
        return -(p * math.exp(logf(z)) - w @ np.exp(z)) / scale

    def jac(z):
        return -(p * math.exp(logf(z)) * dlogf(z) - w * np.exp(z)) / scale

    res = minimize(obj, z0, jac=jac, method="BFGS", options=dict(gtol=1e-13, maxiter=10000))
    z = res.x
    assert np.max(np.abs(jac(z))) < 1e-9, res.message
    x = np.exp(z)
    y = math.exp(logf(z))
    return p * y - w @ x, y, x


def cd_log(A, a):
    a = np.asarray(a, float)
    return (lambda z: math.log(A) + a @ z), (lambda z: a.copy())


def ces_log(A, d, rho, k):
    d = np.asarray(d, float)

    def lvl(z):
        return math.log(A) + k / rho * math.log(np.sum(d * np.exp(rho * z)))

    def dlvl(z):
        t = d * np.exp(rho * z)
        return k * t / t.sum()
    return lvl, dlvl


def homogeneous_start(w, target_log, lvl, degree):
    """A feasible but not optimal start: x ∝ 1/w, scaled (by homogeneity) onto the level."""
    z = -np.log(np.asarray(w, float))
    return z + (target_log - lvl(z)) / degree


# =========================================================================================
# 1-3. Cobb–Douglas
# =========================================================================================
CD_CASES = [
    # (A, exponents, prices, level)
    (2.0, (0.3, 0.5), (2.0, 3.0), 5.0),
    (1.5, (0.2, 0.3, 0.4), (1.0, 2.5, 0.7), 3.0),
    (0.8, (0.6, 0.7), (4.0, 0.5), 2.0),          # increasing returns: cost still defined
]


def cd_model(A, a, role="technology"):
    n = len(a)
    xs = syms(" ".join(f"x{i + 1}" for i in range(n)))
    As = sp.Symbol("A")
    es = syms(" ".join(f"a{i + 1}" for i in range(n)))
    expr = As * sp.Mul(*[x ** e for x, e in zip(xs, es)])
    params = {"A": A, **{f"a{i + 1}": v for i, v in enumerate(a)}}
    names = [str(x) for x in xs]
    if role == "technology":
        return dy.technology(expr, names, params=params)
    return dy.preference(expr, names, params=params)


@pytest.mark.parametrize("A,a,w,y", CD_CASES)
def test_cobb_douglas_cost_closed_form(A, a, w, y):
    c = dy.cost(cd_model(A, a))
    assert c.route == "catalogue"
    assert "Varian" in c.source
    want_c, want_x = cd_spending(w, y, A, a)
    pt = {**price_kw("w", w), "y": y}
    close(c(**pt), want_c)
    close(demand_vector(c, [f"x{i + 1}" for i in range(len(a))], **pt), want_x)


@pytest.mark.parametrize("A,a,w,y", CD_CASES)
def test_cobb_douglas_cost_against_slsqp(A, a, w, y):
    lvl, dlvl = cd_log(A, a)
    z0 = homogeneous_start(w, math.log(y), lvl, sum(a))
    oc, ox = spending_oracle(w, lvl, dlvl, math.log(y), z0)
    c = dy.cost(cd_model(A, a))
    pt = {**price_kw("w", w), "y": y}
    close(c(**pt), oc, ORACLE_RTOL)
    close(demand_vector(c, [f"x{i + 1}" for i in range(len(a))], **pt), ox, ORACLE_RTOL)


PREF_CD = [((0.2, 0.3, 0.4), (1.0, 2.0, 3.0), 20.0), ((0.5, 0.5), (1.5, 0.4), 7.0)]


@pytest.mark.parametrize("a,p,m", PREF_CD)
def test_cobb_douglas_preference_closed_form_and_oracle(a, p, m):
    model = cd_model(1.0, a, "preference")
    n = len(a)
    names = [f"x{i + 1}" for i in range(n)]
    v, e = dy.indirect_utility(model), dy.expenditure(model)
    assert v.route == e.route == "catalogue" and "Mas-Colell" in v.source
    aa, pp = np.asarray(a), np.asarray(p)
    # Marshallian x_i = (a_i/Σa) m/p_i: Varian ch. 7; MWG Example 3.D.1 (from memory)
    want_x = aa / aa.sum() * m / pp
    want_v = np.prod(want_x ** aa)
    pt = {**price_kw("p", p), "m": m}
    close(v(**pt), want_v)
    close(demand_vector(v, names, **pt), want_x)
    u = 1.7
    want_e, want_h = cd_spending(p, u, 1.0, a)   # expenditure = cost of the same form
    ept = {**price_kw("p", p), "u": u}
    close(e(**ept), want_e)
    close(demand_vector(e, names, **ept), want_h)
    # independent optima
    lvl, dlvl = cd_log(1.0, a)
    ov, ox = utility_oracle(p, m, lvl, dlvl, np.log(m / (n * pp)))
    close(v(**pt), math.exp(ov), ORACLE_RTOL)
    close(demand_vector(v, names, **pt), ox, ORACLE_RTOL)
    oe, oh = spending_oracle(p, lvl, dlvl, math.log(u), homogeneous_start(p, math.log(u), lvl, aa.sum()))
    close(e(**ept), oe, ORACLE_RTOL)
    close(demand_vector(e, names, **ept), oh, ORACLE_RTOL)


# =========================================================================================
# CES
# =========================================================================================
CES_CASES = [
    # (A, d, rho, k, prices, level)
    (1.0, (0.3, 0.5, 0.2), -0.5, 1.0, (1.0, 2.0, 3.0), 2.0),
    (2.0, (0.4, 0.6), 0.5, 1.0, (2.0, 1.0), 3.0),
    (1.3, (0.5, 0.25, 0.25), 0.3, 0.8, (0.6, 1.7, 4.0), 1.5),
    (0.7, (1.0, 2.0), -2.0, 1.2, (3.0, 0.4), 4.0),
]


def ces_model(A, d, rho, k, role="technology", names=None, pnames=None):
    n = len(d)
    names = names or [f"x{i + 1}" for i in range(n)]
    pnames = pnames or [f"d{i + 1}" for i in range(n)]
    xs = [sp.Symbol(s) for s in names]
    ds = [sp.Symbol(s) for s in pnames]
    r, kk, As = sp.symbols("r k A")
    expr = As * sp.Add(*[di * x ** r for di, x in zip(ds, xs)]) ** (kk / r)
    params = {"A": A, "r": rho, "k": k, **dict(zip(pnames, d))}
    if role == "technology":
        return dy.technology(expr, names, params=params)
    return dy.preference(expr, names, params=params)


@pytest.mark.parametrize("A,d,rho,k,w,y", CES_CASES)
def test_ces_cost_closed_form(A, d, rho, k, w, y):
    c = dy.cost(ces_model(A, d, rho, k))
    assert c.route == "catalogue"
    assert "Arrow" in c.source and "Minhas" in c.source
    want_c, want_x = ces_spending(w, y, A, d, rho, k)
    pt = {**price_kw("w", w), "y": y}
    close(c(**pt), want_c)
    close(demand_vector(c, [f"x{i + 1}" for i in range(len(d))], **pt), want_x)


@pytest.mark.parametrize("A,d,rho,k,w,y", CES_CASES)
def test_ces_cost_against_slsqp(A, d, rho, k, w, y):
    lvl, dlvl = ces_log(A, d, rho, k)
    z0 = homogeneous_start(w, math.log(y), lvl, k)
    oc, ox = spending_oracle(w, lvl, dlvl, math.log(y), z0)
    c = dy.cost(ces_model(A, d, rho, k))
    pt = {**price_kw("w", w), "y": y}
    close(c(**pt), oc, ORACLE_RTOL)
    close(demand_vector(c, [f"x{i + 1}" for i in range(len(d))], **pt), ox, ORACLE_RTOL)


@pytest.mark.parametrize("d,rho,p,m", [((0.3, 0.5, 0.2), -0.5, (1.0, 2.0, 3.0), 10.0),
                                       ((0.4, 0.6), 0.5, (1.0, 2.0), 20.0)])
def test_ces_preference_closed_form_and_oracle(d, rho, p, m):
    model = ces_model(1.0, d, rho, 1.0, "preference")
    n = len(d)
    names = [f"x{i + 1}" for i in range(n)]
    v, e = dy.indirect_utility(model), dy.expenditure(model)
    assert v.route == e.route == "catalogue" and "Arrow" in e.source
    want_v, want_x = ces_marshallian(p, m, d, rho)
    pt = {**price_kw("p", p), "m": m}
    close(v(**pt), want_v)
    close(demand_vector(v, names, **pt), want_x)
    u = 2.5
    want_e, want_h = ces_spending(p, u, 1.0, d, rho, 1.0)
    ept = {**price_kw("p", p), "u": u}
    close(e(**ept), want_e)
    close(demand_vector(e, names, **ept), want_h)
    lvl, dlvl = ces_log(1.0, d, rho, 1.0)
    ov, ox = utility_oracle(p, m, lvl, dlvl, np.log(m / (n * np.asarray(p))))
    close(v(**pt), math.exp(ov), ORACLE_RTOL)
    close(demand_vector(v, names, **pt), ox, ORACLE_RTOL)
    oe, oh = spending_oracle(p, lvl, dlvl, math.log(u), homogeneous_start(p, math.log(u), lvl, 1.0))
    close(e(**ept), oe, ORACLE_RTOL)
    close(demand_vector(e, names, **ept), oh, ORACLE_RTOL)


# =========================================================================================
# 9. Profit under decreasing returns (Cobb–Douglas and CES), Hotelling's lemma
# =========================================================================================
PROFIT_CD = [(2.0, (0.3, 0.5), 3.0, (2.0, 3.0)), (1.0, (0.2, 0.3, 0.1), 4.0, (1.0, 0.5, 2.0))]
PROFIT_CES = [(1.0, (0.4, 0.6), 0.5, 0.8, 3.0, (2.0, 1.0)),
              (1.5, (0.3, 0.5, 0.2), -0.5, 0.6, 2.0, (1.0, 2.0, 3.0))]


def _profit_values(model, p, w):
    prof = dy.profit(model)
    n = len(w)
    pt = {"p": p, **price_kw("w", w)}
    return prof, pt, prof(**pt), prof.demands["y"](**pt), demand_vector(
        prof, [f"x{i + 1}" for i in range(n)], **pt)


@pytest.mark.parametrize("A,a,p,w", PROFIT_CD)
def test_cobb_douglas_profit_closed_form_and_oracle(A, a, p, w):
    prof, pt, pi, y, x = _profit_values(cd_model(A, a), p, w)
    assert prof.route == "catalogue" and "Varian" in prof.source
    want_pi, want_y, want_x = cd_profit(p, w, A, a)
    close(pi, want_pi)
    close(y, want_y)
    close(x, want_x)
    lvl, dlvl = cd_log(A, a)
    opi, oy, ox = profit_oracle(p, w, lvl, dlvl, np.log(np.asarray(a) / np.asarray(w)))
    close(pi, opi, ORACLE_RTOL)
    close(y, oy, ORACLE_RTOL)
    close(x, ox, ORACLE_RTOL)


@pytest.mark.parametrize("A,d,rho,k,p,w", PROFIT_CES)
def test_ces_profit_closed_form_and_oracle(A, d, rho, k, p, w):
    prof, pt, pi, y, x = _profit_values(ces_model(A, d, rho, k), p, w)
    assert prof.route == "catalogue" and "Arrow" in prof.source
    want_pi, want_y, want_x = ces_profit(p, w, A, d, rho, k)
    close(pi, want_pi)
    close(y, want_y)
    close(x, want_x)
    lvl, dlvl = ces_log(A, d, rho, k)
    opi, oy, ox = profit_oracle(p, w, lvl, dlvl, np.zeros(len(w)))
    close(pi, opi, ORACLE_RTOL)
    close(y, oy, ORACLE_RTOL)
    close(x, ox, ORACLE_RTOL)


@pytest.mark.parametrize("model,p,w", [
    (cd_model(2.0, (0.3, 0.5)), 3.0, (2.0, 3.0)),
    (ces_model(1.5, (0.3, 0.5, 0.2), -0.5, 0.6), 2.0, (1.0, 2.0, 3.0)),
])
def test_hotelling_lemma_by_finite_differences(model, p, w):
    """∂π/∂p = y and −∂π/∂w_i = x_i (Hotelling 1932; Varian ch. 5, from memory)."""
    prof, pt, _, y, x = _profit_values(model, p, w)

    def d(name):
        h = 1e-5 * pt[name]
        return (prof(**{**pt, name: pt[name] + h}) - prof(**{**pt, name: pt[name] - h})) / (2 * h)
    close(d("p"), y, 1e-7)
    close([-d(f"w{i + 1}") for i in range(len(w))], x, 1e-7)


@pytest.mark.parametrize("model", [
    cd_model(1.0, (0.4, 0.6)),                       # constant returns
    cd_model(1.0, (0.7, 0.6)),                       # increasing returns
    ces_model(1.0, (0.5, 0.5), 0.5, 1.0),
    ces_model(1.0, (0.5, 0.5), -1.0, 1.5),
], ids=["cd-crs", "cd-irs", "ces-crs", "ces-irs"])
def test_profit_refused_without_decreasing_returns(model):
    # common practice, no source: with CRS/IRS p·y − c(w,y) has no finite interior maximum
    with pytest.raises(dy.NoSolutionError):
        dy.profit(model)


# =========================================================================================
# 6. Leontief and linear technologies: kinks and corners (LP oracle)
# =========================================================================================
def leontief_model(a, role="technology"):
    n = len(a)
    xs = syms(" ".join(f"x{i + 1}" for i in range(n)))
    As = syms(" ".join(f"a{i + 1}" for i in range(n)))
    expr = sp.Min(*[x / ai for x, ai in zip(xs, As)])
    params = {f"a{i + 1}": v for i, v in enumerate(a)}
    names = [str(x) for x in xs]
    return (dy.technology if role == "technology" else dy.preference)(expr, names, params=params)


def linear_model(a, role="technology"):
    n = len(a)
    xs = syms(" ".join(f"x{i + 1}" for i in range(n)))
    As = syms(" ".join(f"a{i + 1}" for i in range(n)))
    expr = sp.Add(*[ai * x for x, ai in zip(xs, As)])
    params = {f"a{i + 1}": v for i, v in enumerate(a)}
    names = [str(x) for x in xs]
    return (dy.technology if role == "technology" else dy.preference)(expr, names, params=params)


@pytest.mark.parametrize("a,w,y", [((2.0, 3.0), (1.0, 1.0), 1.0),
                                   ((0.5, 1.5, 2.5), (3.0, 0.2, 1.1), 4.0)])
def test_leontief_cost(a, w, y):
    c = dy.cost(leontief_model(a))
    assert c.route == "catalogue" and "Varian" in c.source
    pt = {**price_kw("w", w), "y": y}
    aa, ww = np.asarray(a), np.asarray(w)
    # min(x1/a1, ...) >= y  <=>  x_i >= a_i y, so x_i = a_i y and c = y Σ a_i w_i
    # (Varian ch. 4 Leontief cost, from memory)
    close(c(**pt), y * aa @ ww)
    names = [f"x{i + 1}" for i in range(len(a))]
    close(demand_vector(c, names, **pt), aa * y)
    # LP oracle: min w·x s.t. x_i >= a_i y
    lp = linprog(ww, A_ub=-np.eye(len(a)), b_ub=-aa * y, bounds=[(0, None)] * len(a),
                 method="highs")
    assert lp.status == 0
    close(c(**pt), lp.fun, ORACLE_RTOL)
    close(demand_vector(c, names, **pt), lp.x, ORACLE_RTOL)


def linear_lp(w, a, y):
    """LP oracle: min w·x s.t. a·x >= y, x >= 0."""
    lp = linprog(np.asarray(w, float), A_ub=-np.asarray(a, float)[None, :], b_ub=[-y],
                 bounds=[(0, None)] * len(a), method="highs")
    assert lp.status == 0
    return lp.fun, lp.x


@pytest.mark.parametrize("a,w,y", [((2.0, 3.0), (1.0, 1.0), 1.0),          # x2 cheaper per unit
                                   ((2.0, 3.0), (3.0, 1.0), 2.0),
                                   ((1.0, 2.0, 4.0), (1.5, 2.0, 3.5), 3.0),  # x3 cheapest
                                   ((1.0, 2.0, 4.0), (0.2, 2.0, 3.5), 3.0)])  # x1 cheapest
def test_linear_cost_away_from_ties(a, w, y):
    c = dy.cost(linear_model(a))
    assert c.route == "catalogue" and "Varian" in c.source
    pt = {**price_kw("w", w), "y": y}
    aa, ww = np.asarray(a), np.asarray(w)
    # perfect substitutes: c = y min_i w_i/a_i, all output from the cheapest input
    # (Varian ch. 4 linear technology, from memory)
    close(c(**pt), y * np.min(ww / aa))
    i = int(np.argmin(ww / aa))
    want_x = np.zeros(len(a))
    want_x[i] = y / aa[i]
    names = [f"x{j + 1}" for j in range(len(a))]
    close(demand_vector(c, names, **pt), want_x)
    oc, ox = linear_lp(ww, aa, y)
    close(c(**pt), oc, ORACLE_RTOL)
    close(demand_vector(c, names, **pt), ox, ORACLE_RTOL, atol=1e-12)


@pytest.mark.parametrize("a,w,y", [((2.0, 3.0), (2.0, 3.0), 1.5),
                                   ((1.0, 2.0, 4.0), (3.0, 6.0, 12.0), 2.0)])
def test_linear_cost_at_a_tie(a, w, y):
    """At a tie any split is optimal: the value is y·min w_i/a_i and the demands reported
    must be one of the optimal bundles (reach y, cost c) (common practice, no source)."""
    c = dy.cost(linear_model(a))
    pt = {**price_kw("w", w), "y": y}
    aa, ww = np.asarray(a), np.asarray(w)
    want = y * np.min(ww / aa)
    close(c(**pt), want)
    close(c(**pt), linear_lp(ww, aa, y)[0], ORACLE_RTOL)
    x = demand_vector(c, [f"x{j + 1}" for j in range(len(a))], **pt)
    assert np.all(x >= 0)
    close(aa @ x, y)
    close(ww @ x, want)


def test_leontief_and_linear_preferences():
    a, p, m, u = (2.0, 3.0), (1.0, 2.0), 20.0, 2.0
    aa, pp = np.asarray(a), np.asarray(p)
    names = ["x1", "x2"]
    # perfect complements: x_i = a_i m / Σ a_j p_j, v = m / Σ a_j p_j, e = u Σ a_j p_j
    # (Varian ch. 7, from memory)
    L = leontief_model(a, "preference")
    v, e = dy.indirect_utility(L), dy.expenditure(L)
    assert v.route == e.route == "catalogue"
    close(v(p1=1.0, p2=2.0, m=m), m / (aa @ pp))
    close(demand_vector(v, names, p1=1.0, p2=2.0, m=m), aa * m / (aa @ pp))
    close(e(p1=1.0, p2=2.0, u=u), u * (aa @ pp))
    close(demand_vector(e, names, p1=1.0, p2=2.0, u=u), aa * u)
    # LP oracle for the utility maximum: max t s.t. a_i t - x_i <= 0, p·x <= m
    lp = linprog([0, 0, -1], A_ub=[[-1, 0, a[0]], [0, -1, a[1]], [p[0], p[1], 0]],
                 b_ub=[0, 0, m], bounds=[(0, None)] * 3, method="highs")
    close(v(p1=1.0, p2=2.0, m=m), -lp.fun, ORACLE_RTOL)
    # perfect substitutes: v = m max a_i/p_i, e = u min p_i/a_i (Varian ch. 7, from memory)
    S = linear_model(a, "preference")
    v, e = dy.indirect_utility(S), dy.expenditure(S)
    close(v(p1=1.0, p2=2.0, m=m), m * np.max(aa / pp))
    close(demand_vector(v, names, p1=1.0, p2=2.0, m=m), [m / 1.0, 0.0])
    close(e(p1=1.0, p2=2.0, u=u), u * np.min(pp / aa))
    close(demand_vector(e, names, p1=1.0, p2=2.0, u=u), [u / 2.0, 0.0])
    lp = linprog(-aa, A_ub=[pp], b_ub=[m], bounds=[(0, None)] * 2, method="highs")
    close(v(p1=1.0, p2=2.0, m=m), -lp.fun, ORACLE_RTOL)
    close(demand_vector(v, names, p1=1.0, p2=2.0, m=m), lp.x, ORACLE_RTOL, atol=1e-12)


# =========================================================================================
# 8. Stone–Geary / linear expenditure system
# =========================================================================================
SG_CASES = [
    # (beta, gamma, prices, income, log form?)
    ((0.2, 0.3, 0.5), (1.0, 2.0, 0.5), (1.0, 2.0, 3.0), 20.0, True),
    ((0.3, 0.4), (1.0, 2.0), (1.0, 2.0), 20.0, False),       # Σβ ≠ 1
    ((0.5, 0.9, 0.6), (0.3, 0.0, 1.2), (2.0, 0.5, 1.5), 9.0, False),
]


def sg_model(beta, gamma, log_form):
    n = len(beta)
    xs = syms(" ".join(f"x{i + 1}" for i in range(n)))
    bs = syms(" ".join(f"b{i + 1}" for i in range(n)))
    gs = syms(" ".join(f"g{i + 1}" for i in range(n)))
    if log_form:
        expr = sp.Add(*[b * sp.log(x - g) for x, b, g in zip(xs, bs, gs)])
    else:
        expr = sp.Mul(*[(x - g) ** b for x, b, g in zip(xs, bs, gs)])
    params = {**{f"b{i + 1}": v for i, v in enumerate(beta)},
              **{f"g{i + 1}": v for i, v in enumerate(gamma)}}
    return dy.preference(expr, [str(x) for x in xs], params=params)


def sg_utility(x, beta, gamma, log_form):
    s = np.log(np.asarray(x) - np.asarray(gamma)) @ np.asarray(beta)
    return s if log_form else math.exp(s)


@pytest.mark.parametrize("beta,gamma,p,m,log_form", SG_CASES)
def test_stone_geary_closed_form_and_oracle(beta, gamma, p, m, log_form):
    model = sg_model(beta, gamma, log_form)
    n = len(beta)
    names = [f"x{i + 1}" for i in range(n)]
    v, e = dy.indirect_utility(model), dy.expenditure(model)
    assert v.route == e.route == "catalogue"
    assert "Stone" in v.source and "Geary" in v.source
    pt = {**price_kw("p", p), "m": m}
    want_x = les_marshallian(p, m, beta, gamma)
    close(demand_vector(v, names, **pt), want_x)
    close(v(**pt), sg_utility(want_x, beta, gamma, log_form))
    u = 0.7 if log_form else 1.3
    core_u = math.exp(u) if log_form else u            # Σβ log(x−γ) = log Π(x−γ)^β
    want_e, want_h = les_expenditure(p, core_u, beta, gamma)
    ept = {**price_kw("p", p), "u": u}
    close(e(**ept), want_e)
    close(demand_vector(e, names, **ept), want_h)
    # independent optima in the surplus quantities x − γ = exp(z)
    b = np.asarray(beta, float)
    lvl, dlvl = (lambda z: b @ z), (lambda z: b.copy())
    pp, gg = np.asarray(p, float), np.asarray(gamma, float)
    ov, ox = utility_oracle(p, m, lvl, dlvl, np.log((m - pp @ gg) / (n * pp)), shift=gg)
    close(v(**pt), ov if log_form else math.exp(ov), ORACLE_RTOL)
    close(demand_vector(v, names, **pt), ox, ORACLE_RTOL)
    z0 = homogeneous_start(p, math.log(core_u), lvl, b.sum())
    oe, oh = spending_oracle(p, lvl, dlvl, math.log(core_u), z0, shift=gg)
    close(e(**ept), oe, ORACLE_RTOL)
    close(demand_vector(e, names, **ept), oh, ORACLE_RTOL)


def test_stone_geary_income_below_subsistence_is_outside_domain():
    v = dy.indirect_utility(sg_model((0.3, 0.4), (1.0, 2.0), False))
    # subsistence spending 1*1 + 2*2 = 5 (Stone 1954: the LES needs m > Σ p γ)
    with pytest.raises(dy.DomainError):
        v(p1=1.0, p2=2.0, m=4.0)


# =========================================================================================
# 7. Quasi-linear preferences
# =========================================================================================
def ql_model(coefs):
    n = len(coefs) + 1
    xs = syms(" ".join(f"x{i + 1}" for i in range(n)))
    cs = syms(" ".join(f"c{i + 2}" for i in range(n - 1)))
    expr = xs[0] + sp.Add(*[c * sp.log(x) for c, x in zip(cs, xs[1:])])
    return dy.preference(expr, [str(x) for x in xs],
                         params={f"c{i + 2}": v for i, v in enumerate(coefs)})


def ql_closed_form(p, m, coefs):
    """U = x1 + Σ c_j log x_j: x_j = c_j p1/p_j, x1 = (m − Σ_j p_j x_j)/p1, v = U(x),
    e = p1 (u − Σ c_j log x_j) + Σ_j p_j x_j.  Mas-Colell, Whinston & Green (1995),
    §3.B–3.E quasilinear preferences; Varian ch. 7 (from memory)."""
    p, c = np.asarray(p, float), np.asarray(coefs, float)
    xo = c * p[0] / p[1:]
    spend_o = p[1:] @ xo
    x1 = (m - spend_o) / p[0]
    return np.concatenate([[x1], xo]), x1 + c @ np.log(xo), spend_o


@pytest.mark.parametrize("coefs,p,m", [
    ((3.0,), (1.0, 2.0), 20.0),
    ((1.5, 0.5), (2.0, 0.5, 4.0), 30.0),
])
def test_quasi_linear_closed_form_and_oracle(coefs, p, m):
    model = ql_model(coefs)
    n = len(p)
    names = [f"x{i + 1}" for i in range(n)]
    v, e = dy.indirect_utility(model), dy.expenditure(model)
    assert v.route == e.route == "catalogue" and "Mas-Colell" in v.source
    pt = {**price_kw("p", p), "m": m}
    want_x, want_v, spend_o = ql_closed_form(p, m, coefs)
    close(demand_vector(v, names, **pt), want_x)
    close(v(**pt), want_v)
    u = 4.0
    xo = want_x[1:]
    want_h1 = u - np.asarray(coefs) @ np.log(xo)
    ept = {**price_kw("p", p), "u": u}
    close(e(**ept), p[0] * want_h1 + spend_o)
    close(demand_vector(e, names, **ept), np.concatenate([[want_h1], xo]))
    # independent optima, x = exp(z): U = exp(z1) + Σ c_j z_j
    c = np.asarray(coefs, float)

    def lvl(z):
        return math.exp(z[0]) + c @ z[1:]

    def dlvl(z):
        return np.concatenate([[math.exp(z[0])], c])
    pp = np.asarray(p, float)
    ov, ox = utility_oracle(p, m, lvl, dlvl, np.log(m / (n * pp)))
    close(v(**pt), ov, ORACLE_RTOL)
    # the objective is flat at the optimum, so the oracle's quantities are only as good as
    # the square root of its value accuracy (common practice, no source)
    close(demand_vector(v, names, **pt), ox, 1e-5)
    oe, oh = spending_oracle(p, lvl, dlvl, u, np.concatenate([[math.log(u)], np.zeros(n - 1)]))
    close(e(**ept), oe, ORACLE_RTOL)
    close(demand_vector(e, names, **ept), oh, ORACLE_RTOL)


def test_quasi_linear_three_goods_values_whatever_the_route():
    """The values are right even though the route is wrong (see QL_BUG)."""
    v = dy.indirect_utility(ql_model((1.5, 0.5)))
    want_x, want_v, _ = ql_closed_form((2.0, 0.5, 4.0), 30.0, (1.5, 0.5))
    pt = dict(p1=2.0, p2=0.5, p3=4.0, m=30.0)
    close(v(**pt), want_v, 1e-6)
    close(demand_vector(v, ["x1", "x2", "x3"], **pt), want_x, 1e-6)


def test_quasi_linear_income_effects_and_interior_condition():
    model = ql_model((3.0,))
    v = dy.indirect_utility(model)
    x1, x2 = v.demands["x1"], v.demands["x2"]
    # no income effect on the non-numeraire good (MWG §3.E, from memory)
    assert v.args[-1] not in x2.expr.free_symbols
    vals = [x2(p1=1.0, p2=2.0, m=m) for m in (5.0, 20.0, 300.0)]
    close(vals, [1.5] * 3)
    # numeraire takes the rest: x1 = (m − p2 x2)/p1
    close(x1(p1=1.0, p2=2.0, m=20.0), (20.0 - 2.0 * 1.5) / 1.0)
    close(x1(p1=2.0, p2=2.0, m=20.0), (20.0 - 2.0 * 3.0) / 2.0)
    # the interior condition (m above the non-numeraire spending a·p1 = 3) is stated ...
    text = " ".join(map(str, v.conditions)) + " ".join(v.notes)
    assert v.conditions or "interior" in text
    assert "m" in text
    # ... and enforced at a scalar point below the threshold
    with pytest.raises(dy.DomainError):
        x1(p1=1.0, p2=2.0, m=2.0)
    with pytest.raises(dy.DomainError):
        v(p1=1.0, p2=2.0, m=2.0)
    # an array point outside comes back as NaN with a warning, the inside one is finite
    with pytest.warns(dy.NumericWarning):
        arr = x1(p1=1.0, p2=2.0, m=np.array([2.0, 20.0]))
    assert np.isnan(arr[0]) and arr[1] == pytest.approx(17.0, rel=RTOL)


# =========================================================================================
# 4. Recognition under unusual names and inside monotone outer layers
# =========================================================================================
def test_cobb_douglas_recognised_under_unusual_names():
    L, K, al, be = syms("labour capital alpha beta")
    odd = dy.technology(L ** al * K ** be, ["labour", "capital"],
                        params={"alpha": 0.3, "beta": 0.5})
    c = dy.cost(odd)
    assert c.route == "catalogue"
    pt = {"w_labour": 2.0, "w_capital": 3.0, "y": 5.0}
    want_c, want_x = cd_spending((2.0, 3.0), 5.0, 1.0, (0.3, 0.5))
    close(c(**pt), want_c)
    close(demand_vector(c, ["labour", "capital"], **pt), want_x)
    plain = dy.cost(cd_model(1.0, (0.3, 0.5)))
    close(c(**pt), plain(w1=2.0, w2=3.0, y=5.0))


def test_ces_recognised_under_unusual_names():
    model = ces_model(1.0, (0.4, 0.6), -0.5, 1.0, names=["labour", "capital"],
                      pnames=["alpha", "beta"])
    c = dy.cost(model)
    assert c.route == "catalogue"
    pt = {"w_labour": 1.5, "w_capital": 0.5, "y": 2.0}
    want_c, want_x = ces_spending((1.5, 0.5), 2.0, 1.0, (0.4, 0.6), -0.5)
    close(c(**pt), want_c)
    close(demand_vector(c, ["labour", "capital"], **pt), want_x)


def test_stone_geary_and_quasi_linear_recognised_under_unusual_names():
    food, fun, alpha, beta, gamma = syms("food fun alpha beta gamma")
    sg = dy.preference(alpha * sp.log(food - gamma) + beta * sp.log(fun), ["food", "fun"],
                       params={"alpha": 0.4, "beta": 0.6, "gamma": 2.0})
    v = dy.indirect_utility(sg)
    assert v.route == "catalogue" and "Stone" in v.source
    pt = {"p_food": 1.0, "p_fun": 2.0, "m": 10.0}
    close(demand_vector(v, ["food", "fun"], **pt),
          les_marshallian((1.0, 2.0), 10.0, (0.4, 0.6), (2.0, 0.0)))
    ql = dy.preference(fun + alpha * sp.log(food), ["fun", "food"], params={"alpha": 3.0})
    v = dy.indirect_utility(ql)
    assert v.route == "catalogue" and "Mas-Colell" in v.source
    want_x, want_v, _ = ql_closed_form((2.0, 1.0), 10.0, (3.0,))
    close(demand_vector(v, ["fun", "food"], p_fun=2.0, p_food=1.0, m=10.0), want_x)


@pytest.mark.parametrize("layer,inverse", [
    (lambda g: 3 * g, lambda y: y / 3),
    (lambda g: g ** 2, lambda y: y ** 0.5),
    (lambda g: sp.log(g), lambda y: math.exp(y)),
    (lambda g: sp.exp(g), lambda y: math.log(y)),
    (lambda g: 2 * sp.sqrt(g) + 1, lambda y: ((y - 1) / 2) ** 2),
], ids=["scale", "power", "log", "exp", "affine-sqrt"])
def test_cobb_douglas_recognised_inside_monotone_layers(layer, inverse):
    """f = T(g) with T increasing: c_f(w, y) = c_g(w, T^{-1}(y)) (common practice, no
    source: the cost problem depends on the level sets only)."""
    x1, x2, a, b = syms("x1 x2 a b")
    model = dy.technology(layer(x1 ** a * x2 ** b), ["x1", "x2"], params={"a": 0.3, "b": 0.5})
    c = dy.cost(model)
    assert c.route == "catalogue"
    y = 3.0
    want_c, want_x = cd_spending((2.0, 3.0), inverse(y), 1.0, (0.3, 0.5))
    close(c(w1=2.0, w2=3.0, y=y), want_c)
    close(demand_vector(c, ["x1", "x2"], w1=2.0, w2=3.0, y=y), want_x)


def test_cobb_douglas_written_as_sum_of_logs_is_recognised():
    # log A + a log x1 + b log x2 = log(A x1^a x2^b) (common practice, no source)
    x1, x2, a, b = syms("x1 x2 a b")
    model = dy.preference(a * sp.log(x1) + b * sp.log(x2), ["x1", "x2"],
                          params={"a": 0.25, "b": 0.75})
    v = dy.indirect_utility(model)
    assert v.route == "catalogue"
    want_x = np.array([0.25, 0.75]) * 12.0 / np.array([1.0, 3.0])
    close(demand_vector(v, ["x1", "x2"], p1=1.0, p2=3.0, m=12.0), want_x)
    close(v(p1=1.0, p2=3.0, m=12.0), 0.25 * math.log(want_x[0]) + 0.75 * math.log(want_x[1]))


# =========================================================================================
# 5. Elasticities of substitution and returns to scale
# =========================================================================================
@pytest.mark.parametrize("d,rho,w,y", [((0.3, 0.5, 0.2), -0.5, (1.0, 2.0, 3.0), 2.0),
                                       ((0.4, 0.6), 0.5, (2.0, 1.0), 3.0),
                                       ((0.2, 0.3, 0.5), 0.7, (0.5, 1.5, 2.5), 1.0)])
def test_ces_allen_uzawa_and_morishima_equal_sigma(d, rho, w, y):
    # σ = 1/(1−ρ) for every pair (ACMS 1961); for CES the Morishima elasticity equals the
    # same σ (Blackorby & Russell 1989 AER, from memory)
    t = dy.elasticities(ces_model(1.0, d, rho, 1.0), **price_kw("w", w), y=y)
    n = len(d)
    off = ~np.eye(n, dtype=bool)
    sigma = 1 / (1 - rho)
    close(t.allen_uzawa[off], np.full(n * n - n, sigma), 1e-8)
    close(t.morishima[off], np.full(n * n - n, sigma), 1e-8)
    # cost shares: s_i = d_i^σ w_i^{1−σ} / S (ACMS 1961)
    dd, ww = np.asarray(d), np.asarray(w)
    sh = dd ** sigma * ww ** (1 - sigma)
    close(t.shares, sh / sh.sum(), 1e-8)


@pytest.mark.parametrize("A,a,w,y", CD_CASES)
def test_cobb_douglas_elasticities_and_returns_to_scale(A, a, w, y):
    t = dy.elasticities(cd_model(A, a), **price_kw("w", w), y=y)
    n = len(a)
    off = ~np.eye(n, dtype=bool)
    # Allen–Uzawa = Morishima = 1 off the diagonal (Blackorby & Russell 1989 AER, from memory)
    close(t.allen_uzawa[off], np.ones(n * n - n), 1e-8)
    close(t.morishima[off], np.ones(n * n - n), 1e-8)
    aa = np.asarray(a)
    s = aa / aa.sum()                                  # cost shares a_i / Σa (Varian ch. 4)
    close(t.shares, s, 1e-8)
    # own Allen–Uzawa elasticity −(1 − s_i)/s_i (from σ_ii = ε_ii / s_i, ε_ii = s_i − 1)
    close(np.diag(t.allen_uzawa), -(1 - s) / s, 1e-8)
    # returns to scale of A Π x_i^{a_i} is Σ a_i (Varian ch. 1, from memory)
    close(t.returns_to_scale, aa.sum(), 1e-8)


def test_cobb_douglas_preference_elasticities():
    t = dy.elasticities(cd_model(1.0, (0.2, 0.3, 0.5), "preference"), p1=1.0, p2=2.0, p3=4.0,
                        m=10.0)
    off = ~np.eye(3, dtype=bool)
    close(t.allen_uzawa[off], np.ones(6), 1e-8)
    # CD demands: own-price elasticity −1, cross 0, income elasticity 1 (Varian ch. 7)
    close(t.price, -np.eye(3), 1e-8, atol=1e-12)
    close(t.level, np.ones(3), 1e-8)
    close(t.shares, [0.2, 0.3, 0.5], 1e-8)


# =========================================================================================
# The catalogue itself
# =========================================================================================
def test_catalogue_keys_and_sources():
    keys = list(dy.CATALOGUE.forms)
    assert keys == ["cobb_douglas", "ces", "leontief", "linear", "stone_geary", "quasi_linear"]
    for form in dy.CATALOGUE:
        assert form.source and "(19" in form.source, form.key


# =========================================================================================
# The same forms typed as text (the safe parser), with unusual names
# =========================================================================================
TEXT_CASES = [
    # (role, formula, quantities, params, point, expected value, expected demands, form)
    ("technology", "labour^alpha * capital^beta", ["labour", "capital"],
     {"alpha": 0.3, "beta": 0.5}, {"w_labour": 2.0, "w_capital": 3.0, "y": 5.0},
     *cd_spending((2.0, 3.0), 5.0, 1.0, (0.3, 0.5)), "Varian"),
    ("technology", "(alpha*labour^rho + beta*capital^rho)^(1/rho)", ["labour", "capital"],
     {"alpha": 0.4, "beta": 0.6, "rho": -0.5}, {"w_labour": 1.5, "w_capital": 0.5, "y": 2.0},
     *ces_spending((1.5, 0.5), 2.0, 1.0, (0.4, 0.6), -0.5), "Arrow"),
    # min(x1/a1, x2/a2): x_i = a_i y, c = y Σ a_i w_i (Varian ch. 4, from memory)
    ("technology", "min(x1/a1, x2/a2)", ["x1", "x2"], {"a1": 2.0, "a2": 3.0},
     {"w1": 1.0, "w2": 2.0, "y": 3.0}, 3.0 * (2.0 + 6.0), np.array([6.0, 9.0]), "Varian"),
    # a1 x1 + a2 x2: c = y min w_i/a_i (Varian ch. 4, from memory)
    ("technology", "alpha*labour + beta*capital", ["labour", "capital"],
     {"alpha": 2.0, "beta": 3.0}, {"w_labour": 1.0, "w_capital": 1.0, "y": 6.0},
     6.0 / 3.0, np.array([0.0, 2.0]), "Varian"),
]


@pytest.mark.parametrize("role,text,qs,params,pt,want_value,want_x,source", TEXT_CASES,
                         ids=["cd", "ces", "leontief", "linear"])
def test_text_formulas_with_unusual_names(role, text, qs, params, pt, want_value, want_x,
                                          source):
    c = dy.cost(dy.technology(text, qs, params=params))
    assert c.route == "catalogue" and source in c.source
    close(c(**pt), want_value)
    close(demand_vector(c, qs, **pt), want_x)


def test_text_stone_geary_and_quasi_linear():
    sg = dy.preference("beta1*log(food - gamma1) + beta2*log(rent - gamma2)", ["food", "rent"],
                       params={"beta1": 0.3, "beta2": 0.7, "gamma1": 1.0, "gamma2": 2.0})
    v = dy.indirect_utility(sg)
    assert v.route == "catalogue" and "Stone" in v.source
    close(demand_vector(v, ["food", "rent"], p_food=1.0, p_rent=2.0, m=20.0),
          les_marshallian((1.0, 2.0), 20.0, (0.3, 0.7), (1.0, 2.0)))
    ql = dy.preference("money + alpha*log(leisure)", ["money", "leisure"], params={"alpha": 3.0})
    v = dy.indirect_utility(ql)
    assert v.route == "catalogue" and "Mas-Colell" in v.source
    want_x, want_v, _ = ql_closed_form((1.0, 2.0), 20.0, (3.0,))
    close(v(p_money=1.0, p_leisure=2.0, m=20.0), want_v)
    close(demand_vector(v, ["money", "leisure"], p_money=1.0, p_leisure=2.0, m=20.0), want_x)

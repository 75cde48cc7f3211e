"""The plotly figures, built by plain functions and checked against closed forms.

References: Cobb–Douglas cost and demands, Varian, Microeconomic Analysis, 3rd ed. (1992),
ch. 4 and ch. 7 (from memory); tangency of the isoquant and the isocost line at the cost
minimum (MRTS = price ratio), same book ch. 4 (from memory); the conjugate pair
x²/2 <-> s²/2 and |x| <-> indicator of [-1, 1], Boyd and Vandenberghe, Convex Optimization
(2004), sec. 3.3.1 (from memory).
"""
import numpy as np
import pytest

import duality as dy
from duality.errors import DualityError

from app import analysis as A
from app import figures as F
from pathlib import Path

SCENARIOS = Path(__file__).resolve().parents[2] / "scenarios"


def _scenario(name):
    s = dy.load_scenario(SCENARIOS / name)
    m = s.build_model()
    duals = A.derive_all(m)
    _cards, pt = A.cards(m, s.points()[0])
    return s, m, duals, pt


@pytest.fixture(scope="module")
def pottery():
    return _scenario("pottery_workshop.toml")


@pytest.fixture(scope="module")
def saltmere():
    return _scenario("saltmere_household.toml")


def test_isoquant_passes_through_the_cost_minimising_bundle_tangent_to_the_isocost_line(
        pottery):
    s, m, duals, pt = pottery
    fig = F.level_curve(m, duals["cost"], pt, ("clay", "labour"))
    curve, line, bundle = fig.data
    # bundle = conditional demands (Shephard's lemma) at the baseline
    x = {q: float(d(**A.point_for(d, pt))) for q, d in duals["cost"].demands.items()}
    assert bundle.x[0] == pytest.approx(x["clay"], rel=1e-12)
    assert bundle.y[0] == pytest.approx(x["labour"], rel=1e-12)
    # every point of the curve produces the baseline output (kiln at its optimum)
    A_, out = 1.8, pt["bowls"]
    xi, xj = np.asarray(curve.x), np.asarray(curve.y)
    f = A_ * xi ** 0.3 * x["kiln"] ** 0.2 * xj ** 0.4
    np.testing.assert_allclose(f, out, rtol=1e-9)
    # the isocost line goes through the bundle with slope -w_clay / w_labour ...
    lx, ly = np.asarray(line.x), np.asarray(line.y)
    slope = (ly[-1] - ly[0]) / (lx[-1] - lx[0])
    assert slope == pytest.approx(-pt["w_clay"] / pt["w_labour"], rel=1e-12)
    assert np.interp(x["clay"], lx, ly) == pytest.approx(x["labour"], rel=1e-9)
    # ... and touches the isoquant there: no point of the isoquant costs less (cost
    # minimum), and the nearest points cost only second-order more (MRTS = price ratio)
    spend = pt["w_clay"] * x["clay"] + pt["w_labour"] * x["labour"]
    cost_on_curve = pt["w_clay"] * xi + pt["w_labour"] * xj
    assert (cost_on_curve >= spend * (1 - 1e-12)).all()
    k = np.argmin(np.abs(xi - x["clay"]))
    assert cost_on_curve[k] == pytest.approx(spend, rel=1e-3)


def test_indifference_curve_and_budget_line_of_a_household(saltmere):
    s, m, duals, pt = saltmere
    fig = F.level_curve(m, duals["expenditure"], pt)
    curve, line, bundle = fig.data
    # Cobb–Douglas Marshallian demand x_i = a_i m / p_i (food share 0.5, fuel 0.2)
    assert bundle.x[0] == pytest.approx(0.5 * 420 / 3.2, rel=1e-9)
    assert bundle.y[0] == pytest.approx(0.2 * 420 / 1.6, rel=1e-9)
    bus = 0.3 * 420 / 2.1
    u = np.asarray(curve.x) ** 0.5 * np.asarray(curve.y) ** 0.2 * bus ** 0.3
    np.testing.assert_allclose(u, pt["u"], rtol=1e-9)
    assert "indifference curve" in fig.data[0].name
    assert line.name == "budget line"


def test_level_curve_refuses_a_model_given_on_the_dual_side():
    s, m, duals, pt = _scenario("ferry_operator_translog.toml")
    with pytest.raises(DualityError, match="no production or utility function"):
        F.level_curve(m, duals["cost"], pt)


def test_level_curve_names_bad_axis_choices(pottery):
    s, m, duals, pt = pottery
    with pytest.raises(DualityError, match="two different quantities"):
        F.level_curve(m, duals["cost"], pt, ("clay", "clay"))


def test_cost_curves_match_the_cobb_douglas_closed_form(pottery):
    s, m, duals, pt = pottery
    fig = F.cost_curves(duals["cost"], pt)
    tc, ac, mc = fig.data
    y = np.asarray(tc.x)
    # c(w, y) = K y^(1/r) with r = 0.9 (returns to scale): MC = c / (r y), AC = c / y
    K = float(duals["cost"](**{**A.point_for(duals["cost"], pt), "bowls": 1.0}))
    np.testing.assert_allclose(tc.y, K * y ** (1 / 0.9), rtol=1e-12)
    np.testing.assert_allclose(ac.y, K * y ** (1 / 0.9) / y, rtol=1e-12)
    np.testing.assert_allclose(mc.y, K * y ** (1 / 0.9) / (0.9 * y), rtol=1e-10)


def test_cost_curves_of_a_numeric_cost_function_use_differences():
    s, m, duals, pt = _scenario("fishing_cooperative_numeric.toml")
    c = duals["cost"]
    assert c.route == "numeric"
    fig = F.cost_curves(c, pt, n=40)
    tc, ac, mc = fig.data
    y, t = np.asarray(tc.x), np.asarray(tc.y)
    assert np.isfinite(t).all()
    # marginal cost agrees with the slope of the total-cost trace (independent estimate)
    slope = np.gradient(t, y)
    np.testing.assert_allclose(np.asarray(mc.y)[2:-2], slope[2:-2], rtol=2e-2)


def test_demand_curves_follow_the_marshallian_closed_form(saltmere):
    s, m, duals, pt = saltmere
    fig = F.demand_curves(duals["indirect_utility"], pt)
    curves = [t for t in fig.data if t.mode != "markers"]
    shares = {"food": 0.5, "fuel": 0.2, "bus": 0.3}
    for trace, (q, a) in zip(curves, shares.items()):
        p = np.asarray(trace.x)
        np.testing.assert_allclose(trace.y, a * 420 / p, rtol=1e-10)
    assert len(curves) == 3


def test_conjugate_envelope_of_a_smooth_convex_function():
    fig = F.conjugate_envelope("x^2/2", "x", -3, 3, n=601)
    f, *lines, conj = fig.data
    s = np.asarray(conj.x)
    np.testing.assert_allclose(conj.y, s ** 2 / 2, atol=1e-4)   # grid step 0.01
    xs, fx = np.asarray(f.x), np.asarray(f.y)
    for line in lines:  # each supporting line stays below f
        lx = np.asarray(line.x)
        assert (np.asarray(line.y) <= np.interp(lx, xs, fx) + 1e-9).all()


def test_conjugate_envelope_of_a_kink_and_of_a_non_convex_function():
    fig = F.conjugate_envelope("abs(x)", "x", -2, 2, n=401)
    conj = fig.data[-1]
    assert np.asarray(conj.x).min() == pytest.approx(-1)
    assert np.asarray(conj.x).max() == pytest.approx(1)
    np.testing.assert_allclose(conj.y, 0, atol=1e-12)
    # double well: the lines support the convex envelope, never crossing f
    fig = F.conjugate_envelope("x^4 - 2*x^2", "x", -2, 2, n=801)
    f, *lines, conj = fig.data
    xs, fx = np.asarray(f.x), np.asarray(f.y)
    for line in lines:
        assert (np.asarray(line.y) <= np.interp(np.asarray(line.x), xs, fx) + 1e-9).all()
    # f*(0) = -min f = 1 (minimum -1 at x = ±1)
    assert np.interp(0.0, conj.x, conj.y) == pytest.approx(1.0, abs=1e-9)


@pytest.mark.parametrize("formula, var, where", [
    ("log(x)", "x", "not finite"),
    ("x + a", "x", "give values for a"),
    ("x^2", "y", "the variable 'y' does not appear in x\\^2 .it has x."),
])
def test_conjugate_envelope_names_the_problem(formula, var, where):
    with pytest.raises(DualityError, match=where):
        F.conjugate_envelope(formula, var, -1, 1)


def test_conjugate_envelope_of_a_constant_is_the_indicator_of_zero():
    # f = 3: f*(s) = -3 at s = 0 only (common practice, no source)
    conj = F.conjugate_envelope("3", "x", -1, 1).data[-1]
    assert list(conj.x) == [0.0] and conj.y[0] == pytest.approx(-3.0)


def test_elasticity_heatmap_shows_the_matrix(pottery):
    s, m, duals, pt = pottery
    tabs = A.elasticity_tables(m, pt)
    fig = F.elasticity_heatmap(tabs["allen_uzawa"], "Allen–Uzawa")
    z = np.asarray(fig.data[0].z)
    # Cobb–Douglas: every Allen–Uzawa cross elasticity is 1 (Varian 1992, ch. 4)
    off = z[~np.eye(3, dtype=bool)]
    np.testing.assert_allclose(off, 1.0, rtol=1e-9)
    assert fig.data[0].zmin == -fig.data[0].zmax
    assert list(fig.data[0].x) == ["clay", "kiln", "labour"]


def test_welfare_bars_equal_the_exact_cobb_douglas_cv_and_ev(saltmere):
    s, m, duals, pt = saltmere
    bars = A.welfare_bars_data(A.welfare(s), "preference")
    fig = F.welfare_bars(bars)
    by = {t.name: dict(zip(t.x, t.y)) for t in fig.data}
    # fuel levy: p_fuel 1.6 -> 2.1 with fuel share 0.2; e(p, u) proportional to p_fuel^0.2
    cv = 420 - 420 * (2.1 / 1.6) ** 0.2
    ev = 420 * (1.6 / 2.1) ** 0.2 - 420
    assert by["compensating variation"]["fuel_levy"] == pytest.approx(cv, rel=1e-9)
    assert by["equivalent variation"]["fuel_levy"] == pytest.approx(ev, rel=1e-9)
    assert set(by) == {"compensating variation", "equivalent variation",
                       "consumer surplus change"}


def test_welfare_bars_without_measures_is_an_error():
    import pandas as pd
    with pytest.raises(DualityError, match="no welfare"):
        F.welfare_bars(pd.DataFrame(columns=["variant", "measure", "change"]))


def test_constant_returns_cost_curves_are_flat_not_rounding_noise():
    """Under constant returns average and marginal cost are both c(w, 1), constant in
    output (Varian 1992, ch. 5, from memory): the curves are drawn exactly flat."""
    m = dy.technology("x1^0.5*x2^0.5", ["x1", "x2"])
    cost = dy.cost(m)
    fig = F.cost_curves(cost, {"w1": 0.7, "w2": 1.3, "y": 3.0})
    unit = 2 * (0.7 * 1.3) ** 0.5               # c(w, 1) = 2 sqrt(w1 w2)
    for trace in fig.data[1:]:
        assert np.unique(trace.y).size == 1
        assert trace.y[0] == pytest.approx(unit, rel=1e-12)
    assert fig.layout.yaxis.title.text == "cost"
    assert fig.layout.yaxis2.title.text == "cost per unit of output"
    assert fig.layout.xaxis.title.text.startswith("output")


def test_steady_keeps_a_curve_that_really_varies():
    v = np.array([1.0, 1.0 + 1e-6, 1.0 + 2e-6])
    np.testing.assert_array_equal(F.steady(v), v)
    noisy = np.array([19.44358305165849998, 19.443583051658501, 19.4435830516585])
    assert np.unique(F.steady(noisy)).size == 1


def test_every_figure_titles_its_axes(pottery):
    s, m, duals, pt = pottery
    tabs = A.elasticity_tables(m, pt)
    heat = F.elasticity_heatmap(tabs["price"], "Price", *A.ELASTICITY_AXES["price"])
    assert heat.layout.yaxis.title.text == "demand for (row i)"
    assert heat.layout.xaxis.title.text == "price that changes (column j)"
    dem = F.demand_curves(duals["cost"], pt)
    assert dem.layout.xaxis.title.text == "price w_clay (log scale)"
    assert dem.layout.yaxis.title.text == "quantity clay"


def test_the_profit_bar_says_what_it_measures():
    s = dy.load_scenario(SCENARIOS / "pottery_workshop.toml")
    bars = A.welfare_bars_data(A.welfare(s), "technology")
    assert set(bars["measure"]) == {A.BAR_LABELS["profit"], A.BAR_LABELS["total cost"]}


def test_a_counterexample_is_a_small_table():
    frame = A.counterexample_frame({"w1": 0.5, "y": 2.0, "detail": {"lhs": 1.0, "rhs": 3.0}})
    assert list(frame.index) == ["w1", "y", "detail.lhs", "detail.rhs"]
    assert list(frame["value"]) == [0.5, 2.0, 1.0, 3.0]
    assert A.counterexample_frame(None).empty


@pytest.mark.parametrize("name", ["kettle_lane_bakery.toml", "orchard_village_aids.toml"])
def test_a_recovered_level_curve_is_supported_by_the_isocost_line(name):
    """Every bundle on the level curve costs at least c(w, y) at the baseline prices, and
    the cheapest is the cost minimum itself (definition of the cost / expenditure
    function, Varian 1992, ch. 4 and 7, from memory)."""
    s, m, duals, pt = _scenario(name)
    dual = duals["cost" if m.is_technology else "expenditure"]
    rec = A.recovered(m, tuple(sorted(pt.items())))
    fig = F.recovered_level_curve(m, rec, dual, pt)
    curve = fig.data[0]
    assert "recovered" in curve.name and "Recovered" in fig.layout.title.text
    ps = [str(p) for p in m.prices]
    spend = np.asarray(curve.x) * pt[ps[0]] + np.asarray(curve.y) * pt[ps[1]]
    least = float(dual(**A.point_for(dual, pt)))
    assert spend.min() >= least * (1 - 1e-6)
    assert spend.min() <= least * 1.01


def test_units_from_the_scenario_file_title_the_axes(pottery):
    s, m, duals, pt = pottery
    units = s.units                      # the pottery file's [units] table
    dem = F.demand_curves(duals["cost"], pt, units=units)
    assert dem.layout.xaxis.title.text == "price w_clay (£ per kg, log scale)"
    assert dem.layout.yaxis.title.text == "quantity clay (kg)"
    cost = F.cost_curves(duals["cost"], pt, units=units)
    assert cost.layout.xaxis.title.text == "output bowls (bowls)"
    level = F.level_curve(m, duals["cost"], pt, units=units)
    assert level.layout.xaxis.title.text == "quantity clay (kg)"


def test_regularity_by_row_marks_the_rows_that_violate():
    import pandas as pd
    # a translog cost with Γ̃ + ãã' − diag(ã) positive definite at prices one: not concave
    # there (Diewert and Wales, Econometrica 55 (1987), from memory); concave far from it
    # it need not be, so the figure is checked against the report's own flags
    m = dy.translog_cost(2, params=dict(a0=0, a1=0.5, a2=0.5, g11=0.4, g12=-0.4, g22=0.4,
                                        ay=1, gyy=0, g1y=0, g2y=0))
    data = pd.DataFrame({"w1": [1.0, 1.2, 0.9, 3.0], "w2": [1.0, 1.1, 1.0, 0.5],
                         "y": [1.0, 2.0, 1.5, 1.0]})
    rep = dy.regularity(m, data)
    fig = F.regularity_by_row(rep.rows)
    regular, bad = fig.data
    flags = rep.rows["concave"].to_numpy(bool) & rep.rows["monotone"].to_numpy(bool)
    assert list(regular.x) == [i + 1 for i in range(4) if flags[i]]
    assert list(bad.x) == [i + 1 for i in range(4) if not flags[i]]
    assert 1 in list(bad.x)     # the point of prices one violates curvature
    np.testing.assert_allclose(list(bad.y) + list(regular.y),
                               list(rep.rows["max_eig"].to_numpy()[~flags])
                               + list(rep.rows["max_eig"].to_numpy()[flags]))
    with pytest.raises(DualityError, match="no rows"):
        F.regularity_by_row(rep.rows.iloc[:0])

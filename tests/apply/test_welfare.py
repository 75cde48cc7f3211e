"""Welfare and price scenarios: exact CV/EV, consumer surplus, cost and profit changes."""
from __future__ import annotations

import dataclasses
import math
from pathlib import Path

import numpy as np
import pytest

import duality as dy
from duality.apply import scenario as sc
from duality.errors import DualityError
from duality.apply.welfare import COLUMNS, compare, scenario_table

SCENARIOS = Path(__file__).resolve().parents[2] / "scenarios"
DEMOS = sorted(SCENARIOS.glob("*.toml"))


def change(df, measure):
    return float(df.loc[measure, "change"])


# -- Cobb–Douglas preference: closed forms computed here, independently -----------------
# e(p, u) = u (p1/a)^a (p2/(1-a))^(1-a),  v(p, m) = m / ((p1/a)^a (p2/(1-a))^(1-a)),
# x1 = a m / p1 (Varian, Microeconomic Analysis, 3rd ed. (1992), ch. 7, from memory)
A = 0.3


def K(p1, p2, a=A):
    return (p1 / a) ** a * (p2 / (1 - a)) ** (1 - a)


@pytest.fixture(scope="module")
def cobb_douglas():
    return dy.preference("x1^a * x2^(1 - a)", ["x1", "x2"], params={"a": A})


@pytest.mark.parametrize("p1_new", [1.5, 0.6])
def test_cobb_douglas_cv_ev_and_surplus(cobb_douglas, p1_new):
    p1, p2, m = 1.0, 2.0, 100.0
    df = compare(cobb_douglas, {"p1": p1, "p2": p2, "m": m}, {"p1": p1_new})
    u0, u1 = m / K(p1, p2), m / K(p1_new, p2)
    # Varian (1992), ch. 10, compensating and equivalent variation (from memory):
    # CV = m − e(p', u0), EV = e(p, u1) − m  (positive = gain)
    cv = m - u0 * K(p1_new, p2)
    ev = u1 * K(p1, p2) - m
    # consumer surplus from the demand a m / p1: ΔCS = −a m ln(p1'/p1) (integral of a m/p)
    dcs = -A * m * math.log(p1_new / p1)
    assert change(df, "compensating variation") == pytest.approx(cv, rel=1e-12)
    assert change(df, "equivalent variation") == pytest.approx(ev, rel=1e-12)
    assert change(df, "consumer surplus change") == pytest.approx(dcs, rel=1e-9)
    assert df.loc["utility", "baseline"] == pytest.approx(u0)
    assert df.loc["utility", "variant"] == pytest.approx(u1)
    assert change(df, "demand x1") == pytest.approx(A * m / p1_new - A * m / p1)
    assert change(df, "demand x2") == pytest.approx(0.0, abs=1e-12)
    # spending needed for the baseline utility rises by exactly −CV (income unchanged)
    assert change(df, "expenditure for baseline utility") == pytest.approx(-cv)
    # Willig, American Economic Review 66 (1976): for a normal good consumer surplus lies
    # between CV and EV (from memory); with positive = gain this is CV <= ΔCS <= EV
    assert cv < dcs < ev
    if p1_new > p1:
        assert ev < 0  # a price rise is a loss under the sign convention
    else:
        assert cv > 0


def test_cobb_douglas_two_prices_move_exact(cobb_douglas):
    # both prices move: the straight-path integral of a m/p1 dp1 + (1−a) m/p2 dp2 is
    # −m [a ln(p1'/p1) + (1−a) ln(p2'/p2)] (path independent: no income effect
    # interactions for Cobb–Douglas; common practice, no source)
    df = compare(cobb_douglas, {"p1": 2.0, "p2": 1.0, "m": 50.0}, {"p1": 2.5, "p2": 0.7})
    dcs = -50.0 * (A * math.log(2.5 / 2.0) + (1 - A) * math.log(0.7 / 1.0))
    assert change(df, "consumer surplus change") == pytest.approx(dcs, rel=1e-9)
    cv = 50.0 - (50.0 / K(2.0, 1.0)) * K(2.5, 0.7)
    assert change(df, "compensating variation") == pytest.approx(cv, rel=1e-12)


def test_baseline_by_utility_equals_baseline_by_income(cobb_douglas):
    by_income = compare(cobb_douglas, {"p1": 1.0, "p2": 2.0, "m": 100.0}, {"p2": 2.4})
    u0 = 100.0 / K(1.0, 2.0)
    by_utility = compare(cobb_douglas, {"p1": 1.0, "p2": 2.0, "u": u0}, {"p2": 2.4})
    np.testing.assert_allclose(by_income[["baseline", "variant", "change"]].to_numpy(),
                               by_utility[["baseline", "variant", "change"]].to_numpy(),
                               rtol=1e-10)


def test_income_only_change_all_measures_equal_the_income_change(cobb_douglas):
    # no price change: CV = EV = ΔCS = Δm (definitions; common practice, no source)
    df = compare(cobb_douglas, {"p1": 1.0, "p2": 2.0, "m": 100.0}, {"m": 130.0})
    for k in ("compensating variation", "equivalent variation", "consumer surplus change"):
        assert change(df, k) == pytest.approx(30.0, rel=1e-12)


def test_price_and_income_change_follow_the_definitions(cobb_douglas):
    df = compare(cobb_douglas, {"p1": 1.0, "p2": 2.0, "m": 100.0}, {"p1": 1.2, "m": 110.0})
    u0, u1 = 100.0 / K(1.0, 2.0), 110.0 / K(1.2, 2.0)
    assert change(df, "compensating variation") == pytest.approx(110.0 - u0 * K(1.2, 2.0))
    assert change(df, "equivalent variation") == pytest.approx(u1 * K(1.0, 2.0) - 100.0)
    # straight path in (p1, m): ∫ a m(t)/p1(t) dp1 with m(t) = 100 + 10 t, p1(t) = 1 + 0.2 t
    from scipy.integrate import quad
    integral = quad(lambda t: A * (100 + 10 * t) / (1 + 0.2 * t) * 0.2, 0, 1)[0]
    assert change(df, "consumer surplus change") == pytest.approx(10.0 - integral, rel=1e-9)


# -- quasi-linear utility: no income effect, CV = EV = ΔCS ---------------------------------
def test_quasilinear_cv_equals_ev_equals_surplus():
    # u = x1 + b ln x2: Marshallian x2 = b p1/p2 (interior), so with p1 = 1 and p2 from
    # q to q', ΔCS = −b ln(q'/q) and CV = EV = ΔCS (no income effect; Mas-Colell,
    # Whinston and Green (1995), §3.I, from memory)
    b = 2.0
    model = dy.preference("x1 + b*log(x2)", ["x1", "x2"], params={"b": b})
    df = compare(model, {"p1": 1.0, "p2": 2.0, "m": 20.0}, {"p2": 3.0})
    expected = -b * math.log(3.0 / 2.0)
    for k in ("compensating variation", "equivalent variation", "consumer surplus change"):
        assert change(df, k) == pytest.approx(expected, rel=1e-9)
    assert change(df, "demand x2") == pytest.approx(b / 3.0 - b / 2.0)


def test_dual_side_indirect_utility_gives_the_same_welfare():
    # the same quasi-linear preference typed as v(p, m) (its expenditure function comes by
    # inversion): the welfare numbers agree with the primal model (common practice)
    primal = dy.preference("x1 + b*log(x2)", ["x1", "x2"], params={"b": 2.0})
    dual = dy.indirect_utility_function("(m - b*p1)/p1 + b*log(b*p1/p2)", ["p1", "p2"],
                                        params={"b": 2.0})
    base, var = {"p1": 1.0, "p2": 2.0, "m": 20.0}, {"p2": 2.5, "m": 21.0}
    a, b = compare(primal, base, var), compare(dual, base, var)
    for k in ("compensating variation", "equivalent variation", "consumer surplus change",
              "utility"):
        assert b.loc[k, "change"] == pytest.approx(a.loc[k, "change"], rel=1e-8)


# -- technologies ------------------------------------------------------------------------------
def cd_cost(w1, w2, y, Acoef, a, b):
    # c(w, y) = s (y/A)^(1/s) (w1/a)^(a/s) (w2/b)^(b/s), s = a + b
    # (Varian, Microeconomic Analysis, 3rd ed. (1992), ch. 4, from memory)
    s = a + b
    return s * (y / Acoef) ** (1 / s) * (w1 / a) ** (a / s) * (w2 / b) ** (b / s)


def test_cobb_douglas_cost_and_profit_changes():
    Acoef, a, b = 2.0, 0.3, 0.5
    model = dy.technology("A*x1^a*x2^b", ["x1", "x2"], params={"A": Acoef, "a": a, "b": b})
    base = {"w1": 1.0, "w2": 2.0, "y": 5.0, "p": 3.0}
    df = compare(model, base, {"w1": 1.5, "y": 6.0})
    c0, c1 = cd_cost(1.0, 2.0, 5.0, Acoef, a, b), cd_cost(1.5, 2.0, 6.0, Acoef, a, b)
    assert df.loc["total cost", "baseline"] == pytest.approx(c0, rel=1e-12)
    assert change(df, "total cost") == pytest.approx(c1 - c0, rel=1e-10)
    assert change(df, "unit cost") == pytest.approx(
        cd_cost(1.5, 2.0, 1.0, Acoef, a, b) - cd_cost(1.0, 2.0, 1.0, Acoef, a, b))
    # conditional demand: cost share a/s of total cost, x1 = (a/s) c / w1 (Shephard)
    s = a + b
    assert change(df, "conditional demand x1") == pytest.approx(
        a / s * c1 / 1.5 - a / s * c0 / 1.0, rel=1e-10)
    # profit with decreasing returns: y* = A^(1/(1-s)) (p a/w1)^(a/(1-s)) (p b/w2)^(b/(1-s)),
    # π = (1 − s) p y* (Varian 1992, ch. 2, from memory)
    def supply(p, w1, w2):
        return Acoef ** (1 / (1 - s)) * (p * a / w1) ** (a / (1 - s)) * \
            (p * b / w2) ** (b / (1 - s))
    y0, y1 = supply(3.0, 1.0, 2.0), supply(3.0, 1.5, 2.0)
    assert df.loc["supply y", "baseline"] == pytest.approx(y0, rel=1e-10)
    assert change(df, "supply y") == pytest.approx(y1 - y0, rel=1e-9)
    assert change(df, "profit") == pytest.approx((1 - s) * 3.0 * (y1 - y0), rel=1e-9)
    assert list(df.columns) == list(COLUMNS)


def test_constant_returns_has_no_profit_and_says_why():
    model = dy.technology("x1^0.4*x2^0.6", ["x1", "x2"])
    df = compare(model, {"w1": 1.0, "w2": 1.0, "y": 2.0, "p": 5.0}, {"w2": 2.0})
    assert math.isnan(df.loc["profit", "baseline"]) and math.isnan(df.loc["profit", "change"])
    assert "returns to scale" in df.loc["profit", "note"]
    assert "supply y" not in df.index
    # unit cost under constant returns: (w1/0.4)^0.4 (w2/0.6)^0.6 (Varian 1992, ch. 4)
    assert change(df, "unit cost") == pytest.approx(
        (1 / 0.4) ** 0.4 * (2 / 0.6) ** 0.6 - (1 / 0.4) ** 0.4 * (1 / 0.6) ** 0.6)
    assert change(df, "average cost") == pytest.approx(change(df, "unit cost"))


def test_no_output_price_means_no_profit_rows():
    model = dy.technology("x1^0.3*x2^0.3", ["x1", "x2"])
    df = compare(model, {"w1": 1.0, "w2": 1.0}, {"w1": 2.0})
    assert df.loc["output y", "baseline"] == 1.0  # output defaults to one unit
    assert "no output price" in df.loc["profit", "note"]
    assert df.loc["total cost", "baseline"] == pytest.approx(df.loc["unit cost", "baseline"])


def test_numeric_route_identities_hold():
    # the fishing cooperative's catch function has no closed form: the table still
    # satisfies the identities that define it (cost = w·x(w, y); profit = p y − w·x;
    # common practice, no source)
    s = sc.load(SCENARIOS / "fishing_cooperative_numeric.toml")
    model = s.build_model()
    base, variants = s.points()
    var = variants["fuel_price_rise"]
    df = compare(model, base, var)
    assert dy.cost(model).route == "numeric"
    goods = ("nets", "boats", "fuel")
    for col, pt in (("baseline", base), ("variant", {**base, **var})):
        spend = sum(pt[f"w_{g}"] * df.loc[f"conditional demand {g}", col] for g in goods)
        assert df.loc["total cost", col] == pytest.approx(spend, rel=1e-6)
        inputs = sum(pt[f"w_{g}"] * df.loc[f"input demand {g}", col] for g in goods)
        assert df.loc["profit", col] == pytest.approx(
            pt["p_fish"] * df.loc["supply catch", col] - inputs, rel=1e-6)
        # the catch function is separable in fuel: p ∂f/∂fuel = w_fuel gives
        # fuel = (0.3 p / w_fuel)^(1/0.7) for the profit-maximising input demand
        assert df.loc["input demand fuel", col] == pytest.approx(
            (0.3 * pt["p_fish"] / pt["w_fuel"]) ** (1 / 0.7), rel=1e-6)
    assert change(df, "total cost") > 0  # a dearer input never lowers cost


def test_numeric_route_preference_welfare():
    # a utility outside the catalogue: expenditure and indirect utility are numeric; the
    # measures obey their definitions and the Willig (1976) ordering for normal goods
    model = dy.preference("log(x1) + x2^0.5 + 0.3*log(x1 + x2)", ["x1", "x2"])
    e, v = dy.expenditure(model), dy.indirect_utility(model)
    assert e.route == "numeric" and v.route == "numeric"
    df = compare(model, {"p1": 1.0, "p2": 2.0, "m": 10.0}, {"p1": 1.5})
    u0 = v(p1=1.0, p2=2.0, m=10.0)
    assert change(df, "compensating variation") == pytest.approx(
        10.0 - e(p1=1.5, p2=2.0, u=u0), rel=1e-6)
    cv, dcs, ev = (change(df, k) for k in ("compensating variation",
                                            "consumer surplus change",
                                            "equivalent variation"))
    assert cv < dcs < ev < 0


# -- bad points ----------------------------------------------------------------------------
def test_bad_points_are_refused(cobb_douglas):
    good = {"p1": 1.0, "p2": 2.0, "m": 10.0}
    with pytest.raises(DualityError, match="no value for price 'p2'"):
        compare(cobb_douglas, {"p1": 1.0, "m": 10.0}, {})
    with pytest.raises(DualityError, match="exactly one of income 'm' and utility"):
        compare(cobb_douglas, {**good, "u": 3.0}, {})
    with pytest.raises(DualityError, match="variant: 'p3' is not a name that can be set "
                                           "here; expected one of m, p1, p2"):
        compare(cobb_douglas, good, {"p3": 1.0})
    with pytest.raises(DualityError, match="variant: 'p1' must be positive"):
        compare(cobb_douglas, good, {"p1": 0.0})
    with pytest.raises(DualityError, match="variant: 'u' is not a name that can be set"):
        compare(cobb_douglas, good, {"u": 2.0})
    with pytest.raises(DualityError, match="must be a number"):
        compare(cobb_douglas, good, {"p1": "dear"})
    with pytest.raises(DualityError, match="needs a model"):
        compare("x1*x2", good, {})


# -- every demo scenario --------------------------------------------------------------------
@pytest.mark.parametrize("path", DEMOS, ids=lambda p: p.stem)
def test_every_demo_produces_its_table(path):
    s = sc.load(path)
    model = s.build_model()
    table = scenario_table(s)
    assert list(table.columns) == list(COLUMNS)
    assert table.index.names == ["variant", "measure"]
    assert list(table.index.get_level_values(0).unique()) == list(s.variants)
    for name in s.variants:
        part = table.loc[name]
        if model.role == "preference":
            core = ["compensating variation", "equivalent variation",
                    "consumer surplus change"]
            assert np.isfinite(part.loc[core, "change"].to_numpy(float)).all()
        else:
            core = ["unit cost", "total cost"]
            assert np.isfinite(part.loc[core, ["baseline", "variant"]].to_numpy(float)).all()
            # baseline column is the same baseline for every variant
            assert part.loc["total cost", "baseline"] == pytest.approx(
                table.loc[list(s.variants)[0]].loc["total cost", "baseline"])


def test_numeric_demo_uses_the_numeric_route():
    s = sc.load(SCENARIOS / "fishing_cooperative_numeric.toml")
    assert dy.cost(s.build_model()).route == "numeric"


def test_saltmere_fuel_levy_closed_form():
    # the Saltmere household is Cobb–Douglas with fuel share 0.2: a fuel price rise from
    # 1.6 to 2.1 at income 420 gives CV = 420 (1 − (2.1/1.6)^0.2), EV = 420 ((1.6/2.1)^0.2 − 1),
    # ΔCS = −0.2 · 420 · ln(2.1/1.6) (Varian 1992, ch. 10, from memory)
    table = scenario_table(sc.load(SCENARIOS / "saltmere_household.toml"))
    part = table.loc["fuel_levy"]
    r = 2.1 / 1.6
    assert part.loc["compensating variation", "change"] == pytest.approx(420 * (1 - r ** 0.2))
    assert part.loc["equivalent variation", "change"] == pytest.approx(420 * (r ** -0.2 - 1))
    assert part.loc["consumer surplus change", "change"] == pytest.approx(
        -0.2 * 420 * math.log(r))


def test_ferry_translog_reports_constant_returns():
    table = scenario_table(sc.load(SCENARIOS / "ferry_operator_translog.toml"))
    part = table.loc["summer_timetable"]
    # constant returns (ay = 1, no output terms): unit cost is unchanged by output and
    # total cost scales with it (Christensen, Jorgenson and Lau 1973, from memory)
    assert part.loc["unit cost", "change"] == pytest.approx(0.0, abs=1e-9)
    assert part.loc["total cost", "variant"] / part.loc["total cost", "baseline"] == \
        pytest.approx(42.0 / 30.0)
    assert "returns" in part.loc["profit", "note"]


def test_scenario_errors_name_file_and_variant():
    s = sc.load(SCENARIOS / "pottery_workshop.toml")
    broken = dataclasses.replace(s, variants={"odd": sc.Variant(prices={"w_glaze": 1.0})})
    with pytest.raises(DualityError, match=r"pottery_workshop\.toml: key 'variants\.odd'.*"
                                           r"w_glaze"):
        scenario_table(broken)


def test_scenario_without_variants_gives_an_empty_table():
    s = dataclasses.replace(sc.load(SCENARIOS / "pottery_workshop.toml"), variants={})
    table = scenario_table(s)
    assert table.empty and list(table.columns) == list(COLUMNS)


def test_scenario_table_for_chosen_variants():
    import pathlib
    import pytest as _pytest
    import duality as _dy
    from duality.apply.welfare import scenario_table as _table
    s = _dy.load_scenario(pathlib.Path(__file__).resolve().parents[2] / "scenarios" /
                          "pottery_workshop.toml")
    full = _table(s)
    one = _table(s, only=["festival_order"])
    assert set(one.index.get_level_values(0)) == {"festival_order"}
    assert one.equals(full.loc[["festival_order"]])
    with _pytest.raises(_dy.DualityError, match="no variant named 'nope'"):
        _table(s, only=["nope"])

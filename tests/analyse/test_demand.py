"""Demand systems by differentiation agree with the optimisers' demands."""
from __future__ import annotations

import numpy as np
import pytest

import duality as dy

PT_T = {"w1": 1.3, "w2": 0.8, "y": 2.5}
PT_P = {"p1": 1.3, "p2": 0.8, "m": 12.0}


def _agree(a: dict, b: dict, pt: dict, rtol: float):
    assert list(a) == list(b)
    for name in a:
        assert a[name](**pt) == pytest.approx(b[name](**pt), rel=rtol), name


@pytest.mark.parametrize("formula", ["x1^0.3*x2^0.5", "(x1^-1 + 2*x2^-1)^(-0.8)"])
def test_shephard_equals_the_cost_minimisers(formula):
    # Shephard's lemma: x_i(w, y) = ∂c/∂w_i (Shephard 1953; Varian 1992, ch. 5; from memory)
    c = dy.cost(dy.technology(formula, ["x1", "x2"]))
    _agree(dy.shephard(c), c.demands, PT_T, 1e-12)


def test_shephard_on_a_numeric_cost_uses_finite_differences():
    c = dy.cost(dy.technology("x1^0.3*x2^0.5 + log(1 + x1)", ["x1", "x2"]), budget=1)
    assert c.route == "numeric"
    d = dy.shephard(c)
    assert "finite differences" in d["x1"].method
    _agree(d, c.demands, PT_T, 1e-6)


def test_roy_equals_the_marshallian_demands():
    # Roy's identity x_i = -(∂v/∂p_i)/(∂v/∂m) (Roy 1947; Varian 1992, ch. 7; from memory)
    v = dy.indirect_utility(dy.preference("0.4*log(x1 - 1) + 0.6*log(x2 - 2)", ["x1", "x2"]))
    _agree(dy.roy(v), v.demands, PT_P, 1e-12)


def test_hotelling_equals_supply_and_factor_demands():
    # Hotelling's lemma y = ∂π/∂p, x_i = -∂π/∂w_i (Hotelling 1932; Varian 1992, ch. 5;
    # from memory)
    pi = dy.profit(dy.technology("x1^0.3*x2^0.5", ["x1", "x2"]))
    _agree(dy.hotelling(pi), pi.demands, {"p": 3.0, "w1": 1.0, "w2": 2.0}, 1e-12)


def test_shares_add_up_to_one():
    c = dy.cost(dy.technology("(x1^0.5 + 2*x2^0.5 + x3^0.5)^2", ["x1", "x2", "x3"]))
    s = dy.shares(c)
    pt = {"w1": 1.0, "w2": 2.0, "w3": 3.0, "y": 5.0}
    assert sum(v(**pt) for v in s.values()) == pytest.approx(1.0, rel=1e-14)
    v = dy.indirect_utility(dy.preference("x1^0.3*x2^0.7", ["x1", "x2"]))
    b = dy.shares(v)
    # Cobb–Douglas budget shares equal the exponents (Varian 1992, ch. 7; from memory)
    assert b["x1"](**PT_P) == pytest.approx(0.3) and b["x2"](**PT_P) == pytest.approx(0.7)


def test_demand_functions_refuse_the_wrong_dual():
    v = dy.indirect_utility(dy.preference("x1^0.3*x2^0.7", ["x1", "x2"]))
    with pytest.raises(dy.DualityError, match="Shephard's lemma needs a cost or expenditure"):
        dy.shephard(v)
    with pytest.raises(dy.DualityError, match="Roy's identity needs"):
        dy.roy(dy.cost(dy.technology("x1*x2", ["x1", "x2"])))


def test_derived_results_print_and_render():
    c = dy.cost(dy.technology("x1^0.3*x2^0.5", ["x1", "x2"]))
    assert "catalogue" in repr(c) and "Varian" in repr(c)
    assert c.latex().startswith("c(w_{1}, w_{2}, y) =")
    assert "route: catalogue" in c.summary()
    num = dy.cost(dy.technology("x1^0.3*x2^0.5 + log(1 + x1)", ["x1", "x2"]), budget=1)
    assert "numeric only" in num.latex()
    arr = num(w1=np.array([1.0, 2.0]), w2=1.0, y=2.0)
    assert arr.shape == (2,) and np.all(np.isfinite(arr))

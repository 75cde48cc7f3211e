"""Points: the one sampler, the default point, completing a preference's point, and a
function's value at a point."""
from __future__ import annotations

import pytest

import duality as dy
from duality.errors import DualityError
from duality.solve.points import (complete_point, default_point, sample_points,
                                   sample_primal_points, value_at)


@pytest.fixture(scope="module")
def cobb_douglas_preference():
    return dy.preference("x1^0.3*x2^0.7", ["x1", "x2"])


def test_samples_are_reproducible_and_in_their_ranges():
    m = dy.cost_function("y*(a*w1 + b*w2)", ["w1", "w2"], params={"a": None, "b": 2.0})
    pts = sample_points(m, 20, seed=4)
    assert pts == sample_points(m, 20, seed=4) and pts != sample_points(m, 20, seed=5)
    a, b = sorted(m.params, key=lambda p: p.name)
    for pt in pts:
        assert 0.2 <= pt[a.symbol] <= 0.6 and pt[b.symbol] == 2.0   # free drawn, valued kept
        assert all(0.5 <= pt[w] <= 3.0 for w in m.prices)
        assert 0.5 <= pt[m.level] <= 3.0 and 1.0 <= pt[m.output_price] <= 3.0
    # without levels: the same prices and parameters, drawn in the same order
    bare = sample_points(m, 1, seed=4, levels=False)[0]
    assert bare == {k: v for k, v in pts[0].items() if k not in (m.level, m.output_price)}


def test_preference_samples_draw_income(cobb_douglas_preference):
    m = cobb_douglas_preference
    for pt in sample_points(m, 10, seed=1):
        assert 5.0 <= pt[m.income] <= 50.0 and m.level not in pt


def test_default_point_and_given_values():
    tech = dy.technology("x1^0.3*x2^0.5", ["x1", "x2"])
    assert default_point(tech) == {"w1": 1.0, "w2": 2.0, "y": 5.0, "p": 4.0}
    assert default_point(tech, {"w2": 7, "y": 1})["w2"] == 7.0
    with pytest.raises(DualityError, match=r"unknown name\(s\) zz; the model's prices and "
                                           r"levels are p, w1, w2, y"):
        default_point(tech, {"zz": 1.0})


def test_complete_point_uses_the_duals(cobb_douglas_preference):
    m = cobb_douglas_preference
    duals = dy.solve.derive.duals(m)
    pt = complete_point(m, default_point(m), duals)
    # Cobb–Douglas indirect utility v = (a m/p1)^a ((1-a) m/p2)^(1-a) (Varian 1992, ch. 7;
    # from memory): a = 0.3, m = 100, p = (1, 2)
    assert pt["u"] == pytest.approx((30.0 / 1) ** 0.3 * (70.0 / 2) ** 0.7, rel=1e-12)
    # and the other way: the income that level costs is the income (e(p, v(p, m)) = m)
    back = complete_point(m, {"p1": 1.0, "p2": 2.0, "u": pt["u"]}, duals)
    assert back["m"] == pytest.approx(100.0, rel=1e-10)
    # a technology's point, or one without usable duals, is left as it is
    tech = dy.technology("x1^0.3*x2^0.5", ["x1", "x2"])
    assert complete_point(tech, {"w1": 1.0}, {}) == {"w1": 1.0}
    assert complete_point(m, {"p1": 1.0, "p2": 2.0, "m": 5.0},
                          {"indirect_utility": "does not exist"}) == \
        {"p1": 1.0, "p2": 2.0, "m": 5.0}


def test_value_at_is_none_where_it_cannot_be_evaluated():
    c = dy.cost(dy.technology("x1^0.5*x2^0.5", ["x1", "x2"]))
    # c(w, y) = 2 y sqrt(w1 w2) for y = sqrt(x1 x2) (common practice, no source)
    assert value_at(c, {"w1": 1.0, "w2": 4.0, "y": 3.0, "extra": 9.0}) == \
        pytest.approx(12.0, rel=1e-12)
    assert value_at(c, {"w1": 1.0, "w2": 4.0}) is None
    assert value_at(c, {"w1": -1.0, "w2": 4.0, "y": 3.0}) is None   # outside the domain


def test_primal_samples_reach_the_function_and_are_reproducible():
    # Stone–Geary utility is defined only above subsistence (Deaton and Muellbauer,
    # Economics and Consumer Behavior, 1980, ch. 3; from memory): the sampler doubles
    # a bundle until it is
    m = dy.preference("(x1 - 2)^0.4*(x2 - 3)^0.6", ["x1", "x2"])
    smp = sample_primal_points(m, 6, seed=2)
    again = sample_primal_points(m, 6, seed=2)
    for s, t in zip(smp, again):
        assert (s.quantities == t.quantities).all() and (s.prices == t.prices).all()
        assert s.quantities[0] > 2 and s.quantities[1] > 3
        assert s.fns.f(s.quantities) == pytest.approx(
            (s.quantities[0] - 2) ** 0.4 * (s.quantities[1] - 3) ** 0.6, rel=1e-12)
        assert all(0.5 <= w <= 3.0 for w in s.prices) and s.output_price is None
    tech = dy.technology("A*x1^a*x2^0.5", ["x1", "x2"], params={"A": 2.0, "a": None})
    for s in sample_primal_points(tech, 4, output_price=True):
        a = next(k for k in s.params if str(k) == "a")
        assert 0.2 <= s.params[a] <= 0.6 and 1.0 <= s.output_price <= 3.0

"""Models given on the dual side: constructors, demand systems, the other duals."""
from __future__ import annotations

import numpy as np
import pytest
import sympy as sp

import duality as dy
from duality.errors import ModelError, NoSolutionError


def test_cost_function_gives_shephard_demands_and_profit():
    # c = y^(5/4) w1^(3/8) w2^(5/8) is the cost function of y = x1^0.3 x2^0.5 up to a
    # constant; demands x_i = ∂c/∂w_i (Shephard 1953; Varian 1992, ch. 5; from memory)
    m = dy.cost_function("y^1.25*w1^0.375*w2^0.625", ["w1", "w2"])
    assert [str(q) for q in m.quantities] == ["x1", "x2"]
    c = dy.cost(m)
    assert c.expr == m.expr and "Shephard" in c.method
    w1, w2, y = 1.3, 2.1, 3.0
    assert c.demands["x1"](w1=w1, w2=w2, y=y) == pytest.approx(
        0.375 * y ** 1.25 * w1 ** -0.625 * w2 ** 0.625, rel=1e-13)
    pi = dy.profit(m)
    # max_y p y − c: p = 1.25 K y^0.25 -> y* = (p / (1.25 K))^4 (common practice, no source)
    K = w1 ** 0.375 * w2 ** 0.625
    p = 4.0
    ystar = (p / (1.25 * K)) ** 4
    assert pi.demands["y"](p=p, w1=w1, w2=w2) == pytest.approx(ystar, rel=1e-12)
    assert pi(p=p, w1=w1, w2=w2) == pytest.approx(p * ystar - K * ystar ** 1.25, rel=1e-12)


def test_expenditure_and_indirect_utility_invert_each_other():
    e_model = dy.expenditure_function("u*p1^0.3*p2^0.7", ["p1", "p2"])
    v = dy.indirect_utility(e_model)
    assert v.route == "symbolic"
    # Cobb–Douglas: v = m / (p1^0.3 p2^0.7), x1 = 0.3 m / p1 (Varian 1992, ch. 7; from memory)
    assert v(p1=2.0, p2=3.0, m=10.0) == pytest.approx(10 / (2 ** 0.3 * 3 ** 0.7), rel=1e-13)
    assert v.demands["x1"](p1=2.0, p2=3.0, m=10.0) == pytest.approx(1.5, rel=1e-13)
    v_model = dy.indirect_utility_function("m/(p1^0.3*p2^0.7)", ["p1", "p2"])
    e = dy.expenditure(v_model)
    assert e(p1=2.0, p2=3.0, u=4.0) == pytest.approx(4 * 2 ** 0.3 * 3 ** 0.7, rel=1e-13)
    assert dy.indirect_utility(v_model).demands["x2"](p1=2.0, p2=3.0, m=10.0) == \
        pytest.approx(0.7 * 10 / 3, rel=1e-13)


def test_numeric_inversion_when_no_closed_form():
    # e is increasing in u but e(p, u) = m has no closed-form solution in u
    m = dy.expenditure_function("(u + u^3/3 + exp(u/5))*p1^0.4*p2^0.6", ["p1", "p2"])
    v = dy.indirect_utility(m, budget=1)
    assert v.route == "numeric"
    u = np.array([0.5, 1.0, 2.0])
    e = dy.expenditure(m)
    mm = e(p1=1.5, p2=0.8, u=u)
    assert np.allclose(v(p1=1.5, p2=0.8, m=mm), u, rtol=1e-12)
    # Marshallian = Hicksian at u = v(p, m)
    assert np.allclose(v.demands["x1"](p1=1.5, p2=0.8, m=mm),
                       e.demands["x1"](p1=1.5, p2=0.8, u=u), rtol=1e-10)


def test_cost_from_a_profit_function():
    # π = p^2/(4 w1) + p^2/(4 w2) is the profit function of y = sqrt(x1) + sqrt(x2)
    # (common practice, no source); its cost function is c = y^2 w1 w2 / (w1 + w2)
    m = dy.profit_function("p^2/(4*w1) + p^2/(4*w2)", ["w1", "w2"])
    c = dy.cost(m)
    w1, w2, y = 1.5, 0.5, 2.0
    assert c(w1=w1, w2=w2, y=y) == pytest.approx(y ** 2 * w1 * w2 / (w1 + w2), rel=1e-12)
    pi = dy.profit(m)
    assert pi.demands["y"](p=2.0, w1=w1, w2=w2) == pytest.approx(2.0 / 2 * (1 / w1 + 1 / w2))


def test_flexible_forms_carry_their_sources():
    t = dy.translog_cost(2)
    c = dy.cost(t)
    assert c.route == "catalogue" and "Christensen" in c.source
    assert "Diewert" in dy.cost(dy.generalized_leontief_cost(2)).source
    a = dy.aids_expenditure(2)
    assert "Deaton" in dy.expenditure(a).source
    names = {p.name for p in t.params}
    assert {"a0", "a1", "a2", "g11", "g12", "g22", "ay", "gyy", "g1y", "g2y"} == names


def test_translog_share_equations_from_the_formula():
    # s_i = ∂ln c/∂ln w_i = a_i + Σ_j g_ij ln w_j + g_iy ln y
    # (Christensen, Jorgenson and Lau 1973; from memory)
    vals = dict(a0=0.2, a1=0.4, a2=0.6, g11=0.05, g12=-0.05, g22=0.05, ay=1.0, gyy=0.1,
                g1y=0.02, g2y=-0.02)
    c = dy.cost(dy.translog_cost(2, params=vals))
    s = dy.shares(c)
    w1, w2, y = 1.7, 0.6, 2.5
    want = 0.4 + 0.05 * np.log(w1) - 0.05 * np.log(w2) + 0.02 * np.log(y)
    assert s["x1"](w1=w1, w2=w2, y=y) == pytest.approx(want, rel=1e-12)


def test_aids_shares_exact_and_stone():
    vals = dict(a0=0.5, a1=0.4, a2=0.6, g11=0.1, g12=-0.1, g22=0.1, b0=1.0, b1=0.1,
                b2=-0.1)
    a = dy.aids_expenditure(2, params=vals)
    exact = dy.aids_share_equations(a)
    stone = dy.aids_share_equations(a, index="stone")
    p1, p2, m = sp.symbols("p1 p2 m", positive=True)
    pt = {p1: 1.2, p2: 0.8, m: 10.0}
    syms = {p.name: p.symbol for p in a.params}
    got = float(exact[0].xreplace({syms[k]: v for k, v in vals.items()}).xreplace(pt))
    # the engine's budget share from v(p, m) (Roy) must agree with the published equation
    v = dy.indirect_utility(a, budget=10)
    assert dy.shares(v)["x1"](p1=1.2, p2=0.8, m=10.0) == pytest.approx(got, rel=1e-10)
    s1 = sp.Symbol("s1", real=True)
    assert s1 in stone[0].free_symbols


@pytest.mark.parametrize("call, message", [
    (lambda: dy.cost_function("y*x1*w1", ["w1"]), "unknown symbol 'x1'"),
    (lambda: dy.cost_function("y*w1", ["w1", "w2"]), "price 'w2' does not appear"),
    (lambda: dy.cost_function("y*w1*w2", ["w1", "w2"], ["a"]), "2 prices but 1 quantities"),
    (lambda: dy.translog_cost(2, params={"zz": 1}), "unknown parameter(s) zz"),
    (lambda: dy.translog_cost(1), "at least two prices"),
    (lambda: dy.cost_function("log(-y-w1)", ["w1"]), "no real, finite value"),
])
def test_bad_dual_side_models_are_named(call, message):
    with pytest.raises(ModelError) as err:
        call()
    assert message in str(err.value)


def test_increasing_returns_translog_has_no_profit_function():
    vals = dict(a0=0.0, a1=0.5, a2=0.5, g11=0.0, g12=0.0, g22=0.0, ay=0.8, gyy=0.0,
                g1y=0.0, g2y=0.0)
    with pytest.raises(NoSolutionError, match="increasing returns|decreasing returns"):
        dy.profit(dy.translog_cost(2, params=vals))


def test_dual_side_checks_pass_for_a_regular_translog():
    vals = dict(a0=0.1, a1=0.3, a2=0.7, g11=0.05, g12=-0.05, g22=0.05, ay=1.0, gyy=0.0,
                g1y=0.0, g2y=0.0)
    recs = dy.check(dy.translog_cost(2, params=vals), points=8)
    assert not [r for r in recs if r.status == "failed"], [r.line() for r in recs]
    assert any(r.name == "Shephard's lemma" and r.status == "proved" for r in recs)

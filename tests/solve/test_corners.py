"""Corner solutions by the Kuhn–Tucker conditions (duality.solve.corners).

Every expected value is worked by hand from the Kuhn–Tucker conditions of the problem
(Varian, Microeconomic Analysis, 3rd ed., ch. 7 and §27.5; Mas-Colell, Whinston and Green,
Microeconomic Theory, 3.D; both from memory); the working is written beside each test.
"""
from __future__ import annotations

import math
import warnings

import numpy as np
import pytest

import duality as dy
from duality.errors import DomainError
from duality.solve import corners
from duality.solve.numeric import compile_model


def test_typed_utility_corner_in_the_numeric_route():
    # u = log(1+x1) + log(1+x2) + 0.1 x1 x2, p = (1, 4), m = 1.  At (1, 0): MU1 = 1/2 so
    # lambda = 1/2; MU2 = 1 + 0.1*1 = 1.1 <= lambda*p2 = 2: the corner meets the KKT
    # conditions; along the budget g(x2) = log(2-4x2) + log(1+x2) + 0.1(1-4x2)x2 is concave
    # with g'(0) = -0.9 < 0, so it is the optimum: v = log 2 (hand working, Varian ch. 7)
    v = dy.indirect_utility(dy.preference("log(1+x1) + log(1+x2) + 0.1*x1*x2",
                                          ["x1", "x2"]))
    assert v.route == "numeric"
    pt = dict(p1=1.0, p2=4.0, m=1.0)
    assert v(**pt) == pytest.approx(math.log(2), rel=1e-9)
    d = v.demands
    assert d["x1"](**pt) == pytest.approx(1.0, rel=1e-8)
    assert abs(d["x2"](**pt)) < 1e-8
    rep = v.solver_report(**pt)
    assert bool(rep.corners) and rep.reasons == "ok"
    # at p = (1, 1) the optimum is interior, (1/2, 1/2) by symmetry: not a corner
    rep = v.solver_report(p1=1.0, p2=1.0, m=1.0)
    assert not bool(rep.corners)
    assert d["x1"](p1=1.0, p2=1.0, m=1.0) == pytest.approx(0.5, rel=1e-8)


def test_typed_technology_cost_corner():
    # f = sqrt((1+x1)(1+x2)) - 1, w = (1, 9), y = 1/2.  Interior tangency would need
    # 1+x1 = 9(1+x2), hence 1+x2 = 1/2 < 1: infeasible, so x2 = 0 and 1+x1 = 2.25, c = 1.25.
    # KKT: f1 = 0.5/1.5 = 1/3 so mu = 3; mu*f2 = 3*0.75 = 2.25 <= w2 = 9 (hand working,
    # Varian ch. 5/7 cost minimisation with x >= 0)
    t = dy.technology("(1+x1)^0.5*(1+x2)^0.5 - 1", ["x1", "x2"])
    c = dy.cost(t, budget=0)          # no symbolic time: the numeric route
    assert c.route == "numeric"
    assert c(w1=1.0, w2=9.0, y=0.5) == pytest.approx(1.25, rel=1e-9)
    assert c.demands["x1"](w1=1.0, w2=9.0, y=0.5) == pytest.approx(1.25, rel=1e-8)
    assert bool(c.solver_report(w1=1.0, w2=9.0, y=0.5).corners)
    # the symbolic route solves the interior conditions only: at this point it refuses
    # (valid only where each demand is positive) instead of the negative x2 = -1/2
    sym = dy.cost(t)
    if sym.route == "symbolic":
        with pytest.raises(DomainError):
            sym(w1=1.0, w2=9.0, y=0.5)
        assert sym(w1=1.0, w2=1.0, y=0.5) == pytest.approx(1.0, rel=1e-9)


def test_typed_technology_profit_corner():
    # f = log(1+x1) + log(1+x2), p = 1, w = (0.5, 2): p f1 = 1/(1+x1) = 0.5 gives x1 = 1;
    # p f2(0) = 1 <= w2 = 2 so x2 = 0.  pi = log 2 - 0.5, y = log 2 (hand working,
    # Varian ch. 2 profit maximisation with x >= 0)
    pi = dy.profit(dy.technology("log(1+x1) + log(1+x2)", ["x1", "x2"]), budget=0)
    assert pi.route == "numeric"
    pt = dict(p=1.0, w1=0.5, w2=2.0)
    assert pi(**pt) == pytest.approx(math.log(2) - 0.5, rel=1e-9)
    assert pi.demands["y"](**pt) == pytest.approx(math.log(2), rel=1e-9)
    assert abs(pi.demands["x2"](**pt)) < 1e-8
    assert bool(pi.solver_report(**pt).corners)


def test_quasi_linear_typed_corner_low_income():
    # u = x1 + 2 log(x2 + 1), p = (1, 1): interior x2 = 1 needs m >= 1; at m = 1/2 the
    # numeraire is not bought: (0, 1/2), u = 2 log 1.5 (hand working, Varian ch. 7 / MWG 3.D)
    v = dy.indirect_utility(dy.preference("x1 + 2*log(x2+1)", ["x1", "x2"]))
    pt = dict(p1=1.0, p2=1.0, m=0.5)
    assert v(**pt) == pytest.approx(2 * math.log(1.5), rel=1e-9)
    assert v.demands["x1"](**pt) == pytest.approx(0.0, abs=1e-12)
    assert v.demands["x2"](**pt) == pytest.approx(0.5, rel=1e-12)


def test_stone_geary_shape_with_negative_subsistence_is_not_a_negative_demand():
    # log(1+x1) + log(1+x2) at p = (1, 4), m = 1: the LES formula would give x2 = -1/4;
    # the optimum is the corner (1, 0) with v = log 2 (KKT: MU1 = 1/2 = lambda,
    # MU2(0) = 1 <= 4 lambda = 2; hand working)
    v = dy.indirect_utility(dy.preference("log(1+x1) + log(1+x2)", ["x1", "x2"]))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            got = v(p1=1.0, p2=4.0, m=1.0)
        except DomainError:
            return                      # refused: never a negative quantity
    assert got == pytest.approx(math.log(2), rel=1e-9)


class _Eval:
    """f and grad of a model at fixed parameters, for bounded_point."""

    def __init__(self, model):
        self.c = compile_model(model)

    def f(self, x):
        return float(self.c.f(*x))

    def g(self, x):
        return np.asarray(self.c.grad(*x), float).reshape(-1)


def test_bounded_point_solves_each_problem_at_a_corner():
    u = dy.preference("log(1+x1) + log(1+x2) + 0.1*x1*x2", ["x1", "x2"])
    val, x, _, bound = corners.bounded_point("utility", _Eval(u), np.array([1.0, 4.0]), 1.0)
    assert val == pytest.approx(math.log(2), rel=1e-9)          # as worked above
    assert list(bound) == [False, True] and x[0] == pytest.approx(1.0, rel=1e-9)
    t = dy.technology("(1+x1)^0.5*(1+x2)^0.5 - 1", ["x1", "x2"])
    val, x, _, bound = corners.bounded_point("spending", _Eval(t), np.array([1.0, 9.0]), 0.5)
    assert val == pytest.approx(1.25, rel=1e-9)
    t = dy.technology("log(1+x1) + log(1+x2)", ["x1", "x2"])
    val, x, y, bound = corners.bounded_point("profit", _Eval(t), np.array([0.5, 2.0]), 1.0)
    assert val == pytest.approx(math.log(2) - 0.5, rel=1e-8)
    assert y == pytest.approx(math.log(2), rel=1e-8)


def test_kkt_conditions_reject_a_wrong_corner():
    # u = x1 + x2 at p = (1, 1) ... the point (m, 0) with gradient (1, 3): MU2 = 3 > lambda
    # p2 = 1, so raising x2 pays: not an optimum (KKT, MWG 3.D); with gradient (1, 0.5) it is
    prices = np.array([[1.0, 1.0], [1.0, 1.0]])
    G = np.array([[1.0, 3.0], [1.0, 0.5]])
    bound = np.array([[False, True], [False, True]])
    assert list(corners.kkt_holds("utility", G, prices, bound)) == [False, True]
    # cost: mu from x1, f1 = 1 and w1 = 1 so mu = 1; f2 = 2 with w2 = 1 fails, f2 = 0.5 holds
    G = np.array([[1.0, 2.0], [1.0, 0.5]])
    assert list(corners.kkt_holds("spending", G, prices, bound)) == [False, True]
    # profit at p = 1: p*f2 = 2 > w2 = 1 fails; a sqrt-type infinite marginal at 0 fails
    G = np.array([[1.0, 2.0], [1.0, np.inf]])
    assert not corners.kkt_holds("profit", G, prices, bound, np.array([1.0, 1.0])).any()


def test_linear_and_leontief_corners_are_already_closed_forms():
    # linear f = 2 x1 + 3 x2 at w = (1, 1): only x2 is used (lower price per unit of output),
    # c = y/3; Leontief min(x1/2, x2/3) uses both in fixed proportion, c = (2 w1 + 3 w2) y
    # (Varian ch. 5, from memory)
    lin = dy.cost(dy.technology("2*x1 + 3*x2", ["x1", "x2"]))
    assert lin(w1=1.0, w2=1.0, y=3.0) == pytest.approx(1.0)
    assert lin.demands["x1"](w1=1.0, w2=1.0, y=3.0) == pytest.approx(0.0, abs=1e-12)
    leo = dy.cost(dy.technology("min(x1/2, x2/3)", ["x1", "x2"]))
    assert leo(w1=1.0, w2=2.0, y=1.0) == pytest.approx(8.0)

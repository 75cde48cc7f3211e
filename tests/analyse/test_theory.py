"""Theory restrictions of dual-side models through the public API."""
from __future__ import annotations

import numpy as np
import pytest
import sympy as sp

import duality as dy

TL = dict(a0=0.1, a1=0.3, a2=0.3, a3=0.4, g11=0.1, g12=-0.05, g13=-0.05, g22=0.1,
          g23=-0.05, g33=0.1, ay=1.0, gyy=0.0, g1y=0.01, g2y=-0.01, g3y=0.0)


def _span_equal(derived, published, params):
    def rows(eqs):
        out = []
        for e in eqs:
            expr = sp.expand(e.lhs - e.rhs)
            out.append([expr.coeff(p) for p in params] + [-expr.subs({p: 0 for p in params})])
        return sp.Matrix(out)
    A, B = rows(derived), rows(published)
    return A.rank() == B.rank() == A.col_join(B).rank()


def test_translog_restrictions_equal_the_published_ones():
    model = dy.translog_cost(3)
    s = {p.name: p.symbol for p in model.params}
    # Christensen, Jorgenson and Lau (1973), homogeneity of degree one in prices with a
    # symmetric second-order matrix (from memory)
    published = [sp.Eq(s["a1"] + s["a2"] + s["a3"], 1),
                 sp.Eq(s["g11"] + s["g12"] + s["g13"], 0),
                 sp.Eq(s["g12"] + s["g22"] + s["g23"], 0),
                 sp.Eq(s["g13"] + s["g23"] + s["g33"], 0),
                 sp.Eq(s["g1y"] + s["g2y"] + s["g3y"], 0)]
    derived = [r.equation for r in dy.restrictions(model)]
    assert _span_equal(derived, published, list(model.param_symbols))


def test_aids_restrictions_equal_the_published_ones():
    model = dy.aids_expenditure(3)
    s = {p.name: p.symbol for p in model.params}
    # Deaton and Muellbauer (1980): sum a = 1, sum_k g_kj = 0, sum b = 0 (from memory)
    published = [sp.Eq(s["a1"] + s["a2"] + s["a3"], 1),
                 sp.Eq(s["g11"] + s["g12"] + s["g13"], 0),
                 sp.Eq(s["g12"] + s["g22"] + s["g23"], 0),
                 sp.Eq(s["g13"] + s["g23"] + s["g33"], 0),
                 sp.Eq(s["b1"] + s["b2"] + s["b3"], 0)]
    derived = [r.equation for r in dy.restrictions(model)]
    assert _span_equal(derived, published, list(model.param_symbols))


def test_violations_name_the_broken_restriction():
    assert dy.violations(dy.translog_cost(3, params=TL)) == []
    bad = dict(TL, a3=0.5)
    [(r, res)] = dy.violations(dy.translog_cost(3, params=bad))
    assert r.kind == "homogeneity" and res == pytest.approx(0.1)
    assert "a3" in {p.name for p in r.parameters}


def test_imposed_model_is_homogeneous(rng):
    model = dy.impose_restrictions(dy.translog_cost(3))
    kept = [p.name for p in model.params]
    assert "a3" not in kept and "g33" not in kept
    vals = {k: v for k, v in TL.items() if k in kept}
    c = dy.cost(model.with_values(**vals))
    w = rng.uniform(0.5, 2.0, (3, 5))
    y = rng.uniform(0.5, 2.0, 5)
    # c(t w, y) = t c(w, y) (common practice, no source)
    assert np.allclose(c(w1=2 * w[0], w2=2 * w[1], w3=2 * w[2], y=y),
                       2 * c(w1=w[0], w2=w[1], w3=w[2], y=y), rtol=1e-12)


def test_restrictions_need_a_dual_side_model_and_values():
    with pytest.raises(dy.DualityError, match="satisfy them by construction"):
        dy.restrictions(dy.technology("x1^0.3*x2^0.5", ["x1", "x2"]))
    with pytest.raises(dy.DualityError, match="needs a value for every parameter"):
        dy.violations(dy.translog_cost(2))

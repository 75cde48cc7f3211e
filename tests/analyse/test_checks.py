"""Checks as data: statuses, evidence, and that a wrong identity is caught."""
from __future__ import annotations

import pytest

import duality as dy
from duality.analyse import checks
from duality.solve.calculus import Fn


def _by_name(records):
    return {r.name: r for r in records}


def test_cobb_douglas_technology_checks_all_pass():
    recs = dy.check(dy.technology("A*x1^a*x2^b", ["x1", "x2"],
                                  params={"A": 2, "a": 0.3, "b": 0.5}))
    assert recs and all(r.ok for r in recs), [r.line() for r in recs if not r.ok]
    named = _by_name(recs)
    assert named["Shephard's lemma"].status == "proved"
    assert named["cost homogeneous of degree 1 in prices"].status == "proved"
    assert named["cost concave in prices"].status == "held"
    assert named["cost concave in prices"].points == 20
    assert named["Hotelling's lemma"].ok


def test_preference_checks_cover_the_duality_identities():
    recs = _by_name(dy.check(dy.preference("x1^0.3*x2^0.7", ["x1", "x2"])))
    for name in ("Roy's identity", "e(p, v(p, m)) = m", "v(p, e(p, u)) = u",
                 "Slutsky equation", "Slutsky matrix symmetric",
                 "Slutsky matrix negative semidefinite (e concave in p)",
                 "budget exhausted (adding-up)"):
        assert recs[name].ok, recs[name].line()
    assert all(r.statement for r in recs.values())


def test_constant_returns_profit_checks_are_not_applicable_with_the_reason():
    recs = _by_name(dy.check(dy.technology("x1^0.5*x2^0.5", ["x1", "x2"])))
    rec = recs["Hotelling's lemma"]
    assert rec.status == "not applicable"
    assert "constant returns" in rec.evidence


def test_numeric_route_checks_hold_numerically():
    recs = dy.check(dy.technology("x1^0.3*x2^0.5 + log(1 + x1)", ["x1", "x2"]), budget=1)
    named = _by_name(recs)
    assert named["Shephard's lemma"].status == "held"
    assert named["cost concave in prices"].status == "held"
    assert not any(r.status == "failed" for r in recs), [r.line() for r in recs]


def test_a_wrong_identity_fails_with_a_counterexample():
    import sympy as sp
    w = sp.Symbol("w1", positive=True)
    spec = checks._Spec("deliberately wrong", r"w = w + 10^{-3}",
                        [Fn(w) - Fn(w * (1 + sp.Rational(1, 1000)))], [Fn(w)])
    rec = checks._run(spec, [{w: 1.0}, {w: 2.0}], budget=2, names={w: "w1"})
    assert rec.status == "failed"
    assert rec.counterexample is not None and "w1" in rec.counterexample
    assert rec.max_error == pytest.approx(1e-3, rel=1e-6)


def test_symbolic_proofs_can_be_switched_off():
    recs = dy.check(dy.technology("x1^0.3*x2^0.5", ["x1", "x2"]), symbolic=False, points=5)
    assert {r.status for r in recs} <= {"held", "not applicable"}
    assert _by_name(recs)["Shephard's lemma"].points == 5


def test_records_serialise():
    rec = dy.check(dy.technology("x1^0.3*x2^0.5", ["x1", "x2"]), points=3)[0]
    d = rec.to_dict()
    assert set(d) == {"name", "statement", "status", "evidence", "max_error", "points",
                      "counterexample"}
    with pytest.raises(ValueError):
        dy.CheckRecord("x", "x", "maybe", "")

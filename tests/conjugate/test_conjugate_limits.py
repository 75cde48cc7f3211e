"""Conjugates whose supremum lies at an end of the domain: the limit there, +oo when p·x − f(x)
is unbounded, never a search window's bound.

Values are worked by hand from the definition f*(p) = sup_x p·x − f(x) (Rockafellar, Convex
Analysis (1970), §12; Boyd and Vandenberghe, Convex Optimization (2004), §3.3, from memory).
"""
from __future__ import annotations

import math

import pytest
import sympy as sp

import duality as dy


@pytest.mark.parametrize("p", [-1.0, 0.0, 0.5, 2.0])
def test_log_has_an_infinite_conjugate(p):
    # log is concave and unbounded: p x − log x → +oo as x → 0⁺ (every p) — by hand
    assert dy.conjugate("log(x)", "x")(p=p) == math.inf


@pytest.mark.parametrize("p", [-4.0, -1.0, 0.0, 1.0])
def test_reciprocal_on_its_natural_domain_is_infinite(p):
    # 1/x on x ≠ 0: −1/x → +oo as x → 0⁻, so f*(p) = +oo for every p — by hand
    assert dy.conjugate("1/x", "x")(p=p) == math.inf


@pytest.mark.parametrize("p, want", [(-4.0, -4.0), (-1.0, -2.0), (-0.25, -1.0), (0.0, 0.0)])
def test_reciprocal_on_the_positive_half_line(p, want):
    # x > 0: for p < 0 the maximiser is x = (−p)^(−1/2), f*(p) = −2√(−p); at p = 0 the
    # supremum 0 is approached as x → oo; for p > 0 it is +oo — by hand
    x = sp.Symbol("x", positive=True)
    c = dy.conjugate(1 / x, x)
    assert c(p=p) == pytest.approx(want, abs=1e-9)
    assert c(p=1.0) == math.inf


def test_bell_curve_at_zero_slope_is_the_limit_not_infinity():
    # f = exp(−x²): at p = 0, sup −exp(−x²) = 0, approached as |x| → oo; for p ≠ 0 the
    # line p·x outgrows the bounded f, f*(p) = +oo — by hand
    c = dy.conjugate("exp(-x^2)", "x")
    assert c(p=0.0) == pytest.approx(0.0, abs=1e-12)
    assert c(p=0.5) == math.inf and c(p=-1.0) == math.inf

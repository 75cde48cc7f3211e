"""Tests of duality.conjugate.

Reference pairs are named with their source beside them.  "B&V" below means
Boyd & Vandenberghe, Convex Optimization, Cambridge University Press, 2004 (from memory).
"""
from __future__ import annotations

import math

import numpy as np
import pytest
import sympy as sp
from hypothesis import given, settings
from hypothesis import strategies as st

from duality.conjugate import Conjugate, biconjugate, conjugate
from duality.errors import DualityError

x = sp.Symbol("x")
xp = sp.Symbol("x", positive=True)
x1, x2 = sp.symbols("x1 x2")
p = sp.Symbol("p", real=True)
a = sp.Symbol("a", positive=True)

SETTINGS = settings(max_examples=100, deadline=None)


def grid_sup(fnum, pval, lo=-20.0, hi=20.0, n=400_001):
    """Brute-force oracle: max of p*x - f(x) on a dense grid (common practice, no source)."""
    xs = np.linspace(lo, hi, n)
    with np.errstate(all="ignore"):
        vals = pval * xs - fnum(xs)
    vals = np.where(np.isfinite(vals), vals, -np.inf)
    return float(np.max(vals))


def num(f, var=x):
    return sp.lambdify(var, f, "numpy")


def close(a_, b_, tol=1e-7):
    return abs(a_ - b_) <= tol * (1 + abs(b_))


# ---------------------------------------------------------------------------------------
# standard pairs
# ---------------------------------------------------------------------------------------

def test_square():
    # B&V §3.3.1, Example 3.22 with Q = 2: (x^2)* = p^2/4
    c = conjugate(x**2)
    assert isinstance(c, Conjugate)
    assert sp.simplify(c.expr - p**2 / 4) == 0
    assert c.route == "legendre" and c.kind == "legendre"
    assert c.variables == (p,)
    assert c.domain is None
    # the reported maximiser satisfies f'(x*) = p
    xstar = c.argmax[c.primal_variables[0]]
    assert sp.simplify(2 * xstar - p) == 0


def test_half_square_is_self_conjugate():
    # B&V §3.3.1, Example 3.22 with Q = 1: (x^2/2)* = p^2/2
    c = conjugate(x**2 / 2)
    assert sp.simplify(c.expr - p**2 / 2) == 0


def test_scaled_square_with_positive_parameter():
    # B&V §3.3.2 (scaling rule, from memory): (a x^2)* = p^2/(4a) for a > 0
    c = conjugate(a * x**2, x)
    assert sp.simplify(c.expr - p**2 / (4 * a)) == 0
    assert close(c(p=3.0, a=2.0), 9 / 8)


def test_exponential():
    # B&V §3.3.1, Example 3.21 (exponential): p log p - p for p > 0, 0 at p = 0, +oo for p < 0
    c = conjugate(sp.exp(x))
    for pv in (0.3, 1.0, 2.5, 7.0):
        assert close(c(p=pv), pv * math.log(pv) - pv)
    assert c(p=0) == 0.0
    assert c(p=-0.5) == math.inf
    assert c.expr.subs(p, 0) == 0
    assert c.expr.subs(p, -1) == sp.oo
    assert isinstance(c.expr, sp.Piecewise)
    assert 0 in c.domain and -1 not in c.domain and 5 in c.domain


def test_abs_is_indicator_of_unit_interval():
    # B&V §3.3.1, Example 3.26 (norm): conjugate of |x| is the indicator of [-1, 1]
    c = conjugate(sp.Abs(x))
    for pv in (-1.0, -0.4, 0.0, 0.9, 1.0):
        assert c(p=pv) == 0.0
    for pv in (-1.01, 1.5, 10.0):
        assert c(p=pv) == math.inf
    assert c.domain == sp.Interval(-1, 1)
    assert c.kind == "fenchel"


def test_quartic_power():
    # Rockafellar, Convex Analysis, 1970, §12 (from memory): (|x|^q/q)* = |p|^r/r,
    # 1/q + 1/r = 1; q = 4 gives (3/4)|p|^(4/3)
    c = conjugate(x**4 / 4)
    for pv in (-3.0, -0.5, 0.0, 0.2, 2.0, 8.0):
        assert close(c(p=pv), 0.75 * abs(pv) ** (4 / 3))
    assert any("f''" in n for n in c.notes)  # f'' = 0 at x = 0 is reported


def test_negative_log_on_positive_axis():
    # B&V §3.3.1, Example 3.21 (negative logarithm): -1 - log(-p) for p < 0, +oo else
    c = conjugate(-sp.log(xp))
    for pv in (-5.0, -1.0, -0.1):
        assert close(c(p=pv), -1 - math.log(-pv))
    assert c(p=0.0) == math.inf
    assert c(p=1.0) == math.inf


def test_negative_entropy():
    # B&V §3.3.1, Example 3.21 (negative entropy): (x log x)* = exp(p - 1)
    c = conjugate(xp * sp.log(xp))
    assert sp.simplify(c.expr - sp.exp(p - 1)) == 0


def test_square_on_positive_axis_uses_boundary():
    # derived by hand (common practice, no source): sup_{x>0} (p x - x^2) = p^2/4 if p > 0 else 0
    c = conjugate(xp**2)
    for pv in (-2.0, 0.0, 1.0, 3.0):
        assert close(c(p=pv), max(pv, 0.0) ** 2 / 4)


def test_linear_is_indicator():
    # B&V §3.3.1, Example 3.21 (affine function): (3x + 2)* = -2 at p = 3, +oo elsewhere
    c = conjugate(3 * x + 2)
    assert c(p=3) == -2.0
    assert c(p=2.9) == math.inf and c(p=0) == math.inf


def test_positive_part_is_indicator_of_unit_interval():
    # derived by hand (common practice, no source): max(x, 0)* = indicator of [0, 1]
    c = conjugate(sp.Max(x, 0))
    for pv in (0.0, 0.5, 1.0):
        assert c(p=pv) == 0.0
    for pv in (-0.1, 1.1):
        assert c(p=pv) == math.inf


def test_max_of_affine_is_lower_hull_interpolation():
    # Rockafellar, Convex Analysis, 1970, §12 / §19 (from memory): for f = max_i (a_i x + b_i),
    # f* on [min a_i, max a_i] is the lower convex hull of the points (a_i, -b_i)
    slopes = [-1, sp.Rational(1, 2), 2]
    icpts = [0, -1, 1]
    c = conjugate(sp.Max(*[s * x + b for s, b in zip(slopes, icpts)]))
    pts = sorted((float(s), -float(b)) for s, b in zip(slopes, icpts))
    # lower hull of (-1, 0), (0.5, 1), (2, -1): (0.5, 1) lies above the chord, so the hull
    # is the chord from (-1, 0) to (2, -1)
    for pv in (-1.0, -0.3, 0.5, 1.2, 2.0):
        hull = np.interp(pv, [pts[0][0], pts[2][0]], [pts[0][1], pts[2][1]])
        assert close(c(p=pv), float(hull))
    assert c(p=-1.5) == math.inf and c(p=2.5) == math.inf


def test_quadratic_form_2x2():
    # B&V §3.3.1, Example 3.22 (strictly convex quadratic): (½xᵀAx)* = ½pᵀA⁻¹p
    A = sp.Matrix([[2, 1], [1, 3]])
    X = sp.Matrix([x1, x2])
    c = conjugate((X.T * A * X)[0, 0] / 2, [x1, x2])
    p1, p2 = c.variables
    assert (str(p1), str(p2)) == ("p1", "p2")
    Ainv = np.linalg.inv(np.array([[2.0, 1.0], [1.0, 3.0]]))
    for pv in ([1.0, 0.0], [-0.5, 2.0], [3.0, -1.0]):
        pvec = np.array(pv)
        assert close(c(p1=pv[0], p2=pv[1]), 0.5 * pvec @ Ainv @ pvec)


def test_quadratic_with_linear_term():
    # B&V §3.3.2 (adding an affine function shifts the argument, from memory):
    # (½xᵀAx + bᵀx + c)* = ½(p − b)ᵀA⁻¹(p − b) − c
    f = x1**2 + x1 * x2 + x2**2 + x1 - 2 * x2 + 3
    c = conjugate(f, "x1, x2")
    A = np.array([[2.0, 1.0], [1.0, 2.0]])
    b = np.array([1.0, -2.0])
    for pv in ([0.0, 0.0], [1.5, -0.5]):
        d = np.array(pv) - b
        assert close(c(p1=pv[0], p2=pv[1]), 0.5 * d @ np.linalg.solve(A, d) - 3)


def test_separable_sum():
    # B&V §3.3.2 (independent functions): (g(x1) + h(x2))* = g*(p1) + h*(p2)
    c = conjugate(x1**2 + sp.exp(x2), [x1, x2])
    for p1v, p2v in ((1.0, 2.0), (-3.0, 0.5)):
        assert close(c(p1=p1v, p2=p2v), p1v**2 / 4 + p2v * math.log(p2v) - p2v)
    assert c(p1=1.0, p2=-1.0) == math.inf


def test_general_smooth_multivariate_against_grid():
    # oracle: dense 2-D grid maximum of p·x − f(x) (common practice, no source)
    f = sp.exp(x1 + x2) + x1**2 + x2**2
    c = conjugate(f, [x1, x2])
    g = np.linspace(-3, 3, 1201)
    X1, X2 = np.meshgrid(g, g)
    F = np.exp(X1 + X2) + X1**2 + X2**2
    for pv in ((0.5, -0.3), (2.0, 1.0)):
        brute = float(np.max(pv[0] * X1 + pv[1] * X2 - F))
        val = c(p1=pv[0], p2=pv[1])
        assert val >= brute - 1e-9
        assert val - brute < 1e-3


def test_intercept_convention():
    # tangent-intercept convention f(x) - p x at the tangency (common practice, no source)
    c = conjugate(x**2, convention="intercept")
    assert sp.simplify(c.expr + p**2 / 4) == 0
    assert c.convention == "intercept"
    ce = conjugate(sp.exp(x), convention="intercept")
    assert ce(p=-1.0) == -math.inf
    assert close(ce(p=2.0), -(2 * math.log(2) - 2))


def test_text_input():
    c = conjugate("x**2", "x")
    assert close(c(p=3.0), 9 / 4)


def test_budget_exhausted_falls_back_to_numeric():
    # B&V Example 3.21 (exponential) as reference; budget 0 forces the numeric route
    c = conjugate(sp.exp(x), budget=0)
    assert c.route == "numeric" and c.expr is None
    assert any("budget" in n for n in c.notes)
    for pv in (0.5, 2.0):
        assert close(c(p=pv), pv * math.log(pv) - pv, 1e-6)


def test_repr_mentions_route_and_expression():
    r = repr(conjugate(x**2))
    assert "p**2/4" in r and "legendre" in r


# ---------------------------------------------------------------------------------------
# non-invertible derivatives and non-convex functions
# ---------------------------------------------------------------------------------------

def test_cube_not_invertible():
    # x^3 is unbounded below, so sup_x (p x - x^3) = +oo (common practice, no source)
    c = conjugate(x**3)
    text = " ".join(c.notes)
    assert "not invertible" in text and "not convex" in text
    assert "x = 0" in text
    assert c(p=1) == math.inf
    assert c(p=-2.0) == math.inf


def test_brute_force_quartic_double_well():
    f = x**4 - x**2
    c = conjugate(f)
    assert any("convex envelope" in n for n in c.notes)
    fn = num(f)
    for pv in (-3.0, -1.0, -0.2, 0.0, 0.1, 0.7, 2.5):
        assert close(c(p=pv), grid_sup(fn, pv, -5, 5), 1e-6)


@pytest.mark.parametrize("f", [
    sp.Abs(x),
    sp.Max(2 * x + 1, -x, x / 2 - 1),
    sp.Abs(x - 1) + sp.Abs(x + 2) / 2,
    x**2 + sp.Abs(x),
    x**2,
    x**4 / 4,
    sp.exp(x),
    sp.cosh(x),
])
def test_brute_force_oracle(f):
    # oracle: dense-grid maximum of p*x - f(x) (common practice, no source)
    c = conjugate(f)
    fn = num(f)
    for pv in (-2.0, -1.0, -0.4, 0.0, 0.3, 1.0, 1.5):
        val = c(p=pv)
        if math.isinf(val):
            # unbounded: the grid maximum keeps growing as the window widens
            assert grid_sup(fn, pv, -100, 100, 20001) > grid_sup(fn, pv, -10, 10, 2001) + 1
        else:
            # the grid maximum is a lower bound, within O(step) for kinked f
            brute = grid_sup(fn, pv)
            assert brute - 1e-9 <= val <= brute + 1e-3


def test_min_is_not_convex():
    # min(x, -x) = -|x| has slopes decreasing, so p x + |x| is unbounded (no source)
    c = conjugate(sp.Min(x, -x))
    assert c(p=0.0) == math.inf
    assert any("not convex" in n for n in c.notes)


# ---------------------------------------------------------------------------------------
# Fenchel–Young inequality
# ---------------------------------------------------------------------------------------

FY_FUNCS = [
    (x**2, x),
    (sp.exp(x), x),
    (sp.Abs(x), x),
    (x**4 / 4, x),
    (x**4 - x**2, x),
    (sp.Max(2 * x + 1, -x, x / 2 - 1), x),
    (x**3, x),
    (x**2 + sp.Abs(x), x),
]
_CACHE: dict = {}


def _conj_cached(f):
    if f not in _CACHE:
        _CACHE[f] = conjugate(f)
    return _CACHE[f]


@SETTINGS
@given(i=st.integers(0, len(FY_FUNCS) - 1),
       xv=st.floats(-5, 5, allow_nan=False),
       pv=st.floats(-5, 5, allow_nan=False))
def test_fenchel_young_inequality(i, xv, pv):
    # Rockafellar, Convex Analysis, 1970, §12 (from memory): f(x) + f*(p) >= p x
    f, var = FY_FUNCS[i]
    c = _conj_cached(f)
    fx = float(f.subs(var, xv))
    assert fx + c(p=pv) >= pv * xv - 1e-9 * (1 + abs(pv * xv) + abs(fx))


SMOOTH = [x**2, sp.exp(x), x**4 / 4, sp.cosh(x)]


@SETTINGS
@given(i=st.integers(0, len(SMOOTH) - 1), xv=st.floats(-3, 3, allow_nan=False))
def test_fenchel_young_equality_at_gradient(i, xv):
    # Rockafellar, Convex Analysis, 1970, Theorem 23.5 (from memory): equality iff p ∈ ∂f(x)
    f = SMOOTH[i]
    c = _conj_cached(f)
    pv = float(sp.diff(f, x).subs(x, xv))
    fx = float(f.subs(x, xv))
    assert math.isclose(fx + c(p=pv), pv * xv, rel_tol=1e-8, abs_tol=1e-8)


# ---------------------------------------------------------------------------------------
# biconjugate
# ---------------------------------------------------------------------------------------

@pytest.mark.parametrize("f", [x**2, sp.Abs(x), sp.exp(x)])
def test_biconjugate_returns_closed_convex_f(f):
    # Fenchel–Moreau theorem, Rockafellar, Convex Analysis, 1970, Theorem 12.2 (from memory)
    b = biconjugate(f)
    assert [str(v) for v in b.variables] == ["x"]
    for xv in (-2.0, -0.5, 0.0, 0.3, 1.7):
        assert close(b(x=xv), float(f.subs(x, xv)), 1e-8)


def test_biconjugate_of_double_well_is_convex_envelope():
    # convex envelope of x^4 - x^2: equal to -1/4 on [-1/sqrt 2, 1/sqrt 2], f outside
    # (derived by hand: minima at ±1/sqrt 2 with value -1/4; common practice, no source)
    b = biconjugate(x**4 - x**2)
    r = 1 / math.sqrt(2)
    for xv in (-0.7, -0.3, 0.0, 0.5, r):
        assert abs(b(x=xv) + 0.25) < 1e-6
    for xv in (-1.5, 0.9, 2.0):
        assert abs(b(x=xv) - (xv**4 - xv**2)) < 1e-6


# ---------------------------------------------------------------------------------------
# bad input
# ---------------------------------------------------------------------------------------

def test_unknown_convention():
    with pytest.raises(DualityError, match="sup.*intercept"):
        conjugate(x**2, convention="foo")


def test_ambiguous_variable_names_candidates():
    with pytest.raises(DualityError) as info:
        conjugate(x1 * x2 + x1**2)
    assert "x1" in str(info.value) and "x2" in str(info.value)


def test_wrong_number_of_dual_names():
    with pytest.raises(DualityError):
        conjugate(x1**2 + x2**2, [x1, x2], p="q")


def test_custom_dual_name_and_clash_default():
    c = conjugate(x**2, p="y")
    assert [str(v) for v in c.variables] == ["y"]
    # a parameter named p forces the p_<name> default
    pp = sp.Symbol("p", positive=True)
    c2 = conjugate(pp * x**2, x)
    assert [str(v) for v in c2.variables] == ["p_x"]
    assert close(c2(p_x=2.0, p=1.0), 1.0)


def test_natural_domain_is_inferred_for_text_without_assumptions():
    # -log x has domain x > 0 even when x carries no sign assumption:
    # f*(p) = -1 - log(-p) for p < 0, +oo otherwise (Boyd & Vandenberghe 2004, §3.3.1,
    # Example 3.21; from memory)
    c = conjugate("-log(x)", "x")
    assert c(p=-2.0) == pytest.approx(-1 - math.log(2.0), rel=1e-12)
    assert c(p=0.5) == math.inf
    assert any("natural domain" in n for n in c.notes)

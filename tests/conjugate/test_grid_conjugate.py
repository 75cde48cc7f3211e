"""Tests of duality.conjugate.grid: the discrete Legendre–Fenchel transform of samples.

Reference values are named with their source beside them.  "B&V" means Boyd &
Vandenberghe, Convex Optimization (2004), §3.3 (from memory); "Rockafellar" means
Rockafellar, Convex Analysis (1970), §12, §26 (from memory); "Lucet" means Lucet,
Numerical Algorithms 16 (1997), 'Faster than the fast Legendre transform, the linear-time
Legendre transform' (from memory).  The brute-force oracles below are the definition
f*(q) = max_i (q·x_i − f_i) evaluated directly (common practice, no source).
"""
from __future__ import annotations

import math

import numpy as np
import pytest
import sympy as sp
from hypothesis import given, settings
from hypothesis import strategies as st

import duality
from duality.conjugate import (Conjugate, GridConjugate, biconjugate_samples,
                               conjugate_samples)
from duality.conjugate import grid as grid_mod
from duality.errors import DualityError

TOL = 1e-12


# ---------------------------------------------------------------------------------------
# oracles (the definition, computed directly: common practice, no source)
# ---------------------------------------------------------------------------------------

def naive(f, x, q):
    """max over the finite samples of q·x_i − f_i, for every q (O(n·m))."""
    f = np.asarray(f, float)
    x = np.asarray(x, float)
    fin = np.isfinite(f)
    x, f = x[fin], f[fin]
    q = np.asarray(q, float).ravel()
    out = np.empty(q.size)
    for c in range(0, q.size, 256):
        out[c:c + 256] = (q[c:c + 256, None] * x[None, :] - f[None, :]).max(axis=1)
    return out


def naive_2d(f, x1, x2, q1, q2):
    """max over the grid of q1·x1 + q2·x2 − f(x1, x2) on the product of slope grids."""
    out = np.empty((q1.size, q2.size))
    for a, pa in enumerate(q1):
        s = pa * x1[:, None, None] + q2[None, None, :] * x2[None, :, None] - f[:, :, None]
        out[a] = s.max(axis=(0, 1))
    return out


def slope_range(f, x):
    """First and last lower-hull edge slopes: the leftmost point is a hull vertex and the
    first edge is the least chord slope from it; symmetrically at the right end
    (common practice, no source)."""
    fin = np.isfinite(f)
    x, f = np.asarray(x, float)[fin], np.asarray(f, float)[fin]
    first = np.min((f[1:] - f[0]) / (x[1:] - x[0]))
    last = np.max((f[-1] - f[:-1]) / (x[-1] - x[:-1]))
    return first, last


def close(a, b, tol=TOL):
    a, b = np.asarray(a), np.asarray(b)
    return np.all(np.abs(a - b) <= tol * (1 + np.abs(b)))


def cases(rng):
    even = np.linspace(-2.0, 2.0, 801)
    uneven = np.sort(rng.uniform(-2.0, 2.0, 700))
    w = np.linspace(0.0, 4 * np.pi, 900)
    return {
        "square": (even, even**2),
        "exp": (even, np.exp(even)),
        "abs": (even, np.abs(even)),
        "max_affine": (even, np.maximum.reduce([-2 * even - 1, 0.5 * even, 3 * even - 2])),
        "noisy_convex": (even, even**2 + 0.05 * rng.standard_normal(even.size)),
        "quartic_well": (even, even**4 - even**2),
        "sin": (w, np.sin(w)),
        "uneven_square": (uneven, uneven**2),
        "uneven_sin": (uneven, np.sin(3 * uneven) + 0.1 * uneven**2),
    }


CASE_NAMES = ["square", "exp", "abs", "max_affine", "noisy_convex", "quartic_well", "sin",
              "uneven_square", "uneven_sin"]


# ---------------------------------------------------------------------------------------
# agreement with the definition
# ---------------------------------------------------------------------------------------

@pytest.mark.parametrize("name", CASE_NAMES)
def test_agrees_with_naive_maximum(name, rng):
    # Definition f*(q) = max_i (q x_i − f_i) (Rockafellar §12); hull evaluation as in
    # Lucet (from memory).  Inside the hull slope range: the maximum; outside: +inf.
    x, f = cases(rng)[name]
    g = conjugate_samples(f, x)
    lo, hi = slope_range(f, x)
    assert close(g.slope_range, (lo, hi))
    span = hi - lo
    q = rng.uniform(lo - 0.3 * span - 1, hi + 0.3 * span + 1, 2000)
    hull_slopes = np.diff(f[g.hull]) / np.diff(x[g.hull])
    q = np.concatenate([q, hull_slopes, [g.slope_range[0], g.slope_range[1]]])  # ties
    v = g(q)
    inside = (q >= g.slope_range[0]) & (q <= g.slope_range[1])
    assert inside.sum() > 100 and (~inside).sum() > 100
    assert close(v[inside], naive(f, x, q[inside]))
    assert np.all(v[~inside] == np.inf)
    # the stored values at the default slopes agree too
    assert close(g.values, naive(f, x, g.slopes))
    # the reported maximiser attains the value
    gq = conjugate_samples(f, x, q)
    am = gq.argmax
    assert np.all(am[~inside] == -1)
    assert np.array_equal(gq.values, v)
    assert close(q[inside] * x[am[inside]] - f[am[inside]], v[inside])


@pytest.mark.parametrize("name", CASE_NAMES)
def test_hull_is_the_lower_convex_hull(name, rng):
    # Lower convex hull: slopes increase, every sample lies on or above it, and the hull
    # interpolant is the convex envelope (Rockafellar §12, from memory).
    x, f = cases(rng)[name]
    g = conjugate_samples(f, x)
    h = g.hull
    assert h[0] == 0 and h[-1] == x.size - 1
    s = np.diff(f[h]) / np.diff(x[h])
    assert np.all(np.diff(s) > 0)
    env = np.interp(x, x[h], f[h])
    assert np.all(f >= env - 1e-12 * (1 + np.abs(f)))


@pytest.mark.parametrize("pava", [True, False], ids=["pava", "numpy_passes"])
def test_ties_exact_on_integer_data(pava, monkeypatch):
    # Integer samples on an integer grid with collinear runs: every product and
    # difference is exact in floating point, so the result must equal the definition
    # exactly, also at slopes equal to hull-edge slopes (common practice, no source).
    if not pava:
        monkeypatch.setattr(grid_mod, "_pava", None)
    x = np.arange(-6, 7, dtype=float)
    f = np.array([9, 6, 3, 0, 0, 0, 1, 2, 3, 5, 7, 9, 11], dtype=float)
    q = np.arange(-4, 5, dtype=float)
    g = conjugate_samples(f, x, q)
    inside = (q >= -3) & (q <= 2)
    assert np.array_equal(g.values[inside], naive(f, x, q[inside]))
    assert np.all(np.isinf(g.values[~inside]))
    # collinear points are not vertices: the hull is the kinks and the ends
    assert g.hull.tolist() == [0, 3, 5, 8, 12]
    # at the edge slope q = 0 both ends of the flat edge x in [-3, -1] are maximisers;
    # the left one is reported
    assert g.argmax[q.tolist().index(0.0)] == 3


@settings(max_examples=60, deadline=None)
@given(st.lists(st.integers(-20, 20), min_size=2, max_size=40),
       st.lists(st.integers(-60, 60), min_size=1, max_size=20))
def test_integer_data_property(vals, qs):
    # Same exactness argument as above, on random integer data (common practice).
    f = np.array(vals, dtype=float)
    x = np.arange(f.size, dtype=float) * 2 - 7
    q = np.array(qs, dtype=float) / 4  # dyadic slopes keep q·x exact
    g = conjugate_samples(f, x, q)
    lo, hi = slope_range(f, x)
    inside = (q >= lo) & (q <= hi)
    assert np.array_equal(g.values[inside], naive(f, x, q[inside]))
    assert np.all(np.isinf(g.values[~inside]))


def test_default_slopes():
    # Default: n slopes evenly spaced over [first, last] hull-edge slope (as specified).
    x = np.linspace(0, 1, 11)
    f = x**2
    g = conjugate_samples(f, x)
    assert g.slopes.shape == (11,)
    assert g.slopes[0] == g.slope_range[0] and g.slopes[-1] == g.slope_range[1]
    assert np.allclose(np.diff(g.slopes), (g.slope_range[1] - g.slope_range[0]) / 10)
    assert np.all(np.isfinite(g.values))
    assert close(g.slope_range, (0.1, 1.9))  # first and last chord slopes of x^2


def test_call_is_exact_not_interpolated(rng):
    # Between the stored default slopes f* is piecewise linear in q with kinks at the
    # sample x's; evaluating from the hull must give the definition, not a
    # chord of stored values (common practice, no source).
    x = np.linspace(-1, 1, 7)
    f = x**2
    g = conjugate_samples(f, x, np.linspace(-1, 1, 3))
    q = rng.uniform(-1.5, 1.5, 50)
    assert close(g(q), naive(f, x, q))
    assert not close(np.interp(q, g.slopes, g.values), naive(f, x, q), 1e-3)
    assert isinstance(g(0.25), float) and close(g(0.25), naive(f, x, [0.25])[0])
    assert g(p=np.array([[0.1, 0.2]])).shape == (1, 2)


def test_intercept_convention(rng):
    # "intercept": f(x) − p·x at the tangency, i.e. −f* (the package's convention).
    x = np.sort(rng.uniform(-1, 1, 200))
    f = np.exp(x)
    q = np.linspace(0.0, 3.0, 41)
    a = conjugate_samples(f, x, q)
    b = conjugate_samples(f, x, q, convention="intercept")
    assert b.convention == "intercept"
    assert np.array_equal(b.values, -a.values)
    assert np.array_equal(b(q), -a(q))
    assert np.isneginf(b.values).any()  # q = 0 is below e^{-1}: outside the range
    with pytest.raises(DualityError, match="convention"):
        conjugate_samples(f, x, convention="inf")


def test_result_attributes():
    x = np.linspace(-1, 1, 5)
    g = conjugate_samples(x**2, x)
    assert isinstance(g, GridConjugate)
    assert g.route == "numeric" and g.kind == "fenchel" and g.convention == "sup"
    assert np.array_equal(g.grid, x)
    assert any("+inf" in n for n in g.notes)
    assert "GridConjugate" in repr(g)


def test_inf_points_are_outside_the_domain(rng):
    # f = +inf means outside the domain: the result is that of the finite samples, and
    # maximisers are reported as positions in the full grid (common practice).
    x = np.linspace(-2, 2, 401)
    f = x**4 - x**2
    f_inf = f.copy()
    drop = np.r_[0:30, 100:140, 390:401]
    f_inf[drop] = np.inf
    keep = np.setdiff1d(np.arange(x.size), drop)
    q = rng.uniform(-5, 5, 300)
    a = conjugate_samples(f_inf, x, q)
    b = conjugate_samples(f[keep], x[keep], q)
    assert np.array_equal(a.values, b.values)
    ok = a.argmax >= 0
    assert np.array_equal(a.argmax[ok], keep[b.argmax[ok]])
    assert np.all(np.isfinite(f_inf[a.hull]))
    assert any("81 point(s) with f = +inf" in n for n in a.notes)


def test_non_convex_note_counts_points_off_the_hull():
    x = np.linspace(-1.5, 1.5, 301)
    g = conjugate_samples(x**4 - x**2, x)
    off = x.size - g.hull.size
    assert off > 50
    assert any(f"{off} of 301 finite sample(s) not on the lower convex hull" in n
               for n in g.notes)
    c = conjugate_samples(np.exp(x), x)
    assert c.hull.size == x.size
    assert any("all points are hull vertices" in n for n in c.notes)


def test_pure_numpy_fallback_matches(rng, monkeypatch):
    # Without scipy's pool-adjacent-violators routine the chord passes alone must find
    # the same hull (common practice, no source).
    x, f = cases(rng)["uneven_sin"]
    a = conjugate_samples(f, x)
    monkeypatch.setattr(grid_mod, "_pava", None)
    b = conjugate_samples(f, x)
    assert np.array_equal(a.hull, b.hull)
    assert np.array_equal(a.values, b.values)


# ---------------------------------------------------------------------------------------
# standard pairs on fine grids
# ---------------------------------------------------------------------------------------

def test_half_square():
    # B&V §3.3.1: (x²/2)* = p²/2.  Grid error: the sampled maximum misses the true one
    # by min_i (x_i − p)²/2 in [0, h²/8] (h = spacing; the maximiser is x = p).
    x = np.linspace(-5, 5, 20001)
    h = x[1] - x[0]
    q = np.linspace(-4, 4, 1601)
    v = conjugate_samples(x**2 / 2, x, q).values
    gap = q**2 / 2 - v
    assert np.all(gap >= -1e-12) and np.all(gap <= h**2 / 8 + 1e-12)
    assert gap.max() > 0  # some q fall between grid points: the test can see the error


def test_exponential():
    # B&V §3.3.1 Example 3.21: (e^x)* = p log p − p for p > 0.  Grid error: the concave
    # function p·x − e^x has curvature e^x ≈ p near its maximiser log p, so the sampled
    # maximum misses by at most about p·(h/2)²/2 = p h²/8 (with slack for e^{±h/2}).
    x = np.linspace(-3, 3, 60001)
    h = x[1] - x[0]
    q = np.linspace(0.1, 15.0, 500)
    v = conjugate_samples(np.exp(x), x, q).values
    true = q * np.log(q) - q
    gap = true - v
    assert np.all(gap >= -1e-12 * (1 + np.abs(true)))
    assert np.all(gap <= 1.01 * q * h**2 / 8 + 1e-12 * (1 + np.abs(true)))
    # p = 0 is outside the sampled slope range [e^-3, e^3] (approx.): +inf
    assert conjugate_samples(np.exp(x), x, [0.0, 25.0]).values.tolist() == [np.inf, np.inf]


def test_abs_is_indicator_of_unit_interval():
    # B&V §3.3.1 (norm ↔ indicator of the dual-norm ball), Rockafellar §12:
    # |x|* = 0 on [−1, 1]; the grid [−1, 1] contains 0, so the maximum is exactly 0.
    x = np.linspace(-1, 1, 201)
    g = conjugate_samples(np.abs(x), x, np.linspace(-0.999, 0.999, 99))
    assert np.array_equal(g.values, np.zeros(99))
    assert close(g.slope_range, (-1.0, 1.0))
    assert np.all(np.isinf(g(np.array([-1.5, 1.5]))))


# ---------------------------------------------------------------------------------------
# biconjugate = convex envelope
# ---------------------------------------------------------------------------------------

def test_envelope_of_double_well():
    # Rockafellar §12 (f** = closed convex envelope), from memory: the envelope of
    # x⁴ − x² is −1/4 on [−1/√2, 1/√2] (the two minima) and f outside.  Sampled envelope
    # ≥ true envelope (fewer points), and exceeds it by at most max|f''|·h²/8 with
    # max|f''| = 12·1.5² − 2 = 25 on [−1.5, 1.5].
    x = np.linspace(-1.5, 1.5, 3001)
    h = x[1] - x[0]
    f = x**4 - x**2
    env = biconjugate_samples(f, x)
    true = np.where(np.abs(x) <= 1 / math.sqrt(2), -0.25, f)
    assert np.all(env - true >= -1e-12)
    assert np.all(env - true <= 25 * h**2 / 8 + 1e-12)
    assert np.all(env <= f + 1e-12)
    assert np.abs(env - f).max() > 0.2  # it really is an envelope, not f


@pytest.mark.parametrize("name", ["square", "exp", "uneven_square", "max_affine"])
def test_biconjugate_of_convex_samples_is_the_samples(name, rng):
    # Fenchel–Moreau (Rockafellar §12, from memory): f** = f for convex f.
    x, f = cases(rng)[name]
    assert close(biconjugate_samples(f, x), f)


def test_biconjugate_inf_at_ends():
    # The envelope's domain is the hull of the finite samples (Rockafellar §12).
    x = np.linspace(0, 1, 11)
    f = np.sin(6 * x)
    f[[0, 1, 10]] = np.inf
    env = biconjugate_samples(f, x)
    assert np.isinf(env[[0, 1, 10]]).all() and np.isfinite(env[2:10]).all()


# ---------------------------------------------------------------------------------------
# two dimensions
# ---------------------------------------------------------------------------------------

def test_2d_separable_quadratic():
    # B&V §3.3.1 Example 3.22: (½xᵀQx)* = ½pᵀQ⁻¹p; Q = diag(2, 4) gives
    # (x1² + 2x2²)* = p1²/4 + p2²/8.  Grid error: min over the grid of
    # (x1 − x1*)² + 2(x2 − x2*)² ≤ (1 + 2)·h²/4.
    x1 = np.linspace(-2, 2, 401)
    x2 = np.linspace(-2, 2, 401)
    h = x1[1] - x1[0]
    f = x1[:, None] ** 2 + 2 * x2[None, :] ** 2
    q1 = np.linspace(-3.5, 3.5, 57)
    q2 = np.linspace(-7, 7, 43)
    g = conjugate_samples(f, (x1, x2), (q1, q2))
    assert g.values.shape == (57, 43)
    true = q1[:, None] ** 2 / 4 + q2[None, :] ** 2 / 8
    gap = true - g.values
    assert np.all(gap >= -1e-12) and np.all(gap <= 3 * h**2 / 4 + 1e-12)
    # slopes beyond what the box can support give +inf
    out = conjugate_samples(f, (x1, x2), (np.array([0.0, 9.0]), np.array([0.0, 0.0])))
    assert np.isfinite(out.values[0]).all() and np.isinf(out.values[1]).all()


def test_2d_non_separable_quadratic():
    # B&V §3.3.1 Example 3.22: (½xᵀAx)* = ½pᵀA⁻¹p.  The separable passes give the exact
    # maximum over the grid where finite, which misses the true value by
    # min ½(x − x*)ᵀA(x − x*) ≤ λmax(A)·h²/4.
    A = np.array([[2.0, 0.6], [0.6, 1.0]])
    x1 = np.linspace(-3, 3, 301)
    x2 = np.linspace(-3, 3, 301)
    h = x1[1] - x1[0]
    X1, X2 = np.meshgrid(x1, x2, indexing="ij")
    f = 0.5 * (A[0, 0] * X1**2 + 2 * A[0, 1] * X1 * X2 + A[1, 1] * X2**2)
    q1 = np.linspace(-3, 3, 31)
    q2 = np.linspace(-1, 1, 21)  # inside every x2-line's slope range [0.6x1 − 3, 0.6x1 + 3]
    g = conjugate_samples(f, (x1, x2), (q1, q2))
    Ai = np.linalg.inv(A)
    P1, P2 = np.meshgrid(q1, q2, indexing="ij")
    true = 0.5 * (Ai[0, 0] * P1**2 + 2 * Ai[0, 1] * P1 * P2 + Ai[1, 1] * P2**2)
    lam = np.linalg.eigvalsh(A).max()
    gap = true - g.values
    assert np.all(gap >= -1e-12) and np.all(gap <= lam * h**2 / 4 + 1e-12)
    # default slopes: the range shared by all lines, so every value is finite
    d = conjugate_samples(f, (x1, x2))
    assert np.all(np.isfinite(d.values))
    assert d.slopes[1][0] >= 0.6 * 3 - 3 - 1e-9 and d.slopes[1][-1] <= 3 - 0.6 * 3 + 1e-9


def _inf_pattern(f, x1, x2, q1, q2):
    """Where the propagated +inf rule puts +inf, recomputed from the definition:
    q2 outside some x2-line's hull slope range, or q1 outside the range of
    x1 -> −g(x1, q2) with g the inner maximum (common practice, no source)."""
    out = np.zeros((q1.size, q2.size), dtype=bool)
    ranges = [slope_range(f[i], x2) for i in range(x1.size)]
    lo = max(r[0] for r in ranges)
    hi = min(r[1] for r in ranges)
    for b, pb in enumerate(q2):
        if not (lo <= pb <= hi):
            out[:, b] = True
            continue
        inner = np.array([naive(f[i], x2, [pb])[0] for i in range(x1.size)])
        a_lo, a_hi = slope_range(-inner, x1)
        out[:, b] = (q1 < a_lo) | (q1 > a_hi)
    return out


@pytest.mark.parametrize("kind", ["convex", "non_convex"])
def test_2d_agrees_with_naive_maximum(kind, rng):
    # Separability of the sup (Rockafellar §12, from memory) versus the definition.
    n = 20
    for _ in range(50):   # draw until the x2-lines share a slope range (else all is +inf)
        x1 = np.sort(rng.uniform(-1, 1, n))
        x2 = np.sort(rng.uniform(-1, 2, n))
        X1, X2 = np.meshgrid(x1, x2, indexing="ij")
        if kind == "convex":
            f = X1**2 + X1 * X2 + 1.5 * X2**2 + np.exp(X1 - X2)
        else:
            f = (np.sin(3 * X1) * np.cos(2 * X2) + 0.3 * X1**2
                 + 0.1 * rng.standard_normal((n, n)))
        ranges = [slope_range(f[i], x2) for i in range(n)]
        lo, hi = max(r[0] for r in ranges), min(r[1] for r in ranges)
        if lo < hi:
            break
    assert lo < hi
    # q2 half inside the slope range shared by all x2-lines and half around it, so that
    # both finite and +inf values occur however narrow the range
    q1 = rng.uniform(-6, 6, 37)
    q2 = np.concatenate([rng.uniform(lo, hi, 15), rng.uniform(lo - 1, hi + 1, 14)])
    g = conjugate_samples(f, (x1, x2), (q1, q2))
    fin = np.isfinite(g.values)
    assert fin.sum() > 50 and (~fin).sum() > 50
    ref = naive_2d(f, x1, x2, q1, q2)
    assert close(g.values[fin], ref[fin])
    assert np.all(g.values[~fin] == np.inf)
    assert np.array_equal(~fin, _inf_pattern(f, x1, x2, q1, q2))
    # __call__ recomputes on new slope grids
    assert np.array_equal(g((q1, q2)), g.values)


def test_2d_inf_samples_and_intercept(rng):
    n = 15
    x1 = np.linspace(-1, 1, n)
    x2 = np.linspace(-1, 1, n)
    f = x1[:, None] ** 2 + x2[None, :] ** 2
    f[0, :] = np.inf   # a whole line outside the domain
    f[5, 3] = np.inf
    q1 = np.linspace(-1, 1, 9)
    q2 = np.linspace(-0.5, 0.5, 7)
    g = conjugate_samples(f, (x1, x2), (q1, q2))
    fin = np.isfinite(g.values)
    assert fin.any()
    assert close(g.values[fin], naive_2d(f, x1, x2, q1, q2)[fin])
    b = conjugate_samples(f, [x1, x2], [q1, q2], convention="intercept")
    assert np.array_equal(b.values, -g.values)


def test_2d_biconjugate():
    # Fenchel–Moreau (Rockafellar §12): f** = f for convex f; on grids the double
    # transform is a lower approximation (documented), here within the grid error
    # (slope step × grid step, times the curvature) of the samples.
    x1 = np.linspace(-1, 1, 41)
    x2 = np.linspace(-1, 1, 41)
    f = x1[:, None] ** 2 + 2 * x2[None, :] ** 2
    env = biconjugate_samples(f, (x1, x2))
    assert env.shape == f.shape
    assert np.all(env <= f + 1e-12)
    assert np.abs(env - f).max() <= 0.02
    # a non-convex function: the envelope lies below it and is convex along each axis
    g = np.cos(3 * x1)[:, None] + x2[None, :] ** 2
    eg = biconjugate_samples(g, (x1, x2))
    assert np.all(eg <= g + 1e-12)
    assert np.all(np.diff(eg, 2, axis=0) >= -1e-9)
    # envelope of a separable sum = sum of envelopes; cos(3x) on [−1, 1] has its minimum
    # cos 3 at both ends, so its envelope is the constant cos 3 (common practice)
    assert np.abs(eg - (math.cos(3) + x2[None, :] ** 2)).max() <= 0.02
    assert (g - eg).max() > 1.9


def test_3d_separable():
    # B&V §3.3.1: the conjugate of a separable sum is the sum of conjugates;
    # (x²)* = p²/4, (|x|)* = indicator of [−1, 1], (x²/2)* = p²/2 (grid-exact values
    # at slopes whose maximiser is a grid point).
    x = np.linspace(-2, 2, 41)  # spacing 0.1
    f = (x[:, None, None] ** 2 + np.abs(x)[None, :, None] + 0.5 * x[None, None, :] ** 2)
    q = (np.array([-1.0, 0.4]), np.array([-0.5, 0.5]), np.array([0.3, 1.2]))
    g = conjugate_samples(f, (x, x, x), q)
    true = (q[0][:, None, None] ** 2 / 4 + 0 * q[1][None, :, None]
            + q[2][None, None, :] ** 2 / 2)
    assert close(g.values, true, 1e-9)


# ---------------------------------------------------------------------------------------
# convex fast path
# ---------------------------------------------------------------------------------------

@pytest.mark.parametrize("name", ["square", "exp", "abs", "max_affine", "uneven_square"])
def test_convex_fast_path_same_result(name, rng):
    x, f = cases(rng)[name]
    q = rng.uniform(-6, 6, 500)
    a = conjugate_samples(f, x, q)
    b = conjugate_samples(f, x, q, convex=True)
    assert np.array_equal(a.values, b.values)
    assert np.array_equal(a.hull, b.hull)
    assert np.array_equal(a.argmax, b.argmax)


def test_convex_fast_path_tolerates_rounding(rng):
    # Very close random points make the difference quotients of x² decrease by rounding
    # only; that is not a convexity failure (common practice, no source).
    x = 1000 + np.sort(rng.uniform(0, 1, 200_000))
    f = x**2
    d = np.diff(f) / np.diff(x)
    assert (np.diff(d) < 0).any()  # the data really has rounding-level decreases
    q = rng.uniform(2000.1, 2001.9, 300)
    a = conjugate_samples(f, x, q, convex=True)
    assert close(a.values, naive(f, x, q))


def test_convex_fast_path_rejects_non_convex():
    x = np.linspace(-1.5, 1.5, 301)
    f = x**4 - x**2
    d = np.diff(f) / np.diff(x)
    j = int(np.flatnonzero(np.diff(d) < 0)[0]) + 1  # first point where slopes decrease
    with pytest.raises(DualityError, match=rf"not convex at index {j}\b"):
        conjugate_samples(f, x, convex=True)
    with pytest.raises(DualityError, match="not convex at index"):
        biconjugate_samples(f, x, convex=True)
    # in 2-D the index names the grid point
    F = np.tile(f, (3, 1))
    with pytest.raises(DualityError, match=rf"not convex at index \(0, {j}\)"):
        conjugate_samples(F, (np.arange(3.0), x), convex=True)


# ---------------------------------------------------------------------------------------
# bad input
# ---------------------------------------------------------------------------------------

def test_bad_input_messages():
    x = np.arange(10.0)
    f = x**2
    with pytest.raises(DualityError, match=r"x must be strictly increasing; x\[4\] = 2 "
                                           r"<= x\[3\] = 2"):
        conjugate_samples(np.zeros(6), [0, 1, 1.5, 2, 2, 3])
    with pytest.raises(DualityError, match=r"strictly increasing; x\[1\] = 0 <= x\[0\] = 1"):
        conjugate_samples(np.zeros(3), [1, 0, 2])
    with pytest.raises(DualityError, match="f has 10 values but x has 9 points"):
        conjugate_samples(f, x[:9])
    g = f.copy()
    g[3] = np.nan
    with pytest.raises(DualityError, match="f contains NaN at index 3"):
        conjugate_samples(g, x)
    with pytest.raises(DualityError, match="f is empty"):
        conjugate_samples([], [])
    with pytest.raises(DualityError, match=r"f has shape \(3, 4\) but the grids have "
                                           r"lengths \(3, 5\)"):
        conjugate_samples(np.zeros((3, 4)), (np.arange(3.0), np.arange(5.0)))
    with pytest.raises(DualityError, match="must be a tuple of 2 1-D grids"):
        conjugate_samples(np.zeros((3, 4)), np.arange(3.0))
    g = f.copy()
    g[2] = -np.inf
    with pytest.raises(DualityError, match="-inf at index 2"):
        conjugate_samples(g, x)
    with pytest.raises(DualityError, match="only one finite sample"):
        conjugate_samples([1.0, np.inf], [0.0, 1.0])
    with pytest.raises(DualityError, match="no finite sample"):
        conjugate_samples([np.inf, np.inf], [0.0, 1.0])
    with pytest.raises(DualityError, match=r"p contains NaN at index 1"):
        conjugate_samples(f, x, [0.0, np.nan])
    with pytest.raises(DualityError, match=r"x must be finite; x\[2\]"):
        conjugate_samples(f[:3], [0.0, 1.0, np.inf])
    with pytest.raises(DualityError, match="rectangular array of numbers"):
        conjugate_samples([[1.0, 2.0], [3.0]], ([0, 1], [0, 1]))
    with pytest.raises(DualityError, match="single number"):
        conjugate_samples(3.0, [1.0])
    with pytest.raises(DualityError, match=r"p\[1\] must be a non-empty 1-D array"):
        conjugate_samples(np.zeros((3, 4)), (np.arange(3.0), np.arange(4.0)),
                          (np.arange(2.0), np.zeros((2, 2))))
    with pytest.raises(DualityError, match="p must be a tuple of 2"):
        conjugate_samples(np.zeros((3, 4)), (np.arange(3.0), np.arange(4.0)), [1.0])
    with pytest.raises(DualityError, match="2-D grid|1-D array of grid points"):
        conjugate_samples(np.zeros(4), np.zeros((2, 2)))


# ---------------------------------------------------------------------------------------
# the public entry point
# ---------------------------------------------------------------------------------------

def test_public_entry_point(rng):
    x = np.sort(rng.uniform(-2, 2, 300))
    f = x**4 - x**2
    q = np.linspace(-3, 3, 61)
    g = duality.conjugate(f, x=x, p=q)
    assert isinstance(g, GridConjugate)
    assert np.array_equal(g.values, conjugate_samples(f, x, q).values)
    # lists of numbers are samples too
    gl = duality.conjugate(f.tolist(), x=x.tolist(), p=q.tolist())
    assert np.array_equal(gl.values, g.values)
    gi = duality.conjugate(f, x=x, p=q, convention="intercept")
    assert np.array_equal(gi.values, -g.values)
    env = duality.biconjugate(list(f), x=x)
    assert np.array_equal(env, biconjugate_samples(f, x))
    with pytest.raises(DualityError, match="x must give the grid"):
        duality.conjugate(f)
    with pytest.raises(DualityError, match="x must give the grid"):
        duality.biconjugate(f)
    with pytest.raises(DualityError, match="p is not used"):
        duality.biconjugate(f, x=x, p=q)
    # 2-D through the entry point
    F = x[:50, None] ** 2 + x[None, :40] ** 2
    G = duality.conjugate(F, x=(x[:50], x[:40]), p=(q, q))
    assert G.values.shape == (61, 61)
    # the formula path is unchanged
    c = duality.conjugate("x^2")
    assert isinstance(c, Conjugate)
    assert sp.simplify(c.expr - sp.Symbol("p", real=True) ** 2 / 4) == 0


# -- the ordered lookup of many unsorted slopes -----------------------------------------
def test_sorted_lookup_matches_searchsorted():
    """The lookup that puts many unsorted slopes in order through one integer sort gives
    exactly numpy's ``searchsorted`` (the reference; general-purpose library as oracle),
    also with ties, signed zeros, both signs, infinities and slopes beyond the ends."""
    rng = np.random.default_rng(3)
    s = np.sort(rng.normal(size=40_000))
    s = np.unique(np.concatenate([s, [0.0, 1.0]]))
    q = np.concatenate([rng.normal(size=3000) * 2, s[::37], [-0.0, 0.0, np.inf, -np.inf],
                        np.repeat(s[100], 50), rng.normal(size=3000) * 1e-300])
    rng.shuffle(q)
    k, order = grid_mod._locate(s, q)
    assert order is not None  # the ordered path ran
    assert np.array_equal(np.sort(order), np.arange(q.size))  # a permutation
    assert np.array_equal(k, np.searchsorted(s, q[order], side="left"))
    hx = np.arange(s.size + 1.0)  # any vertex values: the lookup is what is tested
    vals, kk = grid_mod._eval_line(hx, hx, s, q, "extend")
    assert np.array_equal(kk, np.searchsorted(s, q, side="left"))
    # the vertex at x = 0 with slope −inf: q·x − f = 0 − f(0), not 0·(−inf) = NaN
    # (definition of the transform; common practice, no source)
    assert not np.isnan(vals).any()
    assert vals[q == -np.inf][0] == -hx[0] and vals[q == np.inf][0] == np.inf


def test_unsorted_slopes_long_hull_match_naive_maximum():
    """Convex and near-convex samples with 1e5 hull vertices and unsorted slopes: the
    transform equals the naive maximum over all samples (definition of the discrete
    Legendre–Fenchel transform; common practice, no source) to 1e-12."""
    rng = np.random.default_rng(4)
    x = np.sort(rng.uniform(-2, 2, 100_000))
    for f in (x**2, x**2 + 1e-9 * rng.standard_normal(x.size)):
        q = rng.uniform(-3.5, 3.5, 2000)
        g = conjugate_samples(f, x, q)
        ref = (q[:, None] * x[None, :] - f[None, :]).max(axis=1)
        np.testing.assert_allclose(g.values, ref, rtol=0, atol=1e-12)
        assert np.all(g.values[g.argmax >= 0] == q * x[g.argmax] - f[g.argmax])


def test_convexity_detection_agrees_with_the_hull():
    """The one-pass detection of convex samples returns what pooling and pruning return:
    the same vertices and bit-identical edge slopes (the hull of convex points is all of
    them; common practice, no source); near-convex samples (a tiny dent, collinear
    points) are not taken as convex and still get the hull."""
    rng = np.random.default_rng(5)
    x = np.sort(rng.uniform(-2, 2, 5000))
    kinds = []
    for f in (x**2, np.exp(x), x**2 + 1e-5 * rng.standard_normal(x.size),
              np.where(x < 0, 0.0, x)):
        idx, s = grid_mod._hull_indices(x, f)
        dx = np.diff(x)
        d = np.diff(f) / dx
        kinds.append(idx.size == x.size)
        ref = (np.asarray(grid_mod._pava(d, weights=dx).blocks, dtype=np.intp)
               if grid_mod._pava is not None else np.arange(x.size))
        ridx, rs = grid_mod._prune(x, f, ref)
        assert np.array_equal(idx, ridx)
        assert np.array_equal(s, rs)
        assert np.all(np.diff(s) > 0)
    assert kinds == [True, True, False, False]  # both branches ran

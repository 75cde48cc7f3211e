"""Buffered evaluation: the same numbers as the plain sympy → numpy translation."""
from __future__ import annotations

import numpy as np
import pytest
import sympy as sp

from duality.model.lambdas import BufferedFunction, numpy_function

x1, x2, x3, a = sp.symbols("x1 x2 x3 a")
ARGS = [x1, x2, x3, a]

EXPRESSIONS = [
    (sp.sqrt(x1) + 2 * sp.sqrt(x2) + 3 * sp.sqrt(x3)) ** 2,
    1 / sp.sqrt(3 / x3 ** 2 + 2 / x2 ** 2 + x1 ** sp.Float(-2.0)),
    x1 ** sp.Float(0.3) * x2 ** sp.Rational(1, 2) + sp.log(1 + x1) + sp.sqrt(x1 * x2) / 2,
    sp.Min(x1 / 2, x2 / 3),                       # kink: Heaviside in the derivatives
    2 * x1 + 3 * x2,
    x1 ** a * x2 ** 0.5,                          # symbolic exponent
    sp.exp(-x1) * sp.cos(x2) - x3 ** 7 / x1 ** 5,
    -x1 - x2,
    1 / (x1 + x2),
    x1 / (x2 + x3) - x3,
    (x1 * x1 + 1) ** sp.Rational(-5, 2),
    x2 * sp.Heaviside(x1 - 1),
    sp.Piecewise((x1, x1 > 1), (x2 ** 2, True)),  # a condition shared between outputs
    sp.Integer(3),
    a,
    2 ** a,
    x1 ** x2,
    sp.pi * x1,
    x1 ** sp.Rational(7, 3),
    sp.atan(x1) + sp.tanh(x2),
    x1 ** 11 - x2 ** -6 + x3 ** sp.Rational(9, 2),
]


def _reference(exprs, cols):
    with np.errstate(all="ignore"):
        out = numpy_function(ARGS, exprs, cse=True)(*cols)
    rows = []
    for r in out:
        r = np.asarray(r)
        if np.iscomplexobj(r):
            r = np.where(np.abs(r.imag) > 1e-12 * (1 + np.abs(r.real)), np.nan, r.real)
        rows.append(np.broadcast_to(r, cols[0].shape).astype(float))
    return rows


@pytest.mark.parametrize("expr", EXPRESSIONS, ids=[str(e)[:40] for e in EXPRESSIONS])
def test_buffered_function_agrees_with_lambdify_with_derivatives(expr, rng):
    N = 64
    cols = [rng.uniform(-1.0, 4.0, N) for _ in range(3)] + [rng.uniform(0.1, 0.9, N)]
    cols[0][:4] = [0.0, 1.0, -2.0, 4.0]           # zero, the kink, a negative base
    xs = [x1, x2, x3]
    exprs = [expr] + [sp.diff(expr, x) for x in xs] + [sp.diff(expr, xi, xj) for xi in xs
                                                       for xj in xs]
    fn = BufferedFunction(ARGS, exprs)
    out = np.full((len(exprs), N), -7.0)
    tmp = np.full((max(fn.ntmp, 1), N), np.nan)   # garbage in the buffers must not leak
    with np.errstate(all="ignore"):
        fn(cols, list(out), tmp)
    for got, ref in zip(out, _reference(exprs, cols)):
        both_nan = np.isnan(got) & np.isnan(ref)
        with np.errstate(all="ignore"):
            close = (got == ref) | (np.abs(got - ref) <= 1e-12 * np.maximum(1.0, np.abs(ref)))
        assert np.all(both_nan | close)


def test_buffered_function_reuses_buffers_and_accepts_scalars():
    exprs = [x1 * x2 + sp.sqrt(x1), (x1 * x2 + sp.sqrt(x1)) ** 2, a * x3]
    fn = BufferedFunction(ARGS, exprs)
    assert fn.nout == 3
    assert fn.ntmp <= 3
    x = np.array([1.0, 4.0, 9.0])
    out = np.empty((3, 3))
    fn([x, 2.0, x, 0.5], list(out), np.empty((max(fn.ntmp, 1), 3)))
    # values worked out by hand
    assert np.allclose(out[0], [3.0, 10.0, 21.0])
    assert np.allclose(out[1], [9.0, 100.0, 441.0])
    assert np.allclose(out[2], [0.5, 2.0, 4.5])

"""Properties of the given dual that recovery needs: homogeneity, concavity."""
from __future__ import annotations

from fractions import Fraction

import numpy as np
import sympy as sp

from ...errors import DualityError
from ...model.lambdas import numpy_function
from .numeric import _Engine





# -- helpers on the dual ------------------------------------------------------------------------
def _rationalise(expr: sp.Expr) -> sp.Expr:
    """Floats → nearby simple rationals (exact where the float is a short decimal)."""
    reps = {}
    for f in expr.atoms(sp.Float):
        v = float(f)
        fr = Fraction(v).limit_denominator(10 ** 6)
        if abs(float(fr) - v) <= 1e-14 * max(1.0, abs(v)):
            reps[f] = sp.Rational(fr.numerator, fr.denominator)
        else:
            reps[f] = sp.Rational(Fraction(v))
    return expr.xreplace(reps)


def _sample_prices(n: int, rng, zlo: float, zhi: float) -> np.ndarray:
    """Prices (w_1 = 1) over the price domain (log-ratios clipped to ±12)."""
    glo, ghi = max(zlo, -_Engine.ZGRID), min(zhi, _Engine.ZGRID)
    if n == 2:
        t = np.exp(np.linspace(glo, ghi, 61))
        return np.stack([np.ones_like(t), t], axis=1)
    return np.concatenate([np.ones((300, 1)), np.exp(rng.uniform(glo, ghi, (300, n - 1)))],
                          axis=1)


def _check_homogeneous(c_expr, prices, level, levels, label: str) -> None:
    fn = numpy_function(list(prices) + [level], c_expr)
    rng = np.random.default_rng(5)
    W = np.exp(rng.uniform(-1.0, 1.0, (8, len(prices))))
    for w, y in zip(W, np.resize(levels, 8)):
        with np.errstate(all="ignore"):
            try:
                a = complex(fn(*(2.3 * w), y))
                b = 2.3 * complex(fn(*w, y))
            except (ArithmeticError, ValueError, TypeError):
                continue
        if not (np.isfinite(a) and np.isfinite(b)):
            continue
        if abs(a - b) > 1e-8 * (1.0 + abs(b)):
            at = ", ".join(f"{p}={v:.3g}" for p, v in zip(prices, w))
            raise DualityError(
                f"the {label} is not homogeneous of degree one in prices (at {at}, "
                f"{level}={y:g}: value at 2.3×prices is {a.real:.6g}, 2.3×value is "
                f"{b.real:.6g}); every {label} must be — impose the homogeneity "
                "restrictions before recovering the primal")


def _check_concave(c_expr, prices, level, levels, zlo, zhi) -> tuple[bool, list[str]]:
    """Numeric concavity in prices: the price Hessian at sample points must be negative
    semi-definite (tolerance relative to its size)."""
    n = len(prices)
    H = [[sp.diff(c_expr, a, b) for b in prices] for a in prices]
    fn = numpy_function(list(prices) + [level], sp.Matrix(H))
    rng = np.random.default_rng(9)
    W = _sample_prices(n, rng, zlo, zhi)
    bad = []
    for y in levels:
        for w in W:
            with np.errstate(all="ignore"):
                try:
                    h = np.array(fn(*w, y), dtype=complex)
                except (ArithmeticError, ValueError, TypeError):
                    continue
            if not np.all(np.isfinite(h)) or np.max(np.abs(h.imag)) > 1e-9:
                continue
            h = 0.5 * (h.real + h.real.T)
            ev = np.linalg.eigvalsh(h)
            if ev[-1] > 1e-7 * (1e-12 + np.max(np.abs(ev))):
                bad.append((w / w.sum(), y, ev[-1]))
    if not bad:
        return True, []
    w, y, e = bad[0]
    at = ", ".join(f"{p}={v:.3g}" for p, v in zip(prices, w))
    where = (f"not concave in prices at {len(bad)} of {len(W) * len(levels)} sample points "
             f"(e.g. {at}, {level}={y:g}: the price Hessian has eigenvalue {e:.3g} > 0)")
    return False, [where]

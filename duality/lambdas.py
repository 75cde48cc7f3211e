"""One way to turn sympy expressions into numpy functions, used everywhere.

Derivatives of kinked functions (min, max, abs) bring in ``Heaviside`` and ``DiracDelta``;
numpy has no ``DiracDelta``, so it is mapped to zero (its value away from the kink, which
is where a numeric solver or check evaluates) and ``Heaviside`` to ``numpy.heaviside``
with the value one half at zero.
"""
from __future__ import annotations

from typing import Callable, Sequence

import numpy as np
import sympy as sp


def _heaviside(x, h0=0.5):
    return np.heaviside(x, h0)


def _dirac_delta(x, *order):
    return np.zeros_like(np.asarray(x, dtype=float))


NUMPY_MODULES = [{"Heaviside": _heaviside, "DiracDelta": _dirac_delta}, "numpy"]


def numpy_function(args: Sequence, expr, *, cse: bool = False) -> Callable:
    """``sympy.lambdify`` with the package's numpy modules."""
    return sp.lambdify(args, expr, modules=NUMPY_MODULES, cse=cse)


__all__ = ["numpy_function", "NUMPY_MODULES"]

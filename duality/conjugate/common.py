"""Shared pieces of the conjugation routes: the raw result and small helpers."""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Callable

import numpy as np
import sympy as sp

from ..errors import DualityError

CONVENTIONS = ("sup", "intercept")
ROUTES = ("legendre", "fenchel", "numeric")
KINDS = ("legendre", "fenchel")

oo = sp.oo



# ---------------------------------------------------------------------------------------
# internal raw result (always in the "sup" convention)
# ---------------------------------------------------------------------------------------

@dataclass
class _Raw:
    expr: sp.Expr | None
    route: str
    kind: str
    argmax: dict = field(default_factory=dict)
    domain: Any = None
    notes: list = field(default_factory=list)
    numeric: Callable[[np.ndarray], float] | None = None


def _expr_numeric(expr, ps):
    extra = expr.free_symbols - set(ps)
    if extra:
        return None

    def num(pv, _e=expr, _ps=tuple(ps)):
        return _to_float(_e.subs({s: sp.Float(float(v)) for s, v in zip(_ps, pv)}))
    return num


def _remaining(deadline):
    """The account (a :class:`~duality.solve.budget.Budget`) symbolic steps draw on."""
    return deadline


def _to_float(val) -> float:
    if val is sp.oo or val == sp.oo:
        return math.inf
    if val is sp.S.NegativeInfinity or val == -sp.oo:
        return -math.inf
    z = complex(sp.N(val, 30))
    if abs(z.imag) > 1e-9 * (1.0 + abs(z.real)):
        raise DualityError(f"the conjugate is not real here (value {z})")
    return float(z.real)

"""Functions that are symbolic where a closed form exists and numeric where it does not.

A :class:`Fn` pairs an optional sympy expression with a numeric evaluator of a point
(a dict symbol -> float).  Arithmetic, differentiation and substitution keep both sides:
the symbolic side by sympy, the numeric side by lambdified code or, when there is no
expression, by central finite differences.  ``depth`` counts the finite-difference
layers, so callers can choose a tolerance that matches the accuracy actually available.

Demands, elasticities and checks are all written once in terms of :class:`Fn`, so the
same code serves catalogue, symbolic and numeric results.
"""
from __future__ import annotations

import math
from typing import Callable, Mapping

import numpy as np
import sympy as sp

from .result import Derived
from ..model.lambdas import numpy_function

#: Relative step of central finite differences.
FD_STEP = 1e-5


class Fn:
    """A scalar function of named symbols: ``sym`` (sympy or None) and ``num(point)``."""

    __slots__ = ("sym", "_num", "depth", "_params", "_compiled")

    def __init__(self, sym: sp.Expr | None, num: Callable[[Mapping], float] | None = None,
                 depth: int = 0, params: Mapping | None = None):
        if sym is None and num is None:
            raise ValueError("Fn needs an expression or a numeric evaluator")
        self.sym = None if sym is None else sp.sympify(sym)
        self._num = num
        self.depth = depth
        self._params = dict(params or {})
        self._compiled = None

    # -- construction ------------------------------------------------------------
    @classmethod
    def of(cls, d: Derived) -> "Fn":
        """The function behind a derived result."""
        if d.expr is not None:
            return cls(d.expr, params=d.params)
        names = [str(a) for a in d.args]

        def num(pt):
            return float(d(**{n: pt[a] for n, a in zip(names, d.args)},
                           **{str(s): pt[s] for s in d.free_params if s in pt}))
        return cls(None, num, 0, d.params)

    @classmethod
    def const(cls, value) -> "Fn":
        return cls(sp.sympify(value))

    # -- evaluation ------------------------------------------------------------------
    def __call__(self, point: Mapping) -> float:
        if self.sym is not None:
            if self._compiled is None:
                e = self.sym.xreplace(self._params)
                syms = sorted(e.free_symbols, key=str)
                self._compiled = (numpy_function(syms, e), syms)
            fn, syms = self._compiled
            with np.errstate(all="ignore"):
                try:
                    v = complex(fn(*(point[s] for s in syms)))
                except KeyError as exc:
                    raise KeyError(f"no value for {exc.args[0]}") from None
                except (ZeroDivisionError, OverflowError, ValueError):
                    return math.nan
            return v.real if abs(v.imag) <= 1e-12 * max(1.0, abs(v.real)) else math.nan
        return self._num(point)

    # -- algebra -----------------------------------------------------------------------
    def _lift(self, other) -> "Fn":
        return other if isinstance(other, Fn) else Fn.const(other)

    def _combine(self, other, op_sym, op_num) -> "Fn":
        o = self._lift(other)
        params = {**self._params, **o._params}
        if self.sym is not None and o.sym is not None:
            return Fn(op_sym(self.sym, o.sym), params=params)
        a, b = self, o
        return Fn(None, lambda pt: op_num(a(pt), b(pt)), max(a.depth, b.depth), params)

    def __add__(self, o):
        return self._combine(o, lambda a, b: a + b, lambda a, b: a + b)

    __radd__ = __add__

    def __sub__(self, o):
        return self._combine(o, lambda a, b: a - b, lambda a, b: a - b)

    def __rsub__(self, o):
        return self._lift(o) - self

    def __mul__(self, o):
        return self._combine(o, lambda a, b: a * b, lambda a, b: a * b)

    __rmul__ = __mul__

    def __truediv__(self, o):
        return self._combine(o, lambda a, b: a / b, lambda a, b: a / b)

    def __rtruediv__(self, o):
        return self._lift(o) / self

    def __neg__(self):
        return self * -1

    def diff(self, var: sp.Symbol) -> "Fn":
        """∂/∂var: symbolic when possible, else a central difference in ``var``."""
        if self.sym is not None:
            return Fn(sp.diff(self.sym, var), params=self._params)
        f = self

        def num(pt):
            x = float(pt[var])
            h = FD_STEP * max(abs(x), 1e-3)
            up, dn = dict(pt), dict(pt)
            up[var], dn[var] = x + h, x - h
            return (f(up) - f(dn)) / (2 * h)
        return Fn(None, num, self.depth + 1, self._params)

    def subs(self, mapping: Mapping[sp.Symbol, "Fn | sp.Expr"]) -> "Fn":
        """Substitute functions for symbols (composition)."""
        mapping = {k: self._lift(v) for k, v in mapping.items()}
        params = dict(self._params)
        for v in mapping.values():
            params.update(v._params)
        if self.sym is not None and all(v.sym is not None for v in mapping.values()):
            return Fn(self.sym.xreplace({k: v.sym for k, v in mapping.items()}), params=params)
        f = self

        def num(pt):
            new = dict(pt)
            for k, v in mapping.items():
                new[k] = v(pt)
            return f(new)
        depth = max([self.depth] + [v.depth for v in mapping.values()])
        return Fn(None, num, depth, params)

    def __repr__(self) -> str:
        return f"Fn({self.sym if self.sym is not None else '<numeric>'})"


def symbol(s: sp.Symbol) -> Fn:
    return Fn(s)


__all__ = ["Fn", "symbol", "FD_STEP"]

"""The recovered primal function: evaluation, isoquants, summary."""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import sympy as sp

from ...errors import DualityError, NoSolutionError
from ...model.lambdas import numpy_function
from ...model.roles import ROLES

#: symbolic methods, cheapest first
SYMBOLIC_METHODS = ("log-linear", "ratio", "solve")

#: the dual a recovery starts from -> its role (cost: technology, expenditure: preference)
_ROLE_OF_KIND = {r.main_dual: r.name for r in ROLES.values()}




# -- the result ----------------------------------------------------------------------------
@dataclass(frozen=True, eq=False)
class Recovered:
    """A production or utility function recovered from its cost or expenditure function.

    Attributes
    ----------
    role : {"technology", "preference"}
    quantities : tuple of Symbol
        The inputs or goods (the dual's quantity names).
    prices : tuple of Symbol
    level : Symbol
        Output or utility level symbol of the dual.
    expr : sympy.Expr or None
        Closed form f(x) / U(x) in the quantities (and any free parameters); None when
        only the numeric route applies.
    route : {"symbolic", "numeric"}
    method : str
    notes : tuple of str
        Why earlier routes stopped; where concavity in prices failed.
    concave_in_prices : bool or None
        Whether the dual passed the numeric concavity check (None: not checked, free
        parameters).
    dual : Derived
        The cost or expenditure function the primal was recovered from.
    """

    role: str
    quantities: tuple
    prices: tuple
    level: sp.Symbol
    expr: sp.Expr | None
    route: str
    method: str
    notes: tuple
    concave_in_prices: bool | None
    dual: Any = field(repr=False)
    _engine: Any = field(default=None, repr=False)
    _free: tuple = field(default=(), repr=False)
    _zbounds: tuple = field(default=(-30.0, 30.0), repr=False)

    # -- views -------------------------------------------------------------------------
    @property
    def label(self) -> str:
        return ROLES[self.role].primal_function.label

    def __repr__(self) -> str:
        body = "numeric only" if self.expr is None else str(self.expr)
        return (f"<recovered {self.label} of ({', '.join(map(str, self.quantities))}) = "
                f"{body} [{self.route}]>")

    def summary(self) -> str:
        lines = [f"{self.label}: {self.level}({', '.join(map(str, self.quantities))}) = "
                 f"{'(numeric only)' if self.expr is None else self.expr}",
                 f"  route: {self.route} ({self.method})",
                 f"  concave in prices: {self.concave_in_prices}"]
        lines += [f"  note: {n}" for n in self.notes]
        return "\n".join(lines)

    # -- evaluation ----------------------------------------------------------------------
    def __call__(self, **values) -> float | np.ndarray:
        """The output / utility level at keyword quantities (numpy arrays broadcast).

        Raises
        ------
        DualityError
            A missing, unknown, non-positive or non-finite quantity.
        NoSolutionError
            No level could be found at a scalar point (array points come back as NaN).
        """
        names = [str(q) for q in self.quantities]
        free = {str(s): s for s in self._free}
        unknown = [k for k in values if k not in names and k not in free]
        if unknown:
            raise DualityError(f"unknown argument '{unknown[0]}'; the {self.label} takes "
                               f"{', '.join(names)}")
        missing = [k for k in names if k not in values]
        if missing:
            raise DualityError(f"no value for {', '.join(missing)}; the {self.label} takes "
                               f"{', '.join(names)}")
        arrs = []
        for k in names:
            a = np.asarray(values[k], dtype=float)
            if not np.all(np.isfinite(a)):
                raise DualityError(f"{k} must be finite")
            if not np.all(a > 0):
                raise DualityError(f"{k} must be positive; got {a.reshape(-1)[np.argmin(a > 0)]:g}")
            arrs.append(a)
        try:
            b = np.broadcast_arrays(*arrs)
        except ValueError as exc:
            raise DualityError(f"quantity arrays do not broadcast together: {exc}") from None
        scalar = all(np.ndim(a) == 0 for a in arrs)
        if self.expr is not None:
            fvals = {free[k]: float(v) for k, v in values.items() if k in free}
            need = [str(s) for s in self._free if s not in fvals]
            if need:
                raise DualityError(f"no value for parameter(s) {', '.join(need)}; pass them "
                                   f"as keywords, e.g. {need[0]}=0.5")
            fn = numpy_function(list(self.quantities), self.expr.xreplace(fvals))
            with np.errstate(all="ignore"):
                out = np.asarray(fn(*b), dtype=complex)
            out = np.where(np.abs(out.imag) <= 1e-12 * (1 + np.abs(out.real)), out.real, np.nan)
            out = np.broadcast_to(out, b[0].shape).astype(float)
        else:
            flat = np.stack([a.reshape(-1) for a in b], axis=1)
            out = np.array([self._engine.level(row) for row in flat]).reshape(b[0].shape)
        if scalar:
            v = float(out.reshape(-1)[0])
            if not math.isfinite(v):
                words = ROLES[self.role]
                raise NoSolutionError(f"no {words.level} level found at this point: w·x >= "
                                      f"{words.main_function.letter}(w, level) has no "
                                      "bracketed boundary level there")
            return v
        return out

    def isoquant(self, level: float, n: int = 50, other: dict | None = None, *,
                 ratios: tuple[float, float] | None = None,
                 with_prices: bool = False):
        """Points on the isoquant (indifference curve) at ``level``, sorted by the first
        quantity.

        Parameters
        ----------
        level : float
            Output or utility level.
        n : int
            Number of points (points where the dual has no finite value are dropped).
        other : mapping, optional
            With more than two quantities: fixed values of the third and later quantities
            (names → values); points then lie in the plane of the first two.  Without it,
            points lie on the isoquant surface in all quantities.
        ratios : (low, high), optional
            Range of the fan of price ratios w_i/w_1 (concave duals) or quantity ratios
            x_i/x_1 (rays, otherwise); default (0.01, 100), clipped to the price domain
            of :func:`recover` for price fans.
        with_prices : bool
            Also return the generating (supporting) prices, normalised to sum to one.

        Returns
        -------
        ndarray of shape (m, n_quantities), and the prices of the same shape when asked.
        """
        eng = self._need_engine("isoquant points")
        if not np.isfinite(level):
            raise DualityError("the level must be finite")
        if eng.positive_level and not level > 0:
            raise DualityError(f"the {ROLES[self.role].level} must be positive; got {level:g}")
        if int(n) < 1:
            raise DualityError("n must be at least 1")
        if ratios is None:
            lo, hi = 0.01, 100.0
            if other is None and eng.concave:
                lo = max(lo, math.exp(self._zbounds[0]))
                hi = min(hi, math.exp(self._zbounds[1]))
        else:
            lo, hi = ratios
        if not (0 < lo < hi < np.inf):
            raise DualityError("ratios must be (low, high) with 0 < low < high")
        names = [str(q) for q in self.quantities]
        k = len(names)
        fixed = None
        if other is not None:
            if k < 3:
                raise DualityError("'other' fixes the third and later quantities; this "
                                   f"{self.label} has only {k}")
            extra = set(other) - set(names[2:])
            if extra or set(names[2:]) - set(other):
                raise DualityError(f"'other' must give exactly {', '.join(names[2:])}")
            fixed = np.array([float(other[q]) for q in names[2:]])
            if not np.all(fixed > 0):
                raise DualityError("the fixed quantities in 'other' must be positive")
        if fixed is None and eng.concave:
            pts, ws = eng.shephard_fan(float(level), int(n), lo, hi)
        else:
            pts, ws = eng.ray_fan(float(level), int(n), lo, hi, fixed)
        order = np.argsort(pts[:, 0], kind="stable")
        pts, ws = pts[order], ws[order]
        return (pts, ws) if with_prices else pts

    def _need_engine(self, what: str):
        if self._engine is None:
            raise NoSolutionError(f"{what} need a value for every parameter; free: "
                                  + ", ".join(map(str, self._free)))
        return self._engine

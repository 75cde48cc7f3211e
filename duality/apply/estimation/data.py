"""Reading the observed data an equation system needs, with one-line errors that name the
column and the row.

``columns`` maps the model's names (prices, output ``y`` or income ``m``, the observed cost
``c``, quantities) to data columns; a name not mapped is looked up as a column of its own
name.  ``shares`` maps quantity names to observed share columns.
"""
from __future__ import annotations

from typing import Mapping

import numpy as np
import pandas as pd
import sympy as sp

from ...errors import DualityError
from .equations import EquationSystem

#: shares must sum to one within this tolerance unless told otherwise
SHARE_TOL = 1e-3


def as_frame(data) -> pd.DataFrame:
    if isinstance(data, pd.DataFrame):
        return data
    if isinstance(data, Mapping):
        try:
            return pd.DataFrame({k: np.asarray(v) for k, v in data.items()})
        except ValueError as exc:
            raise DualityError(f"the data columns do not have equal lengths ({exc})") from None
    raise DualityError(f"data must be a pandas DataFrame or a mapping of columns, not "
                       f"{type(data).__name__}")


def _row(frame: pd.DataFrame, i: int) -> str:
    return f"row {frame.index[i]!r}"


def _rows(frame: pd.DataFrame, idx, shown: int = 5) -> str:
    """The labels of rows ``idx`` (positions), the first ``shown`` of them."""
    labels = ", ".join(repr(frame.index[j]) for j in idx[:shown])
    return f"rows {labels}" + (f" and {len(idx) - shown} more" if len(idx) > shown else "")


def column_for(name: str, columns: Mapping[str, str], shares: Mapping[str, str]) -> str:
    if name.startswith("s_") and name[2:] in shares:
        return shares[name[2:]]
    return columns.get(name, name)


def resolve(system: EquationSystem, data, *, columns: Mapping[str, str] | None = None,
            shares: Mapping[str, str] | None = None,
            share_tol: float | None = SHARE_TOL) -> dict[sp.Symbol, np.ndarray]:
    """Arrays for every data symbol of ``system``, validated.

    Prices, output, income, cost and quantities must be positive and finite (they enter
    logarithms or ratios); shares finite and, when all are observed, summing to one
    within ``share_tol`` (``None`` skips that check).
    """
    frame = as_frame(data)
    columns = dict(columns or {})
    shares = dict(shares or {})
    out: dict[sp.Symbol, np.ndarray] = {}
    for name, sym in system.data.items():
        col = column_for(name, columns, shares)
        what = f"share of {name[2:]}" if name.startswith("s_") and name[2:] in shares else name
        if col not in frame.columns:
            present = ", ".join(map(str, list(frame.columns)[:12]))
            raise DualityError(f"no column '{col}' for {what}; the data have {present}")
        try:
            arr = pd.to_numeric(frame[col], errors="raise").to_numpy(dtype=float)
        except (ValueError, TypeError):
            bad = pd.to_numeric(frame[col], errors="coerce").isna().to_numpy().argmax()
            raise DualityError(f"column '{col}' ({what}) is not numeric: {_row(frame, bad)} "
                               f"holds {frame[col].iloc[bad]!r}") from None
        nonfinite = np.flatnonzero(~np.isfinite(arr))
        if nonfinite.size:
            i = nonfinite[0]
            raise DualityError(f"column '{col}' ({what}) is missing or not finite at "
                               f"{_row(frame, i)} ({nonfinite.size} rows in all)")
        if not name.startswith("s_"):
            bad = np.flatnonzero(arr <= 0)
            if bad.size:
                i = bad[0]
                raise DualityError(f"column '{col}' ({what}) must be positive: {_row(frame, i)} "
                                   f"holds {arr[i]:g} ({bad.size} rows in all)")
        out[sym] = arr
    share_syms = [s for n, s in system.data.items() if n.startswith("s_")]
    if share_tol is not None and share_syms and len(share_syms) == len(system.quantities):
        total = sum(out[s] for s in share_syms)
        bad = np.flatnonzero(np.abs(total - 1) > share_tol)
        if bad.size:
            i = bad[0]
            raise DualityError(f"the shares ({', '.join(shares[str(q)] for q in system.quantities)}) "
                               f"sum to {total[i]:.6g}, not 1, at {_row(frame, i)} ({bad.size} "
                               f"rows off by more than share_tol={share_tol:g}: "
                               f"{_rows(frame, bad)})")
    n = len(frame)
    if n == 0:
        raise DualityError("the data have no rows")
    return out


def evaluate(expr: sp.Expr, arrays: Mapping[sp.Symbol, np.ndarray], n: int) -> np.ndarray:
    """``expr`` (in data symbols) at every row, as a float array of length ``n``."""
    syms = sorted(expr.free_symbols, key=str)
    if not syms:
        return np.full(n, float(expr))
    fn = sp.lambdify(syms, expr, "numpy")
    return np.broadcast_to(np.asarray(fn(*[arrays[s] for s in syms]), dtype=float), (n,)).copy()


__all__ = ["SHARE_TOL", "as_frame", "resolve", "evaluate", "column_for"]

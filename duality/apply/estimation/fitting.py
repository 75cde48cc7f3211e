"""``estimate``: derive a model's estimating equations, read the data, fit, and return an
:class:`~.result.Estimation`.

Which library does what: statsmodels' OLS for one linear equation, linearmodels' SUR for
a linear system (cross-equation equality constraints; two-step or iterated FGLS), scipy's
``least_squares`` for equations nonlinear in the parameters (see :mod:`.nonlinear`).
"""
from __future__ import annotations

import os
from pathlib import Path
from typing import Mapping

import numpy as np
import pandas as pd

from ...analyse.regularity import regularity
from ...errors import DualityError
from ...model.base import Model
from ...solve.derive import DEFAULT_BUDGET
from .data import SHARE_TOL, as_frame, resolve
from .equations import derive_system
from ..evaluate import _chunks, _count_rows, _file_kind, _progress
from .curvature import (concave_at_reference, slutsky_at_reference, slutsky_start_values,
                        start_values)
from .global_curvature import concave_everywhere, global_start_values
from .crossprod import CHUNK, CrossProducts, accumulate, compile_system, solve
from .linear import METHODS, RawFit, fit_linear
from .nonlinear import fit_nonlinear
from .result import EquationFit, Estimation


#: the engines for a linear system, and the row count up to which "auto" takes the library
ENGINES = ("auto", "library", "crossproducts")
LIBRARY_ROWS = 100_000


def estimate(model: Model, data, *, columns: Mapping[str, str] | None = None,
             shares: Mapping[str, str] | None = None, equations: str = "auto",
             fixed: Mapping[str, float] | None = None, method: str = "iterated",
             drop: str | None = None, index: str = "exact", impose: bool = True,
             start: Mapping[str, float] | None = None, cov_type: str = "nonrobust",
             share_tol: float | None = SHARE_TOL, max_iter: int = 200, tol: float = 1e-8,
             curvature: str = "check", engine: str = "auto", chunksize: int = CHUNK,
             progress: bool = False,
             budget: float | None = DEFAULT_BUDGET) -> Estimation:
    """Estimate a model's parameters from the equations derived from it.

    Parameters
    ----------
    model : Model
        A cost function (typed or from the catalogue: translog, generalized Leontief,
        Cobb–Douglas...), a technology whose cost function has a closed form, or an Almost
        Ideal model (``aids_expenditure``).  Parameter values on the model are start values.
    data : DataFrame, mapping of arrays, dask DataFrame, or path of a CSV or Parquet file
        A file or a dask DataFrame is read chunk by chunk (partition by partition) and a
        linear system estimated from cross-products, so it may be larger than memory.
    columns : mapping, optional
        Model name -> data column (prices, ``y`` or ``m``, observed cost ``c``, quantities).
    shares : mapping, optional
        Quantity name -> column of its observed cost or budget share.
    equations : str
        ``"auto"``, ``"cost"``, ``"shares"``, ``"cost+shares"`` or ``"input-output"``
        (see :data:`~.equations.EQUATIONS`).
    fixed : mapping, optional
        Parameters held at these values (reported as fixed, never estimated).
    method : {"iterated", "sur", "ols"}
        For systems: iterated feasible GLS (maximum likelihood; estimates do not depend on
        which share equation is dropped), two-step SUR, or least squares.  One equation is
        always fitted by (nonlinear) least squares.
    drop : str, optional
        Quantity whose share equation is dropped for adding-up (default the last).
    index : {"exact", "stone"}
        Price index of an Almost Ideal system.
    impose : bool
        Impose the theory restrictions (default); ``False`` to test them afterwards with
        :meth:`Estimation.test`.
    start : mapping, optional
        Start values for nonlinear equations (default: the model's values, else 0.5).
    cov_type : str
        ``"nonrobust"`` or a statsmodels covariance (``"HC1"``...) for one equation;
        ``"nonrobust"`` or ``"robust"`` for a system.
    share_tol : float or None
        Tolerance of the check that observed shares sum to one (``None`` skips it).
    curvature : {"check", "local", "global", "none"}
        ``"check"`` counts the rows where the fitted model violates curvature (needs every
        parameter); ``"local"`` imposes concavity of a translog cost at the point where
        every price and the output equal one, or a negative semidefinite Slutsky matrix of
        an Almost Ideal system where every price and total expenditure equal one
        (:mod:`.curvature`); ``"global"`` imposes concavity at every price on a normalized
        quadratic or symmetric generalized McFadden cost (:mod:`.global_curvature`); both
        report the rows violating curvature before and after; ``"none"`` skips both.
    engine : {"auto", "library", "crossproducts"}
        For a linear system in memory: linearmodels / statsmodels (``"library"``), or
        cross-products accumulated by chunks of ``chunksize`` rows (``"crossproducts"``);
        ``"auto"`` takes the library up to :data:`LIBRARY_ROWS` rows.
    progress : bool
        A progress bar while a file is read.

    Returns
    -------
    Estimation

    Notes
    -----
    Results hold only for the assumed functional form: a good fit does not make the form
    true, and elasticities away from the sample mean rest on it entirely.
    """
    if engine not in ENGINES:
        raise DualityError(f"engine {engine!r} is not one of {', '.join(ENGINES)}")
    columns = dict(columns or {})
    shares = dict(shares or {})
    source = _Source(data)
    names = source.column_names()
    system = derive_system(
        model, equations=equations, shares=list(shares), fixed=fixed, drop=drop,
        index=index, impose_theory=impose,
        have_value=columns.get("c", "c") in names,
        have_quantities=all(columns.get(str(q), str(q)) in names for q in model.quantities),
        budget=budget)
    free = list(system.free)
    notes: list[str] = []
    if source.frame is None:
        if not system.linear:
            raise DualityError("equations nonlinear in the parameters need the data in "
                               "memory (a DataFrame), not read in chunks")
        cp, means = source.cross_products(system, columns, shares, share_tol, chunksize,
                                          progress)
        n = cp.n
        raw = _from_cross_products(cp, system, method, max_iter, tol)
        arrays, rows_kept = {s: np.array([v]) for s, v in means.items()}, False
    else:
        frame = source.frame
        arrays = resolve(system, frame, columns=columns, shares=shares, share_tol=share_tol)
        n, rows_kept = len(frame), True
        notes.extend(_share_note(system, arrays))
        if n <= len(free):
            raise DualityError(f"{n} rows cannot estimate {len(free)} parameters")
        if system.linear and (engine == "crossproducts"
                              or (engine == "auto" and n > LIBRARY_ROWS)):
            cp = accumulate(compile_system(system), arrays, n, chunk=chunksize)
            raw = _from_cross_products(cp, system, method, max_iter, tol)
        elif system.linear:
            raw = fit_linear(system, arrays, n, method=method, cov_type=cov_type,
                             max_iter=max_iter, tol=tol)
        else:
            raw = fit_nonlinear(system, arrays, n, _start(model, free, start), method=method,
                                max_iter=max_iter, tol=tol)
    if curvature not in CURVATURE:
        raise DualityError(f"curvature {curvature!r} is not one of {', '.join(CURVATURE)}")
    result = _result(model, system, raw, n, arrays, rows_kept, notes)
    if curvature == "none":
        return result
    if not rows_kept:
        if curvature in ("local", "global"):
            raise DualityError(f"curvature={curvature!r} needs the data in memory (a "
                               "DataFrame)")
        result.curvature["checked"] = "no: the data were read in chunks"
        return result
    before = _curvature(result, source.frame, columns, budget)
    if curvature == "check":
        result.curvature.update(before)
        return result
    if curvature == "global":
        concave, L = concave_everywhere(system)
        theta0 = global_start_values(concave, L, result.params)
        imposed = "concavity at every price (S = −AAᵀ, Diewert and Wales 1987)"
    else:
        if drop is not None and drop != str(system.quantities[-1]):
            raise DualityError("curvature='local' drops the last share equation; leave drop "
                               "unset")
        if system.model.form == "aids_expenditure":
            concave, L = slutsky_at_reference(system)
            theta0 = slutsky_start_values(system, concave, L, result.params)
            imposed = ("a negative semidefinite Slutsky matrix at the point where every price "
                       "and total expenditure equal one")
        else:
            concave, L = concave_at_reference(system)
            theta0 = start_values(system, concave, L, result.params)
            imposed = "concavity at the point where every price and the output equal one"
    raw = fit_nonlinear(concave, arrays, n, theta0, method=method, max_iter=max_iter, tol=tol,
                        boundary_ok=True)
    Lhat = np.array([raw.theta[concave.free.index(s_)] for s_ in L])
    if np.max(np.abs(Lhat)) < 1e-6 or np.linalg.matrix_rank(raw.cov) < len(concave.free):
        notes = notes + ["curvature binds at its boundary (a singular factor): the standard "
                         "errors of the factor's parameters are not defined and those derived "
                         "from them use a pseudo-inverse"]
    constrained = _result(model, concave, raw, n, arrays, rows_kept, notes)
    after = _curvature(constrained, source.frame, columns, budget)
    constrained.curvature.update({
        "imposed": imposed,
        "rows violating before": before.get("rows violating", before.get("checked")),
        "rows violating after": after.get("rows violating", after.get("checked")),
        "monotonicity violated": after.get("monotonicity violated", "")})
    return constrained


#: the curvature options
CURVATURE = ("check", "local", "global", "none")


def _result(model, system, raw, n, arrays, rows_kept, notes) -> Estimation:
    """Dress a raw fit: per-equation fit, log likelihood, the fitted model."""
    free = list(system.free)
    fits = []
    for g, eq in enumerate(system.equations):
        ssr, sst = float(raw.EE[g, g]), float(raw.sst[g])
        dof = n - raw.k[g]
        fits.append(EquationFit(eq.name, 1 - ssr / sst if sst > 0 else float("nan"),
                                float(np.sqrt(ssr / dof)) if dof > 0 else float("nan"), n, dof))
    G = raw.EE.shape[0]
    sign, logdet = np.linalg.slogdet(raw.EE / n)
    loglik = float(-n / 2 * (G * (1 + np.log(2 * np.pi)) + logdet)) if sign > 0 else float("nan")
    sub = dict(zip(free, raw.theta))
    names = {p.name for p in model.params}
    values = {p.name: float(v) for p, v in sub.items() if p.name in names}
    values.update({k.name: float(e.xreplace(sub)) for k, e in system.derived.items()})
    values.update({k.name: v for k, v in system.fixed.items()})
    fitted = model.with_values(**values)
    return Estimation(system=system, names=tuple(p.name for p in free), theta=raw.theta,
                      cov=raw.cov, equation_fits=tuple(fits), loglik=loglik,
                      estimator=raw.estimator, iterations=raw.iterations, model=fitted, n=n,
                      data=arrays, rows_kept=rows_kept, notes=tuple(notes))


def _share_note(system, arrays) -> list[str]:
    """A note when the observed shares sum to one only within the tolerance: then the
    estimates depend (slightly) on which share equation was dropped."""
    syms = [s for n, s in system.data.items() if n.startswith("s_")]
    if not syms or len(syms) != len(system.quantities):
        return []
    dev = float(np.max(np.abs(sum(arrays[s] for s in syms) - 1)))
    if dev <= 1e-9:
        return []
    return [f"the observed shares sum to one only within {dev:.2g}; the estimates then "
            "depend slightly on which share equation is dropped (rescale the shares to sum "
            "to one to remove this)"]


def _start(model, free, start) -> np.ndarray:
    given = dict(start or {})
    unknown = sorted(set(given) - {p.name for p in model.params})
    if unknown:
        raise DualityError(f"start value for {unknown[0]}, which is not a parameter")
    vals = {p.name: p.value for p in model.params}
    return np.array([float(given[p.name]) if p.name in given else
                     (vals[p.name] if vals.get(p.name) is not None else 0.5) for p in free])


def _from_cross_products(cp, system, method, max_iter, tol) -> RawFit:
    if method not in METHODS:
        raise DualityError(f"method {method!r} is not one of {', '.join(METHODS)}")
    theta, cov, EE, sst, ks, its = solve(cp, system, method=method, max_iter=max_iter, tol=tol)
    G = EE.shape[0]
    est = ("ordinary least squares" if G == 1 else
           {"ols": "constrained least squares", "sur": "two-step SUR",
            "iterated": "iterated SUR"}[method])
    return RawFit(theta, cov, EE, sst, ks, its, True, f"{est} (cross-products by chunks)")


class _Source:
    """The data: a table in memory, a CSV or Parquet file, or a dask DataFrame."""

    def __init__(self, data):
        self.path = self.dask = self.frame = None
        if isinstance(data, (str, os.PathLike)):
            self.path = Path(data)
            if not self.path.exists():
                raise DualityError(f"{self.path}: no such file")
            self.kind = _file_kind(self.path)
        elif hasattr(data, "to_delayed") and hasattr(data, "npartitions"):
            self.dask = data
        else:
            self.frame = as_frame(data)

    def column_names(self) -> list:
        if self.frame is not None:
            return list(self.frame.columns)
        if self.dask is not None:
            return list(self.dask.columns)
        if self.kind == "parquet":
            import pyarrow.parquet as pq  # deferred: optional dependency (the 'scale' extra)
            return list(pq.ParquetFile(self.path).schema_arrow.names)
        return list(pd.read_csv(self.path, nrows=0).columns)

    def cross_products(self, system, columns, shares, share_tol, chunksize, progress):
        comp = compile_system(system)
        G, k = len(comp.parts), comp.k

        def one(df):
            arrays = resolve(system, df, columns=columns, shares=shares, share_tol=share_tol)
            cp = accumulate(comp, arrays, len(df), chunk=chunksize)
            return cp, {s: float(a.sum()) for s, a in arrays.items()}

        def add(a, b):
            return a[0] + b[0], {s: a[1][s] + b[1][s] for s in a[1]}
        total = (CrossProducts(np.zeros((G, G, k + 1, k + 1)), np.zeros(G), 0),
                 {s: 0.0 for s in system.data.values()})
        if self.dask is not None:
            import dask  # deferred: optional dependency (the 'scale' extra)
            parts = [dask.delayed(one)(p) for p in self.dask.to_delayed()]
            while len(parts) > 1:  # a tree of sums, each summed by dask
                parts = [dask.delayed(add)(parts[i], parts[i + 1]) if i + 1 < len(parts)
                         else parts[i] for i in range(0, len(parts), 2)]
            total = dask.compute(parts[0])[0] if parts else total
        else:
            bar = _progress(_count_rows(self.path, self.kind), progress,
                            f"estimating from {self.path.name}")
            try:
                for start, df in _chunks(self.path, self.kind, chunksize):
                    try:
                        total = add(total, one(df))
                    except DualityError as exc:
                        raise DualityError(f"{self.path.name}: {exc}") from None
                    bar.update(len(df))
            finally:
                bar.close()
        cp, sums = total
        if cp.n == 0:
            raise DualityError("the data have no rows")
        if cp.n <= len(system.free):
            raise DualityError(f"{cp.n} rows cannot estimate {len(system.free)} parameters")
        return cp, {s: v / cp.n for s, v in sums.items()}


def _curvature(result: Estimation, frame, columns, budget) -> dict:
    """Rows where the fitted model violates curvature (concavity of cost in prices, the
    Slutsky condition of a demand system), via :func:`duality.analyse.regularity`."""
    m = result.model
    if m.free_params:
        return {"checked": "no: " + ", ".join(map(str, m.free_params)) + " without a value"}
    s = result.system
    cols = {}
    for sym in list(s.prices) + [s.level]:
        cols[str(sym)] = columns.get(str(sym), str(sym))
    try:
        rep = regularity(m, frame, columns=cols, budget=budget, restrictions="ignore")
    except DualityError as exc:
        return {"checked": f"no: {exc}"}
    s = rep.summary
    return {"rows violating": f"{s.curvature.count} of {s.n_rows}",
            "monotonicity violated": f"{s.monotonicity.count} of {s.n_rows}"}


__all__ = ["estimate"]

"""``estimate``: derive a model's estimating equations, read the data, fit, and return an
:class:`~.result.Estimation`.

Which library does what: statsmodels' OLS for one linear equation, linearmodels' SUR for
a linear system (cross-equation equality constraints; two-step or iterated FGLS), scipy's
``least_squares`` for equations nonlinear in the parameters (see :mod:`.nonlinear`).
"""
from __future__ import annotations

from typing import Mapping

import numpy as np
import sympy as sp

from ...analyse.regularity import regularity
from ...errors import DualityError
from ...model.base import Model
from ...solve.derive import DEFAULT_BUDGET
from .data import SHARE_TOL, as_frame, resolve
from .equations import derive_system
from .linear import fit_linear
from .nonlinear import fit_nonlinear
from .result import EquationFit, Estimation


def estimate(model: Model, data, *, columns: Mapping[str, str] | None = None,
             shares: Mapping[str, str] | None = None, equations: str = "auto",
             fixed: Mapping[str, float] | None = None, method: str = "iterated",
             drop: str | None = None, index: str = "exact", impose: bool = True,
             start: Mapping[str, float] | None = None, cov_type: str = "nonrobust",
             share_tol: float | None = SHARE_TOL, max_iter: int = 200, tol: float = 1e-8,
             check_curvature: bool = True,
             budget: float | None = DEFAULT_BUDGET) -> Estimation:
    """Estimate a model's parameters from the equations derived from it.

    Parameters
    ----------
    model : Model
        A cost function (typed or from the catalogue: translog, generalized Leontief,
        Cobb–Douglas...), a technology whose cost function has a closed form, or an Almost
        Ideal model (``aids_expenditure``).  Parameter values on the model are start values.
    data : DataFrame or mapping of arrays
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
    check_curvature : bool
        Count rows where the fitted model violates curvature (needs every parameter).

    Returns
    -------
    Estimation

    Notes
    -----
    Results hold only for the assumed functional form: a good fit does not make the form
    true, and elasticities away from the sample mean rest on it entirely.
    """
    frame = as_frame(data)
    columns = dict(columns or {})
    shares = dict(shares or {})
    system = derive_system(
        model, equations=equations, shares=list(shares), fixed=fixed, drop=drop,
        index=index, impose_theory=impose,
        have_value=_has(frame, columns, "c"),
        have_quantities=all(_has(frame, columns, str(q)) for q in model.quantities),
        budget=budget)
    arrays = resolve(system, frame, columns=columns, shares=shares, share_tol=share_tol)
    n = len(frame)
    free = list(system.free)
    if n <= len(free):
        raise DualityError(f"{n} rows cannot estimate {len(free)} parameters")
    if system.linear:
        raw = fit_linear(system, arrays, n, method=method, cov_type=cov_type,
                         max_iter=max_iter, tol=tol)
    else:
        given = dict(start or {})
        unknown = sorted(set(given) - {p.name for p in model.params})
        if unknown:
            raise DualityError(f"start value for {unknown[0]}, which is not a parameter")
        vals = {p.name: p.value for p in model.params}
        theta0 = np.array([float(given.get(p.name, vals.get(p.name) if vals.get(p.name)
                                           is not None else 0.5)) for p in free])
        raw = fit_nonlinear(system, arrays, n, theta0, method=method, max_iter=max_iter,
                            tol=tol)
    fits = []
    for g, eq in enumerate(system.equations):
        r = raw.resid[:, g]
        y = raw.lhs[:, g]
        ssr = float(r @ r)
        sst = float(((y - y.mean()) ** 2).sum())
        dof = n - raw.k[g]
        fits.append(EquationFit(eq.name, 1 - ssr / sst if sst > 0 else float("nan"),
                                float(np.sqrt(ssr / dof)) if dof > 0 else float("nan"), n, dof))
    G = raw.resid.shape[1]
    S = raw.resid.T @ raw.resid / n
    sign, logdet = np.linalg.slogdet(S)
    loglik = float(-n / 2 * (G * (1 + np.log(2 * np.pi)) + logdet)) if sign > 0 else float("nan")
    values = dict(zip((p.name for p in free), raw.theta.tolist()))
    sub = dict(zip(free, raw.theta))
    values.update({k.name: float(e.xreplace(sub)) for k, e in system.derived.items()})
    values.update({k.name: v for k, v in system.fixed.items()})
    fitted = model.with_values(**values)
    result = Estimation(system=system, names=tuple(p.name for p in free), theta=raw.theta,
                        cov=raw.cov, equation_fits=tuple(fits), loglik=loglik,
                        estimator=raw.estimator, iterations=raw.iterations, model=fitted, n=n,
                        data=arrays)
    if check_curvature:
        result.curvature.update(_curvature(result, frame, columns, shares, budget))
    return result


def _has(frame, columns, name) -> bool:
    return columns.get(name, name) in frame.columns


def _curvature(result: Estimation, frame, columns, shares, budget) -> dict:
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
    d = rep.summary["curvature"]
    mono = rep.summary["monotonicity"]
    return {"rows violating": f"{d['count']} of {rep.summary['n_rows']}",
            "monotonicity violated": f"{mono['count']} of {rep.summary['n_rows']}"}


__all__ = ["estimate"]

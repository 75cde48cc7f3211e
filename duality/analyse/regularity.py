"""Regularity of a fitted dual function at every row of a data set.

Applied work estimates a cost or expenditure function (translog, generalized Leontief,
Almost Ideal, …) and then has to say where in the sample the fitted function is a valid
dual: demands positive (monotonicity) and the substitution matrix negative semidefinite
(concavity in prices).  :func:`regularity` answers this for a whole table at once and
returns, per row, the fitted shares and demands, the checks and every elasticity.

How values are obtained
-----------------------
Everything comes from the dual function itself, by symbolic differentiation done ONCE per
model and compiled with common-subexpression elimination into a single numpy function
that is then evaluated on whole columns:

* technology — the cost function c(w, y) (:func:`duality.cost`): value c, gradient
  c_i = x_i (Shephard's lemma), Hessian c_ij, ∂c/∂y and ∂c_i/∂y;
* preference — the indirect utility function v(p, m) (:func:`duality.indirect_utility`)
  gives u = v(p, m) and the Marshallian demands x_i = −v_i / v_m (Roy's identity) with
  their price and income derivatives; the substitution (Slutsky) matrix is the Hessian
  of the expenditure function e(p, u) (:func:`duality.expenditure`) at u = v(p, m).  If
  the expenditure function has no closed form, the Slutsky matrix
  S_ij = ∂x_i/∂p_j + x_j ∂x_i/∂m of the Marshallian demands is used instead (symmetrised
  for the eigenvalues; the report notes it).

Duals known only numerically (``.expr is None``) are refused with a
:class:`~duality.errors.DualityError` ("regularity at data needs a closed-form dual").

Definitions (subscripts are price derivatives of c, or of e for a preference):

* share             s_i = w_i x_i / c   (budget share p_i x_i / m for a preference)
* price elasticity  ε_ij = w_j c_ij / c_i (technology; conditional demand);
  for a preference ``eps_*`` is the Marshallian ε_ij = (p_j / x_i) ∂x_i/∂p_j and
  ``hicks_*`` the compensated p_j e_ij / e_i
* Allen–Uzawa       σ_ij = c c_ij / (c_i c_j)
* Morishima         M_ij = w_i c_ij / c_j − w_i c_ii / c_i   (row i: the price that changes)
* output elasticity ∂ln x_i / ∂ln y = y c_iy / c_i; income elasticity (m / x_i) ∂x_i/∂m
* returns to scale  c / (y ∂c/∂y)
* monotone          every demand > 0 (and ∂c/∂y > 0, or ∂v/∂m > 0), value > 0
* concave           largest eigenvalue of the substitution matrix ≤ tol × its spectral
  norm (row by row, batched ``numpy.linalg.eigvalsh``).

Parameter values are checked against the theory restrictions derived from the formula
(:mod:`duality.analyse.restrictions`, when that module is present) for models given on the dual
side; a violation raises (or warns, or is ignored, by ``restrictions=``).
"""
from __future__ import annotations

import math
import warnings
from dataclasses import asdict, dataclass, field
from typing import Mapping

import numpy as np
import pandas as pd
import sympy as sp

from ..solve.derive import DEFAULT_BUDGET, cost, expenditure, indirect_utility
from .elasticity import ElasticityTable, substitution_elasticities
from ..errors import DualityError
from ..model.lambdas import numpy_function
from ..model.base import Model
from ..model.roles import ROLES
from ..solve.result import Unavailable
from .restrictions import check_values, derive_restrictions, describe_violation

#: observed shares must sum to one within this, per row
SHARE_SUM_TOL = 1e-6

_CONDITIONS = {
    "monotonicity": "monotone", "monotone": "monotone", "monotonic": "monotone",
    "curvature": "concave", "concavity": "concave", "concave": "concave",
    "domain": "in_domain",
}


class RegularityWarning(UserWarning):
    """Parameter values violate a theory restriction (with ``restrictions="warn"``)."""


# ----------------------------------------------------------------------------------------
# compiled derivatives (once per model)
# ----------------------------------------------------------------------------------------
@dataclass(frozen=True, kw_only=True)
class _Engine:
    role: str                      # "technology" | "preference"
    names: tuple[str, ...]         # quantity names
    prices: tuple[str, ...]        # price names (data columns by default)
    level: str                     # "y" (output) or "m" (income)
    fn: object                     # compiled numpy function of (prices..., level)
    layout: dict                   # output name -> position in fn's result
    fn_e: object = None            # preference: compiled e derivatives of (prices..., u)
    layout_e: dict = field(default_factory=dict)
    conditions: list = field(default_factory=list)   # (text, fn, arg order) per validity
    route: str = ""
    notes: tuple[str, ...] = ()
    label: str = ""


def _closed(d, what: str):
    if d.expr is None:
        raise DualityError(
            f"regularity at data needs a closed-form dual; the {what} of this model is "
            f"known only numerically (route '{d.route}'). Evaluate it point by point with "
            "duality.elasticities instead")
    free = d.free_params
    if free:
        raise DualityError(
            f"parameter(s) {', '.join(map(str, free))} have no value; give them values "
            f"(e.g. model.with_values({free[0]}=...)) before checking regularity at data")
    return d.expr.xreplace(dict(d.params))


def _compile(args, outputs: dict):
    names = list(outputs)
    fn = numpy_function(list(args), [outputs[k] for k in names], cse=True)
    return fn, {k: i for i, k in enumerate(names)}


def _build_engine(model: Model, budget) -> _Engine:
    if model.is_technology:
        c = cost(model, budget=budget)
        C = _closed(c, "cost function")
        ws, y = c.args[:-1], c.args[-1]
        n = len(ws)
        out = {"value": C}
        grad = [sp.diff(C, w) for w in ws]
        for i in range(n):
            out[("g", i)] = grad[i]
        for i in range(n):
            for j in range(i, n):
                out[("H", i, j)] = sp.diff(grad[i], ws[j])
        out["level"] = sp.diff(C, y)
        for i in range(n):
            out[("gl", i)] = sp.diff(grad[i], y)
        fn, layout = _compile(c.args, out)
        conds = _conditions(c)
        return _Engine(role="technology", names=tuple(str(q) for q in model.quantities),
                       prices=tuple(map(str, ws)), level=str(y), fn=fn, layout=layout,
                       conditions=conds, route=c.route, notes=tuple(c.notes),
                       label=c.label)
    v = indirect_utility(model, budget=budget)
    V = _closed(v, "indirect utility function")
    ps, m = v.args[:-1], v.args[-1]
    n = len(ps)
    Vm = sp.diff(V, m)
    xs = [-sp.diff(V, p) / Vm for p in ps]  # Roy's identity
    out = {"value": V, "level": Vm}
    for i in range(n):
        out[("x", i)] = xs[i]
        out[("xm", i)] = sp.diff(xs[i], m)
        for j in range(n):
            out[("xp", i, j)] = sp.diff(xs[i], ps[j])
    fn, layout = _compile(v.args, out)
    notes = list(v.notes)
    conds = _conditions(v)
    fn_e, layout_e = None, {}
    route = v.route
    try:
        e = expenditure(model, budget=budget)
    except DualityError as exc:  # e.g. no expenditure function found within the budget
        e = None
        notes.append(f"no expenditure function ({exc}); substitution matrix from the "
                     "Slutsky equation of the Marshallian demands")
    if e is not None and e.expr is not None and not e.free_params:
        E = e.expr.xreplace(dict(e.params))
        eg = [sp.diff(E, p) for p in e.args[:-1]]
        oute = {"value": E}
        for i in range(n):
            oute[("g", i)] = eg[i]
            for j in range(i, n):
                oute[("H", i, j)] = sp.diff(eg[i], e.args[j])
        fn_e, layout_e = _compile(e.args, oute)
        route = v.route if v.route == e.route else f"{v.route}/{e.route}"
        notes.extend(x for x in e.notes if x not in notes)
    elif e is not None:
        notes.append("the expenditure function is numeric only; substitution matrix from "
                     "the Slutsky equation of the Marshallian demands")
    return _Engine(role="preference", names=tuple(str(q) for q in model.quantities),
                   prices=tuple(map(str, ps)), level=str(m), fn=fn, layout=layout, fn_e=fn_e,
                   layout_e=layout_e, conditions=conds, route=route, notes=tuple(notes),
                   label=v.label)


def _conditions(d) -> list:
    out = []
    for cnd in d.conditions:
        c = cnd.xreplace(dict(d.params))
        if c is sp.true:
            continue
        syms = sorted(c.free_symbols, key=str)
        if any(s not in d.args for s in syms):
            continue
        out.append((str(cnd), numpy_function(syms, c), [str(s) for s in syms]))
    return out


_ENGINES: dict = {}


def _engine(model: Model, budget) -> _Engine:
    key = (model, budget)
    eng = _ENGINES.get(key)
    if eng is None:
        eng = _build_engine(model, budget)
        if len(_ENGINES) > 32:
            _ENGINES.clear()
        _ENGINES[key] = eng
    return eng


# ----------------------------------------------------------------------------------------
# theory restrictions on the parameter values
# ----------------------------------------------------------------------------------------
_RESTRICTIONS: dict = {}


def _restriction_check(model: Model) -> tuple[list[str], str | None]:
    """Violated restrictions as messages, and a note when the check was not made."""
    if model.side not in ("cost", "expenditure", "indirect_utility"):
        return [], None  # primal models: the dual is derived, restrictions do not apply
    key = model
    if key not in _RESTRICTIONS:
        try:
            if model.side == "indirect_utility":
                rs = derive_restrictions(model.expr, tuple(model.prices) + (model.income,),
                                         model.param_symbols, degree=0, shares=False,
                                         name="indirect utility function")
            else:
                rs = derive_restrictions(model.expr, model.prices, model.param_symbols,
                                         degree=1, name=f"the {model.side} function")
        except DualityError as exc:
            rs = Unavailable(f"theory restrictions could not be derived ({exc})")
        _RESTRICTIONS[key] = rs
    rs = _RESTRICTIONS[key]
    if isinstance(rs, Unavailable):
        return [], rs.reason
    if not rs:
        return [], None
    # only the parameters the restrictions know of (check_values refuses others)
    known = {s.name for r in rs for s in tuple(getattr(r, "parameters", ())) + r.symbols}
    values = {p.name: p.value for p in model.params
              if p.value is not None and p.name in known}
    bad = check_values(rs, values, tol=1e-8)
    msgs = []
    for r, res in bad:
        msgs.append(describe_violation(r, res))
    return msgs, None


# ----------------------------------------------------------------------------------------
# data validation
# ----------------------------------------------------------------------------------------
def _present(data: pd.DataFrame) -> str:
    cols = [str(c) for c in data.columns]
    shown = ", ".join(repr(c) for c in cols[:30])
    return shown + (f", … ({len(cols)} in all)" if len(cols) > 30 else "") if cols else "none"


def _column(data: pd.DataFrame, col, role: str) -> np.ndarray:
    """A numeric, finite float column; errors name the row and the column."""
    s = data[col]
    if isinstance(s, pd.DataFrame):
        raise DualityError(f"column {col!r} ({role}) appears more than once in the data")
    if s.dtype == bool:
        raise DualityError(f"column {col!r} ({role}) holds true/false values, not numbers")
    if pd.api.types.is_numeric_dtype(s.dtype):
        num = s.astype(float)
    else:
        num = pd.to_numeric(s, errors="coerce")
        bad = num.isna() & s.notna()
        if bad.any():
            pos = int(np.flatnonzero(bad.to_numpy())[0])
            raise DualityError(f"non-numeric value {s.iloc[pos]!r} at row {data.index[pos]!r} "
                               f"in column {col!r} ({role})")
        num = num.astype(float)
    arr = num.to_numpy(dtype=float, copy=True)
    fin = np.isfinite(arr)
    if not fin.all():
        pos = int(np.flatnonzero(~fin)[0])
        what = "missing value" if np.isnan(arr[pos]) else f"non-finite value {arr[pos]}"
        raise DualityError(f"{what} at row {data.index[pos]!r} in column {col!r} ({role})")
    return arr


def _as_frame(data) -> pd.DataFrame:
    if isinstance(data, pd.DataFrame):
        return data
    if isinstance(data, Mapping):
        try:
            return pd.DataFrame(dict(data))
        except (ValueError, TypeError) as exc:
            raise DualityError(f"data could not be read as a table: {exc}") from None
    raise DualityError(f"data must be a pandas DataFrame (or a mapping of columns), not "
                       f"{type(data).__name__}")


def _resolve_columns(eng: _Engine, data: pd.DataFrame, columns) -> dict[str, object]:
    needed = list(eng.prices) + [eng.level]
    columns = dict(columns or {})
    unknown = [k for k in columns if k not in needed]
    if unknown:
        raise DualityError(f"columns= maps {', '.join(map(repr, unknown))}, which the model "
                           f"does not use; it needs {', '.join(needed)}")
    out = {}
    for name in needed:
        col = columns.get(name, name)
        if col not in data.columns:
            what = "price" if name in eng.prices else ROLES[eng.role].shifter
            how = (f"mapped by columns= to {col!r}" if name in columns else
                   f"map it with columns={{{name!r}: 'your column'}}")
            raise DualityError(f"data has no column {col!r} for the {what} {name} ({how}); "
                               f"columns present: {_present(data)}")
        out[name] = col
    return out


def _observed_shares(eng: _Engine, data: pd.DataFrame, shares,
                     share_tol: float = SHARE_SUM_TOL) -> np.ndarray:
    if not isinstance(shares, Mapping):
        raise DualityError("shares= must map quantity names to columns of observed shares, "
                           f"e.g. {{{eng.names[0]!r}: 'share_col'}}")
    unknown = [k for k in shares if k not in eng.names]
    if unknown:
        raise DualityError(f"shares= names {', '.join(map(repr, unknown))}, which are not "
                           f"quantities of the model ({', '.join(eng.names)})")
    missing = [q for q in eng.names if q not in shares]
    if missing:
        raise DualityError(f"shares= gives no column for {', '.join(missing)}; observed "
                           "shares are checked to sum to one, so give all of "
                           f"{', '.join(eng.names)}")
    cols = []
    for q in eng.names:
        col = shares[q]
        if col not in data.columns:
            raise DualityError(f"data has no column {col!r} for the observed share of {q}; "
                               f"columns present: {_present(data)}")
        a = _column(data, col, f"observed share of {q}")
        bad = (a < 0) | (a > 1)
        if bad.any():
            pos = int(np.flatnonzero(bad)[0])
            raise DualityError(f"observed share {a[pos]:g} of {q} at row {data.index[pos]!r} "
                               f"in column {col!r} is outside [0, 1]")
        cols.append(a)
    S = np.column_stack(cols)
    tot = S.sum(axis=1)
    bad = np.abs(tot - 1) > share_tol
    if bad.any():
        pos = np.flatnonzero(bad)
        shown = ", ".join(repr(data.index[k]) for k in pos[:5]) + (" …" if pos.size > 5
                                                                     else "")
        raise DualityError(f"observed shares do not sum to one at row {data.index[pos[0]]!r}: "
                           f"the sum is {tot[pos[0]]:.10g} ({pos.size} row(s) in all: "
                           f"{shown}; tolerance {share_tol:g}; shares rounded to d digits "
                           f"need share_tol of about n·0.5e-d)")
    return S


# ----------------------------------------------------------------------------------------
# evaluation on arrays
# ----------------------------------------------------------------------------------------
def _run(fn, layout, args, N):
    with np.errstate(all="ignore"):
        res = fn(*args)
    out = {}
    for k, i in layout.items():
        a = np.asarray(res[i])
        if np.iscomplexobj(a):
            a = np.where(np.abs(a.imag) <= 1e-12 * np.maximum(1, np.abs(a.real)), a.real,
                         np.nan)
        a = np.asarray(a, dtype=float)
        out[k] = a.copy() if a.shape == (N,) else np.broadcast_to(a, (N,)).copy()
    return out


@dataclass(frozen=True, kw_only=True)
class RowValues:
    """Every quantity of a regularity check at N points (arrays with N rows).

    ``value`` is c (technology) or e at u = v(p, m) (preference; income where the Slutsky
    equation stands in for e); ``x`` the demands (N, n); ``price``, ``compensated``,
    ``allen``, ``morishima`` and ``H`` (the substitution matrix) are (N, n, n); ``level``
    the output or income elasticities (N, n); ``dlevel`` ∂c/∂y or ∂v/∂m.
    """

    value: np.ndarray
    utility: np.ndarray | None
    x: np.ndarray
    shares: np.ndarray
    price: np.ndarray
    compensated: np.ndarray | None
    level: np.ndarray
    rts: np.ndarray | None
    dlevel: np.ndarray
    H: np.ndarray
    allen: np.ndarray
    morishima: np.ndarray
    max_eig: np.ndarray
    monotone: np.ndarray
    concave: np.ndarray
    in_domain: np.ndarray

    def table(self, k: int, *, role: str, names: tuple[str, ...], point: dict, route: str,
              notes: tuple[str, ...]) -> ElasticityTable:
        """Row ``k`` as an :class:`~duality.analyse.elasticity.ElasticityTable`."""
        return ElasticityTable(
            role=role, names=names, point=point, shares=self.shares[k],
            price=self.price[k], level=self.level[k], allen_uzawa=self.allen[k],
            morishima=self.morishima[k],
            compensated=None if self.compensated is None else self.compensated[k],
            returns_to_scale=None if self.rts is None else float(self.rts[k]),
            route=route, notes=notes)


def _evaluate(eng: _Engine, P: np.ndarray, L: np.ndarray, tol: float) -> RowValues:
    """Every quantity at N points: P (N, n) prices, L (N,) output or income."""
    N, n = P.shape
    cols = [P[:, i] for i in range(n)] + [L]
    r = _run(eng.fn, eng.layout, cols, N)
    if eng.role == "technology":
        val = r["value"]
        g = np.column_stack([r[("g", i)] for i in range(n)])
        H = _sym(r, n, N)
        x, u = g, None
        level_d = np.column_stack([r[("gl", i)] for i in range(n)])
        with np.errstate(all="ignore"):
            level = L[:, None] * level_d / g
            shares = P * g / val[:, None]
            rts = val / (L * r["level"])
        sub_val, sub_g = val, g
    else:
        u = r["value"]
        x = np.column_stack([r[("x", i)] for i in range(n)])
        xm = np.column_stack([r[("xm", i)] for i in range(n)])
        xp = np.empty((N, n, n))
        for i in range(n):
            for j in range(n):
                xp[:, i, j] = r[("xp", i, j)]
        with np.errstate(all="ignore"):
            marshallian = xp * P[:, None, :] / x[:, :, None]
            level = L[:, None] * xm / x
            shares = P * x / L[:, None]
        rts = None
        if eng.fn_e is not None:
            re_ = _run(eng.fn_e, eng.layout_e, [P[:, i] for i in range(n)] + [u], N)
            sub_val = re_["value"]
            sub_g = np.column_stack([re_[("g", i)] for i in range(n)])
            H = _sym(re_, n, N)
        else:
            sub_val = L.copy()
            sub_g = x
            S = xp + x[:, None, :] * xm[:, :, None]
            H = (S + np.swapaxes(S, 1, 2)) / 2
    sub = substitution_elasticities(sub_val, sub_g, H, P)
    # checks
    with np.errstate(invalid="ignore"):
        mono = np.all(x > 0, axis=1) & (r["level"] > 0)
        if eng.role == "technology":
            mono &= sub_val > 0
    fin = np.isfinite(H).all(axis=(1, 2))
    max_eig = np.full(N, np.nan)
    scale = np.full(N, np.nan)
    if fin.any():
        ev = np.linalg.eigvalsh(H[fin])
        max_eig[fin] = ev[:, -1]
        scale[fin] = np.abs(ev).max(axis=1)
    with np.errstate(invalid="ignore"):
        concave = max_eig <= tol * scale
    dom = np.ones(N, dtype=bool)
    if eng.conditions:
        names = list(eng.prices) + [eng.level]
        arrays = dict(zip(names, cols))
        for _, cfn, syms in eng.conditions:
            if all(s in arrays for s in syms):
                with np.errstate(all="ignore"):
                    ok = np.asarray(cfn(*(arrays[s] for s in syms)), dtype=bool)
                dom &= np.broadcast_to(ok, (N,))
    technology = eng.role == "technology"
    return RowValues(
        value=sub_val, utility=u, x=x, shares=shares,
        price=sub.price if technology else marshallian,
        compensated=None if technology else sub.price, level=level, rts=rts,
        dlevel=r["level"], H=H, allen=sub.allen_uzawa, morishima=sub.morishima,
        max_eig=max_eig, monotone=mono & dom, concave=concave & dom, in_domain=dom)


def _sym(r, n, N):
    H = np.empty((N, n, n))
    for i in range(n):
        for j in range(i, n):
            H[:, i, j] = r[("H", i, j)]
            H[:, j, i] = H[:, i, j]
    return H


# ----------------------------------------------------------------------------------------
# the report
# ----------------------------------------------------------------------------------------
@dataclass(frozen=True, kw_only=True)
class Violations:
    """Rows of the data that violate one condition: how many, and their index labels."""

    count: int
    rows: list


@dataclass(frozen=True, kw_only=True)
class ShareSums:
    """How far the rows' observed shares sum from one: the tolerance allowed, the largest
    deviation, and the rows that do not sum to one exactly (beyond 1e-12)."""

    tol: float
    max_dev: float
    count: int
    rows: list


@dataclass(frozen=True, kw_only=True)
class ShareResidual:
    """Fitted minus observed share of one quantity over the rows."""

    mean: float
    rmse: float
    max_abs: float


@dataclass(frozen=True, kw_only=True)
class RegularitySummary:
    """The summary of a regularity check.

    Attributes
    ----------
    n_rows : int
    route : str
        How the dual was derived (``catalogue``, ``symbolic``; ``symbolic/catalogue`` when
        a preference's two duals differ).
    tol : float
        Relative tolerance of the curvature check.
    monotonicity, curvature, domain : Violations
        Rows violating each condition.
    at_mean : ElasticityTable
        Every elasticity at the column means of the data.
    notes : tuple of str
    share_residuals : dict of ShareResidual, or None
        Per quantity, with observed shares only.
    share_sums : ShareSums or None
        With observed shares only: the rows whose shares do not sum to one exactly.
    """

    n_rows: int
    route: str
    tol: float
    monotonicity: Violations
    curvature: Violations
    domain: Violations
    at_mean: ElasticityTable
    notes: tuple[str, ...] = ()
    share_residuals: dict[str, ShareResidual] | None = None
    share_sums: ShareSums | None = None

    def to_dict(self) -> dict:
        """Plain data (lists, numbers, text) for JSON."""
        out = {"n_rows": self.n_rows, "route": self.route, "tol": self.tol,
               **{k: asdict(getattr(self, k)) for k in ("monotonicity", "curvature",
                                                         "domain")},
               "at_mean": self.at_mean.to_dict(), "notes": list(self.notes)}
        if self.share_residuals is not None:
            out["share_residuals"] = {q: asdict(r) for q, r in self.share_residuals.items()}
        if self.share_sums is not None:
            out["share_sums"] = asdict(self.share_sums)
        return out


@dataclass(frozen=True, kw_only=True)
class RegularityReport:
    """Per-row results (``rows``, a DataFrame with the data's index) and a
    :class:`RegularitySummary` of a regularity check."""

    rows: pd.DataFrame
    summary: RegularitySummary
    role: str
    names: tuple[str, ...]
    model_name: str = ""

    def violations(self, condition: str) -> list:
        """Index labels of the rows violating ``condition``: ``"monotonicity"``,
        ``"curvature"`` (``"concavity"``) or ``"domain"``."""
        col = _CONDITIONS.get(str(condition).lower())
        if col is None:
            raise DualityError(f"unknown condition {condition!r}; use one of "
                               "monotonicity, curvature, domain")
        return list(self.rows.index[~self.rows[col].to_numpy(dtype=bool)])

    def as_text(self, max_rows: int = 10) -> str:
        """A readable report."""
        s = self.summary
        n = s.n_rows
        lines = [f"regularity of {self.model_name or 'the model'} at {n} row(s) "
                 f"(route: {s.route})"]

        def cond(title, d: Violations, what):
            shown = ", ".join(map(str, d.rows[:max_rows]))
            more = " …" if d.count > max_rows else ""
            pct = 100.0 * d.count / n if n else 0.0
            lines.append(f"{title}: {n - d.count} of {n} rows satisfy it; "
                         f"{d.count} violate it ({pct:.1f}%)"
                         + (f": {shown}{more}" if d.count else ""))
            lines.append(f"  ({what})")
        cond("monotonicity", s.monotonicity,
             "every fitted demand positive" + (" and ∂c/∂y > 0" if self.role == "technology"
                                              else " and ∂v/∂m > 0"))
        cond("curvature", s.curvature,
             "substitution matrix negative semidefinite: largest eigenvalue ≤ "
             f"{s.tol:g} × its spectral norm")
        if s.domain.count:
            cond("domain", s.domain, "rows outside the region where the closed form holds")
        if s.share_residuals is not None:
            lines.append("fitted minus observed shares:")
            for q, d in s.share_residuals.items():
                lines.append(f"  {q}: mean {d.mean:.4g}, rmse {d.rmse:.4g}, "
                             f"max |.| {d.max_abs:.4g}")
        lines.append("")
        lines.append("at the sample mean:")
        lines.append(s.at_mean.as_text())
        for note in s.notes:
            lines.append(f"note: {note}")
        return "\n".join(lines)

    def __str__(self) -> str:
        return self.as_text()


def regularity(model: Model, data, *, columns: Mapping[str, object] | None = None,
               shares: Mapping[str, object] | None = None, tol: float = 1e-9,
               share_tol: float = SHARE_SUM_TOL,
               budget: float | None = DEFAULT_BUDGET,
               restrictions: str = "raise") -> RegularityReport:
    """Check monotonicity and curvature of a model's dual at every row of ``data``.

    Parameters
    ----------
    model : Model
        A technology (cost function) or a preference (indirect utility and expenditure
        functions), with every parameter given a value.
    data : pandas.DataFrame
        Technology: one column per input price and the output; preference: one per price
        and income.  Column names as in the model unless mapped by ``columns``.
    columns : mapping, optional
        Model name -> data column, e.g. ``{"w1": "price_labour", "y": "output"}``.
    shares : mapping, optional
        Quantity name -> column of observed shares (cost or budget shares); they must lie
        in [0, 1] and sum to one per row within ``share_tol``.  Residuals fitted minus
        observed are reported as ``resid_<q>``.
    share_tol : float
        How far a row's observed shares may sum from one (default 1e-6); published
        shares rounded to d digits need about n·0.5e-d for n quantities.  The rows that
        do not sum to one exactly (beyond 1e-12) are listed in ``summary.share_sums``.
    tol : float
        Relative tolerance of the curvature check.
    budget : float or None
        Seconds allowed for symbolic derivation of the dual.
    restrictions : {"raise", "warn", "ignore"}
        What to do when parameter values violate the theory restrictions derived from the
        formula of a dual-side model (homogeneity, adding-up, symmetry).

    Returns
    -------
    RegularityReport
        ``summary`` (a :class:`RegularitySummary`) and ``rows``, a DataFrame with the
        data's index holding ``value`` (c or e), ``utility`` (preference),
        ``demand_<q>``, ``share_<q>``, ``eps_<q>_<price>``, for a preference also
        ``hicks_<q>_<price>`` (compensated) and ``income_elast_<q>``, for a technology
        ``output_elast_<q>`` and ``rts``; ``allen_<qi>_<qj>``, ``morishima_<qi>_<qj>``,
        ``max_eig``, ``monotone``, ``concave``, ``in_domain``.

    Raises
    ------
    DualityError
        Missing or misnamed columns, non-numeric or missing cells, non-positive prices,
        output or income, bad observed shares, parameters without values, parameter
        values that violate theory restrictions, numeric-only duals.
    """
    if not isinstance(model, Model):
        raise DualityError(f"regularity needs a model (technology, preference or a dual-side "
                           f"form), not {type(model).__name__}")
    if restrictions not in ("raise", "warn", "ignore"):
        raise DualityError(f"restrictions must be 'raise', 'warn' or 'ignore', not "
                           f"{restrictions!r}")
    try:
        tol = float(tol)
    except (TypeError, ValueError):
        raise DualityError(f"tol must be a number, not {tol!r}") from None
    if not (tol >= 0 and math.isfinite(tol)):
        raise DualityError(f"tol must be a non-negative number, not {tol!r}")
    if model.free_params:
        names = ", ".join(map(str, model.free_params))
        raise DualityError(f"parameter(s) {names} have no value; give them values (e.g. "
                           f"model.with_values({model.free_params[0]}=...)) before checking "
                           "regularity at data")
    notes: list[str] = []
    if restrictions != "ignore":
        msgs, note = _restriction_check(model)
        if note:
            notes.append(note)
        if msgs:
            text = ("the parameter values violate theory restrictions derived from the "
                    "formula: " + "; ".join(msgs))
            if restrictions == "raise":
                raise DualityError(text + " (pass restrictions='warn' to check regularity "
                                   "anyway)")
            warnings.warn(text, RegularityWarning, stacklevel=2)
            notes.append(text)
    data = _as_frame(data)
    eng = _engine(model, budget)
    notes.extend(eng.notes)
    colmap = _resolve_columns(eng, data, columns)
    if len(data) == 0:
        raise DualityError("data has no rows")
    arrays = {}
    for name, col in colmap.items():
        what = ("price " if name in eng.prices else ROLES[eng.role].shifter + " ") + name
        a = _column(data, col, what)
        bad = ~(a > 0)
        if bad.any():
            pos = int(np.flatnonzero(bad)[0])
            raise DualityError(f"non-positive {what} = {a[pos]:g} at row {data.index[pos]!r} "
                               f"in column {col!r}; prices, output and income must be "
                               f"positive ({int(bad.sum())} row(s) in all)")
        arrays[name] = a
    try:
        share_tol = float(share_tol)
    except (TypeError, ValueError):
        raise DualityError(f"share_tol must be a number, not {share_tol!r}") from None
    if not (share_tol >= 0 and math.isfinite(share_tol)):
        raise DualityError(f"share_tol must be a non-negative number, not {share_tol!r}")
    observed = (_observed_shares(eng, data, shares, share_tol) if shares is not None
                else None)

    P = np.column_stack([arrays[p] for p in eng.prices])
    L = arrays[eng.level]
    res = _evaluate(eng, P, L, tol)
    rows = _frame(eng, res, data.index, observed)

    # elasticities at the sample mean of the data
    Pm = P.mean(axis=0)[None, :]
    Lm = np.array([L.mean()])
    point = {**{p: float(Pm[0, i]) for i, p in enumerate(eng.prices)},
             eng.level: float(Lm[0])}
    notes = tuple(dict.fromkeys(notes))
    table = _evaluate(eng, Pm, Lm, tol).table(0, role=eng.role, names=eng.names,
                                              point=point, route=eng.route, notes=notes)
    idx = data.index

    def viol(mask):
        bad = ~mask
        return Violations(count=int(bad.sum()), rows=list(idx[bad]))
    residuals = share_sums = None
    if observed is not None:
        dev = np.abs(observed.sum(axis=1) - 1)
        off = dev > 1e-12
        share_sums = ShareSums(tol=share_tol, max_dev=float(dev.max()),
                               count=int(off.sum()), rows=list(idx[off]))
        R = res.shares - observed
        residuals = {q: ShareResidual(mean=float(np.nanmean(R[:, i])),
                                      rmse=float(np.sqrt(np.nanmean(R[:, i] ** 2))),
                                      max_abs=float(np.nanmax(np.abs(R[:, i]))))
                     for i, q in enumerate(eng.names)}
    summary = RegularitySummary(
        n_rows=len(data), route=eng.route, tol=tol, monotonicity=viol(res.monotone),
        curvature=viol(res.concave), domain=viol(res.in_domain), at_mean=table,
        notes=notes, share_residuals=residuals, share_sums=share_sums)
    return RegularityReport(rows=rows, summary=summary, role=eng.role, names=eng.names,
                            model_name=model.name or eng.label)


def _frame(eng: _Engine, res: RowValues, index, observed) -> pd.DataFrame:
    names, prices = eng.names, eng.prices
    n = len(names)
    cols: dict[str, np.ndarray] = {"value": res.value}
    if eng.role == "preference":
        cols["utility"] = res.utility
    for i, q in enumerate(names):
        cols[f"demand_{q}"] = res.x[:, i]
    for i, q in enumerate(names):
        cols[f"share_{q}"] = res.shares[:, i]
    if observed is not None:
        for i, q in enumerate(names):
            cols[f"resid_{q}"] = res.shares[:, i] - observed[:, i]
    for i, q in enumerate(names):
        for j, p in enumerate(prices):
            cols[f"eps_{q}_{p}"] = res.price[:, i, j]
    if res.compensated is not None:
        for i, q in enumerate(names):
            for j, p in enumerate(prices):
                cols[f"hicks_{q}_{p}"] = res.compensated[:, i, j]
    lvl = ROLES[eng.role].shifter + "_elast"
    for i, q in enumerate(names):
        cols[f"{lvl}_{q}"] = res.level[:, i]
    for i in range(n):
        for j in range(n):
            cols[f"allen_{names[i]}_{names[j]}"] = res.allen[:, i, j]
    for i in range(n):
        for j in range(n):
            if i != j:
                cols[f"morishima_{names[i]}_{names[j]}"] = res.morishima[:, i, j]
    if res.rts is not None:
        cols["rts"] = res.rts
    cols["max_eig"] = res.max_eig
    cols["monotone"] = res.monotone
    cols["concave"] = res.concave
    cols["in_domain"] = res.in_domain
    return pd.DataFrame(cols, index=index)


__all__ = ["regularity", "RegularityReport", "RegularitySummary", "Violations",
           "ShareResidual", "RegularityWarning"]

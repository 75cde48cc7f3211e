"""The result of an estimate: estimates with their inference, fit, and the fitted model.

Elasticities at the estimates carry delta-method standard errors: for a quantity
g(θ; data), Var ĝ ≈ ∇g' V ∇g with ∇g the *symbolic* gradient in the free parameters
(Greene, Econometric Analysis, 5th ed., section 5.2.4 / Theorem D.22; from memory).

Definitions used (x_i by Shephard's lemma, s_i = ∂ln c/∂ln w_i; Chambers, Applied
Production Analysis (1988), ch. 2–3, from memory):

* price elasticity        ε_ij = ∂ln x_i/∂ln w_j = ∂ln s_i/∂ln w_j + s_j − δ_ij
* Allen–Uzawa             σ_ij = ε_ij / s_j
* Morishima               M_ij = ε_ji − ε_ii
* output elasticity       ∂ln x_i/∂ln y = ∂ln s_i/∂ln y + ∂ln c/∂ln y
* returns to scale        1 / (∂ln c/∂ln y)

For budget shares s_i(p, m): Marshallian ε_ij = ∂ln s_i/∂ln p_j − δ_ij, income
η_i = 1 + ∂ln s_i/∂ln m, compensated ε*_ij = ε_ij + η_i s_j (Slutsky equation in
elasticities; Deaton and Muellbauer, Economics and Consumer Behavior (1980), ch. 2, from
memory).
"""
from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property

import numpy as np
import pandas as pd
import sympy as sp
from scipy.special import chdtrc, ndtr, ndtri

from ...analyse.theory import restrictions
from ...errors import DualityError
from ...model.base import Model
from ...model.formula import parse
from .equations import EquationSystem


@dataclass(frozen=True)
class EquationFit:
    """Fit of one equation: R² of its left-hand side (known terms moved left), the standard
    error of the regression on the residual degrees of freedom."""

    name: str
    r_squared: float
    se_regression: float
    n: int
    dof: int


@dataclass(frozen=True)
class WaldTest:
    """A Wald test of linear restrictions R θ = q: W = (Rθ̂−q)'(R V R')⁻¹(Rθ̂−q) ~ χ²(rank)."""

    hypotheses: tuple
    statistic: float
    df: int
    p_value: float

    def as_text(self) -> str:
        return (f"Wald test of {len(self.hypotheses)} restriction(s): statistic "
                f"{self.statistic:.4f} on {self.df} d.f., p-value {self.p_value:.4g}\n"
                + "\n".join(f"  {h}" for h in self.hypotheses))


def _dlog(expr, s):
    """∂expr/∂ln s."""
    return s * sp.diff(expr, s)


@dataclass(frozen=True, eq=False)
class Estimation:
    """Estimates of a model's parameters from its derived equations.

    Attributes
    ----------
    system : EquationSystem
        The equations, the free, fixed and derived parameters, what was imposed and dropped.
    names : tuple of str
        The free parameters, in the order of ``theta`` and ``cov``.
    theta : numpy.ndarray
    cov : numpy.ndarray
    equation_fits : tuple of EquationFit
    loglik : float
        Gaussian log likelihood at the estimates (Σ at its maximum-likelihood value).
    estimator : str
        What was run and by which library.
    iterations : int
    model : Model
        The model with the estimates as its parameter values: every feature of the
        package (duals, demands, checks, regularity, scenarios, exports) works on it.
    n : int
    curvature : dict
        Rows where the fitted model violates curvature and monotonicity (or why not checked).
    rows_kept : bool
        False when the data were read in chunks (elasticities only at a point).
    notes : tuple of str
    """

    system: EquationSystem
    names: tuple
    theta: np.ndarray
    cov: np.ndarray
    equation_fits: tuple
    loglik: float
    estimator: str
    iterations: int
    model: Model
    n: int
    data: dict = field(repr=False, default_factory=dict)
    curvature: dict = field(default_factory=dict)
    level: float = 0.95
    rows_kept: bool = True
    notes: tuple = ()

    # -- parameters -----------------------------------------------------------------------
    @cached_property
    def _free_syms(self) -> list:
        return list(self.system.free)

    @cached_property
    def _derived_grad(self) -> dict:
        """Each derived parameter as (value, gradient in θ at the estimates): from the
        restrictions (linear in θ) or from a curvature parametrisation (nonlinear)."""
        out = {}
        sub = dict(zip(self._free_syms, self.theta))
        for k, e in self.system.derived.items():
            out[k] = (float(e.xreplace(sub)),
                      np.array([float(sp.diff(e, p).xreplace(sub)) for p in self._free_syms]))
        return out

    @cached_property
    def table(self) -> pd.DataFrame:
        """One row per parameter: estimate, std. error, t, p, interval and status
        (``estimated``, ``from restrictions`` or ``fixed``)."""
        z = float(ndtri(0.5 + self.level / 2))
        rows = []
        se = np.sqrt(np.clip(np.diag(self.cov), 0, None))
        for name, b, s in zip(self.names, self.theta, se):
            rows.append((name, b, s, "estimated"))
        for k, (v, g) in self._derived_grad.items():
            rows.append((k.name, v, float(np.sqrt(max(g @ self.cov @ g, 0.0))),
                         self.system.derived_how.get(k, "from restrictions")))
        for k, v in self.system.fixed.items():
            rows.append((k.name, v, np.nan, "fixed"))
        order = {p.name: i for i, p in enumerate(self.system.model.params)}
        rows.sort(key=lambda r: order.get(r[0], len(order)))
        df = pd.DataFrame(rows, columns=["parameter", "estimate", "std_error", "status"])
        with np.errstate(divide="ignore", invalid="ignore"):
            df["t"] = np.where(df["std_error"] > 0, df["estimate"] / df["std_error"], np.nan)
        df["p_value"] = 2 * ndtr(-np.abs(df["t"]))
        df["ci_low"] = df["estimate"] - z * df["std_error"]
        df["ci_high"] = df["estimate"] + z * df["std_error"]
        return df.set_index("parameter")[["estimate", "std_error", "t", "p_value", "ci_low",
                                          "ci_high", "status"]]

    @property
    def params(self) -> dict:
        """Every parameter's value: estimated, from the restrictions, and fixed."""
        return {k: float(v) for k, v in self.table["estimate"].items()}

    @property
    def std_errors(self) -> dict:
        return {k: float(v) for k, v in self.table["std_error"].items()}

    @property
    def imposed(self) -> tuple:
        return self.system.imposed

    @property
    def dropped(self) -> str | None:
        return self.system.dropped

    # -- elasticities ---------------------------------------------------------------------
    def _subst(self, e: sp.Expr) -> sp.Expr:
        s = self.system
        e = e.xreplace(s.derived) if s.derived else e
        return e.xreplace(s.fixed) if s.fixed else e

    @cached_property
    def elasticity_exprs(self) -> dict:
        """name -> expression in the free parameters and the data (see the module notes)."""
        s = self.system
        out: dict[str, sp.Expr] = {}
        qs = [str(q) for q in s.quantities]
        if s.log_cost is not None:
            lnc = self._subst(s.log_cost)
            ws, y = list(s.prices), s.level
            sh = [_dlog(lnc, w) for w in ws]
            cy = _dlog(lnc, y)
            eps = {}
            for i, qi in enumerate(qs):
                for j, wj in enumerate(ws):
                    e = _dlog(sh[i], wj) / sh[i] + sh[j] - (1 if i == j else 0)
                    eps[i, j] = e
                    out[f"price {qi},{wj}"] = e
            for i, qi in enumerate(qs):
                for j in range(i, len(qs)):
                    out[f"Allen {qi},{qs[j]}"] = eps[i, j] / sh[j]
            for i, qi in enumerate(qs):
                for j, qj in enumerate(qs):
                    if i != j:
                        out[f"Morishima {ws[i]}:{qj}/{qi}"] = eps[j, i] - eps[i, i]
            for i, qi in enumerate(qs):
                out[f"output {qi}"] = _dlog(sh[i], y) / sh[i] + cy
            out["cost elasticity"] = cy
            out["returns to scale"] = 1 / cy
        elif s.shares_exact:
            shares = [self._subst(e) for e in s.shares_exact]
            loose = sorted({p.name for e in shares for p in e.free_symbols}
                           & {p.name for p in s.model.param_symbols} - set(self.names))
            if loose:
                raise DualityError(f"elasticities need a value for {', '.join(loose)}; fix "
                                   "it in the estimate")
            m = s.level
            ps = list(s.prices)
            eta = [1 + _dlog(shares[i], m) / shares[i] for i in range(len(qs))]
            for i, qi in enumerate(qs):
                for j, pj in enumerate(ps):
                    e = _dlog(shares[i], pj) / shares[i] - (1 if i == j else 0)
                    out[f"price {qi},{pj}"] = e
                    out[f"compensated {qi},{pj}"] = e + eta[i] * shares[j]
            for i, qi in enumerate(qs):
                out[f"income {qi}"] = eta[i]
        return out

    @cached_property
    def _elasticity_fn(self):
        exprs = self.elasticity_exprs
        free = self._free_syms
        data_syms = sorted({x for e in exprs.values() for x in e.free_symbols
                            if x not in set(free)}, key=str)
        flat = []
        for e in exprs.values():
            flat.append(e)
            flat.extend(sp.diff(e, p) for p in free)
        fn = sp.lambdify(free + data_syms, flat, "numpy", cse=True)
        return fn, data_syms

    def elasticities(self, at="mean", *, kinds=None) -> pd.DataFrame:
        """Elasticities at the estimates with delta-method standard errors.

        Parameters
        ----------
        at : "mean", "all", int, list of int, or a mapping name -> value
            The sample mean of the data (default), every row, chosen rows (positions),
            or a point given by value.
        kinds : sequence of str, optional
            Name prefixes to keep (``"price"``, ``"Allen"``, ``"Morishima"``,
            ``"output"``, ``"returns to scale"``, ``"income"``, ``"compensated"``).

        Returns
        -------
        DataFrame
            Columns ``elasticity``, ``estimate``, ``std_error``, ``t`` (and ``row`` unless
            at the mean or a given point).
        """
        exprs = self.elasticity_exprs
        if not exprs:
            raise DualityError("no elasticities for this model")
        fn, data_syms = self._elasticity_fn
        names = list(exprs)
        k = len(self._free_syms)
        if not (isinstance(at, str) and at == "mean") and not isinstance(at, dict) \
                and not self.rows_kept:
            raise DualityError("the rows were not kept (the data were read in chunks); "
                               "elasticities are available at the mean or at a given point")
        if isinstance(at, str) and at == "mean":
            point = {s: np.array([float(np.mean(self.data[s]))]) for s in data_syms}
            label = None
        elif isinstance(at, str) and at == "all":
            point = {s: self.data[s] for s in data_syms}
            label = np.arange(self.n)
        elif isinstance(at, dict):
            missing = [str(s) for s in data_syms if str(s) not in at]
            if missing:
                raise DualityError(f"the point 'at' needs a value for {missing[0]}")
            point = {s: np.array([float(at[str(s)])]) for s in data_syms}
            label = None
        else:
            rows = np.atleast_1d(np.asarray(at, dtype=int))
            if rows.size == 0 or rows.min() < 0 or rows.max() >= self.n:
                raise DualityError(f"row {at!r} is outside the data (0 to {self.n - 1})")
            point = {s: self.data[s][rows] for s in data_syms}
            label = rows
        vals = fn(*self.theta, *[point[s] for s in data_syms])
        npts = len(next(iter(point.values()))) if point else 1
        frames = []
        for i, name in enumerate(names):
            if kinds is not None and not any(name.startswith(kd) for kd in kinds):
                continue
            block = vals[i * (k + 1):(i + 1) * (k + 1)]
            est = np.broadcast_to(np.asarray(block[0], float), (npts,))
            G = np.column_stack([np.broadcast_to(np.asarray(g, float), (npts,))
                                 for g in block[1:]]) if k else np.zeros((npts, 0))
            se = np.sqrt(np.clip(np.einsum("ni,ij,nj->n", G, self.cov, G), 0, None))
            f = pd.DataFrame({"elasticity": name, "estimate": est, "std_error": se})
            if label is not None:
                f.insert(0, "row", label)
            frames.append(f)
        out = pd.concat(frames, ignore_index=True)
        with np.errstate(divide="ignore", invalid="ignore"):
            out["t"] = np.where(out["std_error"] > 0, out["estimate"] / out["std_error"],
                                np.nan)
        return out

    # -- tests ----------------------------------------------------------------------------
    def test(self, hypotheses=None) -> WaldTest:
        """Wald test of linear restrictions on the parameters.

        ``hypotheses``: a string (``"g12 = 0"``, several separated by ``;``) or a list of
        them; ``None`` tests the theory restrictions (which must not have been imposed:
        estimate with ``impose=False``).
        """
        model = self.system.model
        table = model.symbols
        if hypotheses is None:
            eqs = [r.equation for r in restrictions(model) if r.linear]
            texts = [sp.sstr(e) for e in eqs]
            exprs = [e.lhs - e.rhs for e in eqs]
        else:
            if isinstance(hypotheses, str):
                hypotheses = [h for h in hypotheses.split(";") if h.strip()]
            texts, exprs = [], []
            for h in hypotheses:
                if h.count("=") != 1:
                    raise DualityError(f"hypothesis {h!r}: expected one '=' as in 'g12 = 0'")
                lhs, rhs = h.split("=")
                try:
                    e = parse(lhs, symbols=table) - parse(rhs, symbols=table)
                except DualityError as exc:
                    raise DualityError(f"hypothesis {h!r}: {exc}") from None
                stray = [s.name for s in e.free_symbols
                         if s not in set(model.param_symbols)]
                if stray:
                    raise DualityError(f"hypothesis {h!r}: {stray[0]} is not a parameter")
                texts.append(h.strip())
                exprs.append(e)
        free = self._free_syms
        R, q = [], []
        for t, e in zip(texts, exprs):
            e = sp.expand(self._subst(e))
            if any(sp.diff(e, p).free_symbols for p in free):
                raise DualityError(f"hypothesis {t!r} is not linear in the parameters")
            row = [float(sp.diff(e, p)) for p in free]
            const = float(e.xreplace({p: 0 for p in free}))
            if not any(row):
                if abs(const) < 1e-12:
                    raise DualityError(f"restriction {t} holds by construction in this "
                                       "estimate (imposed or fixed); estimate with "
                                       "impose=False to test it")
                raise DualityError(f"restriction {t} contradicts the fixed values")
            R.append(row)
            q.append(-const)
        R, q = np.array(R), np.array(q)
        d = R @ self.theta - q
        V = R @ self.cov @ R.T
        rank = int(np.linalg.matrix_rank(V))
        W = float(d @ np.linalg.pinv(V) @ d)
        return WaldTest(tuple(texts), W, rank, float(chdtrc(rank, W)))

    # -- display --------------------------------------------------------------------------
    def as_text(self) -> str:
        s = self.system
        head = (f"estimates of {s.model.name or 'the model'}: {self.estimator}; {self.n} rows, "
                f"{len(s.equations)} equation(s)")
        lines = [head, ""]
        lines.append(f"{'parameter':<12}{'estimate':>12}{'std. error':>12}{'t':>9}"
                     f"{'interval (' + format(self.level, '.0%') + ')':>26}  status")
        for name, r in self.table.iterrows():
            if r["status"] == "fixed":
                lines.append(f"{name:<12}{r['estimate']:>12.5g}{'':>12}{'':>9}{'':>26}  fixed")
                continue
            ci = f"[{r['ci_low']:.5g}, {r['ci_high']:.5g}]"
            lines.append(f"{name:<12}{r['estimate']:>12.5g}{r['std_error']:>12.5g}"
                         f"{r['t']:>9.3f}{ci:>26}  {r['status']}")
        lines += ["", f"{'equation':<16}{'R²':>8}{'s.e. of regression':>20}{'rows':>8}"
                  f"{'resid. d.f.':>13}"]
        for f in self.equation_fits:
            lines.append(f"{f.name:<16}{f.r_squared:>8.4f}{f.se_regression:>20.5g}{f.n:>8}"
                         f"{f.dof:>13}")
        lines.append(f"log likelihood {self.loglik:.4f}")
        for r in s.imposed:
            lines.append(f"imposed {r}")
        if s.dropped:
            lines.append(f"dropped for adding-up: {s.dropped} (its parameters follow from "
                         "the restrictions)")
        for k, v in self.curvature.items():
            lines.append(f"curvature {k}: {v}")
        lines += [f"note: {n}" for n in s.notes + self.notes]
        lines.append("These estimates hold only for the assumed functional form and data.")
        return "\n".join(lines)

    def as_latex(self) -> str:
        """A tabular of the estimates (LaTeX)."""
        rows = [r"\begin{tabular}{lrrrl}", r"\hline",
                r"parameter & estimate & std.\ error & $t$ & status \\", r"\hline"]
        for name, r in self.table.iterrows():
            sym = sp.latex(sp.Symbol(name))
            if r["status"] == "fixed":
                rows.append(f"${sym}$ & {r['estimate']:.5g} & & & fixed \\\\")
            else:
                rows.append(f"${sym}$ & {r['estimate']:.5g} & {r['std_error']:.5g} & "
                            f"{r['t']:.3f} & {r['status']} \\\\")
        rows.append(r"\hline")
        for f in self.equation_fits:
            name = f.name.replace("_", r"\_")
            rows.append(f"\\multicolumn{{5}}{{l}}{{{name}: $R^2$ = {f.r_squared:.4f}, s.e. of "
                        f"regression {f.se_regression:.5g}, $n$ = {f.n}}} \\\\")
        rows += [r"\hline", r"\end{tabular}"]
        return "\n".join(rows)

    def to_dict(self) -> dict:
        """Everything in the result as plain JSON-ready data."""
        t = self.table
        return {
            "estimator": self.estimator, "n": self.n, "iterations": self.iterations,
            "parameters": {k: {"estimate": float(r["estimate"]),
                               "std_error": None if np.isnan(r["std_error"])
                               else float(r["std_error"]),
                               "status": r["status"]} for k, r in t.iterrows()},
            "covariance": {"parameters": list(self.names), "matrix": self.cov.tolist()},
            "equations": [{"name": e.name, "equation": e.as_text(), "r_squared": f.r_squared,
                           "se_regression": f.se_regression, "n": f.n, "dof": f.dof}
                          for e, f in zip(self.system.equations, self.equation_fits)],
            "loglik": self.loglik,
            "imposed": list(self.system.imposed),
            "dropped": self.system.dropped,
            "curvature": dict(self.curvature),
            "notes": list(self.system.notes) + list(self.notes),
        }

    def __str__(self) -> str:
        return self.as_text()


__all__ = ["Estimation", "EquationFit", "WaldTest"]

"""Estimating equations derived from a dual function.

:func:`log_linear_equation` turns a dual whose logarithm is linear in the logs of its
arguments (a Cobb–Douglas cost function, say) into a regression equation

    ln c = β0 + Σ_i β_i ln w_i + β_y ln y,

with each β written in the structural parameters, and imposes linear homogeneity in prices
by normalising with one price: ln(c / w_k) = β0 + Σ_{i≠k} β_i ln(w_i / w_k) + β_y ln y
(valid because Σ_i β_i = 1 holds for every parameter value — checked symbolically).
:func:`fit` estimates it by least squares on a table and recovers what the structural
parameters imply (returns to scale 1/β_y for a cost function).
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Mapping

import numpy as np
import sympy as sp

from ...errors import DualityError, row_label
from ...model.roles import FUNCTIONS
from ...solve.result import Derived


@dataclass(frozen=True)
class LinearEquation:
    """ln(dependent) = β0 + Σ β_j · regressor_j, with β's as functions of the parameters.

    Attributes
    ----------
    dependent : sympy.Expr
        Left-hand side (e.g. ``log(c/w3)``), with ``c`` the dual's value symbol.
    regressors : dict name -> sympy.Expr
        Regressor expressions in the dual's arguments (e.g. ``log(w1/w3)``).
    coefficients : dict name -> sympy.Expr
        Each coefficient (``const`` and one per regressor) in the structural parameters.
    value : sympy.Symbol
        Symbol standing for the dual's observed value (``c``).
    restrictions : tuple of str
        What was imposed and why.
    """

    dependent: sp.Expr
    regressors: dict
    coefficients: dict
    value: sp.Symbol
    args: tuple
    restrictions: tuple[str, ...] = ()
    source: Derived | None = field(default=None, repr=False)

    def as_text(self) -> str:
        rhs = " + ".join(["b_const"] + [f"b_{k}*{v}" for k, v in self.regressors.items()])
        lines = [f"{self.dependent} = {rhs}"]
        lines += [f"  b_{k} = {v}" for k, v in self.coefficients.items()]
        lines += [f"  imposed: {r}" for r in self.restrictions]
        return "\n".join(lines)


def log_linear_equation(d: Derived, *, normalise: str | None = None) -> LinearEquation:
    """The log-linear regression equation of a dual function (e.g. Cobb–Douglas cost).

    Parameters
    ----------
    d : Derived
        A closed-form dual whose log is linear in the logs of its arguments.
    normalise : str, optional
        A price name: impose homogeneity of degree one in prices by dividing the value and
        the other prices by it (only for cost, expenditure and profit functions).
    """
    if not isinstance(d, Derived) or d.expr is None:
        raise DualityError("a log-linear equation needs a closed-form dual function")
    L = {a: sp.Symbol(f"L_{a}", real=True) for a in d.args}
    logc = sp.expand(sp.expand_log(sp.log(d.expr), force=True))
    sub = sp.expand(logc.xreplace({sp.log(a): L[a] for a in d.args}))
    if sub.free_symbols & set(d.args):
        raise DualityError(f"the log of the {d.label} is not linear in the logs of "
                           f"{', '.join(map(str, d.args))}: no log-linear equation")
    try:
        poly = sp.Poly(sub, *L.values())
    except sp.PolynomialError:
        raise DualityError(f"the log of the {d.label} is not linear in the logs of its "
                           "arguments") from None
    if poly.total_degree() > 1:
        raise DualityError(f"the log of the {d.label} has second-order terms in the logs "
                           "(translog-like); estimate it with duality.estimate, which "
                           "derives its equations and share equations")
    coef = {a: sp.simplify(poly.coeff_monomial(L[a])) for a in d.args}
    const = sp.simplify(poly.coeff_monomial(1))
    value = sp.Symbol(FUNCTIONS[d.kind].code if d.kind in FUNCTIONS else d.kind,
                      positive=True)
    regressors = {str(a): sp.log(a) for a in d.args}
    coefficients = {"const": const, **{str(a): coef[a] for a in d.args}}
    dependent = sp.log(value)
    notes = []
    if normalise is not None:
        names = {str(a): a for a in d.args}
        if normalise not in names:
            raise DualityError(f"cannot normalise by '{normalise}': the {d.label} takes "
                               f"{', '.join(names)}")
        if d.kind not in ("cost", "expenditure", "profit"):
            raise DualityError(f"homogeneity of degree one in prices applies to cost, "
                               f"expenditure and profit functions, not a {d.label}")
        k = names[normalise]
        prices = [a for a in d.args if a.is_positive and str(a) in _price_names(d)]
        total = sp.simplify(sum(coef[a] for a in prices) - 1)
        if total != 0:
            raise DualityError(f"the price coefficients sum to 1 + ({total}), not 1: the "
                               f"{d.label} is not homogeneous of degree one in prices")
        dependent = sp.log(value / k)
        regressors = {}
        coefficients = {"const": const}
        for a in d.args:
            if a == k:
                continue
            if a in prices:
                regressors[f"{a}/{k}"] = sp.log(a / k)
            else:
                regressors[str(a)] = sp.log(a)
            coefficients[list(regressors)[-1]] = coef[a]
        notes.append(f"homogeneity of degree one in prices: price coefficients sum to one "
                     f"for every parameter value, so the {d.label} and the other prices are "
                     f"divided by {k}")
    return LinearEquation(dependent, regressors, coefficients, value, d.args, tuple(notes), d)


def _price_names(d: Derived) -> set[str]:
    if d.kind == "profit":
        return {str(a) for a in d.args}
    return {str(a) for a in d.args[:-1]}


@dataclass(frozen=True)
class Fit:
    """Least-squares estimates of a linear equation.

    ``residual_std_error`` is the standard error of the regression, s = (e'e / dof)^½;
    ``returns_to_scale`` is 1 / (coefficient of ln y) for a cost function, else ``None``.
    """

    coefficients: dict
    std_errors: dict
    residual_std_error: float
    dof: int
    n: int
    r_squared: float
    returns_to_scale: float | None = None

    def as_text(self) -> str:
        rows = [f"{k:>12} {v:12.5f} ({self.std_errors[k]:.5f})"
                for k, v in self.coefficients.items()]
        rows.append(f"standard error of the regression {self.residual_std_error:.4f}; residual "
                    f"degrees of freedom {self.dof}; R² {self.r_squared:.4f}; rows {self.n}")
        if self.returns_to_scale is not None:
            rows.append(f"returns to scale {self.returns_to_scale:.4f}")
        return "\n".join(rows)


def fit(eq: LinearEquation, data, *, columns: Mapping[str, str] | None = None) -> Fit:
    """Ordinary least squares of the equation on a table (DataFrame or mapping of arrays).

    ``columns`` maps the dual's value symbol (e.g. ``c``) and its arguments to data columns.
    """
    columns = dict(columns or {})
    syms = {str(eq.value): eq.value, **{str(a): a for a in eq.args}}
    arrays = {}
    for name, s in syms.items():
        col = columns.get(name, name)
        if col not in data:
            raise DualityError(f"no column '{col}' for '{name}'")
        arr = np.asarray(data[col], dtype=float)
        bad = np.flatnonzero(~(arr > 0))
        if bad.size:
            raise DualityError(f"column '{col}' ({name}) must be positive for logs; row "
                               f"{row_label(data, bad[0])} holds {arr[bad[0]]:g}")
        arrays[s] = arr
    order = sorted(arrays, key=str)
    y = np.asarray(sp.lambdify(order, eq.dependent, "numpy")(*[arrays[s] for s in order]),
                   dtype=float)
    X = [np.ones_like(y)]
    for expr in eq.regressors.values():
        X.append(np.broadcast_to(np.asarray(
            sp.lambdify(order, expr, "numpy")(*[arrays[s] for s in order]), float), y.shape))
    X = np.column_stack(X)
    beta, *_ = np.linalg.lstsq(X, y, rcond=None)
    resid = y - X @ beta
    n, k = X.shape
    dof = n - k
    s2 = float(resid @ resid) / dof
    cov = s2 * np.linalg.inv(X.T @ X)
    names = ["const"] + list(eq.regressors)
    r2 = 1 - float(resid @ resid) / float(((y - y.mean()) ** 2).sum())
    coefs = dict(zip(names, beta.tolist()))
    rts = None
    src = eq.source
    if src is not None and src.kind == "cost" and str(eq.args[-1]) in coefs \
            and coefs[str(eq.args[-1])] != 0:
        rts = 1 / coefs[str(eq.args[-1])]
    return Fit(coefs, dict(zip(names, np.sqrt(np.diag(cov)).tolist())),
               float(np.sqrt(s2)), dof, n, r2, rts)


__all__ = ["LinearEquation", "log_linear_equation", "Fit", "fit"]

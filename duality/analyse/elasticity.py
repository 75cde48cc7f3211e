"""Elasticities: price, output and income elasticities of demand; Allen–Uzawa and
Morishima elasticities of substitution; returns to scale.

Definitions (c is the cost or expenditure function, subscripts are price derivatives,
x_i = c_i by Shephard's lemma; from memory, as in Blackorby and Russell, American Economic
Review 79 (1989), and Chambers, Applied Production Analysis (1988), ch. 2–3):

* price elasticity of demand      ε_ij = ∂ln x_i / ∂ln w_j = w_j c_ij / c_i
* Allen–Uzawa                     σ_ij = c c_ij / (c_i c_j)      (σ_ij = ε_ij / s_j)
* Morishima                       M_ij = ε_ji − ε_ii = w_i c_ij / c_j − w_i c_ii / c_i
  (the response of the ratio x_j / x_i to the price w_i; not symmetric in general)
* output elasticity of demand     ∂ln x_i / ∂ln y;  income elasticity ∂ln x_i / ∂ln m
* returns to scale (dual)         c / (y ∂c/∂y), the inverse of the cost elasticity.

One function, :func:`substitution_elasticities`, turns a cost or expenditure function's
value, gradient and Hessian into price, Allen–Uzawa and Morishima elasticities — on arrays
of numbers (one point, or every row of a data set in
:mod:`duality.analyse.regularity`) and on arrays of sympy expressions (the closed-form
matrices of :func:`allen_uzawa` and :func:`morishima`).  :func:`elasticities` evaluates
everything at one point for any route (numeric duals use finite differences of the
solver's demands); :func:`price_elasticities` differentiates a demand system.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import sympy as sp

from ..solve.calculus import Fn
from ..solve.derive import DEFAULT_BUDGET, cost, expenditure, indirect_utility
from ..errors import DualityError
from ..model.base import Model
from ..model.roles import ROLES
from ..solve.result import Derived


# -- substitution elasticities: one implementation ------------------------------------------
@dataclass(frozen=True, kw_only=True)
class Substitution:
    """Elasticities read off a cost or expenditure function's derivatives, indexed
    ``[..., i, j]`` in quantity order.

    Attributes
    ----------
    price : ndarray
        ε_ij = w_j c_ij / c_i: conditional (output-constant) or compensated
        (utility-constant) price elasticities of demand.
    allen_uzawa : ndarray
        σ_ij = c c_ij / (c_i c_j).
    morishima : ndarray
        M_ij = w_i c_ij / c_j − w_i c_ii / c_i (= ε_ji − ε_ii), zero on the diagonal.
    """

    price: np.ndarray
    allen_uzawa: np.ndarray
    morishima: np.ndarray


def substitution_elasticities(value, gradient, hessian, prices) -> Substitution:
    """Price, Allen–Uzawa and Morishima elasticities from c, ∇c, ∇²c and the prices.

    Vectorised over leading axes: ``value`` (...), ``gradient`` (..., n), ``hessian``
    (..., n, n) and ``prices`` (..., n) give results (..., n, n) — one point, or one per
    data row.  Arrays of sympy expressions (dtype object) give the closed forms.  Where a
    demand is zero the result is inf or NaN, without a warning.

    Notes
    -----
    With x_i = c_i (Shephard's lemma): ε_ij = w_j c_ij / c_i, σ_ij = c c_ij / (c_i c_j)
    and M_ij = w_i c_ij / c_j − w_i c_ii / c_i (Blackorby and Russell, American Economic
    Review 79 (1989); from memory).
    """
    c, g, H, w = (np.asarray(a) for a in (value, gradient, hessian, prices))
    with np.errstate(all="ignore"):
        price = H * w[..., None, :] / g[..., :, None]
        au = c[..., None, None] * H / (g[..., :, None] * g[..., None, :])
        own = w * np.diagonal(H, axis1=-2, axis2=-1) / g          # w_i c_ii / c_i
        mo = w[..., :, None] * H / g[..., None, :] - own[..., :, None]
    idx = np.arange(g.shape[-1])
    mo[..., idx, idx] = 0
    return Substitution(price=price, allen_uzawa=au, morishima=mo)


# -- closed forms ------------------------------------------------------------------------
def _closed_substitution(d: Derived) -> Substitution | None:
    if d.kind not in ("cost", "expenditure"):
        raise DualityError(f"substitution elasticities need a cost or expenditure function, "
                           f"not a {d.label}")
    if d.expr is None:
        return None
    ws = d.args[:-1]
    c = d.expr
    grad = [sp.diff(c, w) for w in ws]
    hess = [[sp.diff(g, w) for w in ws] for g in grad]
    obj = np.empty(len(ws), dtype=object)
    obj[:] = ws
    return substitution_elasticities(c, np.array(grad, dtype=object),
                                     np.array(hess, dtype=object), obj)


def allen_uzawa(d: Derived) -> sp.Matrix | None:
    """σ_ij = c c_ij / (c_i c_j) as a sympy matrix (None for a numeric-only dual)."""
    sub = _closed_substitution(d)
    return None if sub is None else sp.Matrix(sub.allen_uzawa.tolist())


def morishima(d: Derived) -> sp.Matrix | None:
    """M_ij = w_i c_ij / c_j − w_i c_ii / c_i (zero diagonal); None if numeric-only."""
    sub = _closed_substitution(d)
    return None if sub is None else sp.Matrix(sub.morishima.tolist())


def price_elasticities(demands: dict[str, Derived], prices) -> sp.Matrix | None:
    """ε_ij = (p_j / x_i) ∂x_i/∂p_j for a demand system with closed forms."""
    xs = list(demands.values())
    if any(x.expr is None for x in xs):
        return None
    return sp.Matrix(len(xs), len(prices),
                     lambda i, j: prices[j] / xs[i].expr * sp.diff(xs[i].expr, prices[j]))


# -- evaluated tables ------------------------------------------------------------------------
@dataclass(frozen=True, kw_only=True)
class ElasticityTable:
    """Every elasticity of a model at one point.

    Matrices are indexed [i, j] in quantity order (``names``).  For a technology,
    ``price`` holds conditional (output-constant) demand elasticities and ``level`` the
    output elasticities; for a preference, ``price`` holds Marshallian elasticities,
    ``compensated`` the Hicksian ones and ``level`` the income elasticities.
    """

    role: str
    names: tuple[str, ...]
    point: dict
    shares: np.ndarray
    price: np.ndarray
    level: np.ndarray
    allen_uzawa: np.ndarray
    morishima: np.ndarray
    compensated: np.ndarray | None = None
    returns_to_scale: float | None = None
    route: str = ""
    notes: tuple[str, ...] = field(default=())

    def as_text(self) -> str:
        """A plain-text report."""
        def mat(title, M):
            head = " " * 12 + "".join(f"{n:>12}" for n in self.names)
            rows = [f"{n:>12}" + "".join(f"{v:12.4g}" for v in row)
                    for n, row in zip(self.names, M)]
            return "\n".join([title, head, *rows])
        at = ", ".join(f"{k}={v:g}" for k, v in self.point.items())
        words = ROLES[self.role]
        lvl = words.shifter
        parts = [f"elasticities at {at} (route: {self.route})",
                 "shares: " + ", ".join(f"{n}={s:.4g}" for n, s in zip(self.names, self.shares)),
                 mat("price elasticities of " + words.demand, self.price)]
        if self.compensated is not None:
            parts.append(mat("price elasticities of Hicksian demand", self.compensated))
        parts.append(f"{lvl} elasticities: " + ", ".join(
            f"{n}={v:.4g}" for n, v in zip(self.names, self.level)))
        parts.append(mat("Allen–Uzawa elasticities of substitution", self.allen_uzawa))
        parts.append(mat("Morishima elasticities of substitution (row i: price that "
                         "changes; column j: ratio x_j/x_i)", self.morishima))
        if self.returns_to_scale is not None:
            parts.append(f"returns to scale: {self.returns_to_scale:.6g}")
        parts.extend(f"note: {n}" for n in self.notes)
        return "\n".join(parts)

    def to_dict(self) -> dict:
        out = {"role": self.role, "names": list(self.names), "point": dict(self.point),
               "route": self.route, "shares": self.shares.tolist(),
               "price": self.price.tolist(), "level": self.level.tolist(),
               "allen_uzawa": self.allen_uzawa.tolist(), "morishima": self.morishima.tolist(),
               "returns_to_scale": self.returns_to_scale, "notes": list(self.notes)}
        if self.compensated is not None:
            out["compensated"] = self.compensated.tolist()
        return out


def _substitution(c: Derived, pt: dict):
    """Value, gradient (demands) and Hessian of a cost/expenditure function at ``pt``."""
    ws = c.args[:-1]
    C = Fn.of(c)
    xs = [Fn.of(x) for x in c.demands.values()]
    val = C(pt)
    g = np.array([x(pt) for x in xs])
    H = np.array([[x.diff(w)(pt) for w in ws] for x in xs])
    if any(x.depth or x.sym is None for x in xs):
        H = (H + H.T) / 2  # finite differences: symmetrise (symmetry itself is a check)
    return val, g, H


def elasticities(model: Model, *, budget: float | None = DEFAULT_BUDGET,
                 **point: float) -> ElasticityTable:
    """All elasticities of ``model`` at one point.

    Technology: give every input price and the output, e.g. ``w1=1, w2=2, y=5``.
    Preference: give every price and income, e.g. ``p1=1, p2=2, m=100``.
    """
    names = tuple(str(q) for q in model.quantities)
    if model.is_technology:
        c = cost(model, budget=budget)
        pt = _point(c.args, point, c)
        w = np.array([pt[s] for s in c.args[:-1]])
        val, g, H = _substitution(c, pt)
        sub = substitution_elasticities(val, g, H, w)
        y = c.args[-1]
        xs = [Fn.of(x) for x in c.demands.values()]
        level = np.array([x.diff(y)(pt) * pt[y] / gi for x, gi in zip(xs, g)])
        cy = Fn.of(c).diff(y)(pt)
        return ElasticityTable(
            role="technology", names=names,
            point={str(k): v for k, v in pt.items() if k in c.args}, shares=w * g / val,
            price=sub.price, level=level, allen_uzawa=sub.allen_uzawa,
            morishima=sub.morishima, returns_to_scale=float(val / (pt[y] * cy)),
            route=c.route, notes=c.notes)
    v = indirect_utility(model, budget=budget)
    e = expenditure(model, budget=budget)
    pt = _point(v.args, point, v)
    ps = v.args[:-1]
    m = v.args[-1]
    p = np.array([pt[s] for s in ps])
    u = float(Fn.of(v)(pt))
    ept = {**{s: pt[s] for s in ps}, e.args[-1]: u, **_params(pt, e)}
    sub = substitution_elasticities(*_substitution(e, ept), p)
    xs = [Fn.of(x) for x in v.demands.values()]
    xv = np.array([x(pt) for x in xs])
    marsh = np.array([[x.diff(s)(pt) * pt[s] / xi for s in ps] for x, xi in zip(xs, xv)])
    income = np.array([x.diff(m)(pt) * pt[m] / xi for x, xi in zip(xs, xv)])
    return ElasticityTable(
        role="preference", names=names,
        point={str(k): val_ for k, val_ in pt.items() if k in v.args}, shares=p * xv / pt[m],
        price=marsh, level=income, allen_uzawa=sub.allen_uzawa, morishima=sub.morishima,
        compensated=sub.price,
        route=v.route if v.route == e.route else f"{v.route}/{e.route}",
        notes=tuple(dict.fromkeys(v.notes + e.notes)))


def _params(pt: dict, d: Derived) -> dict:
    return {k: v for k, v in pt.items() if k not in d.args}


def _point(args, given: dict, d: Derived) -> dict:
    names = {str(a): a for a in args}
    frees = {str(s): s for s in d.free_params}
    unknown = sorted(set(given) - set(names) - set(frees))
    if unknown:
        raise DualityError(f"unknown argument(s) {', '.join(unknown)}; give "
                           f"{', '.join(names)}")
    missing = [n for n in names if n not in given]
    if missing:
        raise DualityError(f"elasticities need a value for {', '.join(missing)}")
    pt = {}
    for k, v in given.items():
        v = float(v)
        sym = names.get(k) or frees[k]
        if sym in d.positive_args and not v > 0:
            raise DualityError(f"{k} must be positive; got {v:g}")
        pt[sym] = v
    missing_p = [str(s) for s in d.free_params if s not in pt]
    if missing_p:
        raise DualityError(f"give a value for parameter(s) {', '.join(missing_p)}")
    return pt


__all__ = ["allen_uzawa", "morishima", "price_elasticities", "elasticities",
           "ElasticityTable", "Substitution", "substitution_elasticities"]

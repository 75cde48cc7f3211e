"""The public entry points and the :class:`Conjugate` result."""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Callable

import numpy as np
import sympy as sp

from ..errors import DualityError
from ..solve.budget import Budget
from ..model.formula import parse
from .common import _Raw, _expr_numeric, _to_float
from .grid import biconjugate_samples, conjugate_samples
from .multi import _conj_multi
from .univariate import _sup_concave_1d

CONVENTIONS = ("sup", "intercept")
ROUTES = ("legendre", "fenchel", "numeric")
KINDS = ("legendre", "fenchel")

oo = sp.oo



# ---------------------------------------------------------------------------------------
# result object
# ---------------------------------------------------------------------------------------

@dataclass(frozen=True, eq=False)
class Conjugate:
    """The conjugate of a function.

    Attributes
    ----------
    expr : sympy.Expr or None
        The conjugate in :attr:`variables` (and any parameters of f), already in the
        requested convention; ``+oo`` (``-oo`` for ``"intercept"``) outside the effective
        domain.  None when only a numeric evaluation exists (route ``"numeric"``).
    variables : tuple of Symbol
        The dual variables (real symbols).
    primal_variables : tuple of Symbol
        The variables of f that were conjugated.
    route : {"legendre", "fenchel", "numeric"}
        How the result was obtained: symbolic Legendre transform (solving f' = p),
        symbolic Fenchel transform (kinks, indicators, unbounded cases), or numeric.
    kind : {"legendre", "fenchel"}
        ``"legendre"`` when f is smooth and strictly convex so the conjugate is the
        classical Legendre transform; ``"fenchel"`` otherwise.
    convention : {"sup", "intercept"}
    argmax : dict
        Primal variable -> maximiser as an expression in the dual variables, where known.
    domain : sympy Set, sympy condition or None
        The effective domain (where the conjugate is finite); None means everywhere.
    notes : tuple of str
        What was found on the way (non-invertible derivatives, non-convexity, budgets).
    """

    expr: sp.Expr | None
    variables: tuple
    primal_variables: tuple
    route: str
    kind: str
    convention: str = "sup"
    argmax: dict = field(default_factory=dict)
    domain: Any = None
    notes: tuple = ()
    numeric: Callable[[np.ndarray], float] | None = field(default=None, repr=False)

    def __call__(self, **values: float) -> float:
        """Evaluate at keyword values of the dual variables (and parameters), as float.

        Returns ``inf`` outside the effective domain (``-inf`` for ``"intercept"``).
        """
        sign = 1.0 if self.convention == "sup" else -1.0
        if self.expr is None:
            missing = [str(v) for v in self.variables if str(v) not in values]
            if missing:
                raise DualityError(f"missing value(s) for {', '.join(missing)}")
            extra = set(values) - {str(v) for v in self.variables}
            if extra:
                raise DualityError(f"unknown variable(s) {', '.join(sorted(extra))}; "
                                   f"expected {', '.join(map(str, self.variables))}")
            pv = np.array([float(values[str(v)]) for v in self.variables])
            return sign * float(self.numeric(pv))
        names = {str(s): s for s in self.expr.free_symbols}
        missing = sorted(set(names) - set(values))
        if missing:
            raise DualityError(f"missing value(s) for {', '.join(missing)}")
        subs = {names[k]: sp.Float(float(v)) if not isinstance(v, sp.Basic) else v
                for k, v in values.items() if k in names}
        return _to_float(self.expr.subs(subs))

    def __repr__(self) -> str:
        ps = ", ".join(map(str, self.variables))
        star = "f*" if self.convention == "sup" else "-f*"
        body = str(self.expr) if self.expr is not None else "<numeric>"
        return (f"Conjugate({star}({ps}) = {body}; route={self.route!r}, kind={self.kind!r}"
                f", convention={self.convention!r})")



# ---------------------------------------------------------------------------------------
# public entry points
# ---------------------------------------------------------------------------------------

def conjugate(f, x=None, p=None, *, convention: str = "sup",
              budget: float | None = 5.0) -> Conjugate:
    """Convex conjugate of ``f`` with respect to ``x``.

    Parameters
    ----------
    f : sympy.Expr or str
        The function.  Text is read with :func:`duality.model.formula.parse` (never sympify).
        A ``Piecewise((value, cond), (oo, True))`` is read as ``value`` on ``cond``.
    x : str, Symbol or sequence of them, optional
        The variables to conjugate.  Default: the single free symbol of ``f``.
    p : str, Symbol or sequence of them, optional
        Names of the dual variables.  Default ``p`` (one variable) or ``p1, p2, ...``;
        ``p_<name>`` when those clash with symbols of ``f``.
    convention : {"sup", "intercept"}
        ``"sup"``: f*(p) = sup_x (p·x − f(x)).  ``"intercept"``: −f*(p), the intercept
        f(x) − p·x of the tangent with slope p.
    budget : float or None
        CPU seconds allowed for symbolic solving (see :mod:`duality.solve.budget`; None:
        no limit, run in-process).  When exhausted the numeric route is used and a note
        says so.

    Returns
    -------
    Conjugate
    """
    if convention not in CONVENTIONS:
        raise DualityError(f"unknown convention {convention!r}; allowed values are "
                           f"{', '.join(repr(c) for c in CONVENTIONS)}")
    if _is_samples(f):  # sampled values: x is the grid, p the query slopes
        return conjugate_samples(f, _sample_grid(x), p, convention=convention)
    fexpr = _to_expr(f)
    xs, fexpr = _primal_symbols(fexpr, x)
    ps = _dual_symbols(fexpr, xs, p)
    deadline = None if budget is None else Budget(budget)  # CPU seconds
    raw = _conj_multi(fexpr, xs, ps, deadline)
    return _finish(raw, xs, ps, convention)


def biconjugate(f, x=None, p=None, *, budget: float | None = 5.0) -> Conjugate:
    """The conjugate of the conjugate, expressed back in the primal variables.

    Returns a :class:`Conjugate` whose :attr:`~Conjugate.variables` are the primal
    variables ``x`` (and :attr:`~Conjugate.primal_variables` the dual ones), in the
    ``"sup"`` convention.  It equals ``f`` for closed convex ``f`` and the closed convex
    envelope of ``f`` otherwise.  Univariate results whose conjugate is numeric are
    evaluated numerically (``expr=None``); multivariate ones need a symbolic conjugate.
    """
    if _is_samples(f):  # sampled values: the convex envelope at the grid x (an ndarray)
        if p is not None:
            raise DualityError("p is not used by the biconjugate of sampled values")
        return biconjugate_samples(f, _sample_grid(x))
    first = conjugate(f, x, p, budget=budget)
    xs, ps = first.primal_variables, first.variables
    deadline = None if budget is None else Budget(budget)  # CPU seconds
    notes = list(first.notes)
    raw = None
    if first.expr is not None:
        try:
            raw = _conj_multi(first.expr, ps, xs, deadline)
        except Exception as exc:  # noqa: BLE001 - fall back to numbers
            notes.append(f"symbolic second conjugate failed ({exc}); using numeric route")
            raw = None
    if raw is None or (raw.expr is None and raw.numeric is None):
        if len(xs) != 1:
            raise DualityError("the numeric biconjugate is available for one variable only")
        fstar = first
        pname = str(ps[0])

        def num(xv, _c=fstar, _n=pname):
            return _sup_concave_1d(lambda t: float(xv[0]) * t - _c(**{_n: t}))
        raw = _Raw(None, "numeric", "fenchel", numeric=num)
    raw.notes = notes + [n for n in raw.notes if n not in notes]
    return _finish(raw, ps, xs, "sup")


# ---------------------------------------------------------------------------------------
# input handling
# ---------------------------------------------------------------------------------------

def _is_samples(f) -> bool:
    """Sampled values: a numpy array, or a list/tuple of numbers (nested for n-D)."""
    if isinstance(f, np.ndarray):
        return True
    if not isinstance(f, (list, tuple)):
        return False
    stack = list(f)
    while stack:
        item = stack.pop()
        if isinstance(item, (list, tuple, np.ndarray)):
            stack.extend(item)
        elif isinstance(item, (str, sp.Basic)) and not isinstance(item, sp.Number):
            return False
    return True


def _sample_grid(x):
    if x is None:
        raise DualityError("f is sampled values, so x must give the grid (x=array of "
                           "points, or a tuple of grids for an n-D array)")
    return x


def _to_expr(f) -> sp.Expr:
    if isinstance(f, str):
        return parse(f)
    if isinstance(f, sp.Basic):
        return f
    if isinstance(f, (int, float)):
        return sp.sympify(f)  # a Python number, not user text
    raise DualityError(f"f must be a sympy expression or formula text, not "
                       f"{type(f).__name__}")


def _names(v) -> list[str]:
    if v is None:
        return []
    if isinstance(v, (str, sp.Symbol)):
        if isinstance(v, str) and ("," in v or " " in v.strip()):
            return [s for s in v.replace(",", " ").split() if s]
        return [str(v)]
    try:
        return [str(s) for s in v]
    except TypeError:
        raise DualityError(f"cannot read variable names from {v!r}") from None


def _working_symbol(s: sp.Symbol) -> sp.Symbol:
    """A real symbol carrying the sign assumption of ``s``."""
    for key in ("positive", "negative", "nonnegative", "nonpositive"):
        if getattr(s, f"is_{key}"):
            return sp.Symbol(s.name, **{key: True})
    return sp.Symbol(s.name, real=True)


def _primal_symbols(f: sp.Expr, x) -> tuple[tuple, sp.Expr]:
    free = sorted(f.free_symbols, key=lambda s: s.name)
    if x is None:
        if len(free) == 1:
            names = [free[0].name]
        elif not free:
            raise DualityError("f has no variables; say which variable to conjugate (x=)")
        else:
            raise DualityError("f has several symbols (" + ", ".join(s.name for s in free)
                               + "); say which to conjugate with x=")
    else:
        names = _names(x)
        if not names:
            raise DualityError("no variable to conjugate")
    if len(set(names)) != len(names):
        raise DualityError(f"variable named twice in {names}")
    by_name = {s.name: s for s in free}
    orig = []
    for n in names:
        if isinstance(x, sp.Symbol) and x.name == n:
            orig.append(by_name.get(n, x))
        else:
            orig.append(by_name.get(n, sp.Symbol(n, real=True)))
    work = tuple(_working_symbol(s) for s in orig)
    f = f.xreplace({o: w for o, w in zip(orig, work) if o != w})
    return work, f


def _dual_symbols(f: sp.Expr, xs: tuple, p) -> tuple:
    taken = {s.name for s in f.free_symbols}
    if p is None:
        names = ["p"] if len(xs) == 1 else [f"p{i + 1}" for i in range(len(xs))]
        if taken & set(names):
            names = [f"p_{s.name}" for s in xs]
    else:
        names = _names(p)
    if len(names) != len(xs):
        raise DualityError(f"{len(names)} dual name(s) {names} for {len(xs)} variable(s)")
    clash = taken & set(names)
    if clash:
        raise DualityError(f"dual variable name(s) {sorted(clash)} already used in f")
    return tuple(sp.Symbol(n, real=True) for n in names)


def _finish(raw: _Raw, xs, ps, convention) -> Conjugate:
    expr = raw.expr
    num = raw.numeric
    if num is None and expr is not None:
        num = _expr_numeric(expr, ps)
    if convention == "intercept" and expr is not None:
        expr = sp.piecewise_fold(-expr)
    return Conjugate(expr=expr, variables=tuple(ps), primal_variables=tuple(xs),
                     route=raw.route, kind=raw.kind, convention=convention,
                     argmax=dict(raw.argmax), domain=raw.domain,
                     notes=tuple(dict.fromkeys(raw.notes)), numeric=num)


__all__ = ["Conjugate", "conjugate", "biconjugate", "CONVENTIONS", "ROUTES", "KINDS"]

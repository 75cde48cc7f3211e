"""Derived functions that know how they were obtained.

A :class:`Derived` is a cost, profit, expenditure or indirect utility function, or one of
their demands.  It carries its sympy expression (None where only a numeric function
exists), the route that produced it (``catalogue``, ``symbolic`` or ``numeric``), the
published source of a catalogue result, the region where it is valid, and notes on why
earlier routes stopped.  It is callable with keyword values; numpy arrays broadcast.
"""
from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field
from functools import cached_property
from typing import Callable, Mapping

import numpy as np
import sympy as sp

from ..errors import DomainError, DualityError
from ..model.lambdas import numpy_function
from ..model.roles import DUAL_KINDS, FUNCTIONS
from .domain import CODES, REASONS
from .forms.base import Match
from .display import text_equation

ROUTES = ("catalogue", "symbolic", "numeric")

#: kind -> (label, LaTeX head)
KINDS: dict[str, tuple[str, str]] = {
    **{k: (FUNCTIONS[k].label, FUNCTIONS[k].latex) for k in DUAL_KINDS},
    "conditional_demand": ("conditional input demand", "x"),
    "supply": ("output supply", "y"),
    "factor_demand": ("unconditional input demand", "x"),
    "marshallian_demand": ("Marshallian demand", "x"),
    "hicksian_demand": ("Hicksian demand", "h"),
    "share": ("share", "s"),
}


_DEMAND_KINDS = ("conditional_demand", "factor_demand", "marshallian_demand",
                 "hicksian_demand", "supply", "share")


class NumericWarning(UserWarning):
    """Some points of a batch could not be computed and were returned as NaN."""


@dataclass(frozen=True)
class Unavailable:
    """A result that does not exist, and why: e.g. no profit function under constant
    returns to scale.  Falsy, and prints as its reason, so ``if d:`` and ``str(d)`` read
    naturally where a result may be missing."""

    reason: str

    def __bool__(self) -> bool:
        return False

    def __str__(self) -> str:
        return self.reason


@dataclass(frozen=True, kw_only=True)
class SolverReport:
    """Per point, how the numeric solver did (arrays shaped like the point).

    Attributes
    ----------
    iterations : ndarray of int
        Newton iterations used.
    residual : ndarray
        Max-norm of the first-order conditions in logs after the last iteration.
    converged : ndarray of bool
        Whether the point met the tolerance (points that did not are NaN in results).
    """

    iterations: np.ndarray
    residual: np.ndarray
    converged: np.ndarray
    #: per point, the reason code (:data:`duality.solve.domain.REASONS`): ``"ok"`` or why
    #: the point carries no number
    reasons: np.ndarray | None = None
    #: per point, True where the returned optimum is a corner (a non-negativity bound
    #: binds, the Kuhn–Tucker conditions checked there)
    corners: np.ndarray | None = None


@dataclass(frozen=True, eq=False, kw_only=True)
class Derived:
    """A derived function of prices (and output, income or utility level).

    Attributes
    ----------
    kind : str
        One of :data:`KINDS`.
    args : tuple of Symbol
        The arguments, in order (e.g. ``(w1, w2, y)``).
    expr : sympy.Expr or None
        Closed form in the arguments and the model's parameters; None when numeric only.
    route : {"catalogue", "symbolic", "numeric"}
    source : str or None
        Published source of a catalogue closed form.
    method : str
        How the result was obtained, in words.
    notes : tuple of str
        Why earlier routes were not used, interior conditions, tie-breaking rules.
    conditions : tuple of sympy relationals
        Where the closed form is valid (e.g. income above subsistence spending).
    params : mapping Symbol -> float
        Parameter values used when calling.
    name : str
        Name of the quantity this function gives (for demands), else the kind.
    """

    kind: str
    args: tuple[sp.Symbol, ...]
    expr: sp.Expr | None
    route: str
    method: str
    params: Mapping[sp.Symbol, float] = field(default_factory=dict)
    source: str | None = None
    notes: tuple[str, ...] = ()
    conditions: tuple = ()
    name: str = ""
    positive_args: frozenset = frozenset()
    numeric: Callable[..., np.ndarray] | None = field(default=None, repr=False)
    demand_factory: Callable[[], dict] | None = field(default=None, repr=False)
    solver: Callable[[dict], "BatchSolution"] | None = field(default=None, repr=False)
    #: a sentence for a condition (keyed by its text) that says more than the formula
    condition_reasons: Mapping[str, str] = field(default_factory=dict, repr=False)

    def __post_init__(self) -> None:
        if self.route not in ROUTES:
            raise ValueError(f"route {self.route!r} is not one of {ROUTES}")
        if self.expr is None and self.numeric is None:
            raise ValueError("a derived function needs an expression or a numeric evaluator")

    def __getstate__(self):
        # compiled code is rebuilt on demand (it does not travel to other processes)
        state = dict(self.__dict__)
        for key in ("_lambda", "_condition_fns"):
            state.pop(key, None)
        return state

    def __setstate__(self, state):
        self.__dict__.update(state)

    # -- views -------------------------------------------------------------------
    @property
    def label(self) -> str:
        return KINDS[self.kind][0]

    @cached_property
    def demands(self) -> dict[str, "Derived"]:
        """The demand system attached to this function, keyed by quantity name.

        Cost: conditional demands (Shephard's lemma). Expenditure: Hicksian demands.
        Indirect utility: Marshallian demands (Roy's identity). Profit: output supply
        under the output's name and unconditional input demands (Hotelling's lemma).
        """
        if self.demand_factory is None:
            raise DualityError(f"a {self.label} has no demand system of its own")
        return self.demand_factory()

    @property
    def expr_at_values(self) -> sp.Expr | None:
        """The closed form with every known parameter value substituted."""
        return None if self.expr is None else self.expr.xreplace(dict(self.params))

    @property
    def free_params(self) -> tuple[sp.Symbol, ...]:
        if self.expr is None:
            return ()
        return tuple(sorted(self.expr.free_symbols - set(self.args) - set(self.params), key=str))

    def latex(self, *, at_values: bool = False) -> str:
        """``head(args) = closed form`` in LaTeX (or a note that it is numeric)."""
        head = KINDS[self.kind][1]
        if self.kind in _DEMAND_KINDS and self.name:
            head = sp.latex(sp.Symbol(self.name))
        lhs = f"{head}({', '.join(sp.latex(a) for a in self.args)})"
        if self.expr is None:
            return lhs + r" \;\text{(numeric only)}"
        e = self.expr_at_values if at_values else self.expr
        return f"{lhs} = {sp.latex(e)}"

    def _repr_latex_(self) -> str:
        return f"${self.latex()}$"

    def __repr__(self) -> str:
        body = "numeric only" if self.expr is None else str(self.expr)
        src = f", source: {self.source}" if self.source else ""
        return (f"<{self.label} of ({', '.join(map(str, self.args))}) = {body}"
                f" [{self.route}{src}]>")

    def summary(self) -> str:
        """A few lines of text: the function, its route, source, conditions and notes."""
        head = self.name if self.kind in _DEMAND_KINDS else KINDS[self.kind][1].lstrip("\\")
        call = f"{head}({', '.join(map(str, self.args))})"
        formula = (f"{call} = (numeric only)" if self.expr is None else
                   text_equation(call, self.expr, indent=" " * (len(self.label) + 6)))
        lines = [f"{self.label}: {formula}", f"  route: {self.route} ({self.method})"]
        if self.source:
            lines.append(f"  source: {self.source}")
        for c in self.conditions:
            lines.append(f"  valid where: {c}")
        for n in self.notes:
            lines.append(f"  note: {n}")
        return "\n".join(lines)

    # -- evaluation -----------------------------------------------------------------
    @cached_property
    def _lambda(self) -> Callable:
        syms = list(self.args) + sorted(self.expr.free_symbols - set(self.args), key=str)
        fn = numpy_function(syms, self.expr, cse=True)
        return fn, syms

    @cached_property
    def _beyond_float(self) -> bool:
        """Whether the closed form holds an exact number outside the float range."""
        if self.expr is None:
            return False
        return any(abs(math.log2(abs(r.p)) - math.log2(r.q)) > 1000
                   for r in self.expr.atoms(sp.Rational) if r != 0)

    @cached_property
    def _condition_fns(self) -> list[tuple[str, Callable, list]]:
        out = []
        for c in self.conditions:
            syms = sorted(c.free_symbols, key=str)
            out.append((str(c), numpy_function(syms, c), syms))
        return out

    def __call__(self, **values) -> float | np.ndarray:
        """Evaluate at keyword values of the arguments (and optionally parameters).

        Raises
        ------
        DualityError
            A missing or unknown argument, a non-positive price or quantity.
        DomainError
            A scalar point outside the region where the function is valid. Array points
            outside it come back as NaN with a :class:`NumericWarning`.
        """
        point, scalar = self._point(values)
        with np.errstate(all="ignore"):
            if self.expr is not None:
                fn, syms = self._lambda
                missing = [str(s) for s in syms if s not in point]
                if missing:
                    raise DualityError(f"no value for parameter(s) {', '.join(missing)}; "
                                       f"pass them as keywords, e.g. {missing[0]}=0.5")
                out = _blockwise(fn, [point[s] for s in syms])
            else:
                out = np.asarray(self.numeric(point), dtype=float)
            shape = np.broadcast(*point.values()).shape
            if scalar and self._beyond_float and np.all((out == 0) | ~np.isfinite(out)):
                raise DomainError(f"the {self.label} at this point is beyond the range of "
                                  "floating-point numbers (about 1e-308 to 1e308): its "
                                  "formula holds constants too large or too small; "
                                  "rescale them")
            if out.shape != shape or not out.flags.writeable:
                out = np.broadcast_to(out, shape).copy()
            bad = np.zeros(out.shape if self._condition_fns else (), dtype=bool)
            for text, fn, syms in self._condition_fns:
                ok = np.asarray(fn(*(point[s] for s in syms)), dtype=bool)
                bad |= ~np.broadcast_to(ok, out.shape)
                if scalar and bad.any():
                    if text in self.condition_reasons:
                        raise DomainError(f"no {self.label} here: "
                                          f"{self.condition_reasons[text]}")
                    raise DomainError(f"the {self.label} is valid only where {text}; "
                                      f"this point is outside it")
        if bad.any():
            warnings.warn(f"{int(bad.sum())} point(s) lie outside the region where the "
                          f"{self.label} is valid; returned as NaN", NumericWarning, stacklevel=2)
            out[bad] = np.nan
        if scalar:
            if not np.isfinite(out).all() and not bad.any():
                if self.route == "numeric":
                    why = self._numeric_reason(point)
                    raise DomainError(
                        f"the numeric solver found no interior optimum for the {self.label} "
                        "at this point (the optimum may be a corner solution, or may not "
                        "exist at these prices)" if why is None else
                        f"no numeric value of the {self.label} at this point: {why}")
                raise DomainError(f"the {self.label} has no finite value at this point")
            return float(out.reshape(-1)[0])
        return out

    def _numeric_reason(self, point: dict) -> str | None:
        """The solver's reason (:data:`duality.solve.domain.REASONS`) at a scalar point."""
        if self.solver is None:
            return None
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", NumericWarning)
            out = self.solver(point)
        codes = getattr(out, "reasons", None)
        if codes is None:
            return None
        return REASONS[CODES[int(np.asarray(codes).reshape(-1)[0])]]

    def solver_report(self, **values) -> SolverReport:
        """Per point, how the numeric solver did (:class:`SolverReport`: ``iterations``,
        ``residual``, ``converged``, ``reasons``).

        Only for numeric results; arguments as for calling the function.
        """
        if self.solver is None:
            raise DualityError(f"this {self.label} is a closed form ({self.route}); "
                               "there is no solver report")
        point, _ = self._point(values)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", NumericWarning)
            out = self.solver(point)
        reasons = None
        if out.reasons is not None:
            reasons = np.asarray(CODES, dtype=object)[np.asarray(out.reasons, int)]
        return SolverReport(iterations=out.iterations, residual=out.residual,
                            converged=out.converged, reasons=reasons,
                            corners=getattr(out, "corners", None))

    def _point(self, values: Mapping[str, object]) -> tuple[dict, bool]:
        names = {str(a): a for a in self.args}
        params = {str(s): s for s in set(self.params) | set(self.free_params)}
        point: dict[sp.Symbol, np.ndarray] = {}
        for k, v in values.items():
            sym = names.get(k) or params.get(k)
            if sym is None:
                raise DualityError(f"unknown argument '{k}'; the {self.label} takes "
                                   f"{', '.join(names)}"
                                   + (f" (parameters: {', '.join(params)})" if params else ""))
            arr = np.asarray(v, dtype=float)
            if sym in self.positive_args and arr.size:
                # min and max pass over the data without temporaries; NaN fails both tests
                if not arr.min() > 0:
                    if np.isnan(arr).any():
                        raise DualityError(f"{k} must be finite; got "
                                           f"{_first_bad(arr, finite=True)}")
                    raise DualityError(f"{k} must be positive; got {_first_bad(arr)}")
                if not arr.max() < np.inf:
                    raise DualityError(f"{k} must be finite; got "
                                       f"{_first_bad(arr, finite=True)}")
            elif not np.all(np.isfinite(arr)):
                raise DualityError(f"{k} must be finite; got {_first_bad(arr, finite=True)}")
            point[sym] = arr
        missing = [str(a) for a in self.args if a not in point]
        if missing:
            raise DualityError(f"no value for {', '.join(missing)}; the {self.label} takes "
                               f"{', '.join(names)}")
        scalar = all(np.ndim(point[a]) == 0 for a in self.args)
        try:
            np.broadcast(*point.values())
        except ValueError as exc:
            raise DualityError(f"argument arrays do not broadcast together: {exc}") from None
        for s, v in self.params.items():
            point.setdefault(s, float(v))
        # no broadcasting here: scalar parameters stay scalars, so the compiled code does
        # scalar work once instead of once per row; results are broadcast afterwards
        return point, scalar


#: Rows per block when a closed form is evaluated on long one-dimensional arrays: the
#: temporaries of one block stay in the processor's cache, which is faster than numpy
#: passing whole columns through memory once per operation.
EVAL_BLOCK = 65536


def _blockwise(fn, args: list) -> np.ndarray:
    """``fn(*args)`` as a float array, block by block when every array argument is 1-D
    of one length above two blocks (scalars pass through); in one call otherwise."""
    n = None
    for a in args:
        if np.ndim(a) == 0:
            continue
        if a.ndim != 1 or (n is not None and a.shape[0] != n):
            n = -1
            break
        n = a.shape[0]
    if n is None or n < 2 * EVAL_BLOCK:
        return np.asarray(fn(*args), dtype=float)
    first = np.asarray(fn(*[a[:EVAL_BLOCK] if np.ndim(a) else a for a in args]))
    if first.shape != (EVAL_BLOCK,) or np.iscomplexobj(first):
        return np.asarray(fn(*args), dtype=float)   # not elementwise: evaluate at once
    out = np.empty(n)
    out[:EVAL_BLOCK] = first
    for s in range(EVAL_BLOCK, n, EVAL_BLOCK):
        out[s:s + EVAL_BLOCK] = fn(*[a[s:s + EVAL_BLOCK] if np.ndim(a) else a for a in args])
    return out


def _first_bad(arr: np.ndarray, finite: bool = False) -> str:
    flat = arr.reshape(-1)
    idx = np.flatnonzero(~np.isfinite(flat) if finite else ~(flat > 0))[0]
    return f"{flat[idx]:g}" + (f" at index {idx}" if flat.size > 1 else "")


@dataclass(frozen=True, kw_only=True)
class Evaluators:
    """Numeric functions of a point dict (symbol -> array) for a dual with no closed form
    (e.g. found by inverting the other dual): its value, one per quantity, and profit's
    output supply."""

    value: Callable[[dict], np.ndarray]
    quantities: tuple[Callable[[dict], np.ndarray], ...]
    output: Callable[[dict], np.ndarray] | None = None


@dataclass(frozen=True, kw_only=True)
class Solution:
    """A solved problem: value, the optimal quantities, and how they were found.

    Attributes
    ----------
    value, demands : sympy expressions, or None on the numeric route
    route, method, source, notes, conditions : as in :class:`Derived`
    supply : sympy.Expr or None
        Output supply of a profit problem, when it has a closed form.
    match : Match or None
        The catalogue match a catalogue solution came from (reused for the other dual).
    evaluators : Evaluators or None
        Numeric functions when the solution is numeric but not from the batched solver.
    spent : float
        CPU seconds its symbolic route used (a later step of the same call, such as the
        supply of a profit problem, gets only what is left of the call's budget).
    """

    value: sp.Expr | None
    demands: tuple[sp.Expr, ...] | None
    route: str
    method: str
    source: str | None = None
    notes: tuple[str, ...] = ()
    conditions: tuple = ()
    supply: sp.Expr | None = None
    match: Match | None = None
    evaluators: Evaluators | None = None
    #: a sentence for a condition (keyed by its text), passed on to the Derived
    condition_reasons: Mapping[str, str] = field(default_factory=dict)
    spent: float = 0.0


@dataclass(frozen=True, kw_only=True)
class BatchSolution:
    """The numeric solver's answer at every point of a batch (arrays shaped like the
    broadcast point; NaN where a point did not converge).

    Attributes
    ----------
    value : ndarray
        Minimal spending, maximal utility or maximal profit.
    quantities : tuple of ndarray
        The optimal quantity of each good or input, in model order.
    output : ndarray
        Output supplied (profit problems; NaN otherwise).
    converged, iterations, residual : ndarray
        As in :class:`SolverReport`.
    reasons : ndarray of int or None
        Per point, an index into :data:`duality.solve.domain.CODES` (0: solved).
    """

    value: np.ndarray
    quantities: tuple[np.ndarray, ...]
    output: np.ndarray
    converged: np.ndarray
    iterations: np.ndarray
    residual: np.ndarray
    reasons: np.ndarray | None = None
    #: per point, True where a non-negativity bound binds at the returned optimum (a corner
    #: solution, checked by the Kuhn–Tucker conditions; :mod:`duality.solve.corners`)
    corners: np.ndarray | None = None


__all__ = ["Derived", "KINDS", "ROUTES", "NumericWarning", "Unavailable", "SolverReport",
           "Solution", "Evaluators", "BatchSolution"]

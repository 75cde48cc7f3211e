"""Checks as data: the identities and properties duality theory predicts, verified.

:func:`check` returns one :class:`CheckRecord` per property: Shephard's and Hotelling's
lemmas, Roy's identity, the Slutsky equation, symmetry and negative semidefiniteness of
the substitution matrix, e(p, v(p, m)) = m and v(p, e(p, u)) = u, homogeneity, adding-up,
monotonicity and curvature of each dual.

Each check is evaluated numerically at sampled points (``held`` with the largest relative
error, or ``failed`` with the counterexample point), and tried symbolically where that can
succeed (the residual, with the model's parameter values put in exactly, simplifies to zero:
``proved``; in a worker process within the check's budget of CPU seconds).
Properties that are inequalities (monotonicity, curvature) are only ever ``held`` or
``failed``.  A check that cannot apply (no profit function under constant returns, say)
is ``not applicable`` with the reason.  Front ends only display these records.
"""
from __future__ import annotations

import math
import signal
import threading
import warnings
from contextlib import contextmanager
from dataclasses import dataclass
from typing import Callable, Sequence

import numpy as np
import sympy as sp

from ..solve.budget import Budget, run_with_budget
from ..solve.calculus import Fn
from ..solve.derive import DEFAULT_BUDGET, cost, expenditure, indirect_utility, profit
from ..solve.points import sample_points, sample_primal_points
from ..errors import DualityError, NoSolutionError
from ..model.base import Model
from ..solve.result import NumericWarning

STATUSES = ("proved", "held", "failed", "not applicable")

#: CPU seconds allowed for the proof of each check (out of the budget of ``check()``).
PROOF_BUDGET = 1.0
#: Residuals of one check larger than this many operations in all are not tried
#: symbolically (the Slutsky equation of a 3-good Almost Ideal model has about 15,000 and
#: needs several CPU seconds; every proof of the catalogue and 2-good flexible forms has
#: under 1,500).
PROOF_SIZE_LIMIT = 4000

#: Relative tolerance of numeric checks by finite-difference depth of the residual.
TOLERANCE = {0: 1e-8, 1: 1e-5, 2: 1e-3}


@dataclass(frozen=True)
class CheckRecord:
    """The outcome of one check.

    Attributes
    ----------
    name : str
        Short name, e.g. ``"Shephard's lemma"``.
    statement : str
        The property in LaTeX.
    status : {"proved", "held", "failed", "not applicable"}
    evidence : str
        How the status was reached, in words.
    max_error : float or None
        Largest relative error over the points tried (numeric checks).
    points : int
        Number of points tried numerically.
    counterexample : dict or None
        A point (name -> value) where the check failed.
    """

    name: str
    statement: str
    status: str
    evidence: str
    max_error: float | None = None
    points: int = 0
    counterexample: dict | None = None

    def __post_init__(self):
        if self.status not in STATUSES:
            raise ValueError(f"status {self.status!r} is not one of {STATUSES}")

    @property
    def ok(self) -> bool:
        return self.status in ("proved", "held")

    def to_dict(self) -> dict:
        return {"name": self.name, "statement": self.statement, "status": self.status,
                "evidence": self.evidence, "max_error": self.max_error,
                "points": self.points, "counterexample": self.counterexample}

    def line(self) -> str:
        return f"{self.name} — {self.status.upper()}: {self.evidence}"


# -- the check engine ---------------------------------------------------------------------
@dataclass
class _Spec:
    """One check: residual functions (each should be zero) or a sign test."""

    name: str
    statement: str
    residuals: Sequence[Fn] = ()
    scale: Sequence[Fn] = ()                    # magnitude for relative errors
    sign_test: Callable[[dict], tuple[float, float]] | None = None  # -> (violation, scale)
    symbolic: bool = True
    depth: int = 0
    domain: Sequence = ()                       # sympy conditions: skip points outside


def _exact(expr: sp.Expr) -> sp.Expr:
    """``expr`` with every float written as the exact decimal it stands for (0.3 -> 3/10)."""
    floats = expr.atoms(sp.Float)
    return expr.xreplace({f: sp.Rational(str(f)) for f in floats}) if floats else expr


def _powers(e):
    return sp.powsimp(sp.expand_power_base(e, force=True), force=True)


def _homogeneous(e):
    """Common factors pulled out of sums under powers, then powers combined."""
    return _powers(sp.factor_terms(sp.expand_power_base(e, force=True)))


#: Rewrites tried by a proof, cheapest first, until one gives exactly zero.  (Measured on
#: the residuals of the catalogue and flexible forms: tenths of a second in all.)
_CHEAP = (
    lambda e: sp.expand(sp.expand_log(e, force=True)),          # sums of logs, polynomials
    _homogeneous,                                               # products of powers
    lambda e: sp.cancel(_powers(sp.powdenest(e, force=True))),  # rational functions
    lambda e: sp.expand(_powers(e)),
)
_COSTLY = (
    sp.simplify,
    lambda e: sp.simplify(_powers(sp.expand_log(e, force=True))),
    lambda e: sp.simplify(sp.logcombine(sp.powdenest(e, force=True), force=True)),
    lambda e: sp.simplify(_homogeneous(e)),
)


class _SliceUsed(Exception):
    """One rewrite used its slice of CPU time."""


def _on_slice_used(signum, frame):
    raise _SliceUsed()


@contextmanager
def _cpu_slice(seconds: float | None):
    """Stop the block (with :class:`_SliceUsed`) after ``seconds`` of process CPU time.

    Only in a worker's main thread and where ``ITIMER_PROF`` exists; elsewhere no limit.
    """
    if (not seconds or not hasattr(signal, "setitimer")
            or threading.current_thread() is not threading.main_thread()):
        yield
        return
    old = signal.signal(signal.SIGPROF, _on_slice_used)
    signal.setitimer(signal.ITIMER_PROF, seconds)
    try:
        yield
    finally:
        signal.setitimer(signal.ITIMER_PROF, 0)
        signal.signal(signal.SIGPROF, old)


def _zero_by(attempts, expr, cpu_slice: float | None = None) -> bool:
    for attempt in attempts:
        try:
            with _cpu_slice(cpu_slice):
                if attempt(expr) == 0:
                    return True
        except Exception:  # noqa: BLE001 - a failed attempt is just not a proof
            continue
    return False


#: CPU seconds each cheap rewrite may take inside a worker before the next is tried (a
#: rewrite that suits one residual can blow up on another, e.g. expanding a power).
CHEAP_SLICE = 0.15


def _is_zero(expr: sp.Expr, values: dict | None = None, cpu_slice: float | None = None,
             stage: str = "all") -> bool:
    """Worker: does ``expr`` simplify to zero (with ``values`` put in, exactly)?

    ``stage`` ``"cheap"`` tries the cheap rewrites only, each within ``cpu_slice`` CPU
    seconds; ``"costly"`` only ``simplify`` and its variants (smooth functions); ``"all"``
    both.  Kinked functions (min, max, piecewise) are proved branch by branch with the
    cheap rewrites.
    """
    if values:
        expr = expr.xreplace(values)
    expr = _exact(expr)
    if expr == 0:
        return True
    cheap, costly = stage in ("cheap", "all"), stage in ("costly", "all")
    if expr.has(sp.Piecewise, sp.Min, sp.Max, sp.Heaviside):
        if not cheap:
            return False
        try:
            folded = sp.piecewise_fold(expr.rewrite(sp.Piecewise))
        except Exception:  # noqa: BLE001
            return _zero_by(_CHEAP, expr, cpu_slice)
        if isinstance(folded, sp.Piecewise):
            return all(_zero_by(_CHEAP, branch, cpu_slice) for branch, _ in folded.args)
        return _zero_by(_CHEAP, folded, cpu_slice)
    return ((cheap and _zero_by(_CHEAP, expr, cpu_slice))
            or (costly and _zero_by(_COSTLY, expr)))


def _all_zero(exprs: list, values: dict | None, cpu_slice: float | None = None,
              stage: str = "all") -> bool:
    """Worker: every residual of one check simplifies to zero."""
    return all(_is_zero(e, values, cpu_slice, stage) for e in exprs)


#: Proofs already found, by residual and parameter values (the same structure proves the
#: same way every time; a proof that ran out of budget is not remembered).
_PROVED: dict = {}


def _prove(exprs: list, values: dict, account: Budget | None,
           stage: str = "all") -> tuple[bool, bool]:
    """(proved, values_used): try the residuals symbolically within ``account``."""
    used = bool(values) and any(e.free_symbols & set(values) for e in exprs)
    key = (tuple(sp.srepr(e) for e in exprs),
           tuple(sorted((str(k), str(v)) for k, v in values.items())) if used else ())
    if key in _PROVED:
        return True, used
    try:
        in_worker = account is not None and account.remaining is not None
        proved = bool(run_with_budget(_all_zero, list(exprs), values if used else None,
                                      CHEAP_SLICE if in_worker else None, stage,
                                      budget=account))
    except Exception:  # noqa: BLE001 - out of budget or a sympy failure: not a proof
        return False, used
    if proved:
        _PROVED[key] = True
    return proved, used


def _run(spec: _Spec, points: list[dict], budget: Budget | float | None, names: dict,
         values: dict | None = None) -> CheckRecord:
    """One check: a proof unless a quick look finds the residual far from zero at a
    sampled point, else the numeric pass at ``points``.

    ``budget`` is the account of the whole ``check()`` call; the proofs of one check may
    use at most :data:`PROOF_BUDGET` of it, and the numeric pass stops when it is used up.
    """
    account = Budget.of(budget)
    values = values or {}
    tol = TOLERANCE.get(spec.depth, 1e-3)
    exprs = getattr(spec, "symbolic_exprs", None) or [r.sym for r in spec.residuals]
    symbolic = bool(spec.symbolic and exprs and all(e is not None for e in exprs))
    # no budget at all (``budget=None``): proofs run in this process without a limit
    proof = account if account.remaining is None else account.share(PROOF_BUDGET)

    def proved(stage):
        ok, with_values = _prove(exprs, values, proof, stage)
        if not ok:
            return None
        at = " at the model's parameter values" if with_values else ""
        return CheckRecord(spec.name, spec.statement, "proved",
                           f"the residual simplifies to zero symbolically{at}")

    # a residual clearly non-zero at a sampled point cannot simplify to zero, and one far
    # larger than any the proof budget can handle is not tried (a rule on size, not time)
    with account.measure():
        hopeless = symbolic and (sum(sp.count_ops(e) for e in exprs) > PROOF_SIZE_LIMIT
                                 or _clearly_nonzero(spec, points, values))
    if symbolic and not hopeless and not proof.exhausted:
        rec = proved("all")
        if rec is not None:
            return rec
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", NumericWarning)
        worst, worst_pt, used, stopped = _numeric_pass(spec, points, account)
    skipped = len(points) - used
    if stopped is not None:
        skipped_note = (f" (the budget of {account.total:g} CPU s was used up before "
                        f"{len(points) - stopped} of {len(points)} points)")
    elif skipped and used:
        skipped_note = (f" ({skipped} of {len(points)} sampled points lie outside the "
                        "region where it is defined or could not be computed)")
    else:
        skipped_note = ""
    if used == 0:
        why = (f"the budget of {account.total:g} CPU s was used up before any point was "
               "tried" if stopped is not None else "no sampled point could be evaluated")
        return CheckRecord(spec.name, spec.statement, "not applicable", why)
    where = None if worst_pt is None else {names.get(k, str(k)): float(v)
                                           for k, v in worst_pt.items()}
    if worst <= tol:
        return CheckRecord(spec.name, spec.statement, "held",
                           f"held at {used} sampled points; largest relative error "
                           f"{worst:.2g} (tolerance {tol:g}){skipped_note}", worst, used)
    at = ", ".join(f"{k}={v:.4g}" for k, v in where.items())
    return CheckRecord(spec.name, spec.statement, "failed",
                       f"fails at {at}: relative error {worst:.3g} (tolerance {tol:g})",
                       worst, used, where)


def _clearly_nonzero(spec: _Spec, points: list[dict], values: dict) -> bool:
    """A quick look before any proof: is a residual far from zero (relative to its own
    terms) at the first sampled point inside the domain?  Exact sympy evaluation at that
    point; no compiled functions.  False whenever it cannot tell."""
    exprs = [r.sym for r in spec.residuals]
    if not exprs or any(e is None for e in exprs):
        return False
    for pt in points:
        if not _inside(spec.domain, pt):
            continue
        at = {k: sp.Float(v) for k, v in pt.items()}
        at.update({k: v for k, v in values.items() if k not in at})
        for e in exprs:
            try:
                terms = [complex(sp.N(t.xreplace(at))) for t in sp.Add.make_args(e)]
            except (TypeError, ValueError, ArithmeticError):
                return False  # symbols left, or not a number there
            if not all(math.isfinite(abs(t)) for t in terms):
                continue
            if abs(sum(terms)) > 1e-6 * max(abs(t) for t in terms):
                return True
        return False
    return False


def _numeric_pass(spec: _Spec, points: list[dict], account: Budget):
    """(worst error, its point, points used, points reached when the budget ran out or None)."""
    worst, worst_pt, used = 0.0, None, 0
    for k, pt in enumerate(points):
        if account.exhausted:
            return worst, worst_pt, used, k
        if not _inside(spec.domain, pt):
            continue
        try:
            with account.measure():
                if spec.sign_test is not None:
                    viol, scale = spec.sign_test(pt)
                    errs = [viol / max(scale, 1e-300)]
                else:
                    errs = []
                    for k2, r in enumerate(spec.residuals):
                        s = abs(spec.scale[k2](pt)) if k2 < len(spec.scale) else 1.0
                        errs.append(abs(r(pt)) / max(s, 1.0 if not spec.scale else 1e-300))
        except (DualityError, ArithmeticError, ValueError, KeyError):
            continue
        if any(not math.isfinite(e) for e in errs):
            continue
        used += 1
        err = max(errs)
        if err > worst:
            worst, worst_pt = err, pt
    return worst, worst_pt, used, None


def _inside(conds, pt) -> bool:
    for c in conds:
        try:
            v = c.xreplace({k: sp.Float(v) for k, v in pt.items()})
        except Exception:  # noqa: BLE001
            return False
        if v is sp.false or (v is not sp.true and not bool(v)):
            return False
    return True


def _na(name: str, statement: str, reason: str) -> CheckRecord:
    return CheckRecord(name, statement, "not applicable", reason)


def _depth(*fns: Fn) -> int:
    return max(f.depth + (1 if f.sym is None else 0) for f in fns)


# -- sampling -----------------------------------------------------------------------------------
def _sample(model: Model, n: int, seed: int) -> list[dict]:
    """Points with prices in [0.5, 3] and reachable levels; parameter values included."""
    if not model.is_primal:
        return _sample_dual(model, n, seed)
    pts = []
    for smp in sample_primal_points(model, n, seed,
                                    output_price=model.output_price is not None):
        x = smp.quantities
        level = smp.fns.f(x)
        pt = {**smp.params}
        pt.update(zip(model.prices, smp.prices))
        if math.isfinite(level):
            pt[model.level] = level
        if model.income is not None:
            pt[model.income] = float(smp.prices @ x)
        if smp.output_price is not None:
            pt[model.output_price] = smp.output_price
        pts.append(pt)
    return pts


def _sample_dual(model: Model, n: int, seed: int) -> list[dict]:
    """Dual-side models: prices in [0.5, 3]; output in [0.5, 3]; income in [5, 50] and the
    utility level it buys (u = v(p, m)), so both preference duals are checked consistently."""
    v = None
    if not model.is_technology:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            v = Fn.of(indirect_utility(model))
    pts = sample_points(model, n, seed)
    for pt in pts if v is not None else ():
        try:
            u = v(pt)
        except (DualityError, ArithmeticError, ValueError, KeyError):
            u = math.nan
        if math.isfinite(u):
            pt[model.level] = u
    return pts


# -- public ----------------------------------------------------------------------------------
def check(model: Model, *, budget: float | None = DEFAULT_BUDGET, points: int | None = None,
          seed: int = 11, symbolic: bool = True) -> list[CheckRecord]:
    """Verify the identities and properties of every dual of ``model``.

    Parameters
    ----------
    budget : float or None
        CPU seconds (see :mod:`duality.solve.budget`) for the symbolic route of each
        derivation, and for the checks themselves — proofs and numeric passes together;
        each check's proof may use at most :data:`PROOF_BUDGET` of it.  When it is used
        up, the remaining checks say so in their evidence.  ``None``: no limit.
    points : int, optional
        Number of sampled points (default 20 for closed forms, 6 for numeric duals).
    symbolic : bool
        Try symbolic proofs (set False for a quick numeric pass).

    Notes
    -----
    Each check is first evaluated at the sampled points; a proof is then attempted with
    the model's parameter values put in as exact decimals (0.3 -> 3/10), unless the
    residual is far from zero somewhere.  Proofs found are remembered for the process, so
    a second check of a model of the same structure and values is quick.
    """
    if not isinstance(model, Model):
        raise DualityError(f"check needs a model from technology() or preference(), not "
                           f"{type(model).__name__}")
    names = model.symbols
    names = {v: k for k, v in names.items()}
    if model.is_technology:
        specs, numeric = _technology_specs(model, budget)
    else:
        specs, numeric = _preference_specs(model, budget)
    account = Budget(budget)
    values = {k: sp.Rational(str(float(v))) for k, v in model.values.items()}
    n = points if points is not None else (6 if numeric else 20)
    pts = _sample(model, n, seed)
    out = []
    for spec in specs:
        if isinstance(spec, CheckRecord):
            out.append(spec)
            continue
        if not symbolic:
            spec.symbolic = False
        out.append(_run(spec, pts, account, names, values))
    return out


def _scaled(f: Fn, syms, t) -> Fn:
    return f.subs({s: Fn(t * s) for s in syms})


def _grad_checks(kind: str, main: Fn, demands: dict, prices, sign: int, lemma: str,
                 domain) -> list[_Spec]:
    specs = []
    res = [main.diff(w) * sign - Fn.of(x) for (name, x), w in zip(demands.items(), prices)]
    # x_i alone is no scale where a good is not used (a corner, x_i = 0): the rounding of
    # both sides would count as a relative error of any size; the value over the price,
    # the most that can be spent on the good, is a scale that does not vanish there
    scale = [_largest(Fn.of(x), main / Fn(w)) for x, w in zip(demands.values(), prices)]
    specs.append(_Spec(lemma, r"\partial c/\partial w_i = x_i" if kind == "cost" else
                       (r"\partial e/\partial p_i = h_i" if kind == "expenditure" else
                        r"-\partial \pi/\partial w_i = x_i"),
                       res, scale, depth=_depth(main, *(Fn.of(x) for x in demands.values())),
                       domain=domain))
    return specs


def _curvature(name, statement, fns: list[list[Fn]], sign: int, domain, ref=None) -> _Spec:
    """Matrix of functions is NSD (sign=-1) or PSD (sign=+1) at each point; ``ref`` as in
    :func:`_symmetry`."""
    def test(pt):
        M = np.array([[f(pt) for f in row] for row in fns], dtype=float)
        M = (M + M.T) / 2
        eig = np.linalg.eigvalsh(M) * sign
        scale = max(np.abs(M).max(), 1e-12)
        if ref:
            scale = max(scale, max(abs(f(pt)) for row in ref for f in row))
        return max(0.0, -eig.min()) , scale
    depth = max(_depth(f) for row in fns for f in row)
    return _Spec(name, statement, sign_test=test, symbolic=False, depth=depth, domain=domain)


def _largest(*fns: Fn) -> Callable[[dict], float]:
    """Scale of a residual at a point: the largest magnitude of the given functions."""
    def scale(pt):
        return max(abs(f(pt)) for f in fns)
    return scale


def _second_scale(value: Fn, prices) -> list[list[Fn]]:
    """value / (p_i p_j): the size of a second price derivative of a function homogeneous
    of degree one, nonzero also where a good is not bought (common practice, no source)."""
    return [[value / (Fn(p) * Fn(q)) for q in prices] for p in prices]


def _symmetry(name, statement, fns: list[list[Fn]], domain, ref=None) -> _Spec:
    """Matrix ``fns`` is symmetric; ``ref`` (same shape) gives each entry's size where the
    entries themselves may all vanish (a corner)."""
    n = len(fns)
    res = [fns[i][j] - fns[j][i] for i in range(n) for j in range(i + 1, n)]
    scale = [_largest(fns[i][j], *((ref[i][j],) if ref else ())) for i in range(n)
             for j in range(i + 1, n)]
    if not res:
        return None
    return _Spec(name, statement, res, scale, depth=max(_depth(f) for f in res),
                 domain=domain)


def _monotone(name, statement, fns: Sequence[Fn], sign: int, domain) -> _Spec:
    def test(pt):
        vals = np.array([f(pt) for f in fns]) * sign
        return max(0.0, -vals.min()), max(np.abs(vals).max(), 1e-12)
    return _Spec(name, statement, sign_test=test, symbolic=False,
                 depth=max(_depth(f) for f in fns), domain=domain)


def _derive_or_record(fn, model, budget, name, statement):
    try:
        return fn(model, budget=budget), None
    except NoSolutionError as exc:
        return None, _na(name, statement, exc.reason)


def _technology_specs(model: Model, budget) -> tuple[list, bool]:
    specs: list = []
    c = cost(model, budget=budget)
    ws, y = c.args[:-1], c.args[-1]
    dom = c.conditions
    C = Fn.of(c)
    X = [Fn.of(x) for x in c.demands.values()]
    specs += _grad_checks("cost", C, c.demands, ws, 1, "Shephard's lemma", dom)
    specs.append(_Spec("cost = w·x (adding-up)", r"c(w, y) = \sum_i w_i x_i(w, y)",
                       [C - sum((Fn(w) * x for w, x in zip(ws, X)), Fn.const(0))], [C],
                       depth=_depth(C, *X), domain=dom))
    if model.is_primal:
        f = Fn(model.expr, params=model.values)
        specs.append(_Spec("demands reach the output level", r"f(x(w, y)) = y",
                           [f.subs(dict(zip(model.quantities, X))) - Fn(y)], [Fn(y)],
                           depth=_depth(*X), domain=dom))
    specs.append(_hom_spec("cost homogeneous of degree 1 in prices",
                           r"c(t w, y) = t\, c(w, y)", C, ws, 1, dom))
    specs.append(_hom_multi("conditional demands homogeneous of degree 0 in prices",
                            r"x_i(t w, y) = x_i(w, y)", X, ws, 0, dom,
                            [_largest(x, C / Fn(w)) for x, w in zip(X, ws)]))
    S = [[x.diff(w) for w in ws] for x in X]
    ref = _second_scale(C, ws)
    sym = _symmetry("substitution matrix symmetric", r"\partial x_i/\partial w_j = "
                    r"\partial x_j/\partial w_i", S, dom, ref)
    if sym is not None:
        specs.append(sym)
    specs.append(_curvature("cost concave in prices",
                            r"\nabla^2_w c(w, y) \preceq 0", S, -1, dom, ref))
    specs.append(_monotone("cost non-decreasing in prices and output",
                           r"\partial c/\partial w_i \ge 0,\ \partial c/\partial y > 0",
                           X + [C.diff(y)], 1, dom))
    pi, na = _derive_or_record(profit, model, budget, "Hotelling's lemma",
                               r"\partial\pi/\partial p = y,\ -\partial\pi/\partial w_i = x_i")
    if pi is None:
        specs.append(na)
        specs.append(_na("profit convex in prices", r"\nabla^2 \pi(p, w) \succeq 0",
                         na.evidence))
    else:
        P = Fn.of(pi)
        p = pi.args[0]
        dem = pi.demands
        Yf = Fn.of(dem[str(model.level)])
        XF = [Fn.of(dem[str(q)]) for q in model.quantities]
        res = [P.diff(p) - Yf] + [-P.diff(w) - xf for w, xf in zip(ws, XF)]
        specs.append(_Spec("Hotelling's lemma",
                           r"\partial\pi/\partial p = y,\ -\partial\pi/\partial w_i = x_i",
                           res, [_largest(Yf, P / Fn(p))]
                           + [_largest(xf, P / Fn(w)) for w, xf in zip(ws, XF)],
                           depth=_depth(P, Yf, *XF), domain=pi.conditions))
        allp = (p,) + tuple(ws)
        specs.append(_hom_spec("profit homogeneous of degree 1 in (p, w)",
                               r"\pi(t p, t w) = t\, \pi(p, w)", P, allp, 1, pi.conditions))
        grad = [P.diff(s) for s in allp]
        specs.append(_curvature("profit convex in prices", r"\nabla^2 \pi(p, w) \succeq 0",
                                [[g.diff(s) for s in allp] for g in grad], 1,
                                pi.conditions))
    return specs, c.route == "numeric"


def _hom_spec(name, statement, f: Fn, syms, degree, domain):
    return _hom_multi(name, statement, [f], syms, degree, domain)


def _hom_multi(name, statement, fs: list[Fn], syms, degree, domain, scale=None):
    """Every f in ``fs`` homogeneous of ``degree`` in ``syms``; ``scale`` (one per f, as
    for :func:`_grad_checks`) sizes errors where an f vanishes (a good not bought)."""
    scale = fs if scale is None else scale
    t = sp.Symbol("t_", positive=True)
    tv = 1.7
    if all(f.sym is not None for f in fs):
        res_t = [f.subs({s: Fn(t * s) for s in syms}) - Fn(t ** degree) * f for f in fs]
        spec = _Spec(name, statement, [r.subs({t: Fn.const(tv)}) for r in res_t], scale,
                     depth=0, domain=domain)
        spec.symbolic_exprs = [r.sym for r in res_t]  # type: ignore[attr-defined]
        return spec
    res = [f.subs({s: Fn(tv * s) for s in syms}) - f * (tv ** degree) for f in fs]
    return _Spec(name, statement, res, scale, symbolic=False,
                 depth=max(_depth(f) for f in fs), domain=domain)


def _preference_specs(model: Model, budget) -> tuple[list, bool]:
    specs: list = []
    v = indirect_utility(model, budget=budget)
    e = expenditure(model, budget=budget)
    ps, m, u = v.args[:-1], v.args[-1], e.args[-1]
    V, E = Fn.of(v), Fn.of(e)
    X = [Fn.of(x) for x in v.demands.values()]
    H = [Fn.of(h) for h in e.demands.values()]
    vdom = v.conditions
    edom = e.conditions
    both = tuple(vdom) + tuple(edom)
    Vm = V.diff(m)
    specs.append(_Spec("Roy's identity", r"x_i = -\frac{\partial v/\partial p_i}"
                       r"{\partial v/\partial m}",
                       [-V.diff(p) / Vm - x for p, x in zip(ps, X)],
                       [_largest(x, Fn(m) / Fn(p)) for x, p in zip(X, ps)],
                       depth=_depth(V, *X), domain=vdom))
    specs += _grad_checks("expenditure", E, e.demands, ps, 1, "Shephard's lemma (Hicksian)",
                          edom)
    specs.append(_Spec("e(p, v(p, m)) = m", r"e(p, v(p, m)) = m",
                       [E.subs({u: V}) - Fn(m)], [Fn(m)], depth=_depth(E, V), domain=vdom))
    specs.append(_Spec("v(p, e(p, u)) = u", r"v(p, e(p, u)) = u",
                       [V.subs({m: E}) - Fn(u)], [Fn(u)], depth=_depth(E, V), domain=edom))
    specs.append(_Spec("budget exhausted (adding-up)", r"\sum_i p_i x_i(p, m) = m",
                       [sum((Fn(p) * x for p, x in zip(ps, X)), Fn.const(0)) - Fn(m)],
                       [Fn(m)], depth=_depth(*X), domain=vdom))
    # Slutsky equation at u = v(p, m): dx_i/dp_j = dh_i/dp_j - x_j dx_i/dm
    slutsky_res, slutsky_scale = [], []
    for i, x in enumerate(X):
        for j, p in enumerate(ps):
            lhs = x.diff(p)
            rhs = H[i].diff(p).subs({u: V}) - X[j] * x.diff(m)
            slutsky_res.append(lhs - rhs)
            slutsky_scale.append(_largest(x / Fn(p), Fn(m) / (Fn(p) * Fn(ps[i]))))
    specs.append(_Spec("Slutsky equation", r"\frac{\partial x_i}{\partial p_j} = "
                       r"\frac{\partial h_i}{\partial p_j} - x_j \frac{\partial x_i}{\partial m}",
                       slutsky_res, slutsky_scale,
                       depth=max(_depth(r) for r in slutsky_res), domain=both))
    S = [[h.diff(p) for p in ps] for h in H]
    ref = _second_scale(E, ps)
    sym = _symmetry("Slutsky matrix symmetric", r"\partial h_i/\partial p_j = "
                    r"\partial h_j/\partial p_i", S, edom, ref)
    if sym is not None:
        specs.append(sym)
    specs.append(_curvature("Slutsky matrix negative semidefinite (e concave in p)",
                            r"\nabla^2_p e(p, u) \preceq 0", S, -1, edom, ref))
    specs.append(_hom_spec("indirect utility homogeneous of degree 0 in (p, m)",
                           r"v(t p, t m) = v(p, m)", V, tuple(ps) + (m,), 0, vdom))
    specs.append(_hom_multi("Marshallian demands homogeneous of degree 0 in (p, m)",
                            r"x_i(t p, t m) = x_i(p, m)", X, tuple(ps) + (m,), 0, vdom,
                            [_largest(x, Fn(m) / Fn(p)) for x, p in zip(X, ps)]))
    specs.append(_hom_spec("expenditure homogeneous of degree 1 in prices",
                           r"e(t p, u) = t\, e(p, u)", E, ps, 1, edom))
    specs.append(_monotone("indirect utility increasing in income, non-increasing in prices",
                           r"\partial v/\partial m > 0,\ \partial v/\partial p_i \le 0",
                           [Vm] + [-V.diff(p) for p in ps], 1, vdom))
    specs.append(_monotone("expenditure increasing in utility, non-decreasing in prices",
                           r"\partial e/\partial u > 0,\ \partial e/\partial p_i \ge 0",
                           [E.diff(u)] + H, 1, edom))
    return specs, v.route == "numeric" or e.route == "numeric"


__all__ = ["check", "CheckRecord", "STATUSES"]

"""Parameter restrictions implied by theory, derived from the formula of a dual function.

Given a parametric cost c(w, y), profit pi(p, w), expenditure e(p, u) or indirect
utility v(p, m) written as a sympy expression, this module works out *from the formula
itself* (never from a table of known forms) the parameter restrictions economic theory
implies, shows them with a plain-words reason, checks parameter values against them and
imposes them (a reduced parameter set).

Method
------
Every restriction is an identity in the arguments of the function that must hold for all
positive prices (and all levels such as output y or utility u).  The identity is turned
into equations in the parameters as follows.

1. Each price p_i is written p_i = exp(L_i) (and income m = exp(M) for share equations),
   logarithms are expanded (``force=True``: prices and levels are positive) and powers
   of exponentials are combined, so that translog, AIDS and Cobb-Douglas forms become
   polynomials in the L_i (possibly times exponentials exp(b . L)).
2. *Homogeneity* of degree d, F(t p) = t^d F(p) for all t > 0, is equivalent (the price
   domain is connected and the identity holds at t = 1) to Euler's identity in logs,
   obtained by differentiating with respect to ln t at t = 1:

       sum_i d ln F / d L_i - d == 0        (log form)
       sum_i d F / d L_i - d F == 0         (level form).

   ``log_form=None`` chooses the log form when ln F expands with no logarithm of a
   price-dependent sum left over (translog, AIDS-type expenditure, Cobb-Douglas), and the
   level form otherwise (generalized Leontief, CES).  In the level form the expression
   is first put over a common denominator and simplified; if it vanishes the function is
   homogeneous by construction and no restriction is needed.
3. The identity is *decomposed into independent functions*: after ``expand(force=True)``
   every term is split into a factor free of the arguments (its coefficient, a function
   of the parameters only) and a factor in the arguments (a monomial in the L_i, levels
   and their logs times one exponential).  Terms with the same argument factor are
   collected; each collected coefficient must vanish.  (Monomials times exponentials
   with distinct exponents are linearly independent functions, so this is exact for the
   forms above; for other forms the factors are treated as independent, which can only
   over-state the restrictions when distinct factors are algebraically related.)
4. *Adding-up*: the shares s_i = d ln F / d ln p_i must sum to one.  For degree-1
   homogeneous duals this is the same identity as Euler's; the equations are derived
   separately and, when they coincide with homogeneity ones, the homogeneity reason says
   so instead of repeating them.  For share equations given directly
   (:func:`derive_share_restrictions`) adding-up is sum_i s_i == 1, homogeneity is
   s_i(t p, t m) == t^d s_i(p, m) for each i, and symmetry is Slutsky symmetry of the
   compensated share derivatives (see that function).
5. *Symmetry (identification)*: two parameters a, b such that F depends on them only
   through a + b (dF/da - dF/db == 0 identically) are not separately identified; the
   restriction a = b (e.g. gamma_ij = gamma_ji) identifies them.

Equations whose coefficients are nonlinear in the parameters are reduced with the linear
ones (substituting the solved linear system); if what remains is linear it is kept
(written in its original linear part when the nonlinear part vanishes under the other
restrictions).  A remaining product of a parameter monomial and a linear factor (e.g.
b0 (b1 + b2 + b3) in AIDS) gives the linear factor, with the assumption that the
monomial is nonzero stated in the reason.  Anything still nonlinear is returned as it is
and marked "nonlinear" in the reason.

Redundancy: within each kind, an equation implied by the earlier ones of that kind
(no rank increase of the augmented matrix) is dropped, so each kind is a basis in the
order derived, keeping the published-looking form; across kinds only exact duplicates
(equal up to a factor) are dropped.  Restrictions of different kinds may still be jointly
dependent (e.g. AIDS homogeneity rows are implied by adding-up columns plus symmetry);
:func:`impose` handles such dependence.
"""
from __future__ import annotations

import itertools
import math
from dataclasses import dataclass, field
from typing import Iterable, Mapping, Sequence

import sympy as sp

from .errors import DualityError

__all__ = [
    "Restriction",
    "derive_restrictions",
    "derive_share_restrictions",
    "homogeneous_by_construction",
    "check_values",
    "describe_violation",
    "impose",
]

KINDS = ("homogeneity", "adding-up", "symmetry")


# --------------------------------------------------------------------------------------
# The restriction record
# --------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Restriction:
    """One restriction on the parameters.

    Attributes
    ----------
    kind : str
        ``"homogeneity"``, ``"adding-up"`` or ``"symmetry"``.
    equation : sympy.Eq
        The restriction, linear in the parameters for the usual forms.
    reason : str
        Why theory requires it, in plain words.
    parameters : tuple of Symbol
        All parameters of the derivation (used to validate names given to
        :func:`check_values`).
    """

    kind: str
    equation: sp.Eq
    reason: str
    parameters: tuple = field(default=(), compare=False)

    @property
    def expr(self) -> sp.Expr:
        """lhs - rhs (zero when the restriction holds)."""
        return self.equation.lhs - self.equation.rhs

    @property
    def symbols(self) -> tuple:
        """The parameters appearing in the equation, sorted by name."""
        return tuple(sorted(self.expr.free_symbols, key=lambda s: s.name))

    @property
    def linear(self) -> bool:
        return _is_linear(self.expr, self.expr.free_symbols)

    def residual(self, values: Mapping) -> float:
        """lhs - rhs at ``values`` (a mapping of parameter names or symbols to numbers)."""
        subs = _value_map(values, self.symbols)
        missing = [s.name for s in self.symbols if s not in subs]
        if missing:
            raise DualityError(
                f"no value given for parameter {', '.join(missing)} of the {self.kind} "
                f"restriction {sp.sstr(self.equation)}")
        val = self.expr.xreplace(subs)
        try:
            return float(val)
        except TypeError as exc:  # pragma: no cover - complex or symbolic leftovers
            raise DualityError(
                f"the {self.kind} restriction {sp.sstr(self.equation)} does not evaluate "
                f"to a real number at the given values ({val})") from exc

    def latex(self) -> str:
        return sp.latex(self.equation)

    def __str__(self) -> str:
        return f"[{self.kind}] {sp.sstr(self.equation)}: {self.reason}"


def _value_map(values: Mapping, symbols: Iterable[sp.Symbol]) -> dict:
    by_name = {s.name: s for s in symbols}
    out = {}
    for k, v in values.items():
        if isinstance(k, sp.Symbol):
            sym = by_name.get(k.name)
        elif isinstance(k, str):
            sym = by_name.get(k)
        else:
            raise DualityError(f"parameter key {k!r} is neither a name nor a sympy Symbol")
        if sym is None:
            continue
        try:
            out[sym] = sp.Float(float(v)) if not isinstance(v, (int, sp.Integer, sp.Rational)) \
                else sp.nsimplify(v)
        except (TypeError, ValueError) as exc:
            raise DualityError(f"value of parameter {sym.name} is not a number: {v!r}") from exc
    return out


# --------------------------------------------------------------------------------------
# Input validation
# --------------------------------------------------------------------------------------
def _symbols(seq, what: str) -> tuple:
    if isinstance(seq, sp.Symbol):
        seq = (seq,)
    out = []
    for s in seq:
        if isinstance(s, str):
            raise DualityError(f"{what} {s!r} must be a sympy Symbol, not a string")
        if not isinstance(s, sp.Symbol):
            raise DualityError(f"{what} {s!r} is not a sympy Symbol")
        out.append(s)
    if len(set(out)) != len(out):
        dup = [s.name for s in out if out.count(s) > 1]
        raise DualityError(f"{what} {dup[0]} is listed twice")
    return tuple(out)


def _validate(exprs, prices, params, others, extra=()):
    prices = _symbols(prices, "price")
    params = _symbols(params, "parameter")
    if not prices:
        raise DualityError("prices: at least one price symbol is needed")
    clash = set(prices) & set(params)
    if clash:
        raise DualityError(f"{sorted(s.name for s in clash)[0]} is listed both as a price "
                           "and as a parameter")
    free = set().union(*(e.free_symbols for e in exprs))
    for p in list(prices) + list(extra):
        if p not in free:
            raise DualityError(f"price {p.name} does not appear in the expression")
    for a in params:
        if a not in free:
            raise DualityError(f"parameter {a.name} does not appear in the expression")
    if others is None:
        others = tuple(sorted(free - set(prices) - set(params) - set(extra),
                              key=lambda s: s.name))
    else:
        others = _symbols(others, "argument")
        unknown = free - set(prices) - set(params) - set(others) - set(extra)
        if unknown:
            raise DualityError(
                f"symbol {sorted(s.name for s in unknown)[0]} is neither a price, a "
                "parameter nor one of the other arguments")
    return prices, params, tuple(others)


def _sympify(expr, what="expression"):
    try:
        e = sp.sympify(expr)
    except (sp.SympifyError, TypeError) as exc:
        raise DualityError(f"{what} is not a sympy expression: {expr!r}") from exc
    if not isinstance(e, sp.Expr):
        raise DualityError(f"{what} is not a sympy expression: {expr!r}")
    return e


# --------------------------------------------------------------------------------------
# Log variables and the decomposition of an identity into independent functions
# --------------------------------------------------------------------------------------
class _Logs:
    """Price (and income) symbols and their log variables L = ln p."""

    def __init__(self, prices, income=None):
        self.prices = tuple(prices)
        self.L = tuple(sp.Dummy(f"ln_{p.name}", real=True) for p in self.prices)
        self.income = income
        self.M = sp.Dummy(f"ln_{income.name}", real=True) if income is not None else None

    @property
    def subs(self):
        d = {p: sp.exp(L) for p, L in zip(self.prices, self.L)}
        if self.income is not None:
            d[self.income] = sp.exp(self.M)
        return d

    @property
    def back(self):
        d = {L: sp.log(p) for p, L in zip(self.prices, self.L)}
        if self.income is not None:
            d[self.M] = sp.log(self.income)
        return d

    @property
    def all_logs(self):
        return self.L + ((self.M,) if self.M is not None else ())


def _tidy(e: sp.Expr) -> sp.Expr:
    e = sp.expand_log(e, force=True)
    e = sp.powdenest(e, force=True)
    e = sp.powsimp(e, force=True)
    return sp.expand(e, force=True)


def _in_logs(expr, logs: _Logs) -> sp.Expr:
    return _tidy(expr.xreplace(logs.subs))


def _split_term(term, argsyms):
    """(coefficient in parameters only, factor in the arguments) of one product term."""
    coef = sp.Integer(1)
    rest = []
    exp_arg = sp.Integer(0)
    for f in sp.Mul.make_args(term):
        if not (f.free_symbols & argsyms):
            coef *= f
            continue
        if isinstance(f, sp.exp) or (f.is_Pow and f.base == sp.E):
            arg = f.args[0] if isinstance(f, sp.exp) else f.exp
            for part in sp.Add.make_args(sp.expand(arg)):
                if part.free_symbols & argsyms:
                    exp_arg += part
                else:
                    coef *= sp.exp(part)
            continue
        rest.append(f)
    basis = sp.Mul(*rest) * sp.exp(sp.expand(exp_arg))
    return coef, basis


def _identity_coefficients(expr, argsyms, prefer=()) -> list[tuple[sp.Expr, sp.Expr]]:
    """Decompose ``expr == 0`` (for all arguments) into (basis function, coefficient).

    Only coefficients that do not expand to zero are returned.
    """
    argsyms = set(argsyms)
    e = _tidy(expr)
    if e == 0:
        return []
    num, den = sp.fraction(sp.together(e))
    if den.free_symbols & argsyms:
        e = _tidy(num)
    groups: dict = {}
    order = []
    for term in sp.Add.make_args(e):
        coef, basis = _split_term(term, argsyms)
        if basis not in groups:
            groups[basis] = sp.Integer(0)
            order.append(basis)
        groups[basis] += coef
    if prefer:
        def rank(b):
            fs = b.free_symbols
            hits = [i for i, s in enumerate(prefer) if s in fs]
            return min(hits) + 1 if hits else (0 if b == 1 else len(prefer) + 1)
        order.sort(key=rank)
    out = []
    for b in order:
        c = sp.expand(groups[b])
        if c != 0:
            out.append((b, c))
    return out


def _describe_basis(basis, logs: _Logs) -> str:
    if basis == 1:
        return "the constant term"
    shown = basis.xreplace(logs.back)
    return f"the term in {sp.sstr(shown)}"


# --------------------------------------------------------------------------------------
# Linear algebra on restriction equations
# --------------------------------------------------------------------------------------
def _is_linear(expr, params) -> bool:
    params = set(params)
    for s in expr.free_symbols & params:
        d = sp.diff(expr, s)
        if d.free_symbols & params:
            return False
    return True


def _row(expr, params) -> list:
    """Coefficients over ``params`` followed by the constant (expr = row . (params, 1))."""
    expr = sp.expand(expr)
    coeffs = [sp.diff(expr, p) for p in params]
    const = sp.expand(expr.xreplace({p: 0 for p in params}))
    return coeffs + [const]


def _normalise(expr, params) -> sp.Expr:
    """Scale a linear expression to integer coefficients, first coefficient positive."""
    row = _row(expr, params)
    nz = [c for c in row if c != 0]
    if nz and all(c.is_Rational for c in nz):
        lcm = sp.ilcm(*[sp.Rational(c).q for c in nz]) if len(nz) > 1 else sp.Rational(nz[0]).q
        ints = [int(c * lcm) for c in nz]
        g = math.gcd(*ints) if len(ints) > 1 else abs(ints[0])
        scale = sp.Rational(lcm, g)
        expr = sp.expand(expr * scale)
        row = _row(expr, params)
    first = next((c for c in row[:-1] if c != 0), None)
    if first is not None and first.is_number and first < 0:
        expr = sp.expand(-expr)
    return expr


def _as_eq(expr, params) -> sp.Eq:
    """expr == 0 written as Eq(parameter part, constant)."""
    expr = sp.expand(expr)
    const = expr.xreplace({p: 0 for p in params}) if _is_linear(expr, params) else \
        sp.Add(*[t for t in sp.Add.make_args(expr) if not (t.free_symbols & set(params))])
    lhs = sp.expand(expr - const)
    return sp.Eq(lhs, -const, evaluate=False)


def _rank(rows) -> int:
    if not rows:
        return 0
    return sp.Matrix(rows).rank(simplify=True)


def _solve_linear(exprs, params, prefer_last=True, keep=()):
    """Solve linear equations expr == 0; returns (mapping, pivots) or raises on inconsistency."""
    if not exprs:
        return {}, ()
    keep = set(keep)
    cols = [p for p in reversed(params) if p not in keep] + \
        [p for p in reversed(params) if p in keep]
    if not prefer_last:
        cols = list(params)
    A = sp.Matrix([_row(e, cols) for e in exprs])
    R, pivots = A.rref(simplify=True)
    n = len(cols)
    if n in pivots:
        raise DualityError("the restrictions are inconsistent: no parameter values "
                           "satisfy all of them")
    mapping = {}
    for i, j in enumerate(pivots):
        val = -R[i, n]
        for k in range(n):
            if k != j and R[i, k] != 0:
                val -= R[i, k] * cols[k]
        mapping[cols[j]] = sp.expand(val)
    return mapping, tuple(cols[j] for j in pivots)


class _Item:
    __slots__ = ("expr", "kind", "reason")

    def __init__(self, expr, kind, reason):
        self.expr, self.kind, self.reason = sp.expand(expr), kind, reason


def _drop_vanishing(expr, params, sol):
    """Remove products s*c (s a parameter) whose factor c vanishes under ``sol``."""
    rem = sp.expand(expr)
    for s in params:
        c = sp.expand(rem.coeff(s))
        if c == 0 or not (c.free_symbols & set(params)):
            continue
        if sp.expand(c.xreplace(sol)) == 0:
            rem = sp.expand(rem - s * c)
    return rem


def _reduce(items: list[_Item], params) -> list[_Item]:
    """Linearise nonlinear items with the linear ones; see the module docstring."""
    params = tuple(params)
    items = list(items)
    for _ in range(len(items) + 2):
        lin = [it for it in items if _is_linear(it.expr, params)]
        non = [it for it in items if not _is_linear(it.expr, params)]
        if not non:
            break
        try:
            sol, _piv = _solve_linear([it.expr for it in lin], params)
        except DualityError:
            sol = {}
        changed = False
        new_items = []
        for it in items:
            if _is_linear(it.expr, params):
                new_items.append(it)
                continue
            rem = _drop_vanishing(it.expr, params, sol) if sol else it.expr
            if rem != it.expr and _is_linear(rem, params):
                if rem != 0:
                    # what is left once products vanishing under the other restrictions
                    # are removed: the linear condition in its published-looking form
                    new_items.append(_Item(rem, it.kind, it.reason + (
                        f" (the full condition {sp.sstr(it.expr)} = 0 reduces to this "
                        "given the other restrictions)")))
                changed = True
                continue
            r = sp.expand(it.expr.xreplace(sol)) if sol else it.expr
            if r == 0:
                changed = True  # implied by the linear restrictions
                continue
            if _is_linear(r, params):
                new_items.append(_Item(r, it.kind, it.reason + (
                    f" (the full condition {sp.sstr(it.expr)} = 0, reduced with the "
                    "other restrictions)")))
                changed = True
            else:
                new_items.append(it)  # still nonlinear: keep as written for now
        items = new_items
        if not changed:
            # Try dropping parameter monomial factors: b0*(b1+b2+b3) -> b1+b2+b3.
            out = []
            for it in items:
                if _is_linear(it.expr, params):
                    out.append(it)
                    continue
                c, facs = sp.factor_list(it.expr)
                mono = [f**k for f, k in facs if f.is_Symbol and f in params]
                others = [(f, k) for f, k in facs if not (f.is_Symbol and f in params)]
                if len(others) == 1 and _is_linear(others[0][0], params) and mono:
                    lin_f = others[0][0]
                    nz = " and ".join(f"{sp.sstr(m.as_base_exp()[0])} ≠ 0" for m in mono)
                    out.append(_Item(lin_f, it.kind, it.reason + (
                        f" (the full condition is {sp.sstr(sp.factor(it.expr))} = 0; "
                        f"assuming {nz})")))
                    changed = True
                else:
                    out.append(it)
            items = out
            if not changed:
                break
    return items


def _finish(items: list[_Item], params, fn_params=None) -> list[Restriction]:
    """Normalise, de-duplicate within kinds (rank) and across kinds (exact), build records."""
    params = tuple(params)
    fn_params = tuple(fn_params or params)
    kept: list[tuple[_Item, sp.Expr]] = []
    rows_by_kind: dict[str, list] = {}
    seen_exact: list[tuple[sp.Expr, str]] = []
    dropped_into: dict[int, list[str]] = {}
    for it in items:
        lin = _is_linear(it.expr, params)
        e = _normalise(it.expr, params) if lin else sp.expand(it.expr)
        dup_of = None
        for idx, (other, _kind) in enumerate(seen_exact):
            if sp.expand(other - e) == 0 or sp.expand(other + e) == 0:
                dup_of = idx
                break
        if dup_of is not None:
            if kept[dup_of][0].kind != it.kind:
                dropped_into.setdefault(dup_of, []).append(it.kind)
            continue
        if lin:
            rows = rows_by_kind.setdefault(it.kind, [])
            row = _row(e, params)
            if _rank(rows + [row]) == _rank(rows):
                continue
            rows.append(row)
        seen_exact.append((e, it.kind))
        kept.append((it, e))
    out = []
    for idx, (it, e) in enumerate(kept):
        reason = it.reason
        if idx in dropped_into:
            reason += ("; the same equation is the " + " and ".join(sorted(set(dropped_into[idx])))
                       + " condition")
        if not _is_linear(e, params):
            reason += " [nonlinear in the parameters]"
        elif not (e.free_symbols & set(params)) and e != 0:
            reason += " [no parameter values satisfy this: the form cannot meet the condition]"
        out.append(Restriction(it.kind, _as_eq(e, params), reason, fn_params))
    return out


# --------------------------------------------------------------------------------------
# Dual functions
# --------------------------------------------------------------------------------------
def _working_form(F, logs: _Logs, log_form, is_log):
    """(G, uses_log): G = ln F or F in the log variables."""
    if is_log:
        G_log = _in_logs(F, logs)
        G_lev = None
    else:
        G_log = _in_logs(sp.log(F), logs)
        G_lev = None
    if log_form is None:
        Ls = set(logs.all_logs)
        leftover = [a for a in G_log.atoms(sp.log) if a.free_symbols & Ls]
        log_form = not leftover
    if log_form:
        return G_log, True
    G_lev = _in_logs(sp.exp(F) if is_log else F, logs)
    return G_lev, False


def _euler(G, logs: _Logs, degree, uses_log):
    total = sp.Add(*[sp.diff(G, L) for L in logs.all_logs])
    if uses_log:
        return total - degree
    e = total - degree * G
    # Level form: look at (sum dF/dL - d F)/F, so that powers of a common sum cancel.
    q = sp.powsimp(sp.powdenest(sp.expand(e / G, force=True), force=True), force=True)
    num, _den = sp.fraction(sp.together(q))
    num = _tidy(num)
    if num == 0 or sp.simplify(num) == 0:
        return sp.Integer(0)
    return num


def homogeneous_by_construction(expr, prices, degree=1, *, is_log=False) -> bool:
    """True when ``expr`` is homogeneous of ``degree`` in ``prices`` for every parameter value."""
    F = _sympify(expr)
    prices = _symbols(prices, "price")
    for p in prices:
        if p not in F.free_symbols:
            raise DualityError(f"price {p.name} does not appear in the expression")
    degree = sp.nsimplify(degree)
    logs = _Logs(prices)
    G, uses_log = _working_form(F, logs, None, is_log)
    E = _euler(G, logs, degree, uses_log)
    others = (E.free_symbols - set(logs.L)) | set(logs.L)
    return not _identity_coefficients(E, others)


def derive_restrictions(expr, prices, params, *, degree=1, log_form=None, shares=True,
                        others=None, is_log=False, name="the function",
                        symmetry=True) -> list[Restriction]:
    """Restrictions on ``params`` that make ``expr`` a valid dual function.

    Parameters
    ----------
    expr : sympy expression
        The function F (or ln F when ``is_log=True``).
    prices : sequence of Symbol
        The prices in which F is homogeneous (for profit all of (p, w); for indirect
        utility (p..., m) with ``degree=0``).
    params : sequence of Symbol
        The parameters; every other free symbol is an argument (a level such as y or u),
        or list those in ``others``.
    degree : number
        Degree of homogeneity in ``prices``.
    log_form : bool or None
        Work with ln F (True), with F (False) or choose (None, see the module docstring).
    shares : bool
        Also derive adding-up of the shares d ln F / d ln p_i (only when ``degree == 1``).
    name : str
        What F is, for the reasons ("cost", "expenditure", ...).
    symmetry : bool
        Also derive identification (symmetry) restrictions.

    Returns
    -------
    list of Restriction
        Homogeneity, then adding-up, then symmetry restrictions.  An empty homogeneity
        part means homogeneity holds by construction.
    """
    F = _sympify(expr)
    prices, params, others = _validate([F], prices, params, others)
    try:
        degree = sp.nsimplify(degree)
    except (TypeError, ValueError, sp.SympifyError) as exc:
        raise DualityError(f"degree must be a number, not {degree!r}") from exc
    if not degree.is_number:
        raise DualityError(f"degree must be a number, not {degree!r}")
    logs = _Logs(prices)
    G, uses_log = _working_form(F, logs, log_form, is_log)
    argsyms = set(logs.L) | set(others)
    pnames = ", ".join(p.name for p in prices)
    items: list[_Item] = []

    E = _euler(G, logs, degree, uses_log)
    lhs = "Σ_i ∂ln F/∂ln p_i" if uses_log else "Σ_i p_i ∂F/∂p_i"
    rhs = f"{degree}" if uses_log else f"{degree}·F"
    for basis, coef in _identity_coefficients(E, argsyms, logs.all_logs):
        items.append(_Item(coef, "homogeneity", (
            f"{name} must be homogeneous of degree {degree} in ({pnames}): Euler's identity "
            f"{lhs} = {rhs} must hold for all prices, so the coefficient of "
            f"{_describe_basis(basis, logs)} must vanish")))

    if shares and degree == 1:
        G_log = G if uses_log else _in_logs(sp.log(sp.exp(F) if is_log else F), logs)
        S = sp.Add(*[sp.diff(G_log, L) for L in logs.L]) - 1
        if not uses_log:
            S = E  # numerator of sum of shares minus one is Euler's identity
        for basis, coef in _identity_coefficients(S, argsyms, logs.all_logs):
            items.append(_Item(coef, "adding-up", (
                f"the shares s_i = ∂ln {name}/∂ln p_i of ({pnames}) must sum to one for all "
                f"prices, so the coefficient of {_describe_basis(basis, logs)} in "
                "Σ_i s_i - 1 must vanish")))

    if symmetry:
        items.extend(_identification(G, params, argsyms, name))

    items = _reduce(items, params)
    return _finish(items, params)


def _identification(G, params, argsyms, name) -> list[_Item]:
    out = []
    grads = {a: sp.expand(sp.diff(G, a), force=True) for a in params}
    for a, b in itertools.combinations(params, 2):
        ga, gb = grads[a], grads[b]
        if ga == 0 or gb == 0:
            continue
        if (ga.free_symbols & argsyms) != (gb.free_symbols & argsyms):
            continue
        if _identity_coefficients(ga - gb, argsyms):
            continue
        out.append(_Item(a - b, "symmetry", (
            f"{a.name} and {b.name} enter {name} only through their sum {a.name} + {b.name}, "
            f"so they are not separately identified; symmetry {a.name} = {b.name} "
            "identifies them")))
    return out


# --------------------------------------------------------------------------------------
# Share equations
# --------------------------------------------------------------------------------------
def derive_share_restrictions(shares, prices, params, *, income=None, degree=0,
                              others=None, symmetry=True) -> list[Restriction]:
    """Adding-up, homogeneity and symmetry restrictions of a system of share equations.

    Parameters
    ----------
    shares : sequence of sympy expressions
        s_1, ..., s_n, one per price, in the same order as ``prices``, written with
        unrestricted parameters.
    prices : sequence of Symbol
    params : sequence of Symbol
    income : Symbol, optional
        Total expenditure m.  Homogeneity is then in (p, m) jointly, and symmetry is
        that of the compensated share derivatives.
    degree : number
        Degree of homogeneity of the shares (0).

    Notes
    -----
    * adding-up: Σ_i s_i ≡ 1;
    * homogeneity: Σ_j ∂s_i/∂ln p_j (+ ∂s_i/∂ln m) ≡ degree · s_i for each i;
    * symmetry: the Slutsky matrix p_i p_j S_ij / m = ∂s_i/∂ln p_j + s_j ∂s_i/∂ln m
      + s_i s_j - δ_ij s_i is symmetric, i.e.
      ∂s_i/∂ln p_j + s_j ∂s_i/∂ln m ≡ ∂s_j/∂ln p_i + s_i ∂s_j/∂ln m for i < j
      (without ``income`` the ln m terms are absent: cross effects at fixed levels, e.g.
      cost shares at fixed output).
    """
    if isinstance(shares, sp.Basic) or not isinstance(shares, Sequence):
        raise DualityError("shares must be a list of share equations, one per price")
    S = [_sympify(s, f"share {i + 1}") for i, s in enumerate(shares)]
    if income is not None:
        (income,) = _symbols([income], "income")
    extra = (income,) if income is not None else ()
    prices, params, others = _validate(S, prices, params, others, extra)
    if len(S) != len(prices):
        raise DualityError(f"shares: {len(S)} share equations for {len(prices)} prices")
    degree = sp.nsimplify(degree)
    logs = _Logs(prices, income)
    argsyms = set(logs.all_logs) | set(others)
    SL = [_in_logs(s, logs) for s in S]
    pnames = ", ".join(p.name for p in prices) + (f", {income.name}" if income else "")
    items: list[_Item] = []

    for basis, coef in _identity_coefficients(sp.Add(*SL) - 1, argsyms, logs.all_logs):
        items.append(_Item(coef, "adding-up", (
            f"the shares must sum to one for all ({pnames}), so the coefficient of "
            f"{_describe_basis(basis, logs)} in Σ_i s_i - 1 must vanish")))

    for i, s in enumerate(SL):
        E = sp.Add(*[sp.diff(s, L) for L in logs.all_logs]) - degree * s
        for basis, coef in _identity_coefficients(E, argsyms, logs.all_logs):
            items.append(_Item(coef, "homogeneity", (
                f"share {i + 1} (of {prices[i].name}) must be homogeneous of degree {degree} "
                f"in ({pnames}): the coefficient of {_describe_basis(basis, logs)} in "
                "its Euler identity must vanish")))

    if symmetry:
        for i, j in itertools.combinations(range(len(SL)), 2):
            d = sp.diff(SL[i], logs.L[j]) - sp.diff(SL[j], logs.L[i])
            if logs.M is not None:
                d += SL[j] * sp.diff(SL[i], logs.M) - SL[i] * sp.diff(SL[j], logs.M)
            what = ("compensated cross effects" if logs.M is not None else "cross effects")
            for basis, coef in _identity_coefficients(d, argsyms, logs.all_logs):
                items.append(_Item(coef, "symmetry", (
                    f"Slutsky (Young) symmetry: the {what} of shares {i + 1} and {j + 1} "
                    f"(∂s_{i + 1}/∂ln {prices[j].name} and ∂s_{j + 1}/∂ln {prices[i].name}) "
                    f"must be equal, so the coefficient of {_describe_basis(basis, logs)} "
                    "in their difference must vanish")))

    items = _reduce(items, params)
    return _finish(items, params)


# --------------------------------------------------------------------------------------
# Checking and imposing
# --------------------------------------------------------------------------------------
def check_values(restrictions, values: Mapping, *, tol: float = 1e-9
                 ) -> list[tuple[Restriction, float]]:
    """The restrictions violated by ``values`` (|residual| > tol) with their residuals."""
    restrictions = list(restrictions)
    if not isinstance(values, Mapping):
        raise DualityError("values must be a mapping of parameter names to numbers")
    known = {}
    for r in restrictions:
        if not isinstance(r, Restriction):
            raise DualityError(f"{r!r} is not a Restriction")
        for s in tuple(r.parameters) + r.symbols:
            known[s.name] = s
    for k in values:
        nm = k.name if isinstance(k, sp.Symbol) else k
        if not isinstance(nm, str):
            raise DualityError(f"parameter key {k!r} is neither a name nor a sympy Symbol")
        if nm not in known:
            raise DualityError(f"unknown parameter {nm!r} in values: the restrictions "
                               f"involve {', '.join(sorted(known)) or 'no parameters'}")
    out = []
    for r in restrictions:
        res = r.residual(values)
        if not math.isfinite(res) or abs(res) > tol:
            out.append((r, res))
    return out


def describe_violation(restriction: Restriction, residual: float) -> str:
    """One line naming the violated restriction and the parameters involved."""
    names = ", ".join(s.name for s in restriction.symbols)
    return (f"{restriction.kind} restriction {sp.sstr(restriction.equation)} is violated "
            f"by {residual:.3g} (lhs - rhs); parameters involved: {names}")


def impose(expr, restrictions, params, *, keep=None
           ) -> tuple[sp.Expr, dict, tuple]:
    """Impose linear restrictions by eliminating parameters.

    Parameters not in ``keep`` are eliminated first, and among those the last ones in
    ``params`` order.  Returns ``(reduced expr, {eliminated: expression in kept},
    kept parameters)``.
    """
    F = _sympify(expr)
    params = _symbols(params, "parameter")
    keep = _symbols(keep or (), "kept parameter")
    for k in keep:
        if k not in params:
            raise DualityError(f"kept parameter {k.name} is not one of the parameters")
    exprs = []
    for r in restrictions:
        if not isinstance(r, Restriction):
            raise DualityError(f"{r!r} is not a Restriction")
        stray = r.expr.free_symbols - set(params)
        if stray:
            raise DualityError(f"restriction {sp.sstr(r.equation)} involves "
                               f"{sorted(s.name for s in stray)[0]}, which is not a parameter")
        if not _is_linear(r.expr, params):
            raise DualityError(f"restriction {sp.sstr(r.equation)} is nonlinear in the "
                               "parameters and cannot be imposed by elimination")
        exprs.append(r.expr)
    mapping, pivots = _solve_linear(exprs, params, keep=keep)
    forced = [p.name for p in pivots if p in keep]
    if forced:
        raise DualityError(f"cannot keep parameter {forced[0]}: the restrictions determine it")
    reduced = F.xreplace(mapping) if mapping else F
    kept = tuple(p for p in params if p not in mapping)
    return reduced, mapping, kept

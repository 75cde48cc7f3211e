"""Inputs, the decomposition of identities in logs, and the linear algebra of restrictions."""
from __future__ import annotations

import math

import sympy as sp

from ...errors import DualityError
from .record import Restriction, _is_linear


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

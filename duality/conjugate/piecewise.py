"""Piecewise-linear functions: exact conjugates from the break points."""
from __future__ import annotations


import sympy as sp

from .common import _Raw

CONVENTIONS = ("sup", "intercept")
ROUTES = ("legendre", "fenchel", "numeric")
KINDS = ("legendre", "fenchel")

oo = sp.oo



# ---------------------------------------------------------------------------------------
# piecewise-linear functions
# ---------------------------------------------------------------------------------------

_KINKS = (sp.Abs, sp.Max, sp.Min)


def _pl_breakpoints(f, x):
    """Break points of f if f is piecewise linear in x with numeric coefficients."""
    if f.free_symbols - {x}:
        return None
    if not f.has(x):
        return set()
    if isinstance(f, sp.Add):
        out = set()
        for t in f.args:
            b = _pl_breakpoints(t, x)
            if b is None:
                return None
            out |= b
        return out
    if isinstance(f, sp.Mul):
        dep = [a for a in f.args if a.has(x)]
        if len(dep) != 1:
            return None
        return _pl_breakpoints(dep[0], x)
    if isinstance(f, _KINKS):
        out = set()
        for a in f.args:
            b = _pl_breakpoints(a, x)
            if b is None:
                return None
            out |= b
        if isinstance(f, sp.Abs):
            diffs = [f.args[0]]
        else:
            diffs = [a - b for i, a in enumerate(f.args) for b in f.args[i + 1:]]
        for g in diffs:
            out |= _pl_zeros(g, x, out)
        return out
    if f == x:
        return set()
    return None


def _pl_zeros(g, x, bps):
    pts = sorted(bps)
    edges = [-oo] + pts + [oo]
    zeros = set()
    for a, b in zip(edges[:-1], edges[1:]):
        if a == -oo and b == oo:
            t1, t2 = sp.S.Zero, sp.S.One
        elif a == -oo:
            t1, t2 = b - 2, b - 1
        elif b == oo:
            t1, t2 = a + 1, a + 2
        else:
            t1, t2 = a, b
        g1, g2 = g.subs(x, t1), g.subs(x, t2)
        if g1 == g2:
            continue
        r = sp.nsimplify(t1 - g1 * (t2 - t1) / (g2 - g1))
        if a <= r <= b:
            zeros.add(r)
    return zeros


def _pl_conjugate(f, x, p, dom, bps) -> _Raw:
    lo, hi = dom.start, dom.end
    cands = sorted(b for b in bps if lo <= b <= hi)
    for e in (lo, hi):
        if e.is_finite and e not in cands:
            cands.append(e)
    cands = sorted(set(cands))
    fv = lambda t: sp.nsimplify(f.subs(x, t))  # noqa: E731
    notes = []
    ref = cands or [sp.S.Zero]
    s_minus = s_plus = None
    if lo == -oo:
        A = min(ref) - 1
        s_minus = fv(A) - fv(A - 1)
    if hi == oo:
        B = max(ref) + 1
        s_plus = fv(B + 1) - fv(B)
    # convexity of the piecewise linear function: slopes non-decreasing
    seg_pts = [cands[0] - 1] + cands + [cands[-1] + 1] if cands else [0, 1]
    slopes = [(fv(b) - fv(a)) / (b - a) for a, b in zip(seg_pts[:-1], seg_pts[1:])
              if a != b]
    convex = all(s2 >= s1 for s1, s2 in zip(slopes[:-1], slopes[1:]))
    if not convex:
        notes.append("f is piecewise linear but not convex; the result is the conjugate of "
                     "its convex envelope")
    if not cands:  # affine on the whole line
        c = fv(0)
        notes.append(f"f is affine with slope {s_plus}: f* is the indicator of "
                     f"{{{s_plus}}} shifted by {-c}")
        expr = sp.Piecewise((-c, sp.Eq(p, s_plus)), (sp.oo, True))
        return _Raw(expr, "fenchel", "fenchel", {}, sp.FiniteSet(s_plus), notes)
    if s_minus is not None and s_plus is not None and s_minus > s_plus:
        notes.append(f"the slopes at −∞ ({s_minus}) exceed those at +∞ ({s_plus}): "
                     f"p·x − f(x) is unbounded above for every p")
        return _Raw(sp.oo, "fenchel", "fenchel", {}, sp.S.EmptySet, notes)
    val = sp.Max(*[p * b - fv(b) for b in cands])
    conds = []
    if s_minus is not None:
        conds.append(p >= s_minus)
    if s_plus is not None:
        conds.append(p <= s_plus)
    notes.append("f is piecewise linear: f*(p) = max over the break points b of "
                 "p·b − f(b), finite between the limiting slopes")
    if conds:
        expr = sp.Piecewise((val, sp.And(*conds)), (sp.oo, True))
        domain = sp.Interval(s_minus if s_minus is not None else -oo,
                             s_plus if s_plus is not None else oo)
    else:
        expr, domain = val, None
    return _Raw(expr, "fenchel", "fenchel", {}, domain, notes)

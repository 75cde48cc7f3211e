"""Nested CES: CES and Cobb–Douglas aggregates of CES and Cobb–Douglas aggregates, to any
depth, e.g. the two-level CES

    g(x) = b1 (a1 x1**r + a2 x2**r)**(rho/r) + b2 x3**rho.

Every aggregate is read as constant returns to scale (a CES sum (Σ a_j A_j**r)**(1/r), or a
product Π A_j**alpha_j with Σ alpha_j = 1), so the core is X**rho for the top aggregate X.
The unit cost of an aggregate is built from the unit costs of its parts, level by level
(Sato 1967): a CES node with sigma = 1/(1 − r) has

    c = (Σ a_j**sigma c_j**(1 − sigma))**(1/(1 − sigma)),

a Cobb–Douglas node c = Π (c_j / alpha_j)**alpha_j, an input its price.  The cost of
core level g0 is g0**(1/rho) c(w) and the demands are its price derivatives (Shephard's
lemma).
"""
from __future__ import annotations


import sympy as sp

from .base import CoreSolution, Form, free_of, positive_condition

# A node is ("x", symbol) | ("ces", r, ((weight, node), ...)) | ("cd", ((alpha, node), ...))


def _power(expr, xs):
    """(node, d) with expr = A**d for a constant-returns aggregate A, else None."""
    if expr in xs:
        return ("x", expr), sp.Integer(1)
    if isinstance(expr, sp.Pow) and free_of(expr.exp, xs):
        if expr.base in xs:
            return ("x", expr.base), expr.exp
        inner = _power(expr.base, xs)
        if inner is None:
            return None
        return inner[0], inner[1] * expr.exp
    if isinstance(expr, sp.Add):
        return _sum(expr, xs)
    if isinstance(expr, sp.Mul):
        coeff, rest = expr.as_independent(*xs, as_Add=False)
        if coeff != 1:
            return None
        parts = [_power(f, xs) for f in sp.Mul.make_args(rest)]
        if any(p is None for p in parts) or len(parts) < 2:
            return None
        D = sp.Add(*[d for _, d in parts])
        if D == 0:
            return None
        return ("cd", tuple((d / D, node) for node, d in parts)), D
    return None


def _sum(expr, xs):
    """(CES node, r) with expr = (Σ a_j A_j**r) = A**r, else None."""
    parts, r = [], None
    for term in sp.Add.make_args(expr):
        coeff, rest = term.as_independent(*xs, as_Add=False)
        if rest == 1:
            return None                       # an added constant inside: not CES
        got = _power(rest, xs)
        if got is None:
            return None
        node, d = got
        if r is None:
            r = d
        elif sp.simplify(d - r) != 0:
            return None
        parts.append((coeff, node))
    if r is None or r == 0 or r == 1 or len(parts) < 2:
        return None
    return ("ces", r, tuple(parts)), r


def _leaves(node) -> list:
    if node[0] == "x":
        return [node[1]]
    kids = node[2] if node[0] == "ces" else node[1]
    return [x for _, k in kids for x in _leaves(k)]


def _nested(node) -> bool:
    """True when some part of the top aggregate is itself an aggregate."""
    kids = node[2] if node[0] == "ces" else node[1]
    return any(k[0] != "x" for _, k in kids)


def unit_cost(node, price: dict) -> sp.Expr:
    """Unit cost of a constant-returns aggregate, built from its parts (Sato 1967)."""
    if node[0] == "x":
        return price[node[1]]
    if node[0] == "cd":
        return sp.Mul(*[(unit_cost(k, price) / a) ** a for a, k in node[1]])
    r, kids = node[1], node[2]
    sigma = 1 / (1 - r)
    return sp.Add(*[a ** sigma * unit_cost(k, price) ** (1 - sigma) for a, k in kids]) \
        ** (1 / (1 - sigma))


def _conditions(node) -> list:
    if node[0] == "x":
        return []
    if node[0] == "cd":
        out = [c for a, _ in node[1] for c in positive_condition(a)]
        return out + [c for _, k in node[1] for c in _conditions(k)]
    r, kids = node[1], node[2]
    out = [c for a, _ in kids for c in positive_condition(a)]
    out += positive_condition(1 - r)          # quasi-concave aggregate
    if not r.is_nonzero:
        out.append(sp.Ne(r, 0))
    return out + [c for _, k in kids for c in _conditions(k)]


class NestedCES(Form):
    key = "nested_ces"
    title = "nested CES (CES and Cobb–Douglas aggregates of aggregates)"
    positive_core = True
    source = ("Sato, Review of Economic Studies 34 (1967), 'A two-level constant-elasticity-"
              "of-substitution production function' (unit cost of a nest from the unit "
              "costs of its parts); Varian, Microeconomic Analysis, 3rd ed. (1992), ch. 4 "
              "(CES and Cobb–Douglas cost functions) (from memory)")

    def match(self, core, xs):
        got = _power(core, list(xs))
        if got is None:
            return None
        node, rho = got
        if node[0] == "x" or not _nested(node):
            return None
        leaves = _leaves(node)
        if len(leaves) != len(set(leaves)) or set(leaves) != set(xs):
            return None
        return {"tree": node, "rho": rho}

    def requirements(self, pieces, xs):
        conds = _conditions(pieces["tree"])
        rho = pieces["rho"]
        if not rho.is_nonzero:
            conds.append(sp.Ne(rho, 0))
        return conds

    def _unit(self, pieces, xs, ws):
        return unit_cost(pieces["tree"], dict(zip(xs, ws)))

    def solve(self, pieces, xs, ws, g0):
        """Notes
        -----
        g = X**rho with X constant returns: c = g0**(1/rho) c_X(w), x_i = g0**(1/rho)
        ∂c_X/∂w_i (Shephard's lemma).
        """
        c = self._unit(pieces, xs, ws)
        scale = g0 ** (1 / pieces["rho"])
        return CoreSolution(scale * c, tuple(scale * sp.diff(c, w) for w in ws))

    def level(self, pieces, xs, ws, spend):
        c = self._unit(pieces, xs, ws)
        return (spend / c) ** pieces["rho"], ()


__all__ = ["NestedCES", "unit_cost"]

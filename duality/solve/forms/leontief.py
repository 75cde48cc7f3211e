"""Leontief (fixed proportions): g(x) = min_i c_i x_i with c_i > 0."""
from __future__ import annotations

import sympy as sp

from .base import CoreSolution, Form, free_of, positive_condition


class Leontief(Form):
    key = "leontief"
    title = "Leontief (fixed proportions)"
    positive_core = True
    source = ("Varian, Microeconomic Analysis, 3rd ed. (1992), ch. 4 (Leontief cost "
              "function) and ch. 7 (perfect complements) (from memory)")

    def match(self, core, xs):
        if not isinstance(core, sp.Min):
            return None
        c: dict[sp.Symbol, sp.Expr] = {}
        for arg in core.args:
            coeff, rest = arg.as_independent(*xs, as_Add=False)
            if rest not in xs or rest in c or not free_of(coeff, xs):
                return None
            c[rest] = coeff
        if set(c) != set(xs):
            return None
        return {"c": tuple(c[x] for x in xs)}

    def requirements(self, pieces, xs):
        return [cond for cj in pieces["c"] for cond in positive_condition(cj)]

    def solve(self, pieces, xs, ws, g0):
        """Notes
        -----
        x_i = g0 / c_i,  c = g0 * sum_j w_j / c_j: the kink is the cheapest point whatever
        the prices, so demands do not respond to prices.
        """
        c = pieces["c"]
        return CoreSolution(g0 * sp.Add(*[w / cj for w, cj in zip(ws, c)]),
                            tuple(g0 / cj for cj in c),
                            notes=("fixed proportions: the cost-minimising bundle sits at the "
                                   "kink of the isoquant whatever the prices",))

    def level(self, pieces, xs, ws, spend):
        c = pieces["c"]
        return spend / sp.Add(*[w / cj for w, cj in zip(ws, c)]), ()

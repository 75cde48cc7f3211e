"""Linear (perfect substitutes): g(x) = sum_i a_i x_i with a_i > 0."""
from __future__ import annotations

import sympy as sp

from .base import CoreSolution, Form, free_of, positive_condition


class Linear(Form):
    key = "linear"
    title = "linear (perfect substitutes)"
    positive_core = True
    source = ("Varian, Microeconomic Analysis, 3rd ed. (1992), ch. 4 (linear technology "
              "cost function) and ch. 7 (perfect substitutes) (from memory)")

    def match(self, core, xs):
        terms = sp.Add.make_args(core)
        a: dict[sp.Symbol, sp.Expr] = {}
        for t in terms:
            coeff, rest = t.as_independent(*xs, as_Add=False)
            if rest not in xs or rest in a or not free_of(coeff, xs):
                return None
            a[rest] = coeff
        if set(a) != set(xs) or len(xs) < 2:
            return None
        return {"a": tuple(a[x] for x in xs)}

    def requirements(self, pieces, xs):
        return [c for aj in pieces["a"] for c in positive_condition(aj)]

    def solve(self, pieces, xs, ws, g0):
        """Notes
        -----
        c = g0 * min_j w_j / a_j; all of g0 is bought from the input with the lowest
        price per unit of contribution (a corner solution).
        """
        a = pieces["a"]
        ratios = [w / aj for w, aj in zip(ws, a)]
        demands = []
        for i, (ri, ai) in enumerate(zip(ratios, a)):
            cheapest = sp.And(*[ri < rj for rj in ratios[:i]], *[ri <= rj for rj in ratios[i + 1:]])
            demands.append(sp.Piecewise((g0 / ai, cheapest), (0, True)))
        return CoreSolution(g0 * sp.Min(*ratios), tuple(demands),
                            notes=("corner solution: only the input (good) with the lowest "
                                   "price per unit of contribution is used; at a tie any split "
                                   "is optimal and the first of the tied ones is reported",))

    def level(self, pieces, xs, ws, spend):
        a = pieces["a"]
        return spend * sp.Max(*[aj / w for w, aj in zip(ws, a)]), ()

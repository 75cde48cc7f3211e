"""Stone–Geary: g(x) = prod_i (x_i - gamma_i)**b_i with b_i > 0 (linear expenditure system)."""
from __future__ import annotations

import sympy as sp

from .base import CoreSolution, Form, free_of, positive_condition
from .cobb_douglas import CobbDouglas


class StoneGeary(Form):
    key = "stone_geary"
    title = "Stone–Geary (linear expenditure system)"
    positive_core = True
    source = ("Stone, Economic Journal 64 (1954), 'Linear expenditure systems and demand "
              "analysis'; Geary, Review of Economic Studies 18 (1950); Deaton and "
              "Muellbauer, Economics and Consumer Behavior (1980), §3.1 (from memory)")

    def match(self, core, xs):
        b: dict[sp.Symbol, sp.Expr] = {}
        g: dict[sp.Symbol, sp.Expr] = {}
        for f in sp.Mul.make_args(core):
            base, e = f.as_base_exp()
            if not free_of(e, xs):
                return None
            shift, rest = base.as_independent(*xs, as_Add=True)
            if rest not in xs or rest in b:
                return None
            b[rest], g[rest] = e, -shift
        if set(b) != set(xs) or all(v == 0 for v in g.values()):
            return None
        # a negative subsistence quantity (log(1 + x1)) lets the linear expenditure system
        # demand a negative amount at low income or a high price: the optimum is then a
        # corner on x_i >= 0, which these closed forms do not give, so another route solves it
        if any(v.is_negative for v in g.values()):
            return None
        return {"b": tuple(b[x] for x in xs), "gamma": tuple(g[x] for x in xs)}

    def requirements(self, pieces, xs):
        return [c for bj in pieces["b"] for c in positive_condition(bj)]

    def solve(self, pieces, xs, ws, g0):
        """Notes
        -----
        Subsistence quantities gamma_i are bought first; the rest is a Cobb–Douglas problem
        in x_i - gamma_i:  c = sum_j w_j gamma_j + CD cost(g0).
        """
        cd = CobbDouglas().solve({"a": pieces["b"]}, xs, ws, g0)
        base = sp.Add(*[w * gj for w, gj in zip(ws, pieces["gamma"])])
        return CoreSolution(base + cd.value,
                            tuple(gj + d for gj, d in zip(pieces["gamma"], cd.demands)))

    def level(self, pieces, xs, ws, spend):
        base = sp.Add(*[w * gj for w, gj in zip(ws, pieces["gamma"])])
        lvl, _ = CobbDouglas().level({"a": pieces["b"]}, xs, ws, spend - base)
        return lvl, (sp.StrictGreaterThan(spend - base, 0),)

    def marshallian(self, pieces, xs, ws, m):
        b, gamma = pieces["b"], pieces["gamma"]
        B = sp.Add(*b)
        base = sp.Add(*[w * gj for w, gj in zip(ws, gamma)])
        return tuple(gj + bj / B * (m - base) / w for w, bj, gj in zip(ws, b, gamma))

"""Cobb–Douglas: g(x) = prod_i x_i**a_i with a_i > 0, any number of quantities."""
from __future__ import annotations

import sympy as sp

from .base import CoreSolution, Form, free_of, positive_condition


class CobbDouglas(Form):
    key = "cobb_douglas"
    title = "Cobb–Douglas"
    positive_core = True
    source = ("Varian, Microeconomic Analysis, 3rd ed. (1992), ch. 4 (cost) and ch. 7 "
              "(demand); Mas-Colell, Whinston and Green, Microeconomic Theory (1995), "
              "Examples 3.D.1 and 3.E.1 (from memory)")

    def match(self, core, xs):
        factors = sp.Mul.make_args(core)
        exps: dict[sp.Symbol, sp.Expr] = {}
        for f in factors:
            base, e = f.as_base_exp()
            if base in xs and free_of(e, xs) and base not in exps:
                exps[base] = e
            else:
                return None
        if set(exps) != set(xs) or len(xs) < 2:
            return None
        return {"a": tuple(exps[x] for x in xs)}

    def requirements(self, pieces, xs):
        return [c for a in pieces["a"] for c in positive_condition(a)]

    def solve(self, pieces, xs, ws, g0):
        """Notes
        -----
        x_i = (a_i/w_i) g0**(1/k) prod_j (w_j/a_j)**(a_j/k),  c = k g0**(1/k) prod_j (w_j/a_j)**(a_j/k),
        k = sum a_j.
        """
        a = pieces["a"]
        k = sp.Add(*a)
        common = g0 ** (1 / k) * sp.Mul(*[(w / aj) ** (aj / k) for w, aj in zip(ws, a)])
        return CoreSolution(k * common, tuple(aj / w * common for w, aj in zip(ws, a)))

    def level(self, pieces, xs, ws, spend):
        a = pieces["a"]
        k = sp.Add(*a)
        return (spend / (k * sp.Mul(*[(w / aj) ** (aj / k) for w, aj in zip(ws, a)]))) ** k, ()

    def marshallian(self, pieces, xs, ws, m):
        a = pieces["a"]
        k = sp.Add(*a)
        return tuple(aj / k * m / w for w, aj in zip(ws, a))

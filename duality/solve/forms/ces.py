"""CES: g(x) = sum_i d_i x_i**rho with d_i > 0, rho < 1, rho != 0 (n quantities)."""
from __future__ import annotations

import sympy as sp

from .base import CoreSolution, Form, free_of, positive_condition


class CES(Form):
    key = "ces"
    title = "CES (constant elasticity of substitution)"
    positive_core = True
    source = ("Arrow, Chenery, Minhas and Solow, Review of Economics and Statistics 43 (1961); "
              "Varian, Microeconomic Analysis, 3rd ed. (1992), ch. 4 (CES cost function) "
              "(from memory)")

    def match(self, core, xs):
        if not isinstance(core, sp.Add):
            return None
        d: dict[sp.Symbol, sp.Expr] = {}
        rho = None
        for term in core.args:
            coeff, rest = term.as_independent(*xs, as_Add=False)
            base, e = rest.as_base_exp()
            if base not in xs or base in d or not free_of(e, xs):
                return None
            if rho is None:
                rho = e
            elif sp.simplify(e - rho) != 0:
                return None
            d[base] = coeff
        if set(d) != set(xs) or rho is None or rho == 1 or rho == 0:
            return None
        return {"d": tuple(d[x] for x in xs), "rho": rho}

    def requirements(self, pieces, xs):
        rho = pieces["rho"]
        conds = [c for dj in pieces["d"] for c in positive_condition(dj)]
        conds += positive_condition(1 - rho)  # quasi-concave: the tangency is a minimum
        if not rho.is_nonzero:
            conds.append(sp.Ne(rho, 0))
        return conds

    def solve(self, pieces, xs, ws, g0):
        """Notes
        -----
        sigma = 1/(1-rho), S = sum_j d_j**sigma w_j**(1-sigma),
        x_i = g0**(1/rho) (d_i/w_i)**sigma S**(-1/rho),  c = g0**(1/rho) S**(1/(1-sigma)).
        """
        d, rho = pieces["d"], pieces["rho"]
        sigma = 1 / (1 - rho)
        S = sp.Add(*[dj ** sigma * w ** (1 - sigma) for dj, w in zip(d, ws)])
        value = g0 ** (1 / rho) * S ** ((rho - 1) / rho)
        demands = tuple(g0 ** (1 / rho) * (dj / w) ** sigma * S ** (-1 / rho)
                        for dj, w in zip(d, ws))
        return CoreSolution(value, demands)

    def level(self, pieces, xs, ws, spend):
        d, rho = pieces["d"], pieces["rho"]
        sigma = 1 / (1 - rho)
        S = sp.Add(*[dj ** sigma * w ** (1 - sigma) for dj, w in zip(d, ws)])
        return (spend * S ** ((1 - rho) / rho)) ** rho, ()

    def marshallian(self, pieces, xs, ws, m):
        d, rho = pieces["d"], pieces["rho"]
        sigma = 1 / (1 - rho)
        S = sp.Add(*[dj ** sigma * w ** (1 - sigma) for dj, w in zip(d, ws)])
        return tuple(m * dj ** sigma * w ** (-sigma) / S for dj, w in zip(d, ws))

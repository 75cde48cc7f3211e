"""Quasi-linear: g(x) = a*x_k + sum_j phi_j(x_j), linear in one numeraire quantity x_k.

Each phi_j is a strictly concave function of its own quantity whose first-order condition
phi_j'(x_j) = q has one positive solution that sympy finds in closed form (log and power
terms, say).
"""
from __future__ import annotations

import sympy as sp

from ..budget import run_with_budget
from .base import CoreSolution, Form, positive_condition

_q = sp.Symbol("q_", positive=True)

#: Seconds allowed to solve phi'(x) = q when matching (in a worker process, counting its
#: start-up, which takes seconds on a busy machine; the solves themselves take a fraction).
MATCH_BUDGET = 5.0


_t = sp.Symbol("t_", real=True)


def _level_roots(phi, x):
    """Positive solutions of phi(x) = t (run in a worker under a time budget)."""
    xp = sp.Symbol("xp_", positive=True)
    return [s for s in sp.solve(sp.Eq(phi.subs(x, xp), _t), xp) if s.is_real is not False]


def _marginal_roots(phi, x):
    """Positive solutions of phi'(x) = q (run in a worker under a time budget)."""
    xp = sp.Symbol("xp_", positive=True)
    return [s for s in sp.solve(sp.Eq(sp.diff(phi, x).subs(x, xp), _q), xp)
            if s.is_real is not False]


class QuasiLinear(Form):
    key = "quasi_linear"
    title = "quasi-linear"
    source = ("Mas-Colell, Whinston and Green, Microeconomic Theory (1995), §3.B–3.E "
              "(quasilinear preferences); Varian, Microeconomic Analysis, 3rd ed. (1992), "
              "ch. 7 (from memory)")

    def match(self, core, xs):
        if not isinstance(core, sp.Add) or len(xs) < 2:
            return None
        linear, phis = {}, {}
        for t in core.args:
            syms = t.free_symbols & set(xs)
            if len(syms) != 1:
                return None
            (x,) = syms
            coeff, rest = t.as_independent(*xs, as_Add=False)
            if rest == x:
                linear[x] = coeff
            else:
                phis[x] = phis.get(x, 0) + t
        if len(linear) != 1 or set(linear) | set(phis) != set(xs) or set(linear) & set(phis):
            return None
        (k,) = linear
        roots = {}
        for x, phi in phis.items():
            d2 = sp.diff(phi, x, 2)
            if d2.is_negative is False and d2.is_number:
                return None
            try:  # sympy may fail or take long on an unusual phi: then it is not this form
                sols = run_with_budget(_marginal_roots, phi, x, budget=MATCH_BUDGET)
            except Exception:  # noqa: BLE001 - BudgetExceeded, NotImplementedError, ...
                return None
            if len(sols) != 1:
                return None
            roots[x] = sols[0]
        inverse = None
        if len(phis) == 1:  # the corner x_k = 0 has a closed form when phi inverts
            (x, phi), = phis.items()
            try:
                inv = run_with_budget(_level_roots, phi, x, budget=MATCH_BUDGET)
            except Exception:  # noqa: BLE001 - no inverse: the corner stays unsolved
                inv = []
            inverse = inv[0] if len(inv) == 1 else None
        return {"numeraire": k, "a": linear[k], "phi": phis, "root": roots,
                "inverse": inverse}

    def requirements(self, pieces, xs):
        return positive_condition(pieces["a"])

    def _interior(self, pieces, xs, ws):
        k, a = pieces["numeraire"], pieces["a"]
        wk = ws[xs.index(k)]
        xo = {}
        for x, r in pieces["root"].items():
            # phi_j'(x_j) = a w_j / w_k; when phi_j is finite at 0 and its marginal there
            # is below the price ratio, the good is not bought (Kuhn–Tucker: x_j = 0)
            r = r.subs(_q, a * ws[xs.index(x)] / wk)
            phi0 = pieces["phi"][x].subs(x, 0)
            if r.is_positive or not (phi0.is_finite and phi0.is_real):
                xo[x] = r
            else:
                xo[x] = sp.Piecewise((r, r > 0), (sp.Integer(0), True))
        phi = sp.Add(*[p.subs(x, xo[x]) for x, p in pieces["phi"].items()])
        spend_o = sp.Add(*[ws[xs.index(x)] * v for x, v in xo.items()])
        return k, a, wk, xo, phi, spend_o

    def _positive(self, pieces, xs, ws) -> tuple:
        """Conditions that the non-numeraire quantities are positive where no corner
        formula covers them (phi_j infinite at 0 but the root's sign unknown)."""
        k, a, wk, xo, _, _ = self._interior(pieces, xs, ws)
        return tuple(sp.StrictGreaterThan(v, 0) for v in xo.values()
                     if not v.is_positive and not isinstance(v, sp.Piecewise))

    def solve(self, pieces, xs, ws, g0):
        """Notes
        -----
        phi_j'(x_j) = a w_j / w_k fixes the non-numeraire quantities; the numeraire buys
        the rest: x_k = (g0 - phi(x_o)) / a, interior only when that is positive.  With
        one non-numeraire good j the corner below is solved too (Kuhn–Tucker: x_k = 0 and
        phi(x_j) = g0, so x_j = phi^{-1}(g0)).
        """
        k, a, wk, xo, phi, spend_o = self._interior(pieces, xs, ws)
        xk = (g0 - phi) / a
        demands = tuple(xk if x == k else xo[x] for x in xs)
        value = spend_o + wk * xk
        inverse = pieces.get("inverse")
        if inverse is None:
            return CoreSolution(value, demands,
                                conditions=(sp.StrictGreaterThan(xk, 0),)
                                + self._positive(pieces, xs, ws),
                                notes=(f"interior solution: valid while the numeraire {k} "
                                       "is bought in positive amount",))
        (j,) = xo
        xj = inverse.subs(_t, g0)
        inside = sp.StrictGreaterThan(g0, phi)
        corner = {k: sp.Integer(0), j: xj}
        return CoreSolution(
            sp.Piecewise((value, inside), (ws[xs.index(j)] * xj, True)),
            tuple(sp.Piecewise((d, inside), (corner[x], True)) for x, d in zip(xs, demands)),
            conditions=self._positive(pieces, xs, ws),
            notes=(f"corner solution (none of the numeraire {k} bought) where the level is "
                   "at or below what the other good gives at its interior quantity",))

    def level(self, pieces, xs, ws, spend):
        k, a, wk, xo, phi, spend_o = self._interior(pieces, xs, ws)
        interior = a * (spend - spend_o) / wk + phi
        if pieces.get("inverse") is None:
            return interior, (sp.StrictGreaterThan(spend - spend_o, 0),) \
                + self._positive(pieces, xs, ws)
        (j,), (phij,) = xo, pieces["phi"].values()
        at_corner = phij.subs(j, spend / ws[xs.index(j)])
        return (sp.Piecewise((interior, spend > spend_o), (at_corner, True)),
                self._positive(pieces, xs, ws))

    def marshallian(self, pieces, xs, ws, m):
        k, a, wk, xo, phi, spend_o = self._interior(pieces, xs, ws)
        interior = tuple((m - spend_o) / wk if x == k else xo[x] for x in xs)
        if pieces.get("inverse") is None:
            return interior
        (j,) = xo
        corner = {k: sp.Integer(0), j: m / ws[xs.index(j)]}
        return tuple(sp.Piecewise((d, m > spend_o), (corner[x], True))
                     for x, d in zip(xs, interior))

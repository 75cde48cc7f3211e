"""Concavity of a translog cost function imposed at a reference point.

A translog cost function is concave in prices at a point where its shares are s iff

    M = Γ + s s' − diag(s)  is negative semidefinite

(Diewert and Wales, 'Flexible functional forms and global curvature conditions',
Econometrica 55 (1987); from memory).  At the reference point where every price and the
output equal one, s = a.  Homogeneity gives Γ 1 = 0 and Σ a = 1, hence M 1 = 0, and M is
negative semidefinite iff its leading (n−1)×(n−1) block is.  Writing that block as −L L'
with L lower triangular (Lau 1978, a Cholesky reparametrisation, from memory),

    Γ̃ = −L L' − ã ã' + diag(ã),

so every value of L gives a cost function concave at the reference point and every such
function has some L.  The equations become nonlinear in (a, L) and are estimated by
nonlinear least squares, started from the unconstrained estimate projected onto the
concave set.  Divide prices and output by their sample means to make the reference point
the sample mean.
"""
from __future__ import annotations

from dataclasses import replace

import numpy as np
import sympy as sp

from ...errors import DualityError
from .equations import EquationSystem


def _g(sym, i, j):
    a, b = sorted((i, j))
    return sym.get(f"g{a + 1}{b + 1}")


def concave_at_reference(system: EquationSystem) -> tuple[EquationSystem, dict]:
    """The system with the free second-order price parameters of a translog cost replaced
    by Γ̃ = −L L' − ã ã' + diag(ã); returns it and {l symbol: (i, j)}."""
    model = system.model
    if model.form != "translog_cost":
        raise DualityError("curvature='local' is available for translog cost functions "
                           "(concavity at the reference point); use curvature='check'")
    sym = {p.name: p.symbol for p in model.params}
    n = len(model.prices)
    free = set(system.free)
    gt = [[_g(sym, i, j) for j in range(n - 1)] for i in range(n - 1)]
    a = [sym[f"a{i + 1}"] for i in range(n - 1)]
    needed = {g for row in gt for g in row} | set(a)
    if not needed <= free:
        held = sorted(p.name for p in needed - free)
        raise DualityError(f"curvature='local' needs {', '.join(held)} free (not fixed, and "
                           "the last share dropped)")
    L = {}
    for i in range(n - 1):
        for j in range(i + 1):
            L[sp.Symbol(f"l{i + 1}{j + 1}", real=True)] = (i, j)
    Lm = sp.zeros(n - 1, n - 1)
    for s_, (i, j) in L.items():
        Lm[i, j] = s_
    A = sp.Matrix(a)
    G = -Lm * Lm.T - A * A.T + sp.diag(*a)
    repl = {gt[i][j]: sp.expand(G[i, j]) for i in range(n - 1) for j in range(i, n - 1)}
    eqs = tuple(replace(e, rhs=sp.expand(e.rhs.xreplace(repl))) for e in system.equations)
    new_free = tuple(p for p in system.free if p not in repl) + tuple(L)
    derived = {k: sp.expand(v.xreplace(repl)) for k, v in system.derived.items()}
    derived.update(repl)
    how = dict(system.derived_how)
    how.update({g: "from curvature" for g in repl})
    note = ("concavity imposed at the point where every price and the output equal one: "
            "Γ̃ = −LL' − ãã' + diag(ã) (Diewert and Wales 1987)")
    return replace(system, equations=eqs, free=new_free, derived=derived, linear=False,
                   derived_how=how, notes=system.notes + (note,)), L


def start_values(system: EquationSystem, concave: EquationSystem, L: dict,
                 unconstrained: dict) -> np.ndarray:
    """Start values: the unconstrained estimates, with M̃ projected onto the negative
    semidefinite matrices and factored (Cholesky with a small ridge)."""
    model = system.model
    n = len(model.prices)
    a = np.array([unconstrained[f"a{i + 1}"] for i in range(n - 1)])
    Gt = np.array([[unconstrained["g%d%d" % tuple(sorted((i + 1, j + 1)))]
                    for j in range(n - 1)] for i in range(n - 1)])
    M = Gt + np.outer(a, a) - np.diag(a)
    w, v = np.linalg.eigh(-M)
    P = (v * np.clip(w, 1e-6, None)) @ v.T
    C = np.linalg.cholesky(P)
    vals = dict(unconstrained)
    for s_, (i, j) in L.items():
        vals[s_.name] = C[i, j]
    return np.array([vals[p.name] for p in concave.free])


__all__ = ["concave_at_reference", "start_values"]

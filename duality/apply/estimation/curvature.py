"""Concavity of a translog cost function imposed at a reference point (and, further down,
the Slutsky condition of an Almost Ideal system).

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


def lower_factor(k: int, letter: str = "l") -> tuple[dict, sp.Matrix]:
    """A k×k lower-triangular matrix of new symbols ``<letter>11, <letter>21, …``;
    returns {symbol: (i, j)} and the matrix."""
    factor, M = {}, sp.zeros(k, k)
    for i in range(k):
        for j in range(i + 1):
            s_ = sp.Symbol(f"{letter}{i + 1}{j + 1}", real=True)
            factor[s_] = (i, j)
            M[i, j] = s_
    return factor, M


def reparametrised(system: EquationSystem, repl: dict, factor: dict, note: str, *,
                   expand: bool = True) -> EquationSystem:
    """``system`` with the parameters in ``repl`` written through the new free symbols of
    ``factor`` (the replaced ones reported as derived "from curvature")."""
    tidy = sp.expand if expand else (lambda e: e)
    eqs = tuple(replace(e, rhs=tidy(e.rhs.xreplace(repl))) for e in system.equations)
    new_free = tuple(p for p in system.free if p not in repl) + tuple(factor)
    derived = {k: tidy(v.xreplace(repl)) for k, v in system.derived.items()}
    derived.update(repl)
    how = dict(system.derived_how)
    how.update({g: "from curvature" for g in repl})
    return replace(system, equations=eqs, free=new_free, derived=derived, linear=False,
                   derived_how=how, notes=system.notes + (note,))


def factored_start(M: np.ndarray, factor: dict, concave: EquationSystem, unconstrained: dict,
                   floor: float | None = 1e-6) -> np.ndarray:
    """Start values of a reparametrised system: the unconstrained estimates, with −M
    projected onto the positive semidefinite matrices (eigenvalues clipped at ``floor``;
    ``None``: 1e-6 of the largest, a small ridge that keeps the factor defined) and
    factored by Cholesky into the symbols of ``factor``."""
    w, v = np.linalg.eigh(-M)
    if floor is None:
        floor = max(1e-8, 1e-6 * float(np.abs(w).max()))
    F = np.linalg.cholesky((v * np.clip(w, floor, None)) @ v.T)
    vals = dict(unconstrained)
    for s_, (i, j) in factor.items():
        vals[s_.name] = F[i, j]
    return np.array([vals[p.name] for p in concave.free])


def concave_at_reference(system: EquationSystem) -> tuple[EquationSystem, dict]:
    """The system with the free second-order price parameters of a translog cost replaced
    by Γ̃ = −L L' − ã ã' + diag(ã); returns it and {l symbol: (i, j)}."""
    model = system.model
    if model.form != "translog_cost":
        raise DualityError("curvature='local' is available for translog cost functions "
                           "(concavity at the reference point) and Almost Ideal systems (the "
                           "Slutsky condition there); use curvature='check'")
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
    L, Lm = lower_factor(n - 1)
    A = sp.Matrix(a)
    G = -Lm * Lm.T - A * A.T + sp.diag(*a)
    repl = {gt[i][j]: sp.expand(G[i, j]) for i in range(n - 1) for j in range(i, n - 1)}
    note = ("concavity imposed at the point where every price and the output equal one: "
            "Γ̃ = −LL' − ãã' + diag(ã) (Diewert and Wales 1987)")
    return reparametrised(system, repl, L, note), L


def start_values(system: EquationSystem, concave: EquationSystem, L: dict,
                 unconstrained: dict) -> np.ndarray:
    """Start values: the unconstrained estimates, with M̃ projected onto the negative
    semidefinite matrices and factored (Cholesky with a small ridge)."""
    model = system.model
    n = len(model.prices)
    a = np.array([unconstrained[f"a{i + 1}"] for i in range(n - 1)])
    Gt = np.array([[unconstrained["g%d%d" % tuple(sorted((i + 1, j + 1)))]
                    for j in range(n - 1)] for i in range(n - 1)])
    return factored_start(Gt + np.outer(a, a) - np.diag(a), L, concave, unconstrained)




# -- the Almost Ideal system: the Slutsky condition at a reference point --------------------
# At prices p and total expenditure m an Almost Ideal system with shares w has the
# substitution (Slutsky) matrix S with
#
#     C_ij = p_i p_j S_ij / m = g_ij + b_i b_j ln(m/P) + w_i w_j − δ_ij w_i
#
# (the Hicksian share derivative is g_ij + b_i b_j ln(m/P), since ln(m/P) = u·b0·Π p^b at
# e = m; Deaton and Muellbauer 1980; Moschini 1998, from memory; checked in the tests
# against the Slutsky matrix the regularity engine derives from the fitted model).  C is
# S scaled by positive numbers on both sides, so one is negative semidefinite iff the
# other is.  At the reference point where every price and m equal one, ℓ = ln(m/P) = −a0
# and w = a + ℓ b.  Adding-up, homogeneity and symmetry give C 1 = 0, so C is negative
# semidefinite iff its leading (n−1)×(n−1) block is, and writing that block as −L L'
#
#     Γ̃ = −L L' − ℓ b̃ b̃' − w̃ w̃' + diag(w̃),   w̃ = ã + ℓ b̃,
#
# the same Cholesky reparametrisation as for the translog cost (Lau 1978; Diewert and
# Wales 1987), with the income term added.

def _aids_ell(system: EquationSystem) -> float:
    """ℓ = ln(m/P) at p = 1, m = 1, i.e. −a0 (a0 is fixed: not identified otherwise)."""
    a0 = {k.name: v for k, v in system.fixed.items()}.get("a0")
    if a0 is None:
        raise DualityError("curvature='local' of an Almost Ideal system needs a0 fixed, "
                           "e.g. fixed={'a0': 0}")
    return -float(a0)


def slutsky_reference_matrix(params: dict, n: int, ell: float) -> np.ndarray:
    """C = Γ + ℓ b b' + w w' − diag(w) of an Almost Ideal system at p = 1 with
    ln(m/P) = ℓ (the full n×n matrix), from parameter values by name."""
    a = np.array([params[f"a{i + 1}"] for i in range(n)])
    b = np.array([params[f"b{i + 1}"] for i in range(n)])
    G = np.array([[params["g%d%d" % tuple(sorted((i + 1, j + 1)))] for j in range(n)]
                  for i in range(n)])
    w = a + ell * b
    return G + ell * np.outer(b, b) + np.outer(w, w) - np.diag(w)


def slutsky_at_reference(system: EquationSystem) -> tuple[EquationSystem, dict]:
    """The Almost Ideal share system with its free g_ij (i, j < n) replaced so that the
    Slutsky matrix is negative semidefinite where every price and total expenditure
    equal one; returns it and {l symbol: (i, j)}."""
    model = system.model
    if model.form != "aids_expenditure":
        raise DualityError("the Slutsky condition is imposed on Almost Ideal systems "
                           "(aids_expenditure)")
    ell = _aids_ell(system)
    sym = {p.name: p.symbol for p in model.params}
    n = len(model.prices)
    free = set(system.free)
    gt = [[_g(sym, i, j) for j in range(n - 1)] for i in range(n - 1)]
    a = [sym[f"a{i + 1}"] for i in range(n - 1)]
    b = [sym[f"b{i + 1}"] for i in range(n - 1)]
    needed = {g for row in gt for g in row} | set(a) | set(b)
    if not needed <= free:
        held = sorted(p.name for p in needed - free)
        raise DualityError(f"curvature='local' needs {', '.join(held)} free (not fixed, and "
                           "the last share dropped)")
    L, Lm = lower_factor(n - 1)
    ell_s = sp.nsimplify(ell)
    B = sp.Matrix(b)
    W = sp.Matrix(a) + ell_s * B
    G = -Lm * Lm.T - ell_s * B * B.T - W * W.T + sp.diag(*W)
    repl = {gt[i][j]: sp.expand(G[i, j]) for i in range(n - 1) for j in range(i, n - 1)}
    note = ("Slutsky matrix negative semidefinite at the point where every price and total "
            "expenditure equal one: Γ̃ = −LL' − ℓb̃b̃' − w̃w̃' + diag(w̃), w̃ = ã + ℓb̃, "
            "ℓ = −a0 (Lau 1978; Diewert and Wales 1987)")
    return reparametrised(system, repl, L, note), L


def slutsky_start_values(system: EquationSystem, concave: EquationSystem, L: dict,
                         unconstrained: dict) -> np.ndarray:
    """Start values for :func:`slutsky_at_reference`: the unconstrained estimates with the
    leading block of C projected onto the negative semidefinite matrices and factored."""
    n = len(system.model.prices)
    C = slutsky_reference_matrix(unconstrained, n, _aids_ell(system))[:n - 1, :n - 1]
    return factored_start(C, L, concave, unconstrained)


__all__ = ["concave_at_reference", "start_values", "slutsky_at_reference",
           "slutsky_start_values", "slutsky_reference_matrix"]

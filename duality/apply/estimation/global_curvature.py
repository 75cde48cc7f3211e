"""Concavity of a normalized quadratic or symmetric generalized McFadden cost function imposed
at every price (``curvature="global"``).

Both forms (Diewert and Wales, 'Flexible functional forms and global curvature conditions',
Econometrica 55 (1987); from memory) hold the quadratic term ½ wᵀSw / (θ·w) with S w* = 0.
The catalogue builds the identification in: S's free entries are the leading (n−1)×(n−1)
block B (``s11, s12, …``) written through v_i = w_i − (w*_i / w*_n) w_n, so wᵀSw = vᵀBv and
S = Tᵀ B T for a T of full row rank.  The cost function is concave in w at every price iff S
is negative semidefinite, iff B is.  Diewert and Wales impose this by the Cholesky-type
reparametrisation

    B = −A Aᵀ,   A lower triangular (``q11, q21, q22, …``),

which keeps every negative semidefinite B reachable (so the form stays flexible where the
data are concave) and gives no other.  The equations become nonlinear in A and are fitted by
nonlinear least squares (:mod:`.nonlinear`), started from the unconstrained estimate with
B projected onto the negative semidefinite matrices.  The restriction S w* = 0 holds for
every A, since it is built into the form.
"""
from __future__ import annotations


import numpy as np
import sympy as sp

from ...errors import DualityError
from .curvature import factored_start, lower_factor, reparametrised
from .equations import EquationSystem

#: the forms whose curvature can be imposed at every price, and the letter of their block
GLOBAL_FORMS = ("normalized_quadratic_cost", "symmetric_generalized_mcfadden_cost")
#: the letter of the lower-triangular factor's parameters (``q11, q21, q22, …``)
FACTOR = "q"


def _block_symbols(model) -> list[list[sp.Symbol]]:
    sym = {p.name: p.symbol for p in model.params}
    k = len(model.prices) - 1
    return [[sym[f"s{min(i, j) + 1}{max(i, j) + 1}"] for j in range(k)] for i in range(k)]


def concave_everywhere(system: EquationSystem) -> tuple[EquationSystem, dict]:
    """The system with the block B of a normalized quadratic or symmetric generalized
    McFadden cost replaced by −A Aᵀ (A lower triangular); returns it and
    {factor symbol: (i, j)}."""
    model = system.model
    if model.form not in GLOBAL_FORMS:
        raise DualityError("curvature='global' is available for the normalized quadratic and "
                           "symmetric generalized McFadden cost functions (Diewert and Wales "
                           "1987); use curvature='check' or 'local'")
    B = _block_symbols(model)
    k = len(B)
    needed = {B[i][j] for i in range(k) for j in range(i, k)}
    free = set(system.free)
    if not needed <= free:
        held = sorted(p.name for p in needed - free)
        raise DualityError(f"curvature='global' needs {', '.join(held)} free (not fixed)")
    taken = {p.name for p in model.params}
    factor, A = lower_factor(k, FACTOR)
    clash = sorted(s_.name for s_ in factor if s_.name in taken)
    if clash:
        raise DualityError(f"curvature='global' names its factor {clash[0]}, which is "
                           "already a parameter of the model")
    Bt = -A * A.T
    repl = {B[i][j]: sp.expand(Bt[i, j]) for i in range(k) for j in range(i, k)}
    note = ("concavity imposed at every price: the block of S is −AAᵀ with A lower "
            "triangular (Diewert and Wales 1987)")
    return reparametrised(system, repl, factor, note, expand=False), factor


def global_start_values(concave: EquationSystem, factor: dict,
                        unconstrained: dict) -> np.ndarray:
    """Start values: the unconstrained estimates, with the block projected onto the negative
    semidefinite matrices (eigenvalues clipped) and factored by Cholesky (a small ridge keeps
    the factor defined where the projection is singular)."""
    model = concave.model
    k = len(model.prices) - 1
    B = np.array([[unconstrained[f"s{min(i, j) + 1}{max(i, j) + 1}"] for j in range(k)]
                  for i in range(k)])
    return factored_start((B + B.T) / 2, factor, concave, unconstrained, floor=None)


__all__ = ["GLOBAL_FORMS", "concave_everywhere", "global_start_values"]

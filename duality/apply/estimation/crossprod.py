"""Linear systems at scale: estimation from cross-products accumulated chunk by chunk.

After the restrictions are eliminated every equation g reads y_g = A_g θ + e_g with one
parameter vector θ shared by all equations (A_g holds zeros for parameters not in g).
Feasible GLS with residual covariance Σ needs only the cross-products

    A_g'A_h,   A_g'y_h,   y_g'y_h     (g, h = 1..G)

which add over row chunks, so a table larger than memory (a CSV or Parquet file read in
chunks, a dask DataFrame summed over its partitions) is estimated in one pass:

    θ̂ = (Σ_gh σ^{gh} A_g'A_h)⁻¹ Σ_gh σ^{gh} A_g'y_h,   Var θ̂ = (Σ_gh σ^{gh} A_g'A_h)⁻¹,
    E'E_gh = y_g'y_h − θ'A_g'y_h − θ'A_h'y_g + θ'A_g'A_h θ,   Σ = E'E / n,

iterated to convergence (Zellner 1962; Greene, Econometric Analysis, 5th ed., ch. 14;
from memory).  In memory, small tables go to linearmodels' SUR instead
(:mod:`.linear`); the tests check that the two agree.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import sympy as sp

from ...errors import DualityError
from .equations import EquationSystem, linear_parts

#: rows per chunk when a table in memory is reduced to cross-products
CHUNK = 100_000


@dataclass
class CrossProducts:
    """Z_g'Z_h for Z_g = [A_g, y_g], all pairs (G × G × (k+1) × (k+1)), with row count and
    column sums of y (for R²)."""

    ZZ: np.ndarray
    ysum: np.ndarray
    n: int

    def __add__(self, other: "CrossProducts") -> "CrossProducts":
        return CrossProducts(self.ZZ + other.ZZ, self.ysum + other.ysum, self.n + other.n)


@dataclass
class Compiled:
    """Each equation's regressors and left-hand side (known terms moved left) as one
    compiled numpy function of the data symbols."""

    parts: list          # per equation: (dependent, offset, [(column index, regressor)])
    k: int
    fns: list            # per equation: (function, its data symbols, column indices)


def compile_system(system: EquationSystem) -> Compiled:
    free = list(system.free)
    parts, fns = [], []
    for eq in system.equations:
        offset, regs = linear_parts(eq, free)
        cols = [free.index(p) for p in regs]
        parts.append((eq.dependent, offset, list(zip(cols, regs.values()))))
        outs = list(regs.values()) + [eq.dependent - offset]
        syms = sorted(set().union(*(e.free_symbols for e in outs)), key=str)
        fns.append((sp.lambdify(syms, outs, "numpy", cse=True), syms, cols))
    return Compiled(parts, len(free), fns)


def accumulate(comp: Compiled, arrays, n: int, *, chunk: int = CHUNK) -> CrossProducts:
    """Cross-products of a table in memory (``arrays``: data symbol -> column), a chunk of
    rows at a time so that the working memory does not grow with the row count."""
    G, k = len(comp.parts), comp.k
    total = CrossProducts(np.zeros((G, G, k + 1, k + 1)), np.zeros(G), 0)
    Z = np.zeros((G, min(chunk, n), k + 1))
    for lo in range(0, n, chunk):
        hi = min(n, lo + chunk)
        part = {s: a[lo:hi] for s, a in arrays.items()}
        total = total + _one_chunk(comp, part, hi - lo, Z[:, :hi - lo])
    return total


def _one_chunk(comp: Compiled, arrays, m: int, Z: np.ndarray) -> CrossProducts:
    G, k = len(comp.parts), comp.k
    Z[...] = 0.0
    for g, (fn, syms, cols) in enumerate(comp.fns):
        outs = fn(*[arrays[s] for s in syms])
        for j, v in zip(cols + [k], outs):
            Z[g, :, j] = v
    ZZ = np.empty((G, G, k + 1, k + 1))
    for g in range(G):
        for h in range(g, G):
            ZZ[g, h] = Z[g].T @ Z[h]
            ZZ[h, g] = ZZ[g, h].T
    return CrossProducts(ZZ, Z[:, :, k].sum(axis=1), m)


def _in_eq(cp: CrossProducts, k: int) -> list:
    return [np.flatnonzero(np.diag(cp.ZZ[g, g])[:k] != 0) for g in range(cp.ZZ.shape[0])]


def solve(cp: CrossProducts, system: EquationSystem, *, method: str = "iterated",
          max_iter: int = 200, tol: float = 1e-8):
    """Constrained least squares, two-step or iterated SUR from the cross-products.

    Returns ``(theta, cov, EE, sst, k_per_equation, iterations)``.
    """
    G = cp.ZZ.shape[0]
    k = cp.ZZ.shape[2] - 1
    n = cp.n
    AA = cp.ZZ[:, :, :k, :k]
    Ay = cp.ZZ[:, :, :k, k]
    yy = cp.ZZ[:, :, k, k]
    names = [p.name for p in system.free]

    def gls(Sinv):
        M = np.einsum("gh,ghij->ij", Sinv, AA)
        b = np.einsum("gh,ghi->i", Sinv, Ay)
        scale = np.sqrt(np.diag(M))
        if np.any(scale == 0):
            raise DualityError(f"the data cannot identify {names[int(np.argmin(scale))]}; "
                               "fix it")
        Ms = M / np.outer(scale, scale)
        w, v = np.linalg.eigh(Ms)
        if w[0] <= 1e-12 * w[-1]:
            vec = np.abs(v[:, 0])
            pair = [names[j] for j in np.argsort(-vec)[:2] if vec[j] > 1e-6]
            raise DualityError(f"collinear regressors: the data cannot tell "
                               f"{' and '.join(pair)} apart; fix one of them or use data "
                               "that vary")
        Minv = np.linalg.inv(Ms) / np.outer(scale, scale)
        return Minv @ b, Minv

    def resid_cross(theta):
        t = theta
        return (yy - np.einsum("i,ghi->gh", t, Ay) - np.einsum("i,hgi->gh", t, Ay)
                + np.einsum("i,ghij,j->gh", t, AA, t))

    theta, Minv = gls(np.eye(G))
    iterations = 1
    if G > 1 and method in ("sur", "iterated"):
        for _ in range(max_iter):
            S = resid_cross(theta) / n
            new, Minv = gls(np.linalg.inv(S))
            iterations += 1
            step = np.max(np.abs(new - theta) / (1 + np.abs(theta)))
            theta = new
            if method == "sur" or step < tol:
                break
        else:
            raise DualityError(f"iterated SUR did not converge in {max_iter} iterations; "
                               "raise max_iter or use method='sur'")
    EE = resid_cross(theta)
    ks = [len(ix) for ix in _in_eq(cp, k)]
    if G == 1:
        cov = Minv * EE[0, 0] / (n - ks[0])
    elif method == "ols":
        # least squares with equal weights: sandwich with the residual covariance
        S = EE / n
        mid = np.einsum("gh,ghij->ij", S, AA)
        cov = Minv @ mid @ Minv
    else:
        S = EE / n
        _, cov = gls(np.linalg.inv(S))
    sst = np.diag(yy) - cp.ysum ** 2 / n
    return theta, cov, EE, sst, ks, iterations


__all__ = ["CHUNK", "CrossProducts", "Compiled", "compile_system", "accumulate", "solve"]

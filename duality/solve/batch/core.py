"""Batched numeric duals, the shared parts: compiled derivatives, the start on the level
set, batched Newton (the array path), the second-order check and small batched solves.

See :mod:`duality.solve.batch` for the method."""
from __future__ import annotations

from dataclasses import dataclass, field
from functools import lru_cache

import numpy as np
import sympy as sp

from ...model.lambdas import BufferedFunction, numpy_function
from ...model.base import Model


#: Residual (max-norm, in logs) under which a point counts as converged.
TOL = 1e-12
MAXITER = 60
#: Bound on one Newton step in log t along the start ray (a factor e^10 in scale): wide
#: enough that a homogeneous f reaches its level set in one step from almost anywhere.
RAY_STEP = 10.0


@dataclass(frozen=True, kw_only=True)
class BatchResult:
    """Solutions at N points.

    Attributes
    ----------
    value : ndarray (N,)
        Minimal cost or expenditure, maximal utility, or maximal profit; NaN where the
        point did not converge.
    quantities : ndarray (N, n)
        Optimal bundle (NaN where not converged).
    multiplier : ndarray (N,)
        Lagrange multiplier (marginal cost, or marginal utility of income).
    output : ndarray (N,) or None
        Output supplied (profit problems only).
    iterations : ndarray of int (N,)
        Newton iterations used.
    residual : ndarray (N,)
        Final max-norm residual of the first-order conditions (in logs).
    converged : ndarray of bool (N,)
    """

    value: np.ndarray
    quantities: np.ndarray
    multiplier: np.ndarray
    iterations: np.ndarray
    residual: np.ndarray
    converged: np.ndarray
    output: np.ndarray | None = None
    notes: tuple[str, ...] = field(default=())

    @property
    def failed(self) -> np.ndarray:
        """Indices of the points that did not converge."""
        return np.flatnonzero(~self.converged)


# -- compiled model ------------------------------------------------------------------------
class Compiled:
    """f, ∇f and ∇²f of a model as numpy functions of whole arrays of points."""

    def __init__(self, model: Model):
        xs = list(model.quantities)
        self.n = len(xs)
        self.params = tuple(sorted(model.expr.free_symbols - set(xs), key=str))
        f = model.expr
        grad = [sp.diff(f, x) for x in xs]
        self._pairs = [(i, j) for i in range(self.n) for j in range(i, self.n)]
        hess = [sp.diff(grad[i], xs[j]) for i, j in self._pairs]
        args = xs + list(self.params)
        self._f = numpy_function(args, f, cse=True)
        self._fg = numpy_function(args, [f] + grad, cse=True)
        self._fgh = numpy_function(args, [f] + grad + hess, cse=True)  # shared subexpressions
        self._exprs = (xs, args, f, grad, hess)
        self._kernels = None

    @property
    def kernels(self):
        """Log-space derivatives compiled to write into caller-owned buffers (see
        :class:`~duality.model.lambdas.BufferedFunction`): ``(f c, f c K)`` with c_i = x_i f_i
        and K_ij = x_i x_j f_ij (rows for i <= j), or None when they cannot be built.

        These are what Newton in z = log x needs, and the products often simplify
        (x·x^(-1/2) = √x), so they are derived symbolically rather than formed from f_i."""
        if self._kernels is None:
            xs, args, f, grad, hess = self._exprs
            try:
                c = [_smaller(xs[i] * grad[i]) for i in range(self.n)]
                K = [_smaller(xs[i] * xs[j] * h) for (i, j), h in zip(self._pairs, hess)]
                self._kernels = (BufferedFunction(args, [f] + c),
                                 BufferedFunction(args, [f] + c + K))
            except Exception:  # noqa: BLE001 — the array path below still works
                self._kernels = False
        return self._kernels or None

    def _args(self, X, P):
        return [X[:, i] for i in range(self.n)] + list(P)

    def f(self, X, P):
        with np.errstate(all="ignore"):
            return _real(np.broadcast_to(self._f(*self._args(X, P)), X.shape[:1]))

    def fg(self, X, P):
        N = X.shape[0]
        with np.errstate(all="ignore"):
            out = self._fg(*self._args(X, P))
        f = _real(np.broadcast_to(out[0], (N,)))
        G = np.empty((N, self.n))
        for i in range(self.n):
            G[:, i] = _real(np.broadcast_to(out[1 + i], (N,)))
        return f, G

    def tables(self, X, P):
        """f, ∇f and ∇²f as length-N vectors: f, [g_i], [[h_ij]] (no array assembly)."""
        N, n = X.shape[0], self.n
        with np.errstate(all="ignore"):
            out = self._fgh(*self._args(X, P))

        def vec(a):
            a = np.asarray(a)
            if np.iscomplexobj(a) or a.shape != (N,):
                return _real(np.broadcast_to(a, (N,)))
            return a
        f = vec(out[0])
        G = [vec(out[1 + i]) for i in range(n)]
        H = [[None] * n for _ in range(n)]
        for (i, j), h in zip(self._pairs, out[1 + n:]):
            H[i][j] = H[j][i] = vec(h)
        return f, G, H

    def fgh(self, X, P):
        N, n = X.shape[0], self.n
        with np.errstate(all="ignore"):
            out = self._fgh(*self._args(X, P))
        f = _real(np.broadcast_to(out[0], (N,)))
        G = np.empty((N, n))
        for i in range(n):
            G[:, i] = _real(np.broadcast_to(out[1 + i], (N,)))
        H = np.empty((N, n, n))
        for (i, j), h in zip(self._pairs, out[1 + n:]):
            H[:, i, j] = H[:, j, i] = _real(np.broadcast_to(h, (N,)))
        return f, G, H


def _smaller(e):
    """``e`` with products distributed over sums when that does not make it longer."""
    try:
        d = sp.expand_mul(e)
    except Exception:  # noqa: BLE001 — keep the product as it is
        return e
    return d if sp.count_ops(d) <= sp.count_ops(e) else e


def _real(a):
    a = np.asarray(a)
    if np.iscomplexobj(a):
        out = a.real.astype(float)
        out[np.abs(a.imag) > 1e-12 * (1 + np.abs(a.real))] = np.nan
        return out
    return np.array(a, dtype=float)  # a writable copy (inputs may be broadcast views)


@lru_cache(maxsize=64)
def compiled(model: Model) -> Compiled:
    """The compiled model (cached per model)."""
    return Compiled(model)


@lru_cache(maxsize=64)
def is_homothetic(model: Model) -> bool:
    """True when the slope ratios f_i/f_1 do not change along rays (checked numerically).

    Needs every parameter to have a value; a model with free parameters reports False.
    """
    comp = compiled(model)
    if comp.params and set(comp.params) - set(model.values):
        return False
    rng = np.random.default_rng(17)
    X = rng.uniform(0.3, 3.0, (8, comp.n))
    P = [np.full(8, model.values[s]) for s in comp.params]
    _, G1 = comp.fg(X, P)
    _, G2 = comp.fg(3.7 * X, P)
    if not (np.all(np.isfinite(G1)) and np.all(np.isfinite(G2))) or np.any(G1 <= 0):
        return False
    r1, r2 = G1 / G1[:, :1], G2 / G2[:, :1]
    return bool(np.max(np.abs(r1 - r2) / np.abs(r1)) < 1e-10)


# -- spending -----------------------------------------------------------------------------
def _level_res(f, y):
    """Residual of f = y: in logs where y > 0, else relative."""
    with np.errstate(all="ignore"):
        pos = y > 0
        out = np.where(pos, np.log(np.where(pos, f, 1.0)) - np.log(np.where(pos, y, 1.0)),
                       (f - y) / np.maximum(1.0, np.abs(y)))
        out[pos & ~(f > 0)] = np.nan
    return out, pos


def start_on_level(comp: Compiled, W, Y, P):
    """Points on the ray x = t·(1/w)/Σ(1/w) with f(x) = y.

    Newton steps in s = log t (f increases along the ray, so d log f/ds = ∇f·x / f > 0)
    for every point at once; points where that fails are bracketed and bisected.
    Returns the start points and a mask of the points where the level was reached.
    """
    with np.errstate(all="ignore"):
        base = (1.0 / W) / (1.0 / W).sum(axis=1, keepdims=True)
    N = W.shape[0]
    s = np.zeros(N)
    pos = Y > 0
    for _ in range(30):
        X = np.exp(s)[:, None] * base
        f, G = comp.fg(X, P)
        with np.errstate(all="ignore"):
            r = np.where(pos, np.log(f) - np.log(np.where(pos, Y, 1.0)), f - Y)
            d = np.where(pos, np.einsum("ij,ij->i", G, X) / f, np.einsum("ij,ij->i", G, X))
            step = np.clip(r / d, -RAY_STEP, RAY_STEP)
        if np.all(np.abs(r) < 1e-6):  # a start point only: Newton on the KKT finishes
            break
        s = np.where(np.isfinite(step), s - step, s)
    X = np.exp(s)[:, None] * base
    f = comp.f(X, P)
    with np.errstate(all="ignore"):
        good = np.abs(np.where(pos, np.log(f) - np.log(np.where(pos, Y, 1.0)), f - Y)) < 1e-4
    if good.all():
        return X, good
    X_b, ok_b = _bisect_on_level(comp, W[~good], Y[~good], [p[~good] for p in P])
    X[~good], good[~good] = X_b, ok_b
    return X, good


def _bisect_on_level(comp: Compiled, W, Y, P, iters: int = 80):
    with np.errstate(all="ignore"):
        base = (1.0 / W) / (1.0 / W).sum(axis=1, keepdims=True)
    N = W.shape[0]
    lo, hi = np.full(N, -2.0), np.full(N, 2.0)

    def gap(s):
        v = comp.f(np.exp(s)[:, None] * base, P)
        return np.where(np.isfinite(v), v - Y, np.nan)

    for _ in range(40):  # widen until bracketed (NaN below counts as "too low")
        glo, ghi = gap(lo), gap(hi)
        need_lo = ~(glo <= 0)
        need_hi = ~(ghi >= 0)
        if not (need_lo.any() or need_hi.any()):
            break
        lo = np.where(need_lo, lo - 3.0, lo)
        hi = np.where(need_hi, hi + 3.0, hi)
        lo, hi = np.maximum(lo, -300.0), np.minimum(hi, 300.0)
    for _ in range(iters):
        mid = 0.5 * (lo + hi)
        gm = gap(mid)
        up = gm >= 0
        hi = np.where(up, mid, hi)
        lo = np.where(up, lo, mid)
    ok = np.abs(gap(hi)) <= 1e-9 * np.maximum(1.0, np.abs(Y))  # NaN (undefined) fails
    return np.exp(hi)[:, None] * base, ok


def _spending_system(comp, W, Y, P, z, mu):
    """Residuals (N, n+1) and the Jacobian as an (n+1) x (n+1) table of length-N vectors."""
    n = comp.n
    X = np.exp(z)
    f, G, H = comp.fgh(X, P)
    with np.errstate(all="ignore"):
        r = np.empty((len(Y), n + 1))
        r[:, :n] = np.log(W) - mu[:, None] - np.log(G)
        r[:, n], pos = _level_res(f, Y)
        invG = 1.0 / G
        denom = np.where(pos, f, np.maximum(1.0, np.abs(Y)))
        minus_one = np.full(len(Y), -1.0)
        J = [[-H[:, i, j] * X[:, j] * invG[:, i] for j in range(n)] + [minus_one]
             for i in range(n)]
        J.append([G[:, j] * X[:, j] / denom for j in range(n)] + [np.zeros(len(Y))])
    return r, J, (f, G, H, X)


def _residual_only(comp, W, Y, P, z, mu):
    X = np.exp(z)
    f, G = comp.fg(X, P)
    with np.errstate(all="ignore"):
        r = np.empty((len(Y), comp.n + 1))
        r[:, :comp.n] = np.log(W) - mu[:, None] - np.log(G)
        r[:, comp.n], _ = _level_res(f, Y)
    return _maxnorm(r)


def _maxnorm(r):
    """Row-wise max |r| (inf where any entry is NaN or inf), column by column: a reduction
    over a short inner axis is several times slower in numpy."""
    out = np.abs(r[:, 0])
    for i in range(1, r.shape[1]):
        np.maximum(out, np.abs(r[:, i]), out=out)      # NaN propagates
    out[np.isnan(out)] = np.inf
    return out


def _take(args, idx, N):
    """The arguments at rows ``idx`` (no copy when every row is taken)."""
    if idx.size == N:
        return args
    return [a[idx] if isinstance(a, np.ndarray) else [p[idx] for p in a] for a in args]


def _newton(system, residual, v, args, tol, maxiter, iters0=None):
    """Damped Newton for all points; halving only where the residual did not fall.

    ``iters0`` (optional) holds iterations a point has already used elsewhere; no point
    goes beyond ``maxiter`` in total."""
    N = v.shape[0]
    iters = np.zeros(N, dtype=int) if iters0 is None else np.array(iters0, dtype=int)
    active = np.ones(N, dtype=bool)
    norm = residual(*args, v)
    for _ in range(maxiter):
        active &= (norm > tol) & np.isfinite(norm) & (iters < maxiter)
        idx = np.flatnonzero(active)
        if idx.size == 0:
            break
        nr = norm[idx]
        vi = v if idx.size == N else v[idx]
        r, J, _ = system(*_take(args, idx, N), vi)
        step = solve_small(J, -r)
        iters[idx] += 1
        cand = vi + step
        new = residual(*_take(args, idx, N), cand)
        better = new < nr                      # full Newton step accepted here
        acc = idx[better]
        v[acc] = cand[better]
        norm[acc] = new[better]
        # step halving only where the full step did not improve
        pend = np.flatnonzero(~better)
        t = 0.5
        for _ in range(40):
            if pend.size == 0:
                break
            gidx = idx[pend]
            c = v[gidx] + t * step[pend]
            new = residual(*_take(args, gidx, N), c)
            ok = new < nr[pend]
            v[gidx[ok]] = c[ok]
            norm[gidx[ok]] = new[ok]
            pend = pend[~ok]
            t *= 0.5
        active[idx[pend]] = False  # no descent along the Newton direction: give up here
    return v, iters, norm



def _spending_generic(comp, W, Y, P, tol, maxiter, v=None, iters0=None):
    """The array path: start on the level set (ray Newton, then bisection), damped Newton.

    With ``v`` (log-quantities and log multiplier) and ``iters0``, Newton continues from
    there instead.  Returns v, iterations and the final residual."""
    if v is None:
        X0, ok = start_on_level(comp, W, Y, P)
        f0, G0 = comp.fg(X0, P)
        with np.errstate(all="ignore"):
            lam0 = np.einsum("ij,ij->i", W, X0) / np.einsum("ij,ij->i", G0, X0)
            mu0 = np.log(np.where(lam0 > 0, lam0, 1.0))
            v = np.concatenate([np.log(X0), mu0[:, None]], axis=1)
        v[~ok] = np.nan

    def system(W_, Y_, P_, v_):
        return _spending_system(comp, W_, Y_, P_, v_[:, :comp.n], v_[:, comp.n])

    def residual(W_, Y_, P_, v_):
        return _residual_only(comp, W_, Y_, P_, v_[:, :comp.n], v_[:, comp.n])

    return _newton(system, residual, v, (W, Y, P), tol, maxiter, iters0)



def _spending_result(comp, W, P, v, iters, norm, tol, notes) -> BatchResult:
    X = np.exp(v[:, :comp.n])
    conv = (norm <= tol) & second_order(comp, X, P)
    X[~conv] = np.nan
    value = np.einsum("ij,ij->i", W, X)
    lam = np.exp(v[:, comp.n])
    lam[~conv] = np.nan
    return BatchResult(value=value, quantities=X, multiplier=lam, iterations=iters,
                       residual=norm, converged=conv, notes=notes)


def second_order(comp: Compiled, X, P) -> np.ndarray:
    """f quasi-concave at X: ∇²f negative semidefinite on the tangent space of ∇f.

    The tangent basis is the Householder reflection of ∇f/|∇f| (columns 2..n), built and
    applied with length-N vectors, so no per-point matrices are formed for n <= 3.
    """
    N, n = X.shape
    ok = np.zeros(N, dtype=bool)
    finite = np.all(np.isfinite(X), axis=1)
    if not finite.any():
        return ok
    idx = np.flatnonzero(finite)
    Xs = X[idx]
    Ps = [p[idx] if np.ndim(p) else p for p in P]
    _, G, H = comp.tables(Xs, Ps)
    with np.errstate(all="ignore"):
        good = np.ones(idx.size, dtype=bool)
        for g in G:
            good &= np.isfinite(g)
        scale = np.ones(idx.size)
        for row in H:
            for h in row:
                good &= np.isfinite(h)
                scale = np.maximum(scale, np.abs(h))
        if n == 1:
            ok[idx] = good
            return ok
        norm = np.sqrt(sum(g * g for g in G))
        u = [g / norm for g in G]
        v = list(u)
        v[0] = u[0] + np.where(u[0] >= 0, 1.0, -1.0)
        vv = sum(x * x for x in v)
        # Z[i][k] = δ_{i,k+1} − 2 v_i v_{k+1} / vᵀv, k = 0..n-2
        Z = [[(1.0 if i == k + 1 else 0.0) - 2 * v[i] * v[k + 1] / vv for k in range(n - 1)]
             for i in range(n)]
        HZ = [[sum(H[i][j] * Z[j][k] for j in range(n)) for k in range(n - 1)]
              for i in range(n)]
        M = np.empty((idx.size, n - 1, n - 1))
        for k in range(n - 1):
            for m_ in range(k, n - 1):
                M[:, k, m_] = M[:, m_, k] = sum(Z[i][k] * HZ[i][m_] for i in range(n))
        M[~good] = 0.0
        top = _max_eigenvalue(M)
    ok[idx] = good & (top <= 1e-7 * scale)
    return ok


def _max_eigenvalue(M):
    """Largest eigenvalue of symmetric (N, k, k) matrices; closed form for k <= 2."""
    k = M.shape[1]
    if k == 1:
        return M[:, 0, 0]
    if k == 2:
        a, b, c = M[:, 0, 0], 0.5 * (M[:, 0, 1] + M[:, 1, 0]), M[:, 1, 1]
        return 0.5 * (a + c) + np.sqrt(0.25 * (a - c) ** 2 + b * b)
    return np.linalg.eigvalsh(0.5 * (M + np.transpose(M, (0, 2, 1)))).max(axis=1)


def solve_small(A, b):
    """Solve A x = b for a batch of small systems (N, m, m).

    Gaussian elimination with partial pivoting written over the batch axis: every
    operation acts on a length-N vector, which for m <= 8 is several times faster than
    LAPACK called once per tiny matrix.  Singular systems give non-finite rows.
    """
    if isinstance(A, list):  # a table of length-N vectors
        m = len(A)
        a = [[np.array(A[i][j], dtype=float) for j in range(m)] for i in range(m)]
        if m > 8:
            A = np.stack([np.stack(row, axis=1) for row in a], axis=1)
    else:
        N, m, _ = A.shape
        a = None if m > 8 else [[np.array(A[:, i, j], dtype=float) for j in range(m)]
                                for i in range(m)]
    if m > 8:
        with np.errstate(all="ignore"):
            try:
                return np.linalg.solve(A, b[..., None])[..., 0]
            except np.linalg.LinAlgError:
                return np.stack([np.linalg.lstsq(a_, r_, rcond=None)[0]
                                 for a_, r_ in zip(A, b)])
    r = [np.array(b[:, i], dtype=float) for i in range(m)]
    with np.errstate(all="ignore"):
        for k in range(m):
            if k < m - 1:
                piv = k + np.argmax(np.abs(np.stack([a[i][k] for i in range(k, m)])), axis=0)
                for i in range(k + 1, m):
                    sw = piv == i
                    if sw.any():
                        for j in range(k, m):
                            a[k][j], a[i][j] = (np.where(sw, a[i][j], a[k][j]),
                                                np.where(sw, a[k][j], a[i][j]))
                        r[k], r[i] = np.where(sw, r[i], r[k]), np.where(sw, r[k], r[i])
            for i in range(k + 1, m):
                f = a[i][k] / a[k][k]
                for j in range(k + 1, m):
                    a[i][j] -= f * a[k][j]
                r[i] -= f * r[k]
        x = [None] * m
        for k in range(m - 1, -1, -1):
            acc = r[k].copy()
            for j in range(k + 1, m):
                acc -= a[k][j] * x[j]
            x[k] = acc / a[k][k]
    return np.stack(x, axis=1)

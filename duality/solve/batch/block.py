"""The block engine of the spending problem (cost, expenditure; profit through them).

Blocks of points with every array operation writing into one buffer allocated per call;
see :mod:`duality.solve.batch` for the method and :func:`_spend_blocks` for the contract."""
from __future__ import annotations

import numpy as np

from .core import RAY_STEP, Compiled, second_order, solve_small

# -- spending: the block engine -------------------------------------------------------------
#: Points per block of the buffered spending engine: long enough that each numpy call does
#: real work, short enough that a block's buffers stay in cache.
BLOCK = 8192
#: After this many Newton rounds a block hands its last few unfinished points (fewer than
#: one in eight) to the array path, where each step touches only those points.
_HANDOFF = 4


class _Workspace:
    """Named arrays carved out of one float buffer with rows of length ``B``; a view of
    length ``b <= B`` is taken per block, so the memory is touched once per call."""

    def __init__(self, B: int, spec):
        self.spec, k = [], 0
        for name, shape in spec:
            rows = int(np.prod(shape)) if shape else 1
            self.spec.append((name, shape, k, rows))
            k += rows
        self.buf = np.empty((k, B))
        self._views = {}

    def view(self, b: int) -> dict:
        if b in self._views:
            return self._views[b]
        out = self._views[b] = {}
        for name, shape, k, rows in self.spec:
            out[name] = (self.buf[k, :b] if not shape
                         else self.buf[k:k + rows, :b].reshape(tuple(shape) + (b,)))
        return out


class _State:
    """One iterate of a block: z, μ, x = e^z, f and its log-space derivatives c and K at x,
    the residuals and their max-norm — all rows of one (rows, b) array, so that a masked
    copy moves a whole iterate."""

    def __init__(self, raw, n):
        self.raw = raw
        m = 1 + n + n * n
        self.z, self.mu, self.x = raw[:n], raw[n], raw[n + 1:2 * n + 1]
        F = raw[2 * n + 1:2 * n + 1 + m]
        self.f, self.c = F[0], F[1:1 + n]                      # f, c_i = x_i f_i
        self.K = F[1 + n:].reshape(n, n, raw.shape[1])         # K_ij = x_i x_j f_ij
        self.r = raw[2 * n + 1 + m:3 * n + 2 + m]
        self.norm = raw[3 * n + 2 + m]
        self.outs_fg = [F[i] for i in range(1 + n)]
        pairs = [(i, j) for i in range(n) for j in range(i, n)]
        self.outs = self.outs_fg + [self.K[i, j] for i, j in pairs]
        self.mirror = [(self.K[j, i], self.K[i, j]) for i, j in pairs if i != j]

    @staticmethod
    def rows(n):
        return 3 * n + 3 + 1 + n + n * n


def _rows(op, a, out):
    """out = a[0] op a[1] op ... (a reduction over a short leading axis, one call per row:
    cheaper than numpy's reduction entry points for a handful of rows)."""
    if len(a) == 1:
        np.copyto(out, a[0])
        return out
    op(a[0], a[1], out=out)
    for i in range(2, len(a)):
        op(out, a[i], out=out)
    return out


def _spend_blocks(comp: Compiled, W, Y, P, tol, maxiter):
    """min w·x s.t. f(x) = y block by block, every array operation writing into buffers.

    Same mathematics as the array path (ray start, Newton on the log first-order
    conditions, residual-decrease test); the Newton step uses the structure of the
    bordered system (see :func:`_block_step`).  A point whose start fails, or whose full
    Newton step does not lower its residual, or that is still unfinished when the block
    hands over, is flagged for the array path.  Returns quantities, multipliers, values,
    iterations, residuals, converged (with the second-order check) and the two flags."""
    kfg, kfgh = comp.kernels
    N, n = W.shape
    k = n - 1
    kk = max(k, 1)
    B = min(BLOCK, N)
    spec = [("A", (_State.rows(n),)), ("C", (_State.rows(n),)), ("Wt", (n,)), ("lw", (n,)),
            ("ly", ()), ("base", (n,)), ("s", ()), ("e", ()), ("al", ()),
            ("v1", ()), ("v2", ()), ("v3", ()), ("v4", ()),
            ("ktmp", (max(kfg.ntmp, kfgh.ntmp, 1),)), ("c", (n,)), ("cr", (n,)), ("a", (n,)),
            ("u", (n,)), ("q", (n,)), ("rr", (n + 1,)), ("KZ", (n, kk)), ("sKZ", (kk,)),
            ("Mr", (kk, kk)), ("t", (kk,)), ("beta", (kk,))]
    ws = _Workspace(B, spec)
    X = np.empty((N, n))
    lam = np.empty(N)
    value = np.empty(N)
    iters = np.zeros(N, dtype=int)
    norm = np.empty(N)
    conv = np.zeros(N, dtype=bool)
    start_fail = np.zeros(N, dtype=bool)
    unfinished = np.zeros(N, dtype=bool)
    with np.errstate(all="ignore"):
        for s0 in range(0, N, B):
            s1 = min(N, s0 + B)
            b = s1 - s0
            V = ws.view(b)
            if "states" not in V:
                V["states"] = (_State(V["A"], n), _State(V["C"], n))
            A, C = V["states"]
            Pb = [p[s0:s1] for p in P]
            good = _block_start(kfg, kfgh, W[s0:s1], Y[s0:s1], Pb, A, V, n)
            _block_residual(A, V, n)
            it_b = np.zeros(b, dtype=int)
            frozen = np.zeros(b, dtype=bool)
            rounds = 0
            while True:
                act = good & ~frozen & (A.norm > tol) & np.isfinite(A.norm) & (it_b < maxiter)
                na = np.count_nonzero(act)
                if na == 0 or (rounds >= _HANDOFF and 8 * na < b):
                    break
                _block_step(A, C.z, C.mu, V, n, k)
                if na < b:                       # idle points keep their iterate exactly
                    idle = ~act
                    np.copyto(C.z, 0.0, where=idle)
                    np.copyto(C.mu, 0.0, where=idle)
                np.add(C.z, A.z, out=C.z)
                np.add(C.mu, A.mu, out=C.mu)
                _block_eval(kfgh, C, Pb, V)
                _block_residual(C, V, n)
                rej = act & ~(C.norm < A.norm)
                it_b += act
                it_b -= rej                      # the array path counts that round again
                if rej.any():
                    frozen |= rej
                    np.copyto(C.raw, A.raw, where=rej)
                A, C = C, A
                rounds += 1
            fin = np.isfinite(A.norm)
            unfinished[s0:s1] = good & fin & (A.norm > tol) & (it_b < maxiter)
            conv[s0:s1] = _block_second_order(comp, A, V, n, k, good & (A.norm <= tol), Pb)
            start_fail[s0:s1] = ~good
            np.copyto(X[s0:s1].T, A.x)
            np.exp(A.mu, out=lam[s0:s1])
            np.multiply(V["Wt"], A.x, out=V["c"])
            _rows(np.add, V["c"], value[s0:s1])
            norm[s0:s1] = A.norm
            iters[s0:s1] = it_b
    return X, lam, value, iters, norm, conv, start_fail, unfinished


def _block_eval(kern, S: _State, Pb, V, hess=True, from_z=True):
    if from_z:
        np.exp(S.z, out=S.x)
    kern(list(S.x) + Pb, S.outs if hess else S.outs_fg, V["ktmp"])
    if hess:
        for dst, src in S.mirror:
            np.copyto(dst, src)


def _block_start(kfg, kfgh, Wb, Yb, Pb, A: _State, V, n):
    """Ray start of :func:`start_on_level` on one block; leaves z, μ, x and f, c, K of
    the start in ``A``.  Returns the points whose start is good (positive prices and
    level, level reached to 1e-4); the others go to the array path (bisection)."""
    Wt, lw, ly, base, sv = V["Wt"], V["lw"], V["ly"], V["base"], V["s"]
    np.copyto(Wt, Wb.T)
    np.log(Wt, out=lw)
    np.log(Yb, out=ly)
    _rows(np.add, lw, V["v1"])
    np.add(V["v1"], ly, out=V["v1"])
    good = np.isfinite(V["v1"])          # every price and the level positive and finite
    np.divide(1.0, Wt, out=base)
    _rows(np.add, base, V["v4"])
    np.divide(base, V["v4"], out=base)
    sv.fill(0.0)
    lvl, d, step = A.r[n], V["v2"], V["v3"]
    hess = False
    for it in range(31):
        np.exp(sv, out=V["v1"])
        np.multiply(base, V["v1"], out=A.x)
        hess = it > 0
        _block_eval(kfgh if hess else kfg, A, Pb, V, hess, from_z=False)
        np.log(A.f, out=lvl)
        np.subtract(lvl, ly, out=lvl)
        if it == 30:
            break
        _rows(np.add, A.c, d)                    # d log f / d log t = ∇f·x / f
        np.divide(d, A.f, out=d)
        np.divide(lvl, d, out=step)
        np.minimum(step, RAY_STEP, out=step)
        np.maximum(step, -RAY_STEP, out=step)
        moving = np.isfinite(step) & ~(np.abs(lvl) < 1e-6)
        if not (moving & good).any():
            break
        np.copyto(step, 0.0, where=~np.isfinite(step))
        np.subtract(sv, step, out=sv)
    if not hess:
        _block_eval(kfgh, A, Pb, V, from_z=False)
    good &= np.abs(lvl) < 1e-4
    # z = log(base) + s with log base_i = −log w_i − log Σ 1/w
    np.log(V["v4"], out=V["v4"])
    np.add(V["v4"], lw, out=A.z)
    np.subtract(sv, A.z, out=A.z)
    # multiplier from w·x = λ ∇f·x
    np.multiply(Wt, A.x, out=V["c"])
    _rows(np.add, V["c"], V["v1"])
    _rows(np.add, A.c, V["v2"])
    np.divide(V["v1"], V["v2"], out=V["v1"])
    np.log(V["v1"], out=A.mu)
    np.copyto(A.mu, 0.0, where=~(V["v1"] > 0))
    return good


def _block_residual(S: _State, V, n):
    """log w − μ − log ∇f and log f − log y, and their max-norm (NaN when undefined);
    log f_i = log c_i − z_i."""
    ra = S.r[:n]
    np.log(S.c, out=ra)
    np.subtract(V["lw"], ra, out=ra)
    np.add(ra, S.z, out=ra)
    np.subtract(ra, S.mu, out=ra)
    np.log(S.f, out=S.r[n])
    np.subtract(S.r[n], V["ly"], out=S.r[n])
    np.abs(S.r, out=V["rr"])
    _rows(np.maximum, V["rr"], S.norm)


def _block_step(S: _State, dz, dmu, V, n, k):
    """The Newton step of the log first-order conditions at ``S``, into ``dz``, ``dmu``.

    With c = x∘∇f, e = Σc and K = x∘∇²f∘x (from the kernel), the system reads (the
    rows of the log conditions multiplied by −c_i)
        K dz + c dμ = c∘r,      cᵀdz = −f r_level.
    Its solution: dz = α·1 + Zβ with α = −f r_level / e and the columns
    Z_j = e_j − (c_j/e)·1 (j < n−1) spanning the tangent space cᵀu = 0; then
    (ZᵀKZ) β = Zᵀ(c∘r − αK1), an (n−1)×(n−1) system solved in closed form for n ≤ 3,
    and dμ = (Σc∘r − 1ᵀK dz)/e.
    No pivoting is needed; a singular or ill-conditioned system gives a step that fails
    the residual test, and the point goes to the array path.
    """
    f, c, r = S.f, S.c, S.r
    cr, a, u, q = V["cr"], V["a"], V["u"], V["q"]
    e, al = V["e"], V["al"]
    _reduced(S, V, k)
    np.multiply(c, r[:n], out=cr)
    np.multiply(f, r[n], out=al)
    np.divide(al, e, out=al)
    np.negative(al, out=al)
    np.multiply(u, al, out=q)
    np.subtract(cr, q, out=q)
    if k:
        Mr, t, beta = V["Mr"], V["t"], V["beta"]
        sq = V["v1"]
        _rows(np.add, q, sq)
        np.multiply(a[:k], sq, out=t)
        np.subtract(q[:k], t, out=t)
        _small_symmetric_solve(Mr, t, beta, V)
        ab = V["v2"]
        np.multiply(a[:k], beta, out=t)
        _rows(np.add, t, ab)
        np.subtract(al, ab, out=dz[k])
        np.add(beta, dz[k], out=dz[:k])
    else:
        np.copyto(dz[0], al)
    scr, ukd = V["v3"], V["v4"]
    _rows(np.add, cr, scr)
    np.multiply(u, dz, out=cr)
    _rows(np.add, cr, ukd)
    np.subtract(scr, ukd, out=dmu)
    np.divide(dmu, e, out=dmu)


def _reduced(S: _State, V, k):
    """e = Σc, a = c/e, u = K·1 and the reduced matrix ZᵀKZ (into V["Mr"]) for the
    tangent basis Z_j = e_j − a_j·1 of :func:`_block_step`."""
    c, K, e, a, u = S.c, S.K, V["e"], V["a"], V["u"]
    _rows(np.add, c, e)
    _rows(np.add, K.transpose(1, 0, 2), u)
    if k:
        KZ, sKZ, Mr = V["KZ"], V["sKZ"], V["Mr"]
        np.divide(c, e, out=a)
        np.multiply(u[:, None, :], a[None, :k, :], out=KZ)
        np.subtract(K[:, :k, :], KZ, out=KZ)
        _rows(np.add, KZ, sKZ)
        np.multiply(a[:k, None, :], sKZ[None, :, :], out=Mr)
        np.subtract(KZ[:k], Mr, out=Mr)


def _small_symmetric_solve(M, t, out, V):
    """out = M⁻¹ t for (k, k, b) matrices: closed form for k <= 2, else pivoting."""
    k = M.shape[0]
    if k == 1:
        np.divide(t[0], M[0, 0], out=out[0])
        return
    if k == 2:
        det, tmp = V["v1"], V["v2"]
        np.multiply(M[0, 0], M[1, 1], out=det)
        np.multiply(M[0, 1], M[1, 0], out=tmp)
        np.subtract(det, tmp, out=det)
        np.multiply(M[1, 1], t[0], out=out[0])
        np.multiply(M[0, 1], t[1], out=tmp)
        np.subtract(out[0], tmp, out=out[0])
        np.divide(out[0], det, out=out[0])
        np.multiply(M[0, 0], t[1], out=out[1])
        np.multiply(M[1, 0], t[0], out=tmp)
        np.subtract(out[1], tmp, out=out[1])
        np.divide(out[1], det, out=out[1])
        return
    sol = solve_small([[M[i, j] for j in range(k)] for i in range(k)], t.T)
    np.copyto(out, sol.T)


def _block_second_order(comp, S: _State, V, n, k, conv, Pb) -> np.ndarray:
    """:func:`second_order` at the converged points of a block, mostly without new work.

    The reduced matrix ZᵀKZ of the final iterate is congruent to the Hessian of f on the
    tangent space (x∘Z spans ∇f⊥), so where it is clearly negative definite the test of
    :func:`second_order` passes; where the tangent basis is not well conditioned (some
    c_i <= 0, extreme quantities) or the matrix is not clearly definite, the points get
    :func:`second_order` itself."""
    ok = np.zeros(conv.shape, dtype=bool)
    if k in (1, 2):
        _reduced(S, V, k)
        M = V["Mr"]
        fine = np.ones(conv.shape, dtype=bool)
        for i in range(n):
            fine &= (S.c[i] > 0) & (np.abs(S.z[i]) < 100.0)
        if k == 1:
            ok = fine & (M[0, 0] < 0)
        else:
            det, t1 = V["v1"], V["v2"]
            np.multiply(M[0, 0], M[1, 1], out=det)
            np.multiply(M[0, 1], M[1, 0], out=t1)
            np.subtract(det, t1, out=det)
            np.multiply(M[0, 0], M[1, 1], out=t1)
            np.multiply(t1, 1e-6, out=t1)
            ok = fine & (M[0, 0] < 0) & (det > t1)
        ok &= conv
    rest = np.flatnonzero(conv & ~ok)
    if rest.size:
        X = np.exp(S.z[:, rest].T)
        ok[rest] = second_order(comp, X, [p[rest] for p in Pb])
    return ok

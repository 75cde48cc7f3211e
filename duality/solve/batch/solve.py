"""The batched problems: spending (block engine first, then the array path; homothetic
shortcut), utility maximisation and profit maximisation.  See :mod:`duality.solve.batch`."""
from __future__ import annotations

import numpy as np

from ...model.base import Model
from .block import _spend_blocks
from .core import (MAXITER, TOL, BatchResult, _maxnorm, _newton, _residual_only,
                   _spending_generic, _spending_result, compiled, is_homothetic, second_order)

def solve_spending(model: Model, W, Y, P, *, tol: float = TOL,
                   maxiter: int = MAXITER) -> BatchResult:
    """min w·x s.t. f(x) = y at N points (rows of ``W``; ``Y`` and parameter arrays ``P``
    in the order of :attr:`Compiled.params`, each of length N)."""
    comp = compiled(model)
    W = np.asarray(W, float)
    Y = np.asarray(Y, float)
    N = W.shape[0]
    P = [np.broadcast_to(np.asarray(p, float), (N,)) for p in P]
    notes = []
    if (N > 1 and np.all(Y > 0) and all(np.ptp(p) == 0 for p in P if p.size)
            and is_homothetic(model)):
        repeats = _may_repeat(W[:, 0])
        uniq, inverse = (np.unique(W, axis=0, return_inverse=True) if repeats
                         else (W, None))
        if repeats and len(uniq) <= N // 2:  # solve each price row once, then scale
            res = _homothetic(comp, uniq, np.asarray(inverse).reshape(-1), W, Y, P, tol,
                              maxiter)
            if res is not None:
                return res
            notes.append("homothetic shortcut failed; solved at each level")
    return _spending_solve(comp, W, Y, P, tol, maxiter, tuple(notes))


def _may_repeat(col) -> bool:
    """Cheap screen: could at most half of the values in ``col`` be distinct?

    A large column is first sampled at ~8√N fixed pseudo-random positions: when half
    the values repeat, such a sample holds dozens of repeated values, so a sample with
    none rules repetition out without sorting the whole column."""
    N = col.size
    m = int(8 * np.sqrt(N)) + 64
    if N > 4 * m:
        pick = np.random.default_rng(7).choice(N, m, replace=False)
        if np.unique(col[pick]).size == m:
            return False
    return len(np.unique(col)) <= N // 2



def _spending_solve(comp, W, Y, P, tol, maxiter, notes=()) -> BatchResult:
    """The block engine where it applies, the array path for the points it leaves."""
    N, n = W.shape
    if comp.kernels is None or N == 0:
        v, iters, norm = _spending_generic(comp, W, Y, P, tol, maxiter)
        return _spending_result(comp, W, P, v, iters, norm, tol, notes)
    X, lam, value, iters, norm, conv, start_fail, unfinished = _spend_blocks(
        comp, W, Y, P, tol, maxiter)
    for idx, resume in ((np.flatnonzero(start_fail), False),
                        (np.flatnonzero(unfinished), True)):
        if idx.size == 0:
            continue
        Ws, Ys, Ps = W[idx], Y[idx], [p[idx] for p in P]
        if resume:
            with np.errstate(all="ignore"):
                v0 = np.concatenate([np.log(X[idx]), np.log(lam[idx])[:, None]], axis=1)
            v, it, nr = _spending_generic(comp, Ws, Ys, Ps, tol, maxiter, v0, iters[idx])
        else:
            v, it, nr = _spending_generic(comp, Ws, Ys, Ps, tol, maxiter)
        Xs = np.exp(v[:, :n])
        X[idx], lam[idx] = Xs, np.exp(v[:, n])
        value[idx] = np.einsum("ij,ij->i", Ws, Xs)
        iters[idx], norm[idx] = it, nr
        conv[idx] = (nr <= tol) & second_order(comp, Xs, Ps)
    norm[np.isnan(norm)] = np.inf
    bad = np.flatnonzero(~conv)
    if bad.size:
        X[bad], value[bad], lam[bad] = np.nan, np.nan, np.nan
    return BatchResult(value=value, quantities=X, multiplier=lam, iterations=iters,
                       residual=norm, converged=conv, notes=tuple(notes))



def _homothetic(comp, Wu, inverse, W, Y, P, tol, maxiter) -> BatchResult | None:
    """Solve once per distinct price row at a reference level, then move along each ray
    to the requested level (for homothetic f the tangency direction does not depend on
    the level)."""
    P1 = [p[:1] for p in P]
    yref = float(comp.f(np.ones((1, comp.n)), P1)[0])
    if not (np.isfinite(yref) and yref > 0):
        return None
    N = W.shape[0]
    K = Wu.shape[0]
    unit = solve_spending_plain(comp, Wu, np.full(K, yref), [p[:K] for p in P], tol, maxiter)
    if not np.all(unit[2] <= tol):
        return None
    Xh = np.exp(unit[0][:, :comp.n])[inverse]
    # scale: log f(e^s x̂) = log y, Newton in s from s = 0 (f(x̂) = yref)
    s = np.zeros(N)
    norm = np.full(N, np.inf)
    for _ in range(100):
        X = np.exp(s)[:, None] * Xh
        f, G = comp.fg(X, P)
        with np.errstate(all="ignore"):
            r = np.log(f) - np.log(Y)
            d = np.einsum("ij,ij->i", G, X) / f
        norm = np.abs(r)
        if np.all(norm <= tol) or not np.all(np.isfinite(r)) or np.any(d <= 0):
            break
        s = s - r / d
    if not np.all(np.isfinite(norm)):
        return None
    X = np.exp(s)[:, None] * Xh
    f, G = comp.fg(X, P)
    with np.errstate(all="ignore"):
        mu = np.log(np.einsum("ij,ij->i", W, X) / np.einsum("ij,ij->i", G, X))
    v = np.concatenate([np.log(X), mu[:, None]], axis=1)
    full = _residual_only(comp, W, Y, P, v[:, :comp.n], v[:, comp.n])
    iters = unit[1][inverse]
    return _spending_result(comp, W, P, v, iters, full, max(tol, 1e-11),
                            ("homothetic: solved at a reference level, then scaled",))


def solve_spending_plain(comp, W, Y, P, tol, maxiter):
    """Log-quantities with the log multiplier (N, n+1), iterations and final residual of
    the spending problem (no second-order check)."""
    res = _spending_solve(comp, W, Y, P, tol, maxiter)
    with np.errstate(all="ignore"):
        v = np.concatenate([np.log(res.quantities), np.log(res.multiplier)[:, None]], axis=1)
    return v, res.iterations, res.residual


# -- utility --------------------------------------------------------------------------------
def solve_utility(model: Model, Pr, M, P, *, tol: float = TOL,
                  maxiter: int = MAXITER) -> BatchResult:
    """max f(x) s.t. p·x = m at N points."""
    comp = compiled(model)
    Pr = np.asarray(Pr, float)
    M = np.asarray(M, float)
    P = [np.broadcast_to(np.asarray(p, float), (len(M),)) for p in P]
    n = comp.n
    X0 = M[:, None] / (n * Pr)
    _, G0 = comp.fg(X0, P)
    with np.errstate(all="ignore"):
        mu0 = np.log(np.einsum("ij,ij->i", G0, X0) / M)
    v = np.concatenate([np.log(X0), np.where(np.isfinite(mu0), mu0, 0.0)[:, None]], axis=1)

    def parts(Pr_, M_, P_, v_, hess=True):
        X = np.exp(v_[:, :n])
        mu = v_[:, n]
        if hess:
            f, G, H = comp.fgh(X, P_)
        else:
            f, G = comp.fg(X, P_)
            H = None
        with np.errstate(all="ignore"):
            r = np.empty((len(M_), n + 1))
            r[:, :n] = np.log(G) - mu[:, None] - np.log(Pr_)
            spend = np.einsum("ij,ij->i", Pr_, X)
            r[:, n] = np.log(spend) - np.log(M_)
        return r, X, G, H, spend

    def system(Pr_, M_, P_, v_):
        r, X, G, H, spend = parts(Pr_, M_, P_, v_)
        with np.errstate(all="ignore"):
            invG = 1.0 / G
            minus_one = np.full(len(M_), -1.0)
            J = [[H[:, i, j] * X[:, j] * invG[:, i] for j in range(n)] + [minus_one]
                 for i in range(n)]
            J.append([Pr_[:, j] * X[:, j] / spend for j in range(n)] + [np.zeros(len(M_))])
        return r, J, None

    def residual(Pr_, M_, P_, v_):
        return _maxnorm(parts(Pr_, M_, P_, v_, hess=False)[0])

    v, iters, norm = _newton(system, residual, v, (Pr, M, P), tol, maxiter)
    X = np.exp(v[:, :n])
    conv = (norm <= tol) & second_order(comp, X, P)
    X[~conv] = np.nan
    value = comp.f(np.where(conv[:, None], X, 1.0), P)
    value[~conv] = np.nan
    lam = np.exp(v[:, n])
    lam[~conv] = np.nan
    return BatchResult(value=value, quantities=X, multiplier=lam, iterations=iters,
                       residual=norm, converged=conv)


# -- profit -----------------------------------------------------------------------------------
def solve_profit(model: Model, price, W, P, *, tol: float = TOL,
                 maxiter: int = MAXITER) -> BatchResult:
    """max p f(x) − w·x at N points: find y with marginal cost λ(w, y) = p."""
    price = np.asarray(price, float)
    W = np.asarray(W, float)
    N = W.shape[0]
    P = [np.broadcast_to(np.asarray(p, float), (N,)) for p in P]
    price = np.broadcast_to(price, (N,))
    logp = np.log(price)
    # two trial levels give a local slope of log λ in log y
    ly = np.zeros(N)
    a = solve_spending(model, W, np.exp(ly), P, tol=tol, maxiter=maxiter)
    b = solve_spending(model, W, np.exp(ly + 0.5), P, tol=tol, maxiter=maxiter)
    la, lb = np.log(a.multiplier), np.log(b.multiplier)
    y_prev, l_prev = ly + 0.5, lb
    y_cur = ly
    l_cur = la
    iters = a.iterations + b.iterations
    last = a
    for _ in range(60):
        with np.errstate(all="ignore"):
            slope = (l_cur - l_prev) / (y_cur - y_prev)
            slope = np.where(np.isfinite(slope) & (slope > 1e-9), slope, np.nan)
            step = (logp - l_cur) / slope
            step = np.clip(step, -5.0, 5.0)
        done = np.abs(logp - l_cur) <= tol
        if np.all(done | ~np.isfinite(step)):
            break
        y_new = np.where(done | ~np.isfinite(step), y_cur, y_cur + step)
        res = solve_spending(model, W, np.exp(y_new), P, tol=tol, maxiter=maxiter)
        iters = iters + res.iterations
        y_prev, l_prev = y_cur, l_cur
        y_cur, l_cur = y_new, np.log(res.multiplier)
        last = res
    conv = last.converged & (np.abs(logp - l_cur) <= 1e-10)
    # marginal cost must rise with output (second-order condition of profit maximisation)
    with np.errstate(all="ignore"):
        rising = (l_cur - l_prev) / (y_cur - y_prev) > 0
    conv &= np.where(np.isfinite(rising), rising, False) | (np.abs(y_cur - y_prev) == 0)
    Y = np.exp(y_cur)
    X = last.quantities.copy()
    X[~conv] = np.nan
    value = price * Y - np.einsum("ij,ij->i", W, X)
    value[~conv] = np.nan
    Y = np.where(conv, Y, np.nan)
    return BatchResult(value=value, quantities=X, multiplier=np.where(conv, price, np.nan),
                       iterations=iters, residual=np.abs(logp - l_cur), converged=conv,
                       output=Y)

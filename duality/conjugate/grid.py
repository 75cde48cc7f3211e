"""Discrete Legendre–Fenchel transform of sampled functions (values on grids).

For samples ``f_i = f(x_i)`` on a strictly increasing grid ``x_0 < … < x_{n-1}``,

    f*(q) = max_i ( q·x_i − f_i ).

Only the vertices of the *lower convex hull* of the points (x_i, f_i) can be maximisers,
and on the hull the maximiser for slope q is the vertex k whose neighbouring edge slopes
satisfy s_{k-1} <= q <= s_k (the edge slopes of a lower hull increase).  So the transform
is: hull (linear time, see :func:`_hull_indices`), edge slopes, one ``np.searchsorted`` of
the query slopes into the edge slopes, one gather.  Nothing loops per point in Python.

Slopes outside the hull's slope range
-------------------------------------
For a slope q below the first edge slope s_0 (above the last, s_last) the maximum over the
samples is attained at the end x_0 (x_{n-1}) of the *sampled* domain only because the
grid stops there: the value q·x_0 − f_0 describes where the grid ends, not the function.
Such slopes return ``+inf`` explicitly (``-inf`` in the ``"intercept"`` convention) and the
result's notes say so.  Inside [s_0, s_last] (endpoints included) the value is the exact
maximum over the samples.

Several variables
-----------------
For f sampled on a product grid the transform separates,

    f*(p_1, …, p_d) = sup_{x_1} ( p_1 x_1 + … + sup_{x_d} ( p_d x_d − f(x_1, …, x_d) ) ),

so it is applied along the last axis for every line, the result negated and transformed
along the next axis, and so on.  A ``+inf`` from an inner transform (slope out of that
line's range) makes every outer value on that line ``+inf`` (it is propagated, never
replaced by a finite guess); where the result is finite it is the exact maximum over the
grid.

Ties: at a slope equal to an edge slope both ends of the edge are maximisers and give the
same value; the left end is reported as the maximiser.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..errors import DualityError

try:  # scipy >= 1.12: compiled pool-adjacent-violators algorithm (linear time)
    from scipy.optimize import isotonic_regression as _pava
except ImportError:  # pragma: no cover - older scipy: pure numpy passes only
    _pava = None

CONVENTIONS = ("sup", "intercept")

OUTSIDE_NOTE = ("slopes outside [first, last] hull-edge slope give +inf: there the maximum "
                "over the samples sits at an end of the sampled grid, so it would describe "
                "where the grid stops rather than the function")


# ---------------------------------------------------------------------------------------
# result object
# ---------------------------------------------------------------------------------------

@dataclass(frozen=True, eq=False)
class GridConjugate:
    """The conjugate of sampled values.

    Attributes
    ----------
    values : ndarray
        f* at :attr:`slopes` (in the requested convention): shape of ``p`` in 1-D,
        ``(len(p1), len(p2), …)`` in n-D.  ``+inf`` (``-inf`` for ``"intercept"``) where
        a slope is outside the hull's slope range.
    slopes : ndarray or tuple of ndarray
        The query slopes (1-D) or the slope grid per axis (n-D).
    grid : ndarray or tuple of ndarray
        The primal grid.
    argmax : ndarray or None
        1-D: index into ``grid`` of the maximising sample for each slope (``-1`` where the
        value is infinite).  None in n-D.
    hull : ndarray or None
        1-D: indices into ``grid`` of the vertices of the lower convex hull.  None in n-D.
    slope_range : tuple of float or None
        1-D: (first, last) hull-edge slope; f* is finite exactly on this closed interval.
    route, kind, convention, notes
        As for :class:`duality.conjugate.Conjugate`; route is ``"numeric"``, kind
        ``"fenchel"``.
    """

    values: np.ndarray
    slopes: Any
    grid: Any
    argmax: np.ndarray | None = None
    hull: np.ndarray | None = None
    slope_range: tuple | None = None
    route: str = "numeric"
    kind: str = "fenchel"
    convention: str = "sup"
    notes: tuple = ()
    _hx: np.ndarray | None = field(default=None, repr=False)
    _hf: np.ndarray | None = field(default=None, repr=False)
    _hs: np.ndarray | None = field(default=None, repr=False)
    _samples: np.ndarray | None = field(default=None, repr=False)

    def __call__(self, p) -> np.ndarray:
        """f* at new slopes, computed exactly from the stored hull (no interpolation).

        1-D: ``p`` is a number or an array of slopes (result of the same shape).  n-D: a
        tuple of 1-D slope arrays, one per axis (result on their product grid).
        """
        sign = 1.0 if self.convention == "sup" else -1.0
        if self._samples is not None:  # n-D: rerun the separable transform
            ps = _slopes_nd(p, len(self.grid))
            vals, _ = _transform_nd(self._samples, self.grid, ps, "inf", False)
            return sign * vals
        q = _slopes_1d(p)
        vals, _ = _eval_line(self._hx, self._hf, self._hs, q.ravel(), "inf")
        out = sign * vals.reshape(q.shape)
        return float(out) if out.ndim == 0 else out

    def __repr__(self) -> str:
        star = "f*" if self.convention == "sup" else "-f*"
        shape = "x".join(map(str, np.shape(self.values)))
        return (f"GridConjugate({star} at {shape} slopes; route={self.route!r}, "
                f"kind={self.kind!r}, convention={self.convention!r})")


# ---------------------------------------------------------------------------------------
# input checks
# ---------------------------------------------------------------------------------------

def _check_convention(convention):
    if convention not in CONVENTIONS:
        raise DualityError(f"unknown convention {convention!r}; allowed values are "
                           f"{', '.join(repr(c) for c in CONVENTIONS)}")


def _values(f) -> np.ndarray:
    if isinstance(f, (str, bytes)):
        raise DualityError("f must be an array of sampled values, not text")
    try:
        fa = np.asarray(f, dtype=float)
    except (TypeError, ValueError) as exc:
        raise DualityError(f"f must be a rectangular array of numbers ({exc})") from None
    if fa.ndim == 0:
        raise DualityError("f must be an array of sampled values, got a single number")
    if fa.size == 0:
        raise DualityError(f"f is empty (shape {fa.shape}); need at least two samples")
    if np.isnan(fa).any():
        where = _where(np.argwhere(np.isnan(fa))[0])
        raise DualityError(f"f contains NaN at index {where}")
    if np.isneginf(fa).any():
        where = _where(np.argwhere(np.isneginf(fa))[0])
        raise DualityError(f"f contains -inf at index {where}; a function equal to -inf "
                           f"somewhere has conjugate +inf everywhere")
    return fa


def _where(idx) -> str:
    idx = tuple(int(i) for i in np.atleast_1d(idx))
    return str(idx[0]) if len(idx) == 1 else str(idx)


def _grid(x, name: str, n: int, fname: str = "f") -> np.ndarray:
    try:
        xa = np.asarray(x, dtype=float)
    except (TypeError, ValueError) as exc:
        raise DualityError(f"{name} must be a 1-D array of numbers ({exc})") from None
    if xa.ndim != 1:
        raise DualityError(f"{name} must be a 1-D array of grid points, got shape {xa.shape}")
    if xa.size == 0:
        raise DualityError(f"{name} is empty; need at least two grid points")
    if xa.size != n:
        raise DualityError(f"{fname} has {n} values but {name} has {xa.size} points")
    bad = ~np.isfinite(xa)
    if bad.any():
        i = int(np.argmax(bad))
        raise DualityError(f"{name} must be finite; {name}[{i}] = {xa[i]}")
    step = np.diff(xa) <= 0
    if step.any():
        i = int(np.argmax(step)) + 1
        raise DualityError(f"{name} must be strictly increasing; {name}[{i}] = {xa[i]:g} "
                           f"<= {name}[{i - 1}] = {xa[i - 1]:g}")
    return xa


def _slopes_1d(p, name: str = "p") -> np.ndarray:
    if isinstance(p, (str, bytes)):
        raise DualityError(f"{name} must be numbers (query slopes), not text")
    try:
        q = np.asarray(p, dtype=float)
    except (TypeError, ValueError) as exc:
        raise DualityError(f"{name} must be an array of slopes ({exc})") from None
    if np.isnan(q).any():
        raise DualityError(f"{name} contains NaN at index {_where(np.argwhere(np.isnan(q))[0])}")
    if np.isinf(q).any():
        raise DualityError(f"{name} contains an infinite slope at index "
                           f"{_where(np.argwhere(np.isinf(q))[0])}")
    return q


def _slopes_nd(p, d: int) -> tuple:
    if isinstance(p, np.ndarray) or not isinstance(p, (tuple, list)) or len(p) != d:
        raise DualityError(f"f has {d} axes so p must be a tuple of {d} 1-D slope arrays")
    out = []
    for j, pj in enumerate(p):
        if pj is None:
            out.append(None)
            continue
        q = _slopes_1d(pj, f"p[{j}]")
        if q.ndim != 1 or q.size == 0:
            raise DualityError(f"p[{j}] must be a non-empty 1-D array of slopes, "
                               f"got shape {q.shape}")
        out.append(q)
    return tuple(out)


def _grids_nd(x, shape: tuple) -> tuple:
    d = len(shape)
    if isinstance(x, np.ndarray) and x.ndim == 2 and x.shape[0] == d and d > 1:
        x = tuple(x)
    if not isinstance(x, (tuple, list)) or len(x) != d:
        raise DualityError(f"f has {d} axes (shape {shape}) so x must be a tuple of "
                           f"{d} 1-D grids")
    grids = []
    for j, xj in enumerate(x):
        try:
            n_j = np.asarray(xj, dtype=float).size
        except (TypeError, ValueError):
            n_j = -1
        if n_j != shape[j]:
            lens = tuple(_len(g) for g in x)
            raise DualityError(f"f has shape {shape} but the grids have lengths {lens}")
        grids.append(_grid(xj, f"x[{j}]", shape[j]))
    return tuple(grids)


def _len(g) -> Any:
    try:
        return int(np.asarray(g, dtype=float).size)
    except (TypeError, ValueError):
        return "?"


# ---------------------------------------------------------------------------------------
# the lower convex hull of one line of points
# ---------------------------------------------------------------------------------------

def _prune(x, f, idx):
    """Drop, in vectorised passes, every vertex on or above the chord of its neighbours.

    A point on or above the segment joining two other points (one on each side) is not an
    extreme point of the epigraph's hull, so dropping all such points of a pass at once
    never drops a hull vertex and leaves the hull unchanged.  When a pass drops nothing,
    the edge slopes strictly increase: the remaining points are the hull vertices.
    The test is the comparison of consecutive edge slopes, the same numbers later used by
    ``searchsorted``, so the returned slopes are strictly increasing in floating point.
    """
    while True:
        s = np.diff(f[idx]) / np.diff(x[idx])
        if s.size < 2:
            return idx, s
        bad = s[:-1] >= s[1:]
        if not bad.any():
            return idx, s
        keep = np.ones(idx.size, dtype=bool)
        keep[1:-1] = ~bad
        idx = idx[keep]


def _hull_indices(x, f):
    """Indices of the lower-convex-hull vertices of (x_i, f_i), x strictly increasing.

    Linear time, vectorised.  The lower convex hull (greatest convex minorant) of the
    points is the "cumulative sum diagram" of the difference quotients
    d_i = (f_{i+1} − f_i)/(x_{i+1} − x_i) with weights w_i = x_{i+1} − x_i, and its edge
    slopes are the weighted non-decreasing (isotonic) regression of d: pooling adjacent
    violators of d merges exactly the edges a chord replaces (Barlow, Bartholomew, Bremner
    & Brunk, Statistical Inference under Order Restrictions, 1972, ch. 1; from memory).
    The pool boundaries are therefore the hull vertices.  Strictly increasing difference
    quotients (convex data) are detected first, in one pass, and need no pooling.  scipy's compiled pool-adjacent-
    violators routine (a general statistics tool) computes them in O(n); a final chord
    pass (:func:`_prune`, normally dropping nothing) removes any point that rounding in
    the pooled means left on or above a chord, so the slopes returned strictly increase.

    Without that scipy routine (scipy < 1.12) :func:`_prune` alone is used: every pass is
    vectorised, but a deep non-convex pocket loses only a point per side per pass.
    """
    n = x.size
    if n <= 2:
        return np.arange(n), np.diff(f) / np.diff(x)
    dx = np.diff(x)
    d = np.diff(f) / dx
    if bool(np.all(d[1:] > d[:-1])):
        # convex data, detected in one pass: every point is a vertex and the difference
        # quotients are the edge slopes (what :func:`_prune` would return unchanged)
        return np.arange(n), d
    if _pava is not None:
        idx = np.asarray(_pava(d, weights=dx).blocks, dtype=np.intp)
    else:  # pragma: no cover
        idx = np.arange(n)
    return _prune(x, f, idx)


def _convex_indices(x, f, where):
    """Fast path for data said to be convex: check slopes, drop collinear interior points.

    ``where(j)`` maps a position on this line to the index reported in the error.  A
    decrease of the difference quotients small enough to be rounding (closely spaced
    points) is not an error: the hull is then computed as for convex=False.
    """
    s = np.diff(f) / np.diff(x)
    if s.size >= 2:
        dec = s[1:] < s[:-1]
        if dec.any():
            j = np.flatnonzero(dec) + 1  # interior points where the slope decreases
            tol = _rounding_bound(x, f, s, j)
            big = (s[j - 1] - s[j]) > tol
            if big.any():
                j = int(j[np.argmax(big)])
                raise DualityError(
                    f"f is not convex at index {where(j)}: slope {s[j]:.6g} after it is "
                    f"below slope {s[j - 1]:.6g} before it (pass convex=False to use the "
                    f"convex envelope)")
            return _hull_indices(x, f)
        keep = np.ones(x.size, dtype=bool)
        keep[1:-1] = s[1:] > s[:-1]
        if not keep.all():
            idx = np.flatnonzero(keep)
            return idx, np.diff(f[idx]) / np.diff(x[idx])
    return np.arange(x.size), s


def _rounding_bound(x, f, s, j):
    """Generous bound on the rounding error of s[j-1] − s[j] (s: difference quotients)."""
    eps = np.finfo(float).eps

    def err(e):  # error of s[e] = (f[e+1] − f[e]) / (x[e+1] − x[e])
        dx = x[e + 1] - x[e]
        return eps * ((np.abs(f[e]) + np.abs(f[e + 1]))
                      + np.abs(s[e]) * (np.abs(x[e]) + np.abs(x[e + 1]))) / dx \
            + eps * np.abs(s[e])
    return 8.0 * (err(j - 1) + err(j))


def _sort_order(q):
    """A permutation putting ``q`` (float64, 1-D, no NaN) in order, up to ties in its
    leading bits, from one ``np.sort`` of 64-bit integers instead of an ``argsort``.

    The bit pattern of a float, with the magnitude bits flipped for negatives, is an
    integer in the same order as the float (IEEE 754 layout; common practice, no
    source).  Its lowest ⌈log2 m⌉ bits are replaced by the position, so sorting the
    integers carries the permutation along; values equal in all other bits may come out
    of order, which costs the sweep below a little speed and never its result."""
    m = q.size
    bits = max(1, int(m - 1).bit_length())
    b = np.ascontiguousarray(q, dtype=np.float64).view(np.int64)
    key = b ^ ((b >> 63) & np.int64(0x7FFFFFFFFFFFFFFF))
    key >>= bits
    key <<= bits
    key |= np.arange(m, dtype=np.int64)
    key.sort()
    key &= np.int64((1 << bits) - 1)
    return key


def _locate(s, q):
    """``np.searchsorted(s, q, side="left")``, fast also for many unsorted queries.

    Returns ``(k, order)``: ``order`` is None when ``k[j]`` belongs to ``q[j]``; else
    ``k[j]`` belongs to ``q[order[j]]`` (queries taken in nearly sorted order).
    Sorted queries are located in one merge-like sweep (numpy reuses the previous bound).
    Many unsorted queries into a long hull make every binary search miss the cache; then
    the queries are put in order once (:func:`_sort_order`, the only super-linear step)
    and located in that order, so that the later gathers from the hull run in order too.
    """
    if s.size > 2**15 and q.size > 2**10 and not bool(np.all(q[1:] >= q[:-1])):
        order = _sort_order(q)
        return np.searchsorted(s, q[order], side="left"), order
    return np.searchsorted(s, q, side="left"), None


def _eval_line(hx, hf, s, q, outside, label=None):
    """f*(q) = q·x_k − f_k with k the hull vertex for slope q; also returns k (-1: inf),
    or ``label[k]`` when ``label`` is given (gathered in the lookup's order, which is
    cheaper than gathering afterwards in the caller's).

    ``outside="inf"``: +inf for q outside [s_0, s_last] (also for a single vertex, which
    has no edge).  ``outside="extend"``: the plain maximum over the samples, i.e. the end
    vertex beyond the range.
    """
    k, order = _locate(s, q)  # s[k-1] < q <= s[k]
    qo = q if order is None else q[order]
    vals = hx[k]
    with np.errstate(invalid="ignore"):
        vals *= qo
    lost = np.isnan(vals)
    if lost.any():  # 0·(±inf): the vertex at x = 0 gives q·0 = 0 for any slope q
        lost &= ~np.isnan(qo)
        vals[lost] = 0.0
    vals -= hf[k]
    if label is not None:
        k = label[k]
    if outside == "inf":
        if s.size == 0:
            vals[...] = np.inf
            k[...] = -1
        else:
            out = (qo < s[0]) | (qo > s[-1])
            if out.any():
                vals[out] = np.inf
                k[out] = -1
    if order is not None:  # back to the caller's order
        v2, k2 = np.empty_like(vals), np.empty_like(k)
        v2[order] = vals
        k2[order] = k
        vals, k = v2, k2
    return vals, k


# ---------------------------------------------------------------------------------------
# one dimension
# ---------------------------------------------------------------------------------------

def _prepare_1d(fa, x, convex):
    if fa.ndim != 1:
        raise DualityError(f"f has shape {fa.shape}; for a 1-D grid f must be 1-D")
    if isinstance(x, (tuple, list)) and len(x) == 1 and np.ndim(x[0]) == 1:
        x = x[0]
    xa = _grid(x, "x", fa.size)
    fin = np.isfinite(fa)
    nfin = int(fin.sum())
    if nfin == 0:
        raise DualityError("f is +inf at every grid point (no finite sample)")
    if nfin == 1:
        raise DualityError("f has only one finite sample; need at least two to form a "
                           "hull edge (the slope range would be empty)")
    pos = np.flatnonzero(fin) if nfin < fa.size else None
    xs, fs = (xa, fa) if pos is None else (xa[pos], fa[pos])
    if convex:
        idx, s = _convex_indices(xs, fs, lambda j: int(j if pos is None else pos[j]))
    else:
        idx, s = _hull_indices(xs, fs)
    hull = idx if pos is None else pos[idx]
    return fa, xa, xs, fs, idx, s, hull, nfin


def conjugate_samples(f, x, p=None, *, convex: bool = False,
                      convention: str = "sup") -> GridConjugate:
    """Legendre–Fenchel transform of sampled values, exactly, in linear time.

    Linear in the number of samples and of query slopes; the one super-linear step is an
    argsort of the query slopes when very many unsorted slopes meet a very long hull
    (see :func:`_locate`).

    Parameters
    ----------
    f : array_like
        Values at the grid points: 1-D (``len(x)``) or, on a product grid, an array of
        shape ``(len(x[0]), len(x[1]), …)``.  ``+inf`` marks points outside the domain
        (they are dropped); NaN and ``-inf`` are errors.
    x : array_like or tuple of array_like
        Strictly increasing grid (any spacing); a tuple of grids for n-D ``f``.
    p : array_like or tuple of array_like, optional
        Query slopes (1-D: any shape and order; n-D: one 1-D array per axis, the result
        is on their product grid).  Default per axis: ``len(x)`` slopes evenly spaced
        between the first and last hull-edge slope (n-D: the range shared by all lines
        along that axis, so the values are finite when such a range exists); a single
        slope when that range is one point (the hull is one edge).
    convex : bool
        Promise that the samples are convex: skip the hull, only check that the
        difference quotients do not decrease (DualityError naming the index otherwise).
        In n-D this applies to the innermost (last-axis) pass.
    convention : {"sup", "intercept"}
        ``"sup"``: f*(p) = max_i (p·x_i − f_i).  ``"intercept"``: its negative, the
        intercept f(x) − p·x of the supporting line with slope p.

    Returns
    -------
    GridConjugate
        Non-convex samples give the conjugate of their convex envelope (the hull does it);
        the notes say how many samples were not on the hull.  Slopes outside the hull's
        slope range give ``+inf`` (see the module notes).
    """
    _check_convention(convention)
    fa0 = _values(f)
    if fa0.ndim >= 2:
        return _conjugate_nd(fa0, x, p, convex, convention)
    fa, xa, xs, fs, idx, s, hull, nfin = _prepare_1d(fa0, x, convex)
    hx, hf = xs[idx], fs[idx]
    if p is None:  # a single slope when the hull is one edge
        q = np.linspace(s[0], s[-1], xa.size) if s[-1] > s[0] else s[:1].copy()
    else:
        q = _slopes_1d(p)
    vals, argmax = _eval_line(hx, hf, s, q.ravel(), "inf", label=hull)
    k = argmax  # -1 where the slope is outside the range, as the hull index is
    argmax = argmax.reshape(q.shape)
    vals = vals.reshape(q.shape)
    notes = []
    if nfin < fa.size:
        notes.append(f"{fa.size - nfin} point(s) with f = +inf dropped (outside the domain)")
    off = nfin - hull.size
    if off:
        notes.append(f"{off} of {nfin} finite sample(s) not on the lower convex hull "
                     f"(not convex there, or collinear): the result is the conjugate of "
                     f"the convex envelope")
    else:
        notes.append("samples convex: all points are hull vertices")
    nout = int(np.count_nonzero(k < 0))
    notes.append(OUTSIDE_NOTE + (f" ({nout} of {k.size} query slope(s) outside)"
                                 if nout else ""))
    if convex:
        notes.append("convex=True: convexity checked on difference quotients; the hull "
                     "is computed only if rounding made some of them decrease")
    if convention == "intercept":
        vals = -vals
    return GridConjugate(values=vals, slopes=q, grid=xa, argmax=argmax, hull=hull,
                         slope_range=(float(s[0]), float(s[-1])), convention=convention,
                         notes=tuple(notes), _hx=hx, _hf=hf, _hs=s)


def biconjugate_samples(f, x, *, convex: bool = False) -> np.ndarray:
    """The convex envelope of the samples at the primal grid (f** on the grid).

    1-D: exact — the linear interpolation of the lower convex hull; ``+inf`` at grid
    points outside the hull of the finite samples (only where f = +inf at the ends).
    Convex samples come back unchanged (up to rounding at collinear points).

    n-D: the separable transform applied twice on grids — f* (the plain maximum over the
    samples, no +inf rule) on a slope grid with as many points per axis as the primal grid,
    spanning all hull-edge slopes of the lines, then max over that slope grid of
    q·x − f*(q) at the primal points.  This is an approximation from below: it is the
    envelope wherever a supporting slope of the envelope lies on the slope grid, and
    otherwise errs by at most about (slope step) × (grid step) per axis for smooth f.
    """
    fa0 = _values(f)
    if fa0.ndim >= 2:
        return _biconjugate_nd(fa0, x, convex)
    fa, xa, xs, fs, idx, s, hull, nfin = _prepare_1d(fa0, x, convex)
    hx, hf = xs[idx], fs[idx]
    env = np.interp(xa, hx, hf)
    env[hull] = hf  # the vertices exactly
    env[(xa < hx[0]) | (xa > hx[-1])] = np.inf
    return env


# ---------------------------------------------------------------------------------------
# several dimensions (separable passes)
# ---------------------------------------------------------------------------------------

def _stage(lines, xg, q, outside, convex, sink, where):
    """Transform every row of ``lines`` (values on grid ``xg``) at slopes ``q``.

    Rows containing ``-inf`` (an inner +inf, negated) give +inf for every slope; rows
    with no finite value give -inf (max over an empty set); ``+inf`` entries are dropped.
    Returns (values of shape (rows, len(q)), q, count of non-hull points, rows with +inf).
    """
    L, n = lines.shape
    hulls = []
    offhull = 0
    fin_all = np.isfinite(lines)
    for r in range(L):
        v = lines[r]
        if fin_all[r].all():
            xs, vs, pos = xg, v, None
        elif np.isneginf(v).any():
            hulls.append("+inf")
            continue
        else:
            pos = np.flatnonzero(fin_all[r])
            if pos.size == 0:
                hulls.append("-inf")
                continue
            xs, vs = xg[pos], v[pos]
        if convex:
            idx, s = _convex_indices(
                xs, vs, lambda j, _r=r, _p=pos: where(_r, int(j if _p is None else _p[j])))
        else:
            idx, s = _hull_indices(xs, vs)
        offhull += xs.size - idx.size
        hulls.append((xs[idx], vs[idx], s))
    if q is None:
        q = _default_slopes(hulls, n, outside, sink)
    out = np.empty((L, q.size))
    for r, h in enumerate(hulls):
        if isinstance(h, str):
            out[r] = np.inf if h == "+inf" else -np.inf
        else:
            out[r], _ = _eval_line(h[0], h[1], h[2], q, outside)
    return out, q, offhull


def _default_slopes(hulls, n, outside, note_sink):
    """Evenly spaced slopes over the range shared by all lines (``"inf"``) or their union."""
    firsts = np.array([h[2][0] for h in hulls if not isinstance(h, str) and h[2].size])
    lasts = np.array([h[2][-1] for h in hulls if not isinstance(h, str) and h[2].size])
    if firsts.size == 0:
        raise DualityError(f"cannot choose default slopes for axis {note_sink['axis']}: no "
                           f"line along it has two finite values; pass p")
    lo, hi = float(firsts.max()), float(lasts.min())
    if outside == "extend" or lo > hi:
        if outside == "inf":
            note_sink["notes"].append(
                f"axis {note_sink['axis']}: the lines' hull slope ranges share no slope; "
                f"default slopes span their union, so some values are +inf")
        lo, hi = float(firsts.min()), float(lasts.max())
    return np.linspace(lo, hi, n) if hi > lo else np.array([lo])


def _transform_nd(fa, grids, ps, outside, convex, notes=None):
    """Separable transform of ``fa`` on ``grids`` at slope grids ``ps`` (None: default)."""
    d = fa.ndim
    arr = fa
    slopes = list(ps)
    sink = {"notes": notes if notes is not None else [], "axis": None}
    offhull_first = 0
    for j in range(d - 1, -1, -1):
        vals = arr if j == d - 1 else -arr
        moved = np.moveaxis(vals, j, -1)
        shp = moved.shape
        lines = moved.reshape(-1, shp[-1])
        sink["axis"] = j

        def where(r, i, _shp=shp, _j=j):
            rest = np.unravel_index(r, _shp[:-1]) if len(_shp) > 1 else ()
            idx = list(int(t) for t in rest)
            idx.insert(_j, i)
            return tuple(idx)
        with np.errstate(invalid="ignore", over="ignore"):
            out, q, off = _stage(np.ascontiguousarray(lines), grids[j], slopes[j], outside,
                                 convex and j == d - 1, sink, where)
        if j == d - 1:
            offhull_first = off
        slopes[j] = q
        arr = np.moveaxis(out.reshape(shp[:-1] + (q.size,)), -1, j)
    return arr, (tuple(slopes), offhull_first, sink["notes"])


def _conjugate_nd(fa, x, p, convex, convention):
    grids = _grids_nd(x, fa.shape)
    ps = (None,) * fa.ndim if p is None else _slopes_nd(p, fa.ndim)
    fin = np.isfinite(fa)
    if not fin.any():
        raise DualityError("f is +inf at every grid point (no finite sample)")
    notes = []
    vals, (slopes, off, notes) = _transform_nd(fa, grids, ps, "inf", convex, notes)
    ndrop = int(fa.size - fin.sum())
    if ndrop:
        notes.insert(0, f"{ndrop} point(s) with f = +inf dropped (outside the domain)")
    notes.append(f"separable passes along axes {fa.ndim - 1}..0; {off} point(s) not on the "
                 f"hull of their line in the first pass")
    ninf = int(np.count_nonzero(np.isinf(vals)))
    notes.append(OUTSIDE_NOTE + "; in n-D a +inf from an inner pass is propagated"
                 + (f" ({ninf} of {vals.size} values are +inf)" if ninf else ""))
    sign = 1.0 if convention == "sup" else -1.0
    return GridConjugate(values=sign * vals, slopes=slopes, grid=grids, convention=convention,
                         notes=tuple(notes), _samples=fa)


def _biconjugate_nd(fa, x, convex):
    grids = _grids_nd(x, fa.shape)
    if not np.isfinite(fa).any():
        raise DualityError("f is +inf at every grid point (no finite sample)")
    fstar, (slopes, _, _) = _transform_nd(fa, grids, (None,) * fa.ndim, "extend", convex)
    env, _ = _transform_nd(fstar, slopes, grids, "extend", False)
    return env


__all__ = ["GridConjugate", "conjugate_samples", "biconjugate_samples"]

"""Benchmark of the discrete Legendre–Fenchel transform of samples (duality.conjugate.grid).

Run:  python tests/benchmarks/bench_grid.py [--naive-limit SECONDS] [--seed N]

Prints, measured in one run:
1. 1-D, n = 1e3 … 1e6 samples on an uneven grid of a noisy non-convex function
   (x⁴ − x² + noise), m = n query slopes in random order inside the hull's slope range:
   the linear-time transform against the naive O(n·m) maximum (chunked numpy), their
   ratio, the largest disagreement, the fitted scaling exponent of the fast method, and
   at n = 1e6 one ``np.sort`` of the same (unsorted) draws (ratio: median of 9 pairs timed
   back to back).
2. 2-D, n = 64 … 512 points per axis, a non-separable convex quadratic plus a ripple,
   m = n slopes per axis: the separable grid transform against the naive maximum over all
   grid points for every slope pair (chunked numpy).
In 1-D above n = 1e4 the naive maximum runs on a subsample of the (randomly ordered)
query slopes and its time is scaled to all n slopes (printed "(sub m)" and said beside the
headline).  The naive method runs only where its estimated time (from its first chunks) is
under the limit; otherwise "skipped (est. X s)" is printed, and at 2-D n = 512 the ratio is
extrapolated from the n⁴ cost of the largest measured size (and says so).
Goals: ≥ 500× at 1-D n = 1e5; exponent ≤ 1.2; agreement ≤ 1e-12; ≤ 5× sort at 1e6;
≥ 300× at 2-D n = 512; also ≤ 5× sort for convex x² at 1e6.  Every headline is printed
beside its goal and again as one JSON line at the end.  This is a script, not a test:
nothing here is asserted.
"""
from __future__ import annotations

import argparse
import math
import statistics
import sys
import time

import numpy as np

from duality.conjugate import conjugate_samples

from _report import emit, headline

CMD = "python tests/benchmarks/bench_grid.py"


def median_time(fn, repeats):
    times = []
    out = None
    for _ in range(repeats):
        t = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t)
    return statistics.median(times), out


def paired_ratio(fn, ref, repeats=7):
    """Median over ``repeats`` of time(fn) / time(ref), the two timed back to back (in
    alternating order) so that a change of machine load touches both alike; also the
    median times."""
    rs, ta, tb = [], [], []
    for i in range(repeats):
        pair = [fn, ref] if i % 2 else [ref, fn]
        t = {}
        for g in pair:
            t0 = time.perf_counter()
            g()
            t[g] = time.perf_counter() - t0
        rs.append(t[fn] / t[ref])
        ta.append(t[fn])
        tb.append(t[ref])
    return statistics.median(rs), statistics.median(ta), statistics.median(tb)


def naive_1d(f, x, q, limit):
    """max_i (q·x_i − f_i) in chunks of q; returns (values or None, seconds, estimated)."""
    chunk = max(1, 4_000_000 // x.size)
    out = np.empty(q.size)
    t0 = time.perf_counter()
    done = 0
    while done < q.size:
        c = q[done:done + chunk]
        out[done:done + c.size] = (c[:, None] * x[None, :] - f[None, :]).max(axis=1)
        done += c.size
        elapsed = time.perf_counter() - t0
        if elapsed > 1.0 and done < q.size:
            est = elapsed * q.size / done
            if est > limit:
                return None, est, True
    return out, time.perf_counter() - t0, False


def naive_2d(f, x1, x2, q1, q2, limit):
    """max over all grid points of q1·x1 + q2·x2 − f, for every slope pair, chunked."""
    g1, g2 = np.meshgrid(x1, x2, indexing="ij")
    g1, g2, gf = g1.ravel(), g2.ravel(), f.ravel()
    P1, P2 = np.meshgrid(q1, q2, indexing="ij")
    P1, P2 = P1.ravel(), P2.ravel()
    chunk = max(1, 4_000_000 // gf.size)
    out = np.empty(P1.size)
    t0 = time.perf_counter()
    done = 0
    while done < P1.size:
        a, b = P1[done:done + chunk], P2[done:done + chunk]
        v = a[:, None] * g1[None, :]
        v += b[:, None] * g2[None, :]
        v -= gf[None, :]
        out[done:done + a.size] = v.max(axis=1)
        done += a.size
        elapsed = time.perf_counter() - t0
        if elapsed > 1.0 and done < P1.size:
            est = elapsed * P1.size / done
            if est > limit:
                return None, est, True
    return out.reshape(q1.size, q2.size), time.perf_counter() - t0, False


def bench_1d(limit, seed):
    rng = np.random.default_rng(seed)
    print("1-D: f = x^4 - x^2 + 0.01*noise on n sorted uniform points in [-2, 2]; "
          "m = n slopes, random order, inside the hull slope range")
    head = (f"{'n':>9} {'fast (s)':>10} {'naive (s)':>22} {'ratio':>9} "
            f"{'max |diff|':>11} {'hull pts':>9}")
    print(head)
    print("-" * len(head))
    fast_t = {}
    ratios = {}
    diffs = []
    subsampled = {}
    sort_info = None
    for k in (3, 4, 5, 6):
        n = 10**k
        raw = rng.uniform(-2, 2, n)
        x = np.sort(raw)
        f = x**4 - x**2 + 0.01 * rng.standard_normal(n)
        lo, hi = conjugate_samples(f, x).slope_range
        q = rng.uniform(lo, hi, n)
        reps = 7 if n <= 10**5 else 5
        conjugate_samples(f, x, q)  # warm up
        tf, g = median_time(lambda: conjugate_samples(f, x, q), reps)
        fast_t[n] = tf
        # the naive maximum costs n per slope: above 1e4 it runs on a subsample of the
        # (randomly ordered) slopes and its time is scaled to all m = n slopes
        msub = n if n <= 10**4 else (2000 if n <= 10**5 else 300)
        ref, tn, est = naive_1d(f, x, q[:msub], limit)
        if ref is not None:
            tn *= n / msub
        if ref is None:
            naive_s = f"skipped (est. {tn:.0f} s)"
            ratio_s, diff_s = "-", "-"
        else:
            naive_s = f"{tn:.3f}" + ("" if msub == n else f" (sub {msub})")
            ratios[n] = tn / tf
            ratio_s = f"{tn / tf:.0f}x"
            d = float(np.max(np.abs(g.values[:msub] - ref)))
            diffs.append(d)
            diff_s = f"{d:.1e}"
            if msub < n:
                subsampled[n] = msub
        print(f"{n:>9} {tf:>10.4f} {naive_s:>22} {ratio_s:>9} {diff_s:>11} "
              f"{g.hull.size:>9}")
        if n == 10**6:
            np.sort(raw)
            rs, _, ts = paired_ratio(lambda: conjugate_samples(f, x, q),
                                     lambda: np.sort(raw), 9)
            sort_info = (ts, rs)
    # the lookup's worst case: convex data, every sample a hull vertex
    n = 10**6
    raw = rng.uniform(-2, 2, n)
    x = np.sort(raw)
    f = x**2
    q = rng.uniform(*conjugate_samples(f, x).slope_range, n)
    conjugate_samples(f, x, q)
    tc, gc = median_time(lambda: conjugate_samples(f, x, q), 5)
    tcc, _ = median_time(lambda: conjugate_samples(f, x, q, convex=True), 5)
    rc, _, tsc = paired_ratio(lambda: conjugate_samples(f, x, q), lambda: np.sort(raw), 9)
    print(f"  (convex x^2 at n=1e6, {gc.hull.size} hull points: fast {tc:.4f} s, "
          f"convex=True {tcc:.4f} s, sort {tsc:.4f} s, fast/sort {rc:.2f})")
    expo = math.log(fast_t[10**6] / fast_t[10**4]) / math.log(100)
    print()
    r5 = ratios.get(10**5, float("nan"))
    note = (f"naive maximum timed on {subsampled[10**5]} of the 1e5 slopes, scaled to all"
            if 10**5 in subsampled else "")
    headline("grid", "1-D speed-up over the naive maximum at n=1e5", r5, 500,
             at_most=False, note=note)
    headline("grid", "1-D scaling exponent of the fast method (1e4 -> 1e6)", expo, 1.2,
             at_most=True, unit="")
    dmax = max(diffs) if diffs else float("nan")
    headline("grid", "1-D max |fast - naive| where both ran", dmax, 1e-12, at_most=True,
             unit="")
    ts, rs = sort_info  # medians of 9 back-to-back pairs
    headline("grid", "1-D non-convex n=1e6: fast / one np.sort", rs, 5, at_most=True)
    headline("grid", "1-D convex x^2 n=1e6: fast / one np.sort", rc, 5, at_most=True,
             note=f"{gc.hull.size} hull points")


def bench_2d(limit, seed):
    print()
    print("2-D: f = x1^2 + 0.6 x1 x2 + 0.5 x2^2 + 0.05 sin(5 x1) cos(3 x2) on [-2, 2]^2, "
          "n points per axis; m = n slopes per axis")
    head = (f"{'n':>5} {'fast (s)':>10} {'naive (s)':>22} {'ratio':>22} "
            f"{'max |diff|':>11} {'finite':>7}")
    print(head)
    print("-" * len(head))
    measured = {}
    fast = {}
    for n in (64, 128, 256, 512):
        x1 = np.linspace(-2, 2, n)
        x2 = np.linspace(-2, 2, n)
        X1, X2 = np.meshgrid(x1, x2, indexing="ij")
        f = X1**2 + 0.6 * X1 * X2 + 0.5 * X2**2 + 0.05 * np.sin(5 * X1) * np.cos(3 * X2)
        q1 = np.linspace(-2.0, 2.0, n)
        q2 = np.linspace(-0.6, 0.6, n)  # inside every x2-line's slope range
        conjugate_samples(f, (x1, x2), (q1, q2))
        tf, g = median_time(lambda: conjugate_samples(f, (x1, x2), (q1, q2)), 5)
        fast[n] = tf
        ref, tn, est = naive_2d(f, x1, x2, q1, q2, limit)
        fin = np.isfinite(g.values)
        if ref is None:
            naive_s = f"skipped (est. {tn:.0f} s)"
            if measured:
                n0 = max(measured)
                ext = measured[n0] * (n / n0) ** 4
                ratio_s = f"{ext / tf:.0f}x (extrapolated)"
                fast[("ext", n)] = ext / tf
            else:
                ratio_s = "-"
            diff_s = "-"
        else:
            measured[n] = tn
            naive_s = f"{tn:.3f}"
            ratio_s = f"{tn / tf:.0f}x"
            fast[("ratio", n)] = tn / tf
            diff_s = f"{float(np.max(np.abs(g.values[fin] - ref[fin]))):.1e}"
        print(f"{n:>5} {tf:>10.4f} {naive_s:>22} {ratio_s:>22} {diff_s:>11} "
              f"{fin.mean():>7.0%}")
    print()
    r = fast.get(("ratio", 512))
    how = "measured"
    if r is None:
        r, how = fast.get(("ext", 512)), f"extrapolated from n^4 scaling of n={max(measured)}"
    headline("grid", "2-D speed-up over the naive maximum at n=512", r, 300,
             at_most=False, note=how)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--naive-limit", type=float, default=60.0,
                    help="skip the naive method where it would take longer (s)")
    ap.add_argument("--seed", type=int, default=12345)
    args = ap.parse_args(argv)
    print(f"reproduce: {CMD} --naive-limit {args.naive_limit:g} --seed {args.seed}")
    print(f"python {sys.version.split()[0]}, numpy {np.__version__}; fast = median of "
          f"5-7 repeats, naive = one chunked run")
    print()
    bench_1d(args.naive_limit, args.seed)
    bench_2d(args.naive_limit, args.seed)
    emit()


if __name__ == "__main__":
    main()

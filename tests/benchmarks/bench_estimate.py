"""Benchmark of ``duality.estimate`` on a 3-input translog cost function with two shares.

Run:  python tests/benchmarks/bench_estimate.py [--rows 1e6] [--file-rows 1e6 1e7]
                                                [--repeat K] [--seed N]

1. In memory: the cost equation and two share equations, iterated SUR, on ``--rows``
   invented rows, against one ``numpy.linalg.lstsq`` of the stacked design of the same
   data (the three equations' regressors in the shared parameters, built beforehand and
   not timed).  Goal: ratio ≤ 3.  Peak memory traced during the estimate (tracemalloc),
   against the size of the data columns.  Goal: ≤ 2× the data.
2. From Parquet files of each ``--file-rows`` size, read in chunks: time and peak memory.
   Goal: peak memory independent of the row count.

The one-off symbolic work (deriving the equations and restrictions) is done once before
timing, as in repeated use on one model.  A script, not a test: nothing is asserted.
"""
from __future__ import annotations

import argparse
import tempfile
import time
import tracemalloc
from pathlib import Path

import numpy as np
import pandas as pd

import duality as dy

SHARES = {"x1": "s1", "x2": "s2", "x3": "s3"}
A = np.array([0.3, 0.3, 0.4])
GAM = np.array([[0.1, -0.05, -0.05], [-0.05, 0.1, -0.05], [-0.05, -0.05, 0.1]])
GY = np.array([-0.01, 0.0, 0.01])


def invent(n: int, rng) -> pd.DataFrame:
    """Rows from a known translog (homogeneity and symmetry hold), with noise."""
    L = rng.normal(0, 0.3, (n, 3))
    ly = rng.normal(0, 1, n)
    S = A + L @ GAM + np.outer(ly, GY)
    e = rng.normal(0, 0.01, (n, 2))
    S[:, :2] += e
    S[:, 2] -= e.sum(axis=1)
    lnc = (1 + L @ A + 0.5 * np.einsum("ni,ij,nj->n", L, GAM, L) + 0.8 * ly
           + 0.025 * ly ** 2 + ly * (L @ GY) + rng.normal(0, 0.05, n))
    return pd.DataFrame({"w1": np.exp(L[:, 0]), "w2": np.exp(L[:, 1]), "w3": np.exp(L[:, 2]),
                         "y": np.exp(ly), "c": np.exp(lnc), "s1": S[:, 0], "s2": S[:, 1],
                         "s3": S[:, 2]})


def stacked_design(model, data):
    """The stacked regressors and left-hand side of the same equations (for lstsq)."""
    from duality.apply.estimation.crossprod import compile_system
    from duality.apply.estimation.data import evaluate, resolve
    from duality.apply.estimation.equations import derive_system
    system = derive_system(model, shares=list(SHARES))
    arrays = resolve(system, data, shares=SHARES)
    comp = compile_system(system)
    n = len(data)
    X = np.zeros((len(comp.parts) * n, comp.k))
    y = np.zeros(len(comp.parts) * n)
    for g, (dep, offset, regs) in enumerate(comp.parts):
        for j, r in regs:
            X[g * n:(g + 1) * n, j] = evaluate(r, arrays, n)
        y[g * n:(g + 1) * n] = evaluate(dep, arrays, n) - evaluate(offset, arrays, n)
    return X, y


def best_of(fn, repeat):
    best = float("inf")
    for _ in range(max(1, repeat)):
        t0 = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t0)
    return best, out


def peak_of(fn):
    tracemalloc.start()
    fn()
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    return peak


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rows", type=float, default=1e6)
    ap.add_argument("--file-rows", type=float, nargs="*", default=[1e6, 1e7])
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--seed", type=int, default=0)
    args = ap.parse_args()
    rng = np.random.default_rng(args.seed)
    model = dy.translog_cost(3)
    kw = dict(shares=SHARES, curvature="none")
    dy.estimate(model, invent(1000, rng), **kw)          # one-off symbolic work

    n = int(args.rows)
    data = invent(n, rng)
    X, y = stacked_design(model, data)
    t_est, res = best_of(lambda: dy.estimate(model, data, **kw), args.repeat)
    t_ls, _ = best_of(lambda: np.linalg.lstsq(X, y, rcond=None), args.repeat)
    del X, y
    data_bytes = data.memory_usage(index=False).sum()
    peak = peak_of(lambda: dy.estimate(model, data, **kw))
    print(f"in memory, {n:,} rows, {len(res.system.equations)} equations, "
          f"{len(res.names)} free parameters ({res.estimator}, {res.iterations} iterations)")
    print(f"{'':>28}{'seconds':>10}{'ratio':>8}   goal")
    print(f"{'numpy lstsq, stacked':>28}{t_ls:>10.3f}{1:>8.2f}")
    print(f"{'estimate, iterated SUR':>28}{t_est:>10.3f}{t_est / t_ls:>8.2f}   ≤ 3")
    print(f"{'':>28}{'MB':>10}{'ratio':>8}")
    print(f"{'data columns':>28}{data_bytes / 1e6:>10.1f}{1:>8.2f}")
    print(f"{'peak while estimating':>28}{peak / 1e6:>10.1f}{peak / data_bytes:>8.2f}   ≤ 2")
    del data

    if not args.file_rows:
        return
    print()
    print(f"{'file rows':>12}{'file MB':>10}{'seconds':>10}{'peak MB':>10}"
          f"{'peak / first':>14}")
    first = None
    with tempfile.TemporaryDirectory() as tmp:
        for rows in args.file_rows:
            rows = int(rows)
            path = Path(tmp) / f"rows_{rows}.parquet"
            import pyarrow as pa
            import pyarrow.parquet as pq
            writer = None
            for lo in range(0, rows, 1_000_000):
                part = invent(min(1_000_000, rows - lo), rng)
                table = pa.Table.from_pandas(part, preserve_index=False)
                writer = writer or pq.ParquetWriter(path, table.schema)
                writer.write_table(table)
            writer.close()
            t0 = time.perf_counter()
            peak = peak_of(lambda: dy.estimate(model, path, **kw))
            secs = time.perf_counter() - t0
            first = first or peak
            print(f"{rows:>12,}{path.stat().st_size / 1e6:>10.1f}{secs:>10.2f}"
                  f"{peak / 1e6:>10.1f}{peak / first:>14.2f}")
    print("goal: peak memory independent of the row count (ratio ≈ 1)")


if __name__ == "__main__":
    main()

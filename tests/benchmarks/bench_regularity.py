"""Benchmark of duality.analyse.regularity on a 3-input translog cost function.

Run:  python tests/benchmarks/bench_regularity.py [--repeat K] [--seed N]

Prints the one-off cost of differentiating and compiling the model (first call), then for
1e3, 1e4 and 1e5 rows of random positive prices and output the best of K timed calls of
``regularity`` (the compiled derivatives are reused, as in repeated use on one model),
rows per second and how many rows violate monotonicity and curvature.
Goal: 1e5 rows in seconds, not minutes.  This is a script, not a test: nothing here is
asserted.
"""
from __future__ import annotations

import argparse
import time

import numpy as np
import pandas as pd

import duality as dy
from duality.analyse.regularity import regularity

# homogeneity holds: Σ a_i = 1, rows of g sum to zero, Σ g_iy = 0
PARAMS = dict(a0=0.1, a1=0.3, a2=0.5, a3=0.2, g11=0.1, g12=-0.05, g13=-0.05, g22=0.08,
              g23=-0.03, g33=0.08, ay=0.9, gyy=0.05, g1y=0.01, g2y=-0.02, g3y=0.01)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--seed", type=int, default=0)
    args = ap.parse_args()
    rng = np.random.default_rng(args.seed)
    model = dy.translog_cost(3, params=PARAMS)

    small = pd.DataFrame({k: np.exp(rng.uniform(-1, 1, 10)) for k in
                          ("w1", "w2", "w3", "y")})
    t0 = time.perf_counter()
    regularity(model, small)
    print(f"first call (derive, differentiate, compile; 10 rows): "
          f"{time.perf_counter() - t0:.3f} s")

    print(f"{'rows':>8} {'best s':>10} {'rows/s':>12} {'non-monotone':>13} {'non-concave':>12}")
    last = None
    for N in (1_000, 10_000, 100_000):
        data = pd.DataFrame({k: np.exp(rng.uniform(-1.5, 1.5, N)) for k in
                             ("w1", "w2", "w3", "y")})
        best = float("inf")
        for _ in range(max(1, args.repeat)):
            t0 = time.perf_counter()
            rep = regularity(model, data)
            best = min(best, time.perf_counter() - t0)
        print(f"{N:>8} {best:>10.4f} {N / best:>12.0f} "
              f"{rep.summary.monotonicity.count:>13} "
              f"{rep.summary.curvature.count:>12}")
        last = best
    print(f"time at 1e5 rows: {last:.3f} s")


if __name__ == "__main__":
    main()

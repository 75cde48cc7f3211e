"""Benchmark of exporting a 3-good quadratic Almost Ideal model to Python.

Run:  python tests/benchmarks/bench_quaids_export.py

Measures CPU seconds (this process) of ``export(model, "python")`` (the duals: expenditure,
indirect utility, Marshallian and Hicksian demands) and of
``export(model, "python", equations=True)`` (the estimating equations), each on a fresh model
so nothing is cached, beside the same export of the Almost Ideal model for scale.
Goal: each quadratic Almost Ideal export ≤ 5 CPU seconds, and ≤ 10× the Almost Ideal one.
Before the export's tidying bounded the products it distributes, the duals took minutes.
A script, not a test: nothing is asserted.
"""
from __future__ import annotations

import time

import duality as dy
from duality.apply.export import export

Q = dict(a0=0.0, a1=0.3, a2=0.5, a3=0.2, g11=0.08, g12=-0.05, g13=-0.03, g22=0.09,
         g23=-0.04, g33=0.07, b1=0.1, b2=-0.06, b3=-0.04, l1=0.03, l2=-0.01, l3=-0.02)
AIDS = dict({k: v for k, v in Q.items() if not k.startswith("l")}, b0=1.0)


def cpu(fn) -> float:
    t = time.process_time()
    fn()
    return time.process_time() - t


def main() -> None:
    for what, kw in (("duals", {}), ("estimating equations", {"equations": True,
                                                               "fixed": {"a0": 0}})):
        qa = cpu(lambda: export(dy.quaids_expenditure(3, params=dict(Q)), "python", **kw))
        kw_ai = dict(kw, fixed={"a0": 0, "b0": 1}) if kw else kw
        ai = cpu(lambda: export(dy.aids_expenditure(3, params=dict(AIDS)), "python", **kw_ai))
        print(f"{what:22s} quadratic AI {qa:6.2f} s (goal ≤ 5)   Almost Ideal {ai:6.2f} s   "
              f"ratio {qa / ai:5.1f} (goal ≤ 10)")


if __name__ == "__main__":
    main()

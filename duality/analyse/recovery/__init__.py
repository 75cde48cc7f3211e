"""Recovering the primal from its dual: the technology from a cost function, the
preference from an expenditure function.

For a cost function c(w, y) (homogeneous of degree one in prices) the input requirement
set and the production function are

    V(y) = {x : w·x >= c(w, y) for all w > 0},
    f(x) = max {y : w·x >= c(w, y) for all w > 0},

and the same with (p, u, e) for an expenditure function and the utility function.  The
formula only sees the concave hull of c in prices: a dual that is not concave gives back
the technology of its concave hull, which :func:`recover` reports.

Two routes, tried in order:

* **symbolic** — Shephard's lemma x_i = ∂c/∂w_i(w, y), i = 1..n, with w_1 = 1, solved for
  (w_2..w_n, y) within the budget of CPU seconds (log-linear system for power forms; ratios
  x_i/x_1 for homothetic forms; plain ``sympy.solve`` last).  Every candidate is verified
  numerically (c(w(x), f(x)) = w(x)·x, the demands give back x, and w(x) supports V(f(x)))
  before it is returned.  Used only where the dual is concave in prices.
* **numeric** — f(x) is the root in y of φ(y) = min_w (w·x − c(w, y)) over normalised
  prices, which decreases in y; the inner minimisation runs on the price simplex (a grid,
  then L-BFGS-B with the analytic gradient x − ∇c, i.e. the conditional demands).

:meth:`Recovered.isoquant` gives points on the isoquant / indifference curve: the
cost-minimising bundles ∂c/∂w at a fan of price ratios where the dual is concave, else the
boundary of V(y) along a fan of rays, x = s·d with s = max_w c(w, y)/(w·d).
"""

from .core import recover
from .result import Recovered

__all__ = ["recover", "Recovered"]

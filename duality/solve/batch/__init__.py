"""Batched numeric duals: Newton on the first-order conditions for all points at once.

For a model with no closed-form dual, the cost (expenditure), indirect utility and profit
functions are evaluated at N price points together:

* unknowns are log-quantities z = log x (and the log multiplier), so every quantity stays
  positive and the conditions are well scaled;
* gradients and Hessians come from sympy, lambdified once per model (with common
  subexpressions shared) and evaluated on whole arrays;
* every Newton step solves N small linear systems in one batched call; step halving is
  applied only at the points whose residual did not fall;
* the spending problem (cost, expenditure, and profit through it) runs first in a block
  engine: blocks of points with every array operation writing into one buffer allocated
  per call (fresh temporaries cost more than the arithmetic at this size), log-space
  derivatives x∘∇f and x∘∇²f∘x compiled once per model, a Newton step that uses the
  bordered structure (an (n−1)×(n−1) system, closed form for n ≤ 3), and the final
  iterate's derivatives reused for the second-order check.  Points it cannot finish in
  full steps go to the array path above, which is the reference;
* a homothetic technology is solved once at a reference level and then scaled along the
  ray to each requested level (the tangency direction does not depend on the level);
* each point reports its iterations and final residual; a point that does not converge,
  or converges to a point that is not a minimum (second-order condition), is reported as
  such and its value is NaN — never returned as a number.

Notes
-----
Spending problem, min w·x s.t. f(x) = y, in z = log x and μ = log λ:
    log w_i − μ − log f_i(x) = 0 (i = 1..n),   log f(x) − log y = 0.
Utility problem, max f(x) s.t. p·x = m:
    log f_i(x) − μ − log p_i = 0,   log(p·x) − log m = 0.
Profit, max p f(x) − w·x: the output y solves λ(w, y) = p, where λ is the spending
problem's multiplier (marginal cost); found by a safeguarded secant in log y, with
λ increasing in y required (decreasing returns locally).
"""
from __future__ import annotations

from . import block
from .core import (MAXITER, RAY_STEP, TOL, BatchResult, Compiled, compiled, is_homothetic,
                   second_order, solve_small, start_on_level)
from .solve import solve_profit, solve_spending, solve_spending_plain, solve_utility

__all__ = ["TOL", "MAXITER", "RAY_STEP", "BatchResult", "Compiled", "compiled",
           "is_homothetic", "second_order", "solve_small", "start_on_level",
           "solve_spending", "solve_spending_plain", "solve_utility", "solve_profit",
           "block"]

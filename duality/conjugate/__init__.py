"""Convex conjugates (Legendre–Fenchel transforms) of functions of one or more variables.

:func:`conjugate` computes

    f*(p) = sup_x ( p·x − f(x) )                       (convention ``"sup"``)

or its negative, the tangent-intercept form f(x) − p·x at the tangency (convention
``"intercept"``).  Results are :class:`Conjugate` objects carrying a sympy expression
(``+oo`` outside the effective domain, written as ``Piecewise((value, cond), (oo, True))``),
the route that produced it and notes on what was checked.

Routes, tried in this order for each (separable part of the) function:

* piecewise-linear f (``Abs``, ``Max``, ``Min`` of affine pieces, with numeric
  coefficients): exact — f*(p) is the maximum of ``p*b - f(b)`` over the break points
  ``b`` on the interval between the limiting slopes, ``+oo`` outside (route ``"fenchel"``);
* polynomials with numeric coefficients: odd degree or negative leading coefficient gives
  ``+oo`` everywhere; a non-convex even polynomial goes to a numeric route that maximises
  ``p*r - f(r)`` over the real roots ``r`` of ``f'(r) = p`` (``numpy.roots``), i.e. the
  conjugate of the convex envelope;
* smooth strictly convex f (route ``"legendre"``): ``f'(x) = p`` is solved symbolically
  (within the time budget, in a worker process), the right branch is chosen by checking
  it numerically against sample points, and the boundary of the range of f' is handled
  with limits;
* multivariate: separable sums are conjugated term by term, quadratics
  ½xᵀAx + bᵀx + c in closed form, other smooth convex functions by solving ∇f = p
  symbolically, otherwise numerically (route ``"numeric"``, ``expr=None``).

Sampled values (a numpy array, or a list/tuple of numbers) are transformed exactly on
their grid by :func:`conjugate_samples` (``x`` is then the grid, ``p`` the query slopes);
see :mod:`duality.conjugate.grid`.

Primal symbols declared ``positive`` (``nonnegative``, ``negative``, ``nonpositive``)
restrict the domain of f to that half line (f = +oo outside).
"""
from .core import CONVENTIONS, KINDS, ROUTES, Conjugate, biconjugate, conjugate
from .grid import GridConjugate, biconjugate_samples, conjugate_samples

__all__ = ["conjugate", "biconjugate", "Conjugate", "CONVENTIONS", "ROUTES", "KINDS",
           "conjugate_samples", "biconjugate_samples", "GridConjugate"]

"""Parameter restrictions implied by theory, derived from the formula of a dual function.

Given a parametric cost c(w, y), profit pi(p, w), expenditure e(p, u) or indirect
utility v(p, m) written as a sympy expression, this module works out *from the formula
itself* (never from a table of known forms) the parameter restrictions economic theory
implies, shows them with a plain-words reason, checks parameter values against them and
imposes them (a reduced parameter set).

Method
------
Every restriction is an identity in the arguments of the function that must hold for all
positive prices (and all levels such as output y or utility u).  The identity is turned
into equations in the parameters as follows.

1. Each price p_i is written p_i = exp(L_i) (and income m = exp(M) for share equations),
   logarithms are expanded (``force=True``: prices and levels are positive) and powers
   of exponentials are combined, so that translog, AIDS and Cobb-Douglas forms become
   polynomials in the L_i (possibly times exponentials exp(b . L)).
2. *Homogeneity* of degree d, F(t p) = t^d F(p) for all t > 0, is equivalent (the price
   domain is connected and the identity holds at t = 1) to Euler's identity in logs,
   obtained by differentiating with respect to ln t at t = 1:

       sum_i d ln F / d L_i - d == 0        (log form)
       sum_i d F / d L_i - d F == 0         (level form).

   ``log_form=None`` chooses the log form when ln F expands with no logarithm of a
   price-dependent sum left over (translog, AIDS-type expenditure, Cobb-Douglas), and the
   level form otherwise (generalized Leontief, CES).  In the level form the expression
   is first put over a common denominator and simplified; if it vanishes the function is
   homogeneous by construction and no restriction is needed.
3. The identity is *decomposed into independent functions*: after ``expand(force=True)``
   every term is split into a factor free of the arguments (its coefficient, a function
   of the parameters only) and a factor in the arguments (a monomial in the L_i, levels
   and their logs times one exponential).  Terms with the same argument factor are
   collected; each collected coefficient must vanish.  (Monomials times exponentials
   with distinct exponents are linearly independent functions, so this is exact for the
   forms above; for other forms the factors are treated as independent, which can only
   over-state the restrictions when distinct factors are algebraically related.)
4. *Adding-up*: the shares s_i = d ln F / d ln p_i must sum to one.  For degree-1
   homogeneous duals this is the same identity as Euler's; the equations are derived
   separately and, when they coincide with homogeneity ones, the homogeneity reason says
   so instead of repeating them.  For share equations given directly
   (:func:`derive_share_restrictions`) adding-up is sum_i s_i == 1, homogeneity is
   s_i(t p, t m) == t^d s_i(p, m) for each i, and symmetry is Slutsky symmetry of the
   compensated share derivatives (see that function).
5. *Symmetry (identification)*: two parameters a, b such that F depends on them only
   through a + b (dF/da - dF/db == 0 identically) are not separately identified; the
   restriction a = b (e.g. gamma_ij = gamma_ji) identifies them.

Equations whose coefficients are nonlinear in the parameters are reduced with the linear
ones (substituting the solved linear system); if what remains is linear it is kept
(written in its original linear part when the nonlinear part vanishes under the other
restrictions).  A remaining product of a parameter monomial and a linear factor (e.g.
b0 (b1 + b2 + b3) in AIDS) gives the linear factor, with the assumption that the
monomial is nonzero stated in the reason.  Anything still nonlinear is returned as it is
and marked "nonlinear" in the reason.

Redundancy: within each kind, an equation implied by the earlier ones of that kind
(no rank increase of the augmented matrix) is dropped, so each kind is a basis in the
order derived, keeping the published-looking form; across kinds only exact duplicates
(equal up to a factor) are dropped.  Restrictions of different kinds may still be jointly
dependent (e.g. AIDS homogeneity rows are implied by adding-up columns plus symmetry);
:func:`impose` handles such dependence.
"""
from .derivation import derive_restrictions, derive_share_restrictions, homogeneous_by_construction
from .record import KINDS, Restriction
from .values import check_values, describe_violation, impose

__all__ = [
    "Restriction",
    "derive_restrictions",
    "derive_share_restrictions",
    "homogeneous_by_construction",
    "check_values",
    "describe_violation",
    "impose",
    "KINDS",
]

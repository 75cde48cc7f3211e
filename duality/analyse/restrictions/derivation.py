"""Deriving restrictions: homogeneity (Euler), adding-up, symmetry; from a dual or from share equations."""
from __future__ import annotations

import itertools
from typing import Sequence

import sympy as sp

from ...errors import DualityError
from .algebra import (_Item, _Logs, _describe_basis, _finish, _identity_coefficients,
                      _in_logs, _reduce, _symbols, _sympify, _tidy, _validate)
from .record import Restriction


# --------------------------------------------------------------------------------------
# Dual functions
# --------------------------------------------------------------------------------------
def _working_form(F, logs: _Logs, log_form, is_log):
    """(G, uses_log): G = ln F or F in the log variables."""
    if is_log:
        G_log = _in_logs(F, logs)
        G_lev = None
    else:
        G_log = _in_logs(sp.log(F), logs)
        G_lev = None
    if log_form is None:
        Ls = set(logs.all_logs)
        leftover = [a for a in G_log.atoms(sp.log) if a.free_symbols & Ls]
        log_form = not leftover
    if log_form:
        return G_log, True
    G_lev = _in_logs(sp.exp(F) if is_log else F, logs)
    return G_lev, False


def _euler(G, logs: _Logs, degree, uses_log):
    total = sp.Add(*[sp.diff(G, L) for L in logs.all_logs])
    if uses_log:
        return total - degree
    e = total - degree * G
    # Level form: look at (sum dF/dL - d F)/F, so that powers of a common sum cancel.
    q = sp.powsimp(sp.powdenest(sp.expand(e / G, force=True), force=True), force=True)
    num, _den = sp.fraction(sp.together(q))
    num = _tidy(num)
    if num == 0 or sp.simplify(num) == 0:
        return sp.Integer(0)
    return num


def _rational_and_homogeneous(F, prices, degree, is_log) -> bool:
    """True when F (not ln F) is rational in ``prices`` and Σ p_i ∂F/∂p_i = degree·F
    identically; False means "not shown", and the general test runs."""
    if is_log or not F.is_rational_function(*prices):
        return False
    e = sp.Add(*[p * sp.diff(F, p) for p in prices]) - degree * F
    return sp.cancel(sp.together(e)) == 0


def homogeneous_by_construction(expr, prices, degree=1, *, is_log=False) -> bool:
    """True when ``expr`` is homogeneous of ``degree`` in ``prices`` for every parameter value."""
    F = _sympify(expr)
    prices = _symbols(prices, "price")
    for p in prices:
        if p not in F.free_symbols:
            raise DualityError(f"price {p.name} does not appear in the expression")
    degree = sp.nsimplify(degree)
    logs = _Logs(prices)
    G, uses_log = _working_form(F, logs, None, is_log)
    E = _euler(G, logs, degree, uses_log)
    others = (E.free_symbols - set(logs.L)) | set(logs.L)
    return not _identity_coefficients(E, others)


def derive_restrictions(expr, prices, params, *, degree=1, log_form=None, shares=True,
                        others=None, is_log=False, name="the function",
                        symmetry=True) -> list[Restriction]:
    """Restrictions on ``params`` that make ``expr`` a valid dual function.

    Parameters
    ----------
    expr : sympy expression
        The function F (or ln F when ``is_log=True``).
    prices : sequence of Symbol
        The prices in which F is homogeneous (for profit all of (p, w); for indirect
        utility (p..., m) with ``degree=0``).
    params : sequence of Symbol
        The parameters; every other free symbol is an argument (a level such as y or u),
        or list those in ``others``.
    degree : number
        Degree of homogeneity in ``prices``.
    log_form : bool or None
        Work with ln F (True), with F (False) or choose (None, see the module docstring).
    shares : bool
        Also derive adding-up of the shares d ln F / d ln p_i (only when ``degree == 1``).
    name : str
        What F is, for the reasons ("cost", "expenditure", ...).
    symmetry : bool
        Also derive identification (symmetry) restrictions.

    Returns
    -------
    list of Restriction
        Homogeneity, then adding-up, then symmetry restrictions.  An empty homogeneity
        part means homogeneity holds by construction.
    """
    F = _sympify(expr)
    prices, params, others = _validate([F], prices, params, others)
    try:
        degree = sp.nsimplify(degree)
    except (TypeError, ValueError, sp.SympifyError) as exc:
        raise DualityError(f"degree must be a number, not {degree!r}") from exc
    if not degree.is_number:
        raise DualityError(f"degree must be a number, not {degree!r}")
    logs = _Logs(prices)
    G, uses_log = _working_form(F, logs, log_form, is_log)
    argsyms = set(logs.L) | set(others)
    pnames = ", ".join(p.name for p in prices)
    items: list[_Item] = []

    # A function rational in the prices (normalized quadratic, generalized McFadden, …) is
    # tested in levels first, where cancelling is quick; in logs the same test can take
    # minutes.  When Euler's identity holds there it holds in any form, and with it adding-up.
    E = (sp.Integer(0) if _rational_and_homogeneous(F, prices, degree, is_log)
         else _euler(G, logs, degree, uses_log))
    lhs = "Σ_i ∂ln F/∂ln p_i" if uses_log else "Σ_i p_i ∂F/∂p_i"
    rhs = f"{degree}" if uses_log else f"{degree}·F"
    for basis, coef in _identity_coefficients(E, argsyms, logs.all_logs):
        items.append(_Item(coef, "homogeneity", (
            f"{name} must be homogeneous of degree {degree} in ({pnames}): Euler's identity "
            f"{lhs} = {rhs} must hold for all prices, so the coefficient of "
            f"{_describe_basis(basis, logs)} must vanish")))

    if shares and degree == 1:
        G_log = G if uses_log else _in_logs(sp.log(sp.exp(F) if is_log else F), logs)
        S = sp.Add(*[sp.diff(G_log, L) for L in logs.L]) - 1
        if not uses_log:
            S = E  # numerator of sum of shares minus one is Euler's identity
        for basis, coef in _identity_coefficients(S, argsyms, logs.all_logs):
            items.append(_Item(coef, "adding-up", (
                f"the shares s_i = ∂ln {name}/∂ln p_i of ({pnames}) must sum to one for all "
                f"prices, so the coefficient of {_describe_basis(basis, logs)} in "
                "Σ_i s_i - 1 must vanish")))

    if symmetry:
        items.extend(_identification(G, params, argsyms, name))

    items = _reduce(items, params)
    return _finish(items, params)


def _identification(G, params, argsyms, name) -> list[_Item]:
    out = []
    grads = {a: sp.expand(sp.diff(G, a), force=True) for a in params}
    for a, b in itertools.combinations(params, 2):
        ga, gb = grads[a], grads[b]
        if ga == 0 or gb == 0:
            continue
        if (ga.free_symbols & argsyms) != (gb.free_symbols & argsyms):
            continue
        if _identity_coefficients(ga - gb, argsyms):
            continue
        out.append(_Item(a - b, "symmetry", (
            f"{a.name} and {b.name} enter {name} only through their sum {a.name} + {b.name}, "
            f"so they are not separately identified; symmetry {a.name} = {b.name} "
            "identifies them")))
    return out


# --------------------------------------------------------------------------------------
# Share equations
# --------------------------------------------------------------------------------------
def derive_share_restrictions(shares, prices, params, *, income=None, degree=0,
                              others=None, symmetry=True) -> list[Restriction]:
    """Adding-up, homogeneity and symmetry restrictions of a system of share equations.

    Parameters
    ----------
    shares : sequence of sympy expressions
        s_1, ..., s_n, one per price, in the same order as ``prices``, written with
        unrestricted parameters.
    prices : sequence of Symbol
    params : sequence of Symbol
    income : Symbol, optional
        Total expenditure m.  Homogeneity is then in (p, m) jointly, and symmetry is
        that of the compensated share derivatives.
    degree : number
        Degree of homogeneity of the shares (0).

    Notes
    -----
    * adding-up: Σ_i s_i ≡ 1;
    * homogeneity: Σ_j ∂s_i/∂ln p_j (+ ∂s_i/∂ln m) ≡ degree · s_i for each i;
    * symmetry: the Slutsky matrix p_i p_j S_ij / m = ∂s_i/∂ln p_j + s_j ∂s_i/∂ln m
      + s_i s_j - δ_ij s_i is symmetric, i.e.
      ∂s_i/∂ln p_j + s_j ∂s_i/∂ln m ≡ ∂s_j/∂ln p_i + s_i ∂s_j/∂ln m for i < j
      (without ``income`` the ln m terms are absent: cross effects at fixed levels, e.g.
      cost shares at fixed output).
    """
    if isinstance(shares, sp.Basic) or not isinstance(shares, Sequence):
        raise DualityError("shares must be a list of share equations, one per price")
    S = [_sympify(s, f"share {i + 1}") for i, s in enumerate(shares)]
    if income is not None:
        (income,) = _symbols([income], "income")
    extra = (income,) if income is not None else ()
    prices, params, others = _validate(S, prices, params, others, extra)
    if len(S) != len(prices):
        raise DualityError(f"shares: {len(S)} share equations for {len(prices)} prices")
    degree = sp.nsimplify(degree)
    logs = _Logs(prices, income)
    argsyms = set(logs.all_logs) | set(others)
    SL = [_in_logs(s, logs) for s in S]
    pnames = ", ".join(p.name for p in prices) + (f", {income.name}" if income else "")
    items: list[_Item] = []

    for basis, coef in _identity_coefficients(sp.Add(*SL) - 1, argsyms, logs.all_logs):
        items.append(_Item(coef, "adding-up", (
            f"the shares must sum to one for all ({pnames}), so the coefficient of "
            f"{_describe_basis(basis, logs)} in Σ_i s_i - 1 must vanish")))

    for i, s in enumerate(SL):
        E = sp.Add(*[sp.diff(s, L) for L in logs.all_logs]) - degree * s
        for basis, coef in _identity_coefficients(E, argsyms, logs.all_logs):
            items.append(_Item(coef, "homogeneity", (
                f"share {i + 1} (of {prices[i].name}) must be homogeneous of degree {degree} "
                f"in ({pnames}): the coefficient of {_describe_basis(basis, logs)} in "
                "its Euler identity must vanish")))

    if symmetry:
        for i, j in itertools.combinations(range(len(SL)), 2):
            d = sp.diff(SL[i], logs.L[j]) - sp.diff(SL[j], logs.L[i])
            if logs.M is not None:
                d += SL[j] * sp.diff(SL[i], logs.M) - SL[i] * sp.diff(SL[j], logs.M)
            what = ("compensated cross effects" if logs.M is not None else "cross effects")
            for basis, coef in _identity_coefficients(d, argsyms, logs.all_logs):
                items.append(_Item(coef, "symmetry", (
                    f"Slutsky (Young) symmetry: the {what} of shares {i + 1} and {j + 1} "
                    f"(∂s_{i + 1}/∂ln {prices[j].name} and ∂s_{j + 1}/∂ln {prices[i].name}) "
                    f"must be equal, so the coefficient of {_describe_basis(basis, logs)} "
                    "in their difference must vanish")))

    items = _reduce(items, params)
    return _finish(items, params)

"""Catalogue of flexible forms written on the dual side, each with its published source.

Builders return dual-side models (:mod:`duality.model.dual_side`) whose parameters follow one
naming scheme (``a0, a1, …`` first-order, ``g11, g12, …`` second-order with ``i <= j``,
symmetric by construction; output terms ``ay, gyy, g1y, …``; AIDS ``b0, b1, …``).
Parameters not given a value stay free (symbolic).  The theory restrictions
(homogeneity, adding-up) are not built in: :func:`duality.analyse.restrictions` derives them from
the formula, checks values against them and imposes them.

* translog cost — Christensen, Jorgenson and Lau (1973):
  ln c = a0 + Σ a_i ln w_i + ½ ΣΣ g_ij ln w_i ln w_j + ay ln y + ½ gyy (ln y)²
  + Σ g_iy ln w_i ln y
* generalized Leontief cost — Diewert (1971):  c = y ΣΣ b_ij (w_i w_j)^{1/2}
* Almost Ideal expenditure — Deaton and Muellbauer (1980):
  ln e(p, u) = ln a(p) + u b(p),  ln a = a0 + Σ a_k ln p_k + ½ ΣΣ g_kj ln p_k ln p_j,
  b = b0 Π p_k^{b_k};  budget shares w_i = a_i + Σ_j g_ij ln p_j + b_i ln(m / a(p)),
  or with Stone's index ln P* = Σ_k w_k ln p_k in place of ln a(p).
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Callable, Mapping, Sequence

import sympy as sp

from ..model.dual_side import cost_function, expenditure_function
from ..errors import ModelError
from ..model.base import Model

def _names(n_or_names, letter: str) -> list[str]:
    if isinstance(n_or_names, int):
        if n_or_names < 2:
            raise ModelError("a flexible form needs at least two prices")
        return [f"{letter}{i + 1}" for i in range(n_or_names)]
    names = list(n_or_names)
    if len(names) < 2:
        raise ModelError("a flexible form needs at least two prices")
    return names


def _params(names: Sequence[str], given: Mapping[str, float | None] | None) -> dict:
    given = dict(given or {})
    unknown = sorted(set(given) - set(names))
    if unknown:
        raise ModelError(f"unknown parameter(s) {', '.join(unknown)}; this form has "
                         f"{', '.join(names)}")
    return {k: given.get(k) for k in names}


def _quadratic(logs: Sequence[str], idx: Sequence[str], prefix: str) -> tuple[str, list[str]]:
    """½ ΣΣ g_ij L_i L_j with symmetric g (i <= j) as text, and the parameter names."""
    terms, names = [], []
    n = len(logs)
    for i in range(n):
        for j in range(i, n):
            g = f"{prefix}{idx[i]}{idx[j]}"
            names.append(g)
            terms.append(f"1/2*{g}*{logs[i]}^2" if i == j else f"{g}*{logs[i]}*{logs[j]}")
    return " + ".join(terms), names


def translog_cost(prices=2, *, output: str = "y", params=None, quantities=None,
                  name: str = "") -> Model:
    """Translog cost function c(w, y) (Christensen, Jorgenson and Lau 1973).

    Parameters
    ----------
    prices : int or sequence of str
        Number of inputs (prices ``w1..wn``) or the price names.
    params : mapping, optional
        Values for ``a0, a1.., g11, g12.., ay, gyy, g1y..``; others stay free.
    """
    ps = _names(prices, "w")
    idx = [str(i + 1) for i in range(len(ps))]
    L = [f"log({p})" for p in ps]
    quad, gnames = _quadratic(L, idx, "g")
    first = " + ".join(f"a{i}*{l}" for i, l in zip(idx, L))
    ly = f"log({output})"
    out_terms = f"ay*{ly} + 1/2*gyy*{ly}^2 + " + " + ".join(
        f"g{i}y*{l}*{ly}" for i, l in zip(idx, L))
    formula = f"exp(a0 + {first} + {quad} + {out_terms})"
    names = (["a0"] + [f"a{i}" for i in idx] + gnames + ["ay", "gyy"]
             + [f"g{i}y" for i in idx])
    return cost_function(formula, ps, quantities, output=output, params=_params(names, params),
                         name=name or "translog cost", form="translog_cost")


def generalized_leontief_cost(prices=2, *, output: str = "y", params=None, quantities=None,
                              name: str = "") -> Model:
    """Generalized Leontief cost function c = y ΣΣ b_ij (w_i w_j)^{1/2} (Diewert 1971),
    with b_ij = b_ji (parameters ``b11, b12, …`` for i <= j)."""
    ps = _names(prices, "w")
    idx = [str(i + 1) for i in range(len(ps))]
    terms, names = [], []
    for i in range(len(ps)):
        for j in range(i, len(ps)):
            b = f"b{idx[i]}{idx[j]}"
            names.append(b)
            terms.append(f"{b}*{ps[i]}" if i == j else f"2*{b}*sqrt({ps[i]}*{ps[j]})")
    formula = f"{output}*({' + '.join(terms)})"
    return cost_function(formula, ps, quantities, output=output, params=_params(names, params),
                         name=name or "generalized Leontief cost",
                         form="generalized_leontief_cost")


def aids_expenditure(prices=2, *, utility: str = "u", income: str = "m", params=None,
                     goods=None, name: str = "") -> Model:
    """Almost Ideal expenditure function (Deaton and Muellbauer 1980).

    ln e = a0 + Σ a_k ln p_k + ½ ΣΣ g_kj ln p_k ln p_j + u·b0·Π p_k^{b_k}
    (symmetric g: parameters ``g11, g12, …`` for k <= j).
    """
    ps = _names(prices, "p")
    idx = [str(i + 1) for i in range(len(ps))]
    L = [f"log({p})" for p in ps]
    quad, gnames = _quadratic(L, idx, "g")
    first = " + ".join(f"a{i}*{l}" for i, l in zip(idx, L))
    prod = "*".join(f"{p}^b{i}" for i, p in zip(idx, ps))
    formula = f"exp(a0 + {first} + {quad} + {utility}*b0*{prod})"
    names = ["a0"] + [f"a{i}" for i in idx] + gnames + ["b0"] + [f"b{i}" for i in idx]
    return expenditure_function(formula, ps, goods, utility=utility, income=income,
                                params=_params(names, params),
                                name=name or "Almost Ideal demand system",
                                form="aids_expenditure")


def quaids_expenditure(prices=2, *, utility: str = "u", income: str = "m", params=None,
                       goods=None, name: str = "") -> Model:
    """Quadratic Almost Ideal expenditure function (Banks, Blundell and Lewbel 1997).

    ln e = ln a(p) + b(p)·u / (1 − λ(p)·u) with ln a(p) as in :func:`aids_expenditure`
    (``a0, a1.., g11, g12..``), b(p) = Π p_k^{b_k} and λ(p) = Σ l_k ln p_k (``l1, l2, …``).
    The utility level u is Banks, Blundell and Lewbel's ln V; the budget shares are
    w_i = a_i + Σ_j g_ij ln p_j + b_i ln(m/a(p)) + (l_i / b(p))·(ln(m/a(p)))².
    With every l_k = 0 it is the Almost Ideal form with b0 = 1.
    """
    ps = _names(prices, "p")
    idx = [str(i + 1) for i in range(len(ps))]
    L = [f"log({p})" for p in ps]
    quad, gnames = _quadratic(L, idx, "g")
    first = " + ".join(f"a{i}*{l}" for i, l in zip(idx, L))
    prod = "*".join(f"{p}^b{i}" for i, p in zip(idx, ps))
    lam = " + ".join(f"l{i}*{l}" for i, l in zip(idx, L))
    formula = (f"exp(a0 + {first} + {quad} + {prod}*{utility}/(1 - ({lam})*{utility}))")
    names = (["a0"] + [f"a{i}" for i in idx] + gnames + [f"b{i}" for i in idx]
             + [f"l{i}" for i in idx])
    return expenditure_function(formula, ps, goods, utility=utility, income=income,
                                params=_params(names, params),
                                name=name or "quadratic Almost Ideal demand system",
                                form="quaids_expenditure")


def _number_text(x) -> str:
    """A weight or reference price as formula text (exact for ints and fractions)."""
    try:
        r = sp.nsimplify(x, rational=True) if not isinstance(x, str) else sp.sympify(x)
    except (TypeError, ValueError, sp.SympifyError) as exc:
        raise ModelError(f"{x!r} is not a number") from exc
    if not r.is_number or not r.is_real or not r > 0:
        raise ModelError(f"weights and reference prices must be positive numbers, not {x!r}")
    return f"({r})"


def _normalized_quadratic_core(ps, idx, weights, reference, output):
    """Σ b_i w_i y + ½ Σ_{i,j<n} s_ij v_i v_j / (θ·w) y with v_i = w_i − (w*_i / w*_n) w_n:
    the quadratic form wᵀSw with S w* = 0 built in (S's last row and column eliminated)."""
    n = len(ps)
    weights = [1 / sp.Integer(n)] * n if weights is None else list(weights)
    reference = [1] * n if reference is None else list(reference)
    for what, vals in (("weights", weights), ("reference", reference)):
        if len(vals) != n:
            raise ModelError(f"{what}: {len(vals)} numbers for {n} prices")
    th = [_number_text(t) for t in weights]
    ref = [_number_text(r) for r in reference]
    index = " + ".join(f"{t}*{p}" for t, p in zip(th, ps))
    v = [f"({ps[i]} - {ref[i]}/{ref[-1]}*{ps[-1]})" for i in range(n - 1)]
    quad, snames = _quadratic(v, idx[:-1], "s")
    linear = " + ".join(f"b{i}*{p}" for i, p in zip(idx, ps))
    core = f"{output}*({linear} + ({quad})/({index}))"
    return core, index, [f"b{i}" for i in idx] + snames


def normalized_quadratic_cost(prices=2, *, output: str = "y", params=None, quantities=None,
                              weights=None, reference=None, name: str = "") -> Model:
    """Normalized quadratic cost function (Diewert and Wales 1987), constant returns:

    c(w, y) = y·[Σ b_i w_i + ½ wᵀ S w / (θ·w)],  S symmetric with S w* = 0,

    θ fixed nonnegative weights (``weights``, default 1/n each; Diewert and Wales suggest
    the sample mean quantities) and w* a reference price vector (``reference``, default
    ones).  S w* = 0 is built in: S's free entries are the leading (n−1)×(n−1) block
    ``s11, s12, …`` (i <= j < n), written through v_i = w_i − (w*_i / w*_n) w_n, so that
    wᵀSw = Σ s_ij v_i v_j.  The function is homogeneous of degree one in w by construction;
    it is concave in w for all prices iff the block is negative semidefinite
    (:func:`concave_block` builds such a block from a lower-triangular one).
    """
    ps = _names(prices, "w")
    idx = [str(i + 1) for i in range(len(ps))]
    core, _index, names = _normalized_quadratic_core(ps, idx, weights, reference, output)
    return cost_function(core, ps, quantities, output=output, params=_params(names, params),
                         name=name or "normalized quadratic cost",
                         form="normalized_quadratic_cost")


def symmetric_generalized_mcfadden_cost(prices=2, *, output: str = "y", params=None,
                                        quantities=None, weights=None, reference=None,
                                        name: str = "") -> Model:
    """Symmetric generalized McFadden cost function (Diewert and Wales 1987):

    c(w, y) = y·[Σ b_i w_i + ½ wᵀ S w / (θ·w)] + Σ c_i w_i + byy·(θ·w)·y²,

    the normalized quadratic core (:func:`normalized_quadratic_cost`, same ``weights``,
    ``reference`` and S w* = 0 built in) with input-specific fixed terms ``c1, c2, …`` and a
    quadratic output term ``byy`` that make it flexible in output as well.  Concave in w for
    all prices iff the S block is negative semidefinite.
    """
    ps = _names(prices, "w")
    idx = [str(i + 1) for i in range(len(ps))]
    core, index, names = _normalized_quadratic_core(ps, idx, weights, reference, output)
    fixed = " + ".join(f"c{i}*{p}" for i, p in zip(idx, ps))
    formula = f"{core} + {fixed} + byy*({index})*{output}^2"
    names = names + [f"c{i}" for i in idx] + ["byy"]
    return cost_function(formula, ps, quantities, output=output, params=_params(names, params),
                         name=name or "symmetric generalized McFadden cost",
                         form="symmetric_generalized_mcfadden_cost")


def concave_block(lower, *, prefix: str = "s") -> dict[str, float]:
    """Values ``s11, s12, …`` of a negative semidefinite block S = −L Lᵀ.

    ``lower`` is an (n−1)×(n−1) lower-triangular matrix L (entries above the diagonal are
    ignored); any L gives a negative semidefinite S, and every such S arises from some L —
    the Cholesky-type reparametrisation by which Diewert and Wales (1987) impose global
    concavity on the normalized quadratic and symmetric generalized McFadden forms.
    """
    import numpy as np  # deferred: numpy is only needed here, sympy elsewhere in the module
    L = np.tril(np.asarray(lower, float))
    if L.ndim != 2 or L.shape[0] != L.shape[1] or L.shape[0] < 1:
        raise ModelError("concave_block needs a square lower-triangular matrix")
    if not np.isfinite(L).all():
        raise ModelError("concave_block: the matrix has entries that are not finite")
    S = -L @ L.T
    k = S.shape[0]
    return {f"{prefix}{i + 1}{j + 1}": float(S[i, j]) for i in range(k) for j in range(i, k)}


def _aids_pieces(model: Model):
    """ln a(p), the g matrix entry function and the parameter symbols of an (Q)AIDS model."""
    ps = list(model.prices)
    sym = {p.name: p.symbol for p in model.params}
    n = len(ps)
    lnp = [sp.log(p) for p in ps]

    def g(i, j):
        a, b = sorted((i, j))
        return sym[f"g{a + 1}{b + 1}"]
    lna = sym["a0"] + sum(sym[f"a{k + 1}"] * lnp[k] for k in range(n)) + sp.Rational(1, 2) * \
        sum(g(k, j) * lnp[k] * lnp[j] for k in range(n) for j in range(n))
    return ps, sym, lnp, g, lna


def aids_indirect_utility(model: Model) -> sp.Expr:
    """Indirect utility of an Almost Ideal model, as published by Deaton and Muellbauer
    (1980): ln e = ln a(p) + u·b0·Π p_k^{b_k} solved for u,
    u = (ln m − ln a(p)) / (b0·Π p_k^{b_k})."""
    if model.form != "aids_expenditure":
        raise ModelError("this indirect utility needs a model from aids_expenditure()")
    ps, sym, _lnp, _g, lna = _aids_pieces(model)
    b = sym["b0"] * sp.Mul(*[p ** sym[f"b{k + 1}"] for k, p in enumerate(ps)])
    return (sp.log(model.income) - lna) / b


def quaids_indirect_utility(model: Model) -> sp.Expr:
    """Indirect utility of a quadratic Almost Ideal model, as published by Banks, Blundell
    and Lewbel (1997): ln V = {[(ln m − ln a(p)) / b(p)]⁻¹ + λ(p)}⁻¹, i.e.
    u = z / (b(p) + λ(p)·z) with z = ln m − ln a(p)."""
    if model.form != "quaids_expenditure":
        raise ModelError("this indirect utility needs a model from quaids_expenditure()")
    ps, sym, lnp, _g, lna = _aids_pieces(model)
    n = len(ps)
    b = sp.Mul(*[p ** sym[f"b{k + 1}"] for k, p in enumerate(ps)])
    lam = sum(sym[f"l{k + 1}"] * lnp[k] for k in range(n))
    z = sp.log(model.income) - lna
    return z / (b + lam * z)


def aids_share_equations(model: Model, *, index: str = "exact",
                         observed: Sequence[str] | None = None) -> list[sp.Expr]:
    """Budget-share equations of an AIDS or quadratic AIDS model, in prices, income and
    parameters.

    ``index="exact"`` uses ln P = ln a(p) (the model's own price index); ``"stone"`` uses
    Stone's index ln P* = Σ_k w_k ln p_k with observed shares ``w_k`` (symbols named by
    ``observed``, default ``s1, s2, …``), the linear approximation common in estimation.
    A quadratic Almost Ideal model (Banks, Blundell and Lewbel 1997) adds
    (l_i / b(p))·(ln m − ln a(p))², b(p) = Π p_k^{b_k}; its index is always the exact one.
    """
    if model.form not in ("aids_expenditure", "quaids_expenditure"):
        raise ModelError("share equations of this kind need a model from aids_expenditure() "
                         "or quaids_expenditure()")
    if index not in ("exact", "stone"):
        raise ModelError(f"index {index!r} is not one of exact, stone")
    if model.form == "quaids_expenditure" and index != "exact":
        raise ModelError("the quadratic Almost Ideal shares use the exact price index a(p); "
                         "index='stone' is for the Almost Ideal model")
    ps = list(model.prices)
    sym = {p.name: p.symbol for p in model.params}
    n = len(ps)
    m = model.income
    lnp = [sp.log(p) for p in ps]

    def g(i, j):
        a, b = sorted((i, j))
        return sym[f"g{a + 1}{b + 1}"]
    if index == "exact":
        lnP = sym["a0"] + sum(sym[f"a{k + 1}"] * lnp[k] for k in range(n)) + sp.Rational(1, 2) * \
            sum(g(k, j) * lnp[k] * lnp[j] for k in range(n) for j in range(n))
    else:
        names = list(observed) if observed is not None else [f"s{k + 1}" for k in range(n)]
        if len(names) != n:
            raise ModelError(f"{n} goods but {len(names)} observed share names")
        shares = [sp.Symbol(s, real=True) for s in names]
        lnP = sum(s * l for s, l in zip(shares, lnp))
    shares = [sym[f"a{i + 1}"] + sum(g(i, j) * lnp[j] for j in range(n))
              + sym[f"b{i + 1}"] * (sp.log(m) - lnP) for i in range(n)]
    if model.form == "quaids_expenditure":
        b = sp.Mul(*[p ** sym[f"b{k + 1}"] for k, p in enumerate(ps)])
        shares = [w + sym[f"l{i + 1}"] / b * (sp.log(m) - lnP) ** 2
                  for i, w in enumerate(shares)]
    return shares


@dataclass(frozen=True)
class DualForm:
    """One flexible form of the dual-side catalogue.

    ``build(prices, **options) -> Model`` is its builder (``prices`` a number or the price
    names); ``role`` and ``side`` say which model it gives, ``price_letter`` how its
    default price names begin, ``source`` where it was published.
    """

    name: str
    title: str
    source: str
    role: str
    side: str
    price_letter: str
    build: Callable[..., Model]
    #: the published closed form of the other dual in the model's own symbols (for an
    #: expenditure form its indirect utility v(p, m)), when the engine's inversion
    #: would not find it within a budget; derivation verifies it numerically
    other_dual: Callable[[Model], sp.Expr] | None = None


#: the dual-side catalogue, in the order it is listed (the one source of it)
DUAL_FORMS: tuple[DualForm, ...] = (
    DualForm("translog_cost", "translog cost function",
             "Christensen, Jorgenson and Lau, 'Transcendental logarithmic production "
             "frontiers', Review of Economics and Statistics 55 (1973) (from memory)",
             "technology", "cost", "w", translog_cost),
    DualForm("generalized_leontief_cost", "generalized Leontief cost function",
             "Diewert, 'An application of the Shephard duality theorem: a generalized "
             "Leontief production function', Journal of Political Economy 79 (1971) "
             "(from memory)",
             "technology", "cost", "w", generalized_leontief_cost),
    DualForm("aids_expenditure", "Almost Ideal expenditure function",
             "Deaton and Muellbauer, 'An almost ideal demand system', American "
             "Economic Review 70 (1980) (from memory)",
             "preference", "expenditure", "p", aids_expenditure,
             other_dual=aids_indirect_utility),
    DualForm("quaids_expenditure", "quadratic Almost Ideal expenditure function",
             "Banks, Blundell and Lewbel, 'Quadratic Engel curves and consumer demand', "
             "Review of Economics and Statistics 79 (1997) (from memory)",
             "preference", "expenditure", "p", quaids_expenditure,
             other_dual=quaids_indirect_utility),
    DualForm("normalized_quadratic_cost", "normalized quadratic cost function",
             "Diewert and Wales, 'Flexible functional forms and global curvature "
             "conditions', Econometrica 55 (1987) (from memory)",
             "technology", "cost", "w", normalized_quadratic_cost),
    DualForm("symmetric_generalized_mcfadden_cost",
             "symmetric generalized McFadden cost function",
             "Diewert and Wales, 'Flexible functional forms and global curvature "
             "conditions', Econometrica 55 (1987) (from memory)",
             "technology", "cost", "w", symmetric_generalized_mcfadden_cost),
)
#: form name -> :class:`DualForm`
BY_NAME: dict[str, DualForm] = {f.name: f for f in DUAL_FORMS}
#: form name -> ``{"title", "source"}`` (derived from :data:`DUAL_FORMS`)
DUAL_CATALOGUE: dict[str, dict[str, str]] = {
    f.name: {"title": f.title, "source": f.source} for f in DUAL_FORMS}


def get_form(name: str) -> DualForm:
    """The :class:`DualForm` called ``name``; an unknown name's error lists the forms."""
    if name not in BY_NAME:
        raise ModelError(f"unknown dual-side form {name!r}; the forms are "
                         f"{', '.join(BY_NAME)}")
    return BY_NAME[name]


__all__ = ["DualForm", "DUAL_FORMS", "BY_NAME", "get_form", "DUAL_CATALOGUE", "translog_cost", "generalized_leontief_cost", "aids_expenditure",
           "quaids_expenditure", "aids_indirect_utility", "quaids_indirect_utility", "aids_share_equations",
           "normalized_quadratic_cost", "symmetric_generalized_mcfadden_cost",
           "concave_block"]

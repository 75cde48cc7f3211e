"""The estimating equations of a model, derived from its dual — never typed by the user.

A cost function c(w, y; θ) (typed, from the dual catalogue, or derived from a technology)
gives

* the **log cost equation**  ln c = ln C(w, y; θ);
* the **share equations**   s_i = ∂ln C / ∂ln w_i        (Shephard's lemma in logs);
* the **input–output equations**  x_i / y = (∂C / ∂w_i) / y  (Shephard's lemma in levels,
  divided by output when that removes it, as for the generalized Leontief form).

An Almost Ideal model gives its Marshallian budget shares in prices and total expenditure
(``index="exact"``: the translog price index, nonlinear in θ; ``"stone"``: Stone's index,
linear), from :func:`duality.solve.dual_forms.aids_share_equations`.

The theory restrictions (homogeneity, adding-up, symmetry) come from
:func:`duality.analyse.theory.restrictions`, derived from the model's formula; the linear
ones are imposed by eliminating parameters (:func:`duality.analyse.restrictions.impose`),
which imposes them across all equations at once.  Shares sum to one, so one share equation
is dropped (the last unless ``drop`` names another).  Parameters held by ``fixed`` are
replaced by their values before anything else.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from functools import lru_cache
from typing import Mapping, Sequence

import sympy as sp

from ...analyse.restrictions import impose
from ...analyse.theory import restrictions as theory_restrictions
from ...errors import DualityError
from ...model.base import Model
from ...solve.derive import DEFAULT_BUDGET, cost
from ...solve.dual_forms import aids_share_equations

#: the ``equations`` choices and what each means
EQUATIONS = {
    "auto": "the log cost (or expenditure) equation, plus the share equations when shares "
            "are given; input–output equations for a dual whose log is not linear in its "
            "parameters but whose derivatives are; budget shares for an Almost Ideal model",
    "cost": "the log cost (or expenditure) equation alone",
    "shares": "the share equations alone (one dropped for adding-up)",
    "cost+shares": "the log cost equation and the share equations (one share dropped)",
    "input-output": "input–output equations x_i/y from Shephard's lemma in levels",
}


@dataclass(frozen=True)
class EstimatingEquation:
    """One equation ``dependent = rhs``: ``dependent`` in observed data only, ``rhs`` in
    data and parameters.

    Attributes
    ----------
    name : str
        ``"ln c"``, ``"share x1"``, ``"x1/y"``.
    dependent, rhs : sympy.Expr
    observed : str
        The data name the dependent variable is built from (``c``, ``s_x1``, ``x1``).
    """

    name: str
    dependent: sp.Expr
    rhs: sp.Expr
    observed: str

    def as_text(self) -> str:
        return f"{sp.sstr(self.dependent)} = {sp.sstr(self.rhs)}"

    def as_latex(self) -> str:
        return f"{sp.latex(self.dependent)} = {sp.latex(self.rhs)}"


@dataclass(frozen=True)
class EquationSystem:
    """The equations to estimate, with the parameters sorted into free, fixed and derived.

    Attributes
    ----------
    model : Model
        The model the equations were derived from (unchanged).
    side : {"cost", "expenditure"}
    equations : tuple of EstimatingEquation
        In terms of the free parameters only (restrictions and fixed values substituted).
    data : dict name -> Symbol
        Every observed name the equations use (prices, output or income, ``c``, shares).
    free : tuple of Symbol
        Parameters to estimate.
    fixed : dict Symbol -> float
    derived : dict Symbol -> sympy.Expr
        Parameters eliminated by the restrictions, in the free ones.
    unused : tuple of Symbol
        Parameters the equations do not contain (reported, not estimated).
    imposed : tuple of str
        The restrictions imposed, each as text with its kind.
    dropped : str or None
        The share equation dropped for adding-up.
    linear : bool
        Every equation is linear in the free parameters.
    level_expr : sympy.Expr or None
        ln C (or the share system's base function) in all parameters, for elasticities.
    """

    model: Model
    side: str
    equations: tuple
    data: dict
    free: tuple
    fixed: dict
    derived: dict
    unused: tuple
    imposed: tuple
    dropped: str | None
    linear: bool
    prices: tuple
    level: sp.Symbol
    quantities: tuple
    log_cost: sp.Expr | None = None
    shares_exact: tuple = ()
    notes: tuple = ()
    index: str | None = None
    derived_how: dict = field(default_factory=dict)

    def as_text(self) -> str:
        """The estimating equations, what was imposed and dropped, as plain text."""
        lines = ["estimating equations:"]
        lines += [f"  [{e.name}]  {e.as_text()}" for e in self.equations]
        if self.fixed:
            lines.append("fixed: " + ", ".join(f"{k} = {v:g}" for k, v in self.fixed.items()))
        if self.derived:
            lines.append("eliminated by the restrictions: " + ", ".join(
                f"{k} = {sp.sstr(v)}" for k, v in self.derived.items()))
        lines += [f"imposed: {r}" for r in self.imposed]
        if self.dropped:
            lines.append(f"dropped for adding-up: {self.dropped}")
        lines += [f"note: {n}" for n in self.notes]
        return "\n".join(lines)


def _log_expand(expr: sp.Expr) -> sp.Expr:
    return sp.expand(sp.expand_log(sp.log(expr), force=True))


def _is_linear_in(expr: sp.Expr, params: Sequence[sp.Symbol]) -> bool:
    ps = set(params)
    return all(not (sp.diff(expr, p).free_symbols & ps) for p in ps & expr.free_symbols)


def _dual_of(model: Model, budget):
    """(side, function, prices, level, quantities) of the model's cost or expenditure."""
    if not isinstance(model, Model):
        raise DualityError(f"estimation needs a model, not {type(model).__name__}")
    if model.is_primal:
        if not model.is_technology:
            raise DualityError("estimation of a utility function goes through its expenditure "
                               "function, which contains unobserved utility; give a dual-side "
                               "demand system (aids_expenditure) instead")
        d = cost(model, budget=budget)
        if d.expr is None:
            raise DualityError("the cost function of this technology has no closed form; "
                               "estimation needs one")
        return "cost", d.expr, tuple(d.args[:-1]), d.args[-1], tuple(model.quantities)
    if model.side in ("cost", "expenditure"):
        return model.side, model.expr, tuple(model.prices), model.level, tuple(model.quantities)
    raise DualityError(f"estimation covers cost and expenditure functions, not a "
                       f"{model.side.replace('_', ' ')} function")


def _dropped_params(model, C, prices, quantities, drop, is_aids) -> set:
    """Parameters in the share equation that will be dropped (the last unless ``drop``)."""
    names = [str(q) for q in quantities]
    i = names.index(drop) if drop in names else len(names) - 1
    if is_aids:
        rhs = aids_share_equations(model, index="exact")[i]
    else:
        rhs = prices[i] * sp.diff(_log_expand(C), prices[i])
    return rhs.free_symbols & set(model.param_symbols)


def share_symbol(q) -> sp.Symbol:
    """The data symbol of the observed share of quantity ``q`` (``s_x1``)."""
    return sp.Symbol(f"s_{q}", real=True)


def derive_system(model: Model, *, equations: str = "auto", shares: Sequence[str] = (),
                  fixed: Mapping[str, float] | None = None, drop: str | None = None,
                  index: str = "exact", impose_theory: bool = True,
                  have_value: bool = True, have_quantities: bool = False,
                  budget: float | None = DEFAULT_BUDGET) -> EquationSystem:
    return _derive_cached(model, equations, tuple(shares), tuple(sorted((fixed or {}).items())),
                          drop, index, impose_theory, have_value, have_quantities, budget)


@lru_cache(maxsize=64)
def _derive_cached(model, equations, shares, fixed, drop, index, impose_theory, have_value,
                   have_quantities, budget) -> EquationSystem:
    return _derive(model, equations=equations, shares=shares, fixed=dict(fixed), drop=drop,
                   index=index, impose_theory=impose_theory, have_value=have_value,
                   have_quantities=have_quantities, budget=budget)


def _derive(model: Model, *, equations, shares, fixed, drop, index, impose_theory,
            have_value, have_quantities, budget) -> EquationSystem:
    """Derive the estimating equations of ``model`` with its theory imposed.

    Parameters
    ----------
    equations : str
        One of :data:`EQUATIONS`.
    shares : sequence of str
        Quantity names whose shares are observed (needed for share equations).
    fixed : mapping name -> float
        Parameters held at values.
    drop : str, optional
        Quantity whose share equation is dropped for adding-up (default the last).
    index : {"exact", "stone"}
        Price index of an Almost Ideal system.
    impose_theory : bool
        Impose the linear theory restrictions (default); ``False`` estimates freely so
        that the restrictions can be tested.
    have_value, have_quantities : bool
        Whether the data hold the observed cost and the quantities (for ``"auto"``).
    """
    if equations not in EQUATIONS:
        raise DualityError(f"equations {equations!r} is not one of {', '.join(EQUATIONS)}")
    side, C, prices, level, quantities = _dual_of(model, budget)
    params = list(model.param_symbols)
    by_name = {p.name: p.symbol for p in model.params}
    fixed = dict(fixed or {})
    unknown = sorted(set(fixed) - set(by_name))
    if unknown:
        raise DualityError(f"fixed parameter {unknown[0]} is not a parameter of the model "
                           f"(it has {', '.join(by_name)})")
    fix = {by_name[k]: float(v) for k, v in fixed.items()}
    # a value set on the model is a start value, never a fixed one
    notes: list[str] = []
    qnames = [str(q) for q in quantities]
    is_aids = model.form in ("aids_expenditure", "quaids_expenditure")
    if side == "expenditure" and not is_aids:
        raise DualityError("an expenditure function contains unobserved utility; estimation "
                           "of expenditure systems covers the Almost Ideal models "
                           "(aids_expenditure, quaids_expenditure) through their budget "
                           "shares")

    # -- restrictions -----------------------------------------------------------------
    imposed, mapping = [], {}
    if impose_theory and not model.is_primal:
        rs = [r for r in theory_restrictions(model) if r.linear]
        if rs:
            # eliminate the parameters of the dropped share first (impose eliminates the
            # last ones first), so the equations kept hold the free ones
            last = _dropped_params(model, C, prices, quantities, drop, is_aids)
            order = [p for p in params if p not in last] + [p for p in params if p in last]
            _, mapping, _ = impose(model.expr, rs, order, keep=list(fix))
            imposed = [f"[{r.kind}] {sp.sstr(r.equation)}" for r in rs]
    elif not impose_theory:
        notes.append("theory restrictions not imposed")

    data: dict[str, sp.Symbol] = {str(p): p for p in prices}
    eqs: list[EstimatingEquation] = []
    dropped = None
    lnC = None
    exact_shares: tuple = ()
    value_name = "c" if side == "cost" else "m"

    # the quadratic Almost Ideal shares stay factored: expanding (ln m − ln a(p))²/b(p)
    # gives hundreds of terms, slow to fit, export and read
    tidy = (lambda e: e) if model.form == "quaids_expenditure" else sp.expand

    def sub(e):
        e = e.xreplace(mapping) if mapping else e
        return tidy(e.xreplace(fix)) if fix else tidy(e)

    def pick_drop(names):
        if drop is None:
            return names[-1]
        if drop not in names:
            raise DualityError(f"drop={drop!r} is not one of the share equations "
                               f"({', '.join(names)})")
        return drop

    if is_aids:
        if equations not in ("auto", "shares"):
            raise DualityError(f"an Almost Ideal model is estimated from its budget shares, "
                               f"not equations={equations!r}")
        if index not in ("exact", "stone"):
            raise DualityError(f"index {index!r} is not one of exact, stone")
        if index == "stone" and model.form == "quaids_expenditure":
            raise DualityError("the quadratic Almost Ideal shares use the exact price index; "
                               "leave index='exact'")
        if not shares:
            raise DualityError("the Almost Ideal budget shares need observed shares: give "
                               "shares={quantity: column}")
        missing = [q for q in qnames if q not in shares]
        if missing:
            raise DualityError(f"no observed share for {missing[0]}: give all of "
                               f"{', '.join(qnames)}")
        if index == "exact" and "a0" in by_name and by_name["a0"] not in fix:
            raise DualityError("the constant a0 of the Almost Ideal price index is not "
                               "identified in practice; fix it, e.g. fixed={'a0': 0}")
        income = model.income
        data[str(income)] = income
        obs = [share_symbol(q) for q in qnames]
        for q, s in zip(qnames, obs):
            data[str(s)] = s
        rhs_all = aids_share_equations(model, index=index, observed=[str(s) for s in obs])
        exact_shares = tuple(aids_share_equations(model, index="exact"))
        d = pick_drop(qnames)
        dropped = f"share {d}"
        for q, s, r in zip(qnames, obs, rhs_all):
            if q != d:
                eqs.append(EstimatingEquation(f"share {q}", s, sub(r), str(s)))
        level = income
        if index == "stone":
            notes.append("Stone's index ln P = Σ s_k ln p_k uses the observed shares")
    else:
        lnC = _log_expand(C)
        data[str(level)] = level
        log_linear = _is_linear_in(sub(lnC), params)
        if equations == "auto":
            if log_linear or not have_quantities:
                equations = "cost+shares" if shares else "cost"
                if not have_value and shares:
                    equations = "shares"
            else:
                equations = "input-output"
        if equations in ("cost", "cost+shares"):
            cval = sp.Symbol(value_name, positive=True)
            data[value_name] = cval
            eqs.append(EstimatingEquation(f"ln {value_name}", sp.log(cval), sub(lnC),
                                          value_name))
        if equations in ("shares", "cost+shares"):
            if not shares:
                raise DualityError("share equations need observed shares: give "
                                   "shares={quantity: column}")
            missing = [q for q in qnames if q not in shares]
            if missing:
                raise DualityError(f"no observed share for {missing[0]}: share equations need "
                                   f"all of {', '.join(qnames)}")
            d = pick_drop(qnames)
            dropped = f"share {d}"
            for q, w in zip(qnames, prices):
                s = share_symbol(q)
                data[str(s)] = s
                if q != d:
                    eqs.append(EstimatingEquation(f"share {q}", s,
                                                  sub(sp.expand(w * sp.diff(lnC, w))), str(s)))
        if equations == "input-output":
            for q, w in zip(qnames, prices):
                qs = sp.Symbol(q, positive=True)
                data[q] = qs
                rhs = sp.diff(C, w)
                ratio = sp.simplify(rhs / level)
                if level not in ratio.free_symbols:
                    eqs.append(EstimatingEquation(f"{q}/{level}", qs / level, sub(ratio), q))
                else:
                    eqs.append(EstimatingEquation(q, qs, sub(rhs), q))
    free_all = [p for p in params if p not in fix and p not in mapping]
    used = set().union(*(e.rhs.free_symbols for e in eqs))
    free = tuple(p for p in free_all if p in used)
    unused = tuple(p for p in free_all if p not in used)
    if unused:
        names = ", ".join(p.name for p in unused)
        example = ", ".join(f"'{p.name}': 1" for p in unused[:2])
        raise DualityError(f"parameter(s) {names} do not enter these estimating equations "
                           f"({', '.join(e.name for e in eqs)}) and cannot be estimated; fix "
                           f"them, e.g. fixed={{{example}}}")
    derived = {k: sp.expand(v.xreplace(fix)) for k, v in mapping.items()}
    linear = all(_is_linear_in(e.rhs, free) for e in eqs)
    return EquationSystem(model=model, side=side, equations=tuple(eqs), data=data, free=free,
                          fixed=fix, derived=derived, unused=unused, imposed=tuple(imposed),
                          dropped=dropped, linear=linear, prices=prices, level=level,
                          quantities=quantities, log_cost=lnC, shares_exact=exact_shares,
                          notes=tuple(notes), index=index if is_aids else None)


def linear_parts(eq: EstimatingEquation, free: Sequence[sp.Symbol]):
    """(offset, {parameter: regressor}) of an equation linear in the parameters:
    rhs = offset + Σ_k θ_k · regressor_k, each piece in data symbols only."""
    present = [p for p in free if p in eq.rhs.free_symbols]
    regs = {p: sp.expand(sp.diff(eq.rhs, p)) for p in present}
    offset = sp.expand(eq.rhs.xreplace({p: 0 for p in present}))
    return offset, regs


__all__ = ["EQUATIONS", "EstimatingEquation", "EquationSystem", "derive_system",
           "linear_parts", "share_symbol"]

"""Price scenarios and welfare: what a change of prices (and income or output) does.

:func:`compare` evaluates one model at a baseline point and at a variant point and
returns one table; :func:`scenario_table` does it for every variant of a scenario file
(:mod:`duality.apply.scenario`).

Layout
------
One row per **measure**, four columns:

``baseline``
    the measure at the baseline point (NaN for measures that only exist as a change);
``variant``
    the measure at the variant point;
``change``
    variant minus baseline, or the welfare measure itself;
``note``
    the definition used, or why a measure is not available.

:func:`scenario_table` stacks these with a two-level row index ``(variant, measure)``.

Points are flat dictionaries in the model's own names, e.g. ``{"p1": 1.0, "p2": 2.0,
"m": 100.0}``.  The baseline gives every price and, for a preference, exactly one of
income or the utility level (income is then ``e(p0, u0)``); for a technology the output
(default 1) and optionally the output price (needed for profit and supply).  The variant
gives only what changes: prices, and optionally income or output.

Preferences — sign convention: **a positive number is a gain to the consumer**
------------------------------------------------------------------------------------
With baseline prices and income ``(p0, m0)``, variant ``(p1, m1)``, ``u0 = v(p0, m0)``,
``u1 = v(p1, m1)`` (Varian, *Microeconomic Analysis*, 3rd ed. (1992), ch. 10, from
memory)::

    compensating variation  CV = e(p1, u1) − e(p1, u0) = m1 − e(p1, u0)
    equivalent variation    EV = e(p0, u1) − e(p0, u0) = e(p0, u1) − m0

CV is the income change at the *new* prices that leaves the consumer exactly as well off
as at the baseline (a price rise gives CV < 0: ``−CV`` is the compensation needed); EV is
the income change at the *old* prices that is as good as the variant.  Both are computed
exactly from the expenditure function (closed form or numeric), never approximated.

Change in Marshallian consumer surplus along the straight path ``p(t) = p0 + t (p1 − p0)``,
``m(t) = m0 + t (m1 − m0)``, ``t ∈ [0, 1]``::

    ΔCS = (m1 − m0) − ∫₀¹ Σ_i x_i(p(t), m(t)) (p1_i − p0_i) dt

by adaptive quadrature (:func:`scipy.integrate.quad`) on the Marshallian demands.  For a
normal good CV ≤ ΔCS ≤ EV (Willig, *American Economic Review* 66 (1976), from memory);
with no income effect (quasi-linear utility) all three coincide.

Further rows: prices, income, utility, the spending needed to reach the baseline utility
``e(p, u0)`` (its change is the compensation the price change calls for) and every
Marshallian demand ``x_i(p1, m1) − x_i(p0, m0)``.

Technologies
------------
Rows: prices, output, unit cost ``c(w, 1)``, total cost ``c(w, y)``, average cost
``c(w, y)/y`` and every conditional input demand ``x_i(w, y)``.  When the baseline gives
the output price and the technology has a profit function (decreasing returns), also
profit ``π(p, w)``, supply and the unconditional input demands; otherwise one ``profit``
row with NaN values and the reason in its note (e.g. constant returns to scale).

Numeric-route duals work the same way: they are callables too.
"""
from __future__ import annotations

import math
from functools import lru_cache
from typing import Mapping

import pandas as pd
from scipy import integrate

from ..errors import DualityError, NoSolutionError
from ..model.base import Model
from ..solve.derive import cost, expenditure, indirect_utility, profit

COLUMNS = ("baseline", "variant", "change", "note")

NOTE_CV = ("CV = m1 − e(p1, u0): income change at the new prices that restores baseline "
           "utility; positive = gain (Varian 1992, ch. 10)")
NOTE_EV = ("EV = e(p0, u1) − m0: income change at the old prices equivalent to the "
           "variant; positive = gain (Varian 1992, ch. 10)")
NOTE_CS = ("ΔCS = (m1 − m0) − ∫ x(p, m)·dp along the straight path from (p0, m0) to "
           "(p1, m1), Marshallian demands, scipy quad; positive = gain")
NOTE_SPEND = ("e(p, u0): spending needed for baseline utility; its change is the "
              "compensation the price change calls for (= −CV when income is unchanged)")


@lru_cache(maxsize=64)
def _duals_preference(model: Model):
    return expenditure(model), indirect_utility(model)


@lru_cache(maxsize=64)
def _cost(model: Model):
    return cost(model)


@lru_cache(maxsize=64)
def _profit(model: Model):
    try:
        return profit(model), ""
    except NoSolutionError as exc:
        return None, str(exc)


def compare(model: Model, baseline: Mapping[str, float],
            variant: Mapping[str, float]) -> pd.DataFrame:
    """Compare a model at a baseline point and a variant point (see the module docstring).

    Parameters
    ----------
    model : Model
        A technology or a preference (any side, any route).
    baseline : mapping
        Every price by its name, plus income *or* utility (preference), or output and
        optionally the output price (technology).
    variant : mapping
        What changes: prices, and optionally income (preference) or output (technology).

    Returns
    -------
    pandas.DataFrame
        Index ``measure``; columns ``baseline``, ``variant``, ``change``, ``note``.
    """
    if not isinstance(model, Model):
        raise DualityError(f"compare needs a model from technology(), preference() or a "
                           f"dual-side constructor, not {type(model).__name__}")
    base, var = _points(model, baseline, variant)
    rows = (_preference_rows if model.role == "preference" else _technology_rows)(
        model, base, var)
    df = pd.DataFrame([r[1:] for r in rows], columns=list(COLUMNS),
                      index=pd.Index([r[0] for r in rows], name="measure"))
    df.attrs["convention"] = "positive welfare numbers are gains; change = variant − baseline"
    return df


def scenario_table(scenario, *, only=None) -> pd.DataFrame:
    """Every variant of a :class:`~duality.apply.scenario.Scenario` against its baseline.

    Rows are indexed by ``(variant, measure)``; columns as in :func:`compare`.  Errors
    name the scenario file and the variant's key.  ``only`` restricts the table to the
    named variants (in that order).
    """
    model = scenario.build_model()
    base, variants = scenario.points()
    if only is not None:
        unknown = [n for n in only if n not in variants]
        if unknown:
            raise DualityError(f"{scenario.where}: no variant named {unknown[0]!r}; the "
                               f"variants are {', '.join(variants) or 'none'}")
        variants = {n: variants[n] for n in only}
    frames = {}
    for name, point in variants.items():
        try:
            frames[name] = compare(model, base, point)
        except DualityError as exc:
            raise type(exc)(f"{scenario.where}: key 'variants.{name}': {exc}") from None
    if not frames:
        idx = pd.MultiIndex.from_arrays([[], []], names=["variant", "measure"])
        return pd.DataFrame(columns=list(COLUMNS), index=idx)
    out = pd.concat(frames, names=["variant", "measure"])
    out.attrs["title"] = scenario.title
    return out


# -- points -------------------------------------------------------------------------------
def _points(model: Model, baseline, variant) -> tuple[dict, dict]:
    prices = [str(p) for p in model.prices]
    if model.role == "preference":
        levels = [str(model.income), str(model.level)]
        var_ok = set(prices) | {str(model.income)}
    else:
        levels = [str(model.level), str(model.output_price)]
        var_ok = set(prices) | set(levels)
    base_ok = set(prices) | set(levels)
    base = _clean(baseline, base_ok, "baseline")
    var = _clean(variant, var_ok, "variant")
    for p in prices:
        if p not in base:
            raise DualityError(f"baseline: no value for price '{p}'; every price of the "
                               "model needs a baseline value")
    if model.role == "preference":
        m, u = str(model.income), str(model.level)
        if (m in base) == (u in base):
            raise DualityError(f"baseline: give exactly one of income '{m}' and utility "
                               f"level '{u}'")
    else:
        base.setdefault(str(model.level), 1.0)
    for k, v in base.items():
        if k != str(model.level) or model.role == "technology":
            if not v > 0:
                raise DualityError(f"baseline: '{k}' must be positive; got {v:g}")
    for k, v in var.items():
        if not v > 0:
            raise DualityError(f"variant: '{k}' must be positive; got {v:g}")
    full = dict(base)
    full.update(var)
    return base, full


def _clean(point, allowed, what) -> dict[str, float]:
    if not isinstance(point, Mapping):
        raise DualityError(f"{what}: expected a mapping of name -> value, got "
                           f"{type(point).__name__}")
    out = {}
    for k, v in point.items():
        if k not in allowed:
            raise DualityError(f"{what}: '{k}' is not a name that can be set here; "
                               f"expected one of {', '.join(sorted(allowed))}")
        try:
            x = float(v)
        except (TypeError, ValueError):
            raise DualityError(f"{what}: '{k}' must be a number; got {v!r}") from None
        if not math.isfinite(x):
            raise DualityError(f"{what}: '{k}' must be finite; got {x}")
        out[k] = x
    return out


def _row(name, b, v, note="", change=None):
    b = float("nan") if b is None else float(b)
    v = float("nan") if v is None else float(v)
    return (name, b, v, v - b if change is None else float(change), note)


# -- preferences ----------------------------------------------------------------------------
def _preference_rows(model: Model, base: dict, var: dict) -> list[tuple]:
    e, v = _duals_preference(model)
    ps = [str(p) for p in model.prices]
    mname, uname = str(model.income), str(model.level)
    p0 = {p: base[p] for p in ps}
    p1 = {p: var[p] for p in ps}
    if mname in base:
        m0 = base[mname]
        u0 = v(**p0, **{mname: m0})
    else:
        u0 = base[uname]
        m0 = e(**p0, **{uname: u0})
    m1 = var[mname] if mname in var else m0
    u1 = v(**p1, **{mname: m1})
    e1_u0 = e(**p1, **{uname: u0})
    e0_u1 = e(**p0, **{uname: u1})
    cv = m1 - e1_u0
    ev = e0_u1 - m0
    marsh = v.demands
    dcs = (m1 - m0) - _price_path_integral(marsh, ps, p0, p1, mname, m0, m1)
    rows = [_row(f"price {p}", p0[p], p1[p]) for p in ps]
    rows += [
        _row("income", m0, m1),
        _row("utility", u0, u1, "v(p, m) (indirect utility)"),
        _row("expenditure for baseline utility", m0, e1_u0, NOTE_SPEND),
        _row("compensating variation", None, None, NOTE_CV, change=cv),
        _row("equivalent variation", None, None, NOTE_EV, change=ev),
        _row("consumer surplus change", None, None, NOTE_CS, change=dcs),
    ]
    for name, d in marsh.items():
        rows.append(_row(f"demand {name}", d(**p0, **{mname: m0}), d(**p1, **{mname: m1}),
                         "Marshallian demand x(p, m)"))
    return rows


def _price_path_integral(marsh, ps, p0, p1, mname, m0, m1) -> float:
    """∫₀¹ Σ_i x_i(p(t), m(t)) (p1_i − p0_i) dt on the straight path."""
    dp = {p: p1[p] - p0[p] for p in ps}
    moving = [p for p in ps if dp[p] != 0.0]
    if not moving:
        return 0.0
    dm = m1 - m0
    names = dict(zip(ps, marsh))  # demands are keyed by quantity name, in price order

    def integrand(t: float) -> float:
        point = {p: p0[p] + t * dp[p] for p in ps}
        point[mname] = m0 + t * dm
        return sum(float(marsh[names[p]](**point)) * dp[p] for p in moving)

    val, err = integrate.quad(integrand, 0.0, 1.0, epsabs=1e-10, epsrel=1e-9, limit=100)
    return float(val)


# -- technologies ----------------------------------------------------------------------------
def _technology_rows(model: Model, base: dict, var: dict) -> list[tuple]:
    c = _cost(model)
    ws = [str(w) for w in model.prices]
    yname, pname = str(model.level), str(model.output_price)
    w0 = {w: base[w] for w in ws}
    w1 = {w: var[w] for w in ws}
    y0, y1 = base[yname], var[yname]
    rows = [_row(f"price {w}", w0[w], w1[w]) for w in ws]
    if pname in base or pname in var:
        rows.append(_row(f"output price {pname}", base.get(pname), var.get(pname)))
    c0, c1 = c(**w0, **{yname: y0}), c(**w1, **{yname: y1})
    rows += [
        _row(f"output {yname}", y0, y1),
        _row("unit cost", c(**w0, **{yname: 1.0}), c(**w1, **{yname: 1.0}),
             "c(w, 1): cost of one unit of output"),
        _row("total cost", c0, c1, "c(w, y)"),
        _row("average cost", c0 / y0, c1 / y1, "c(w, y) / y"),
    ]
    for name, d in c.demands.items():
        rows.append(_row(f"conditional demand {name}", d(**w0, **{yname: y0}),
                         d(**w1, **{yname: y1}), "x(w, y) (Shephard's lemma)"))
    if pname not in base:
        rows.append(_row("profit", None, None, f"not computed: the baseline gives no output "
                         f"price '{pname}'", change=float("nan")))
        return rows
    prof, why = _profit(model)
    if prof is None:
        rows.append(_row("profit", None, None, f"not available: {why}", change=float("nan")))
        return rows
    q0 = {pname: base[pname], **w0}
    q1 = {pname: var[pname], **w1}
    rows.append(_row("profit", prof(**q0), prof(**q1), "π(p, w)"))
    for name, d in prof.demands.items():
        label = f"supply {name}" if name == yname else f"input demand {name}"
        note = ("y(p, w) (Hotelling's lemma)" if name == yname
                else "x(p, w), unconditional (Hotelling's lemma)")
        rows.append(_row(label, d(**q0), d(**q1), note))
    return rows


__all__ = ["compare", "scenario_table", "COLUMNS"]

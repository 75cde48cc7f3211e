"""Plotly figures of the app, built by plain functions (tests call them directly).

Every function returns a :class:`plotly.graph_objects.Figure` and raises
:class:`~duality.errors.DualityError` with a readable reason when the figure does not
exist for the model (no production function given, fewer than two quantities...).

- :func:`level_curve`: the isoquant or indifference curve through the optimal bundle,
  with the isocost or budget line tangent there and the bundle marked;
- :func:`cost_curves`: total, average and marginal cost against output;
- :func:`demand_curves`: each demand against its own price, the other prices fixed;
- :func:`conjugate_envelope`: a one-variable function, its conjugate, and the supporting
  lines whose upper envelope is the convex envelope of the function;
- :func:`elasticity_heatmap`: a matrix of elasticities;
- :func:`welfare_bars`: welfare or cost changes per price variant;
- :func:`comparison_bars`: two scenarios' numbers side by side.
- :func:`regularity_by_row`: the fitted model's curvature measure at every data row,
  rows that violate curvature or monotonicity marked.
"""
from __future__ import annotations

import numpy as np
import pandas as pd
import plotly.graph_objects as go
import sympy as sp
from plotly.subplots import make_subplots

import duality as dy
from duality.errors import DualityError
from duality.model.base import Model
from duality.model.formula import parse
from duality.solve.result import Derived

#: the app's palette: slate ink, a teal for the primal, an ochre for the dual side
INK = "#23313f"
PRIMAL = "#17877b"
DUAL = "#c98a1b"
MUTED = "#8a97a5"
ACCENT = "#a23b52"
SERIES = [PRIMAL, DUAL, ACCENT, "#4a6fa5", "#6b8e23", "#8e5ea2"]

_LAYOUT = dict(template="plotly_white", font=dict(family="Source Sans Pro, sans-serif",
                                                  color=INK, size=13),
               margin=dict(l=60, r=20, t=50, b=50), legend=dict(orientation="h", y=-0.18))


def axis(what: str, name: str, units: dict | None = None, scale: str = "") -> str:
    """An axis title: ``price w_clay (£ per kg, log scale)``, the unit from the scenario
    file's ``[units]`` table when it has one for ``name``."""
    inside = [u for u in ((units or {}).get(name, ""), scale) if u]
    return f"{what} {name}" + (f" ({', '.join(inside)})" if inside else "")


def _finish(fig: go.Figure, title: str) -> go.Figure:
    fig.update_layout(title=dict(text=title, x=0.0, xanchor="left"), **_LAYOUT)
    if fig.layout.annotations:  # subplot titles: leave room under the figure's title
        fig.update_layout(margin=dict(t=90))
    return fig


def _primal_fn(model: Model):
    """The production or utility function as a vectorised numpy function of quantities."""
    if not model.is_primal:
        side = model.side.replace("_", " ")
        article = "an" if side[0] in "aeiou" else "a"
        raise DualityError(f"the model was given as {article} {side} function, so there is "
                           "no production or utility function to draw its level curve from")
    expr = model.numeric_expr
    if expr.free_symbols - set(model.quantities):
        missing = ", ".join(sorted(map(str, expr.free_symbols - set(model.quantities))))
        raise DualityError(f"parameter(s) {missing} need values to draw the level curve")
    return sp.lambdify(list(model.quantities), expr, "numpy")


def _demand_values(d: Derived, point: dict) -> dict[str, float]:
    names = {str(a) for a in d.args}
    pt = {k: v for k, v in point.items() if k in names}
    return {q: float(x(**pt)) for q, x in d.demands.items()}


def level_curve(model: Model, dual: Derived, point: dict, pair: tuple[str, str] | None = None,
                n: int = 200, units: dict | None = None) -> go.Figure:
    """Isoquant (technology) or indifference curve (preference) through the optimum.

    ``dual`` is the cost function (technology) or the expenditure function (preference);
    ``point`` holds its prices and output or utility level.  ``pair`` names the two
    quantities on the axes (default: the first two); the others stay at their optimal
    values.  The line ``w_i x_i + w_j x_j = w_i x_i* + w_j x_j*`` is the isocost or
    budget line through the optimal bundle.
    """
    qs = [str(q) for q in model.quantities]
    if len(qs) < 2:
        raise DualityError("a level curve needs at least two quantities")
    pair = tuple(pair or qs[:2])
    if len(set(pair)) != 2 or not set(pair) <= set(qs):
        raise DualityError(f"choose two different quantities among {', '.join(qs)}")
    f = _primal_fn(model)
    xstar = _demand_values(dual, point)
    level = float(np.asarray(f(*[xstar[q] for q in qs])))
    i, j = qs.index(pair[0]), qs.index(pair[1])
    xi0, xj0 = xstar[pair[0]], xstar[pair[1]]
    xi = np.geomspace(xi0 / 6.0, xi0 * 6.0, n)
    xj = _solve_level(f, qs, xstar, i, j, xi, level, xj0)
    return _level_figure(model, point, pair, xstar, xi, xj, level, recovered=False,
                         units=units)


def recovered_level_curve(model: Model, recovered, dual: Derived, point: dict,
                          n: int = 80, units: dict | None = None) -> go.Figure:
    """The isoquant or indifference curve of the technology or preference recovered from
    a cost or expenditure function (``recovered``: :func:`duality.recover`), through the
    bundle the dual's demands give at ``point``, in the plane of the first two quantities
    (the others at that bundle); marked as recovered."""
    qs = [str(q) for q in model.quantities]
    if len(qs) < 2:
        raise DualityError("a level curve needs at least two quantities")
    xstar = _demand_values(dual, point)
    level = float(point[str(model.level)])
    other = {q: xstar[q] for q in qs[2:]} or None
    pts = np.asarray(recovered.isoquant(level, n=n, other=other), dtype=float)
    return _level_figure(model, point, tuple(qs[:2]), xstar, pts[:, 0], pts[:, 1], level,
                         recovered=True, units=units)


def _level_figure(model: Model, point: dict, pair: tuple, xstar: dict, xi: np.ndarray,
                  xj: np.ndarray, level: float, recovered: bool,
                  units: dict | None = None) -> go.Figure:
    """The level curve (points ``xi``, ``xj``) with the isocost or budget line through
    the optimal bundle ``xstar`` and the bundle marked."""
    qs = [str(q) for q in model.quantities]
    i, j = qs.index(pair[0]), qs.index(pair[1])
    prices = [str(p) for p in model.prices]
    wi, wj = point[prices[i]], point[prices[j]]
    xi0, xj0 = xstar[pair[0]], xstar[pair[1]]
    spend = wi * xi0 + wj * xj0
    line_x = np.linspace(0.0, spend / wi, 50)
    line_y = (spend - wi * line_x) / wj
    what, line = model.role_info.level_curve, model.role_info.price_line
    source = "cost" if model.is_technology else "expenditure"
    name = f"{what} ({level:.4g})" + (f", recovered from the {source} function"
                                      if recovered else "")
    fig = go.Figure()
    ok = np.isfinite(xi) & np.isfinite(xj)
    fig.add_trace(go.Scatter(x=xi[ok], y=xj[ok], mode="lines", name=name,
                             line=dict(color=PRIMAL, width=3, dash="dot" if recovered
                                       else "solid")))
    fig.add_trace(go.Scatter(x=line_x, y=line_y, mode="lines", name=line,
                             line=dict(color=DUAL, width=2, dash="dash")))
    fig.add_trace(go.Scatter(x=[xi0], y=[xj0], mode="markers", name="optimal bundle",
                             marker=dict(color=ACCENT, size=12, symbol="diamond")))
    fig.update_xaxes(title=axis("quantity", pair[0], units), range=[0, 2.2 * xi0])
    fig.update_yaxes(title=axis("quantity", pair[1], units), range=[0, 2.2 * xj0])
    title = f"{what.capitalize()} and {line} at the chosen prices"
    if recovered:
        title = (f"Recovered {what} (from the {source} function) and {line} at the "
                 "chosen prices")
    return _finish(fig, title)


def _solve_level(f, qs, xstar, i, j, xi, level, xj0, iters: int = 80) -> np.ndarray:
    """For each x_i, the x_j with f(...) = level (others at the optimum): bisection in
    logs on a bracket grown until it holds the level; NaN where none is found."""
    n = len(xi)
    base = [np.full(n, xstar[q]) for q in qs]

    def F(xj):
        args = list(base)
        args[i], args[j] = xi, xj
        with np.errstate(all="ignore"):
            return np.asarray(f(*args), dtype=float) - level

    lo, hi = np.full(n, np.log(xj0) - 1.0), np.full(n, np.log(xj0) + 1.0)
    for _ in range(40):  # widen until f(lo) < level < f(hi) (f increasing in x_j)
        flo, fhi = F(np.exp(lo)), F(np.exp(hi))
        bad_lo, bad_hi = ~(flo < 0), ~(fhi > 0)
        if not (bad_lo.any() or bad_hi.any()):
            break
        lo = np.where(bad_lo, lo - 2.0, lo)
        hi = np.where(bad_hi, hi + 2.0, hi)
    valid = (F(np.exp(lo)) < 0) & (F(np.exp(hi)) > 0)
    for _ in range(iters):
        mid = 0.5 * (lo + hi)
        above = F(np.exp(mid)) > 0
        hi = np.where(above, mid, hi)
        lo = np.where(above, lo, mid)
    out = np.exp(0.5 * (lo + hi))
    return np.where(valid, out, np.nan)


def cost_curves(cost: Derived, point: dict, n: int = 120,
                units: dict | None = None) -> go.Figure:
    """Total, average and marginal cost against output at the point's input prices.

    Marginal cost is the derivative of the closed form where there is one, otherwise a
    central difference of the numeric cost function.
    """
    if cost.kind != "cost":
        raise DualityError("cost curves need a cost function")
    y = cost.args[-1]
    y0 = float(point[str(y)])
    ys = np.linspace(y0 / 20.0, 2.5 * y0, n)
    pt = {str(a): np.full(n, float(point[str(a)])) for a in cost.args[:-1]}
    tc = np.asarray(cost(**pt, **{str(y): ys}), dtype=float)
    if cost.expr is not None:
        mc_expr = sp.diff(cost.expr_at_values, y)
        mc_fn = sp.lambdify(list(cost.args), mc_expr, "numpy")
        mc = np.asarray(mc_fn(*[pt[str(a)] for a in cost.args[:-1]], ys), dtype=float)
        mc = np.broadcast_to(mc, ys.shape)
    else:
        h = 1e-4 * ys
        up = np.asarray(cost(**pt, **{str(y): ys + h}), dtype=float)
        down = np.asarray(cost(**pt, **{str(y): ys - h}), dtype=float)
        mc = (up - down) / (2 * h)
    fig = make_subplots(rows=1, cols=2, subplot_titles=("total cost", "average and "
                                                        "marginal cost"))
    fig.add_trace(go.Scatter(x=ys, y=tc, name="total cost c(w, y)",
                             line=dict(color=PRIMAL, width=3)), 1, 1)
    fig.add_trace(go.Scatter(x=ys, y=steady(tc / ys), name="average cost c/y",
                             line=dict(color=DUAL, width=2)), 1, 2)
    fig.add_trace(go.Scatter(x=ys, y=steady(mc), name="marginal cost ∂c/∂y",
                             line=dict(color=ACCENT, width=2, dash="dot")), 1, 2)
    fig.add_vline(x=y0, line=dict(color=MUTED, dash="dash"))
    fig.update_xaxes(title=axis("output", str(y), units))
    fig.update_yaxes(title="cost", row=1, col=1)
    fig.update_yaxes(title="cost per unit of output", row=1, col=2)
    return _finish(fig, "Cost against output at the chosen input prices")


def steady(values: np.ndarray, rel: float = 1e-9) -> np.ndarray:
    """``values``, or their mean where they differ only by rounding (relative spread at
    most ``rel``): a constant curve is drawn flat, not as noise on a magnified axis."""
    v = np.asarray(values, dtype=float)
    finite = v[np.isfinite(v)]
    if finite.size and np.ptp(finite) <= rel * np.abs(finite).max():
        return np.where(np.isfinite(v), finite.mean(), v)
    return v


def demand_curves(dual: Derived, point: dict, n: int = 81,
                  units: dict | None = None) -> go.Figure:
    """Each demand of ``dual`` against its own price, the other arguments fixed at
    ``point`` (one panel per quantity; the point itself is marked)."""
    dem = dual.demands
    names = list(dem)
    prices = [str(a) for a in dual.args[:len(names)]]
    fig = make_subplots(rows=(len(names) + 2) // 3, cols=min(3, len(names)),
                        subplot_titles=[f"{q} against {p}" for q, p in zip(names, prices)])
    base = {str(a): float(point[str(a)]) for a in dual.args}
    mid = n // 2
    for k, (q, p) in enumerate(zip(names, prices)):
        grid = np.geomspace(base[p] / 4.0, base[p] * 4.0, 2 * mid + 1)
        grid[mid] = base[p]                       # the point itself, exactly
        pt = {a: np.full(grid.size, v) for a, v in base.items()}
        pt[p] = grid
        x = np.asarray(dem[q](**pt), dtype=float)
        r, c = k // 3 + 1, k % 3 + 1
        fig.add_trace(go.Scatter(x=grid, y=x, name=q, showlegend=False,
                                 line=dict(color=SERIES[k % len(SERIES)], width=3)), r, c)
        fig.add_trace(go.Scatter(x=[base[p]], y=[x[mid]], mode="markers", showlegend=False,
                                 marker=dict(color=INK, size=9)), r, c)
        fig.update_xaxes(title=axis("price", p, units, "log scale"), type="log", row=r,
                         col=c)
        fig.update_yaxes(title=axis("quantity", q, units), row=r, col=c)
    kind = {"cost": "Conditional", "profit": "Unconditional", "expenditure": "Hicksian",
            "indirect_utility": "Marshallian"}.get(dual.kind, "")
    return _finish(fig, f"{kind} demands against their own prices")


def conjugate_envelope(formula: str, var: str = "x", lower: float = -3.0,
                       upper: float = 3.0, n: int = 801, lines: int = 9,
                       params: dict | None = None) -> go.Figure:
    """A function of one variable, its Legendre–Fenchel conjugate, and supporting lines.

    The conjugate f*(s) = sup_x (s x − f(x)) is computed on a grid of ``n`` points of
    [lower, upper] by the linear-time discrete transform; each drawn line
    ``s x − f*(s)`` supports f from below, and together they trace its convex envelope.
    """
    if not lower < upper:
        raise DualityError(f"the interval needs lower < upper (got {lower:g}, {upper:g})")
    expr = parse(formula)
    sym = sp.Symbol(var)
    if params:
        expr = expr.xreplace({sp.Symbol(k): v for k, v in params.items()})
    extra = sorted(map(str, expr.free_symbols - {sym}))
    if extra and sym not in expr.free_symbols:
        raise DualityError(f"the variable {var!r} does not appear in {formula} (it has "
                           f"{', '.join(extra)})")
    if extra:
        raise DualityError(f"the function may only depend on {var}; give values for "
                           + ", ".join(extra))
    xs = np.linspace(lower, upper, n)
    with np.errstate(all="ignore"):
        fx = np.broadcast_to(np.asarray(sp.lambdify(sym, expr, "numpy")(xs), dtype=float),
                             xs.shape)
    if not np.isfinite(fx).all():
        bad = xs[~np.isfinite(fx)]
        raise DualityError(f"{formula} is not finite on [{lower:g}, {upper:g}] "
                           f"(e.g. at {var} = {bad[0]:.4g}); choose another interval")
    conj = dy.conjugate(fx, xs)   # slopes spread over the hull's range, all finite
    s, fstar = np.asarray(conj.slopes, dtype=float), np.asarray(conj.values, dtype=float)
    fig = make_subplots(rows=1, cols=2, subplot_titles=(
        f"f({var}) and supporting lines", "conjugate f*(s) = sup (s·x − f(x))"))
    fig.add_trace(go.Scatter(x=xs, y=fx, name=f"f({var}) = {formula}",
                             line=dict(color=PRIMAL, width=3)), 1, 1)
    picks = np.linspace(0, len(s) - 1, lines).round().astype(int)
    span = fx.max() - fx.min()
    for k, idx in enumerate(picks):
        line = s[idx] * xs - fstar[idx]
        keep = line >= fx.min() - 0.3 * span
        fig.add_trace(go.Scatter(x=xs[keep], y=line[keep], mode="lines",
                                 name="supporting lines s·x − f*(s)", legendgroup="lines",
                                 showlegend=k == 0, line=dict(color=DUAL, width=1)), 1, 1)
    fig.add_trace(go.Scatter(x=s, y=fstar, name="f*(s)", line=dict(color=ACCENT, width=3)),
                  1, 2)
    fig.update_xaxes(title=var, row=1, col=1)
    fig.update_xaxes(title="s (slope)", row=1, col=2)
    fig.update_yaxes(range=[fx.min() - 0.15 * span - 1e-9, fx.max() + 0.15 * span + 1e-9],
                     row=1, col=1)
    return _finish(fig, "Legendre–Fenchel conjugate as the envelope of supporting lines")


def elasticity_heatmap(matrix: pd.DataFrame, title: str, rows: str = "row",
                       columns: str = "column") -> go.Figure:
    """A heat map of an elasticity matrix (rows and columns labelled by quantity;
    ``rows`` and ``columns`` title the axes)."""
    vals = matrix.to_numpy(dtype=float)
    finite = vals[np.isfinite(vals)]
    bound = float(np.abs(finite).max()) if finite.size else 1.0
    text = [[("—" if not np.isfinite(v) else f"{v:.3g}") for v in row] for row in vals]
    fig = go.Figure(go.Heatmap(z=vals, x=list(matrix.columns), y=list(matrix.index),
                               zmin=-bound, zmax=bound, text=text, texttemplate="%{text}",
                               colorscale=[[0.0, ACCENT], [0.5, "#f4f1ea"], [1.0, PRIMAL]],
                               colorbar=dict(title="elasticity")))
    fig.update_yaxes(autorange="reversed", title=rows)
    fig.update_xaxes(title=columns, side="bottom")
    return _finish(fig, title)


def welfare_bars(data: pd.DataFrame, title: str = "Change per variant",
                 axis: str = "change from the baseline") -> go.Figure:
    """Grouped bars: one group per variant, one bar per measure (column ``change``)."""
    if data.empty:
        raise DualityError("no welfare or cost measures to draw for these variants")
    fig = go.Figure()
    for k, (measure, part) in enumerate(data.groupby("measure", sort=False)):
        fig.add_trace(go.Bar(x=part["variant"], y=part["change"], name=measure,
                             marker_color=SERIES[k % len(SERIES)],
                             text=[f"{v:,.2f}" for v in part["change"]],
                             textposition="outside"))
    fig.add_hline(y=0, line=dict(color=INK, width=1))
    fig.update_layout(barmode="group")
    fig.update_yaxes(title=axis)
    return _finish(fig, title)


def comparison_bars(frame: pd.DataFrame, names: tuple[str, str],
                    section: str = "at the baseline") -> go.Figure:
    """Horizontal bars of one section of :func:`app.analysis.comparison`: each item's
    change from the second scenario to the first, in per cent (items of very different
    size read on one axis)."""
    part = frame[frame["section"] == section].dropna(subset=["change %"])
    if part.empty:
        raise DualityError(f"nothing to compare under {section!r}")
    colours = [PRIMAL if v >= 0 else ACCENT for v in part["change %"]]
    fig = go.Figure(go.Bar(y=part["item"], x=part["change %"], orientation="h",
                           marker_color=colours, name="change",
                           text=[f"{v:+.3g} %" for v in part["change %"]],
                           textposition="outside"))
    fig.add_vline(x=0, line=dict(color=INK, width=1))
    fig.update_layout(height=140 + 32 * len(part), showlegend=False)
    fig.update_yaxes(title="", autorange="reversed")
    fig.update_xaxes(title=f"change from {names[1]} to {names[0]}, per cent")
    return _finish(fig, f"{names[0].capitalize()} against {names[1]}, {section}")


def regularity_by_row(rows: pd.DataFrame, title: str = "Regularity of the fitted model, "
                      "row by row") -> go.Figure:
    """Largest eigenvalue of the substitution matrix (``max_eig``, ≤ 0 where the fitted
    function is concave) at every row of a regularity report; violations marked."""
    if rows.empty or "max_eig" not in rows:
        raise DualityError("no rows to draw (the regularity report is empty)")
    x = np.arange(1, len(rows) + 1)
    ok = rows["concave"].to_numpy(bool) & rows["monotone"].to_numpy(bool)
    fig = go.Figure()
    fig.add_trace(go.Scatter(x=x[ok], y=rows["max_eig"].to_numpy(float)[ok], mode="markers",
                             name="regular", marker=dict(color=PRIMAL, size=6)))
    fig.add_trace(go.Scatter(x=x[~ok], y=rows["max_eig"].to_numpy(float)[~ok],
                             mode="markers", name="curvature or monotonicity violated",
                             marker=dict(color=ACCENT, size=8, symbol="x")))
    fig.add_hline(y=0, line=dict(color=INK, width=1))
    fig.update_xaxes(title="data row")
    fig.update_yaxes(title="largest eigenvalue of the substitution matrix")
    return _finish(fig, title)

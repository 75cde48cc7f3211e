"""The page: sidebar (where the model comes from, its numbers) and one view at a time.

Only the chosen view is computed on each run of the page, so an edit re-evaluates what
is on screen and nothing else.  Symbolic derivations are cached by model in
:mod:`app.analysis`; their solving runs in budgeted worker processes of the library.
"""
from __future__ import annotations

import math
import os
from pathlib import Path

import numpy as np
import pandas as pd
import streamlit as st

import duality as dy
from duality.apply import scenario as sc
from duality.errors import DualityError, number_file_rows
from duality.texts import CAUTION

from . import analysis as A
from . import figures as F
from . import workspace as W

ROUTE_BADGE = {"catalogue": ("catalogue", "green"), "symbolic": ("derived", "blue"),
               "numeric": ("numeric", "orange")}
_CSS = """
<style>
.dy-brand {font-size: 1.35rem; font-weight: 700; color: #17877b; letter-spacing: .02em;}
.dy-brand span {color: #c98a1b;}
.dy-caution {border-left: 4px solid #c98a1b; background: #fbf6ea; padding: .5rem .8rem;
             font-size: .88rem; color: #23313f; margin-bottom: .6rem;}
.dy-prov {font-size: .85rem; color: #5b6b7b;}
</style>
"""


# -- state --------------------------------------------------------------------------------
def _save_dir() -> Path:
    return Path(os.environ.get("DUALITY_APP_SAVE_DIR", W.SCENARIO_DIR))


def _start_file() -> Path:
    given = os.environ.get("DUALITY_APP_SCENARIO")
    return Path(given) if given else W.SCENARIO_DIR / W.DEFAULT_SCENARIO


def _use(raw: dict, origin: Path | None, label: str) -> None:
    """Make ``raw`` the scenario in use (new widget keys, so inputs show its values)."""
    ss = st.session_state
    ss.raw, ss.origin, ss.label, ss.loaded = raw, origin, label, raw
    if origin is not None or label == "typed formula":
        ss.pop("uploaded", None)   # the same file may be uploaded again later
    ss.generation = ss.get("generation", 0) + 1
    ss.pop("edit_error", None)


def _init() -> None:
    ss = st.session_state
    if "raw" in ss:
        return
    path = _start_file()
    try:
        raw, origin = W.read_file(path)
        _use(raw, origin, path.name)
    except DualityError as exc:
        ss.start_error = str(exc)
        raw, origin = W.read_file(W.SCENARIO_DIR / W.DEFAULT_SCENARIO)
        _use(raw, origin, W.DEFAULT_SCENARIO)


# -- sidebar ------------------------------------------------------------------------------
def _load_pick(entries) -> None:
    """Load the demo scenario just chosen in the picker (edits of the previous one are
    dropped; save them first)."""
    ss = st.session_state
    entry = next(e for e in entries if e.name == ss.pick)
    ss.pop("pick_error", None)
    if entry.error:
        ss.pick_error = entry.error
        return
    try:
        raw, origin = W.read_file(entry.path)
    except DualityError as exc:
        ss.pick_error = str(exc)
        return
    _use(raw, origin, entry.name)


def _source_picker() -> None:
    ss = st.session_state
    side = st.sidebar
    side.markdown('<div class="dy-brand">duality</div>', unsafe_allow_html=True)
    side.caption("From a production or utility function to its duals, demands, "
                 "elasticities and checks.")
    how = side.radio("Model from", ["Demo scenario", "Upload a scenario", "Type a formula"],
                     key="source", horizontal=False)
    if how == "Demo scenario":
        entries = W.list_scenarios()
        names = [e.name for e in entries]
        labels = {e.name: (e.title if not e.error else f"{e.name} (does not load)")
                  for e in entries}
        if "pick" not in ss:
            start = ss.origin.name if ss.get("origin") is not None else W.DEFAULT_SCENARIO
            ss.pick = start if start in names else names[0]
        side.selectbox("Scenario", names, format_func=labels.get, key="pick",
                       on_change=_load_pick, args=(entries,))
        if ss.get("pick_error"):
            side.error(ss.pick_error)
    elif how == "Upload a scenario":
        up = side.file_uploader("Scenario file (.toml)", type=["toml"], key="upload")
        if up is not None and ss.get("uploaded") != (up.name, up.size):
            try:
                raw = W.read_upload(up.getvalue(), up.name)
            except DualityError as exc:
                side.error(str(exc))
            else:
                ss.uploaded = (up.name, up.size)
                _use(raw, None, up.name)
                st.rerun()
    else:
        with side.form("typed"):
            formula = st.text_input("Formula", "A*x1^a*x2^b", key="t_formula",
                                    help="e.g. A*x1^0.3*x2^0.5, (x1^r + x2^r)^(1/r), "
                                    "min(x1/a, x2/b); ^ or ** for powers")
            role = st.radio("It is a", ["technology", "preference"], horizontal=True,
                            key="t_role")
            qs = st.text_input("Quantities", "x1, x2", key="t_quantities")
            params = st.text_input("Parameter values", "A=2, a=0.3, b=0.5",
                                   key="t_params")
            go_ = st.form_submit_button("Use this model")
        if go_:
            try:
                raw = W.from_formula(formula, role, qs, params)
            except DualityError as exc:
                ss.typed_error = str(exc)
            else:
                ss.pop("typed_error", None)
                _use(raw, None, "typed formula")
                st.rerun()
        if ss.get("typed_error"):
            side.error(ss.typed_error)


def _number(label: str, value: float, key: str, positive: bool = True):
    return st.sidebar.number_input(label, value=float(value), key=key, format="%g",
                                   min_value=1e-12 if positive else None,
                                   step=_step(value))


def _step(v: float) -> float:
    v = abs(float(v))
    if v == 0 or not math.isfinite(v):
        return 0.1
    return float(10 ** (math.floor(math.log10(v)) - 1))


def _editors() -> dict:
    """Inputs for parameters, baseline prices and output or income; the edited scenario
    dictionary (validated) or the previous one with the error kept for display."""
    ss = st.session_state
    raw, g = ss.raw, ss.generation
    side = st.sidebar
    params = raw["model"].get("parameters", {})
    new_params, new_prices = {}, {}
    if params:
        side.markdown("**Parameters**")
        for name, val in params.items():
            new_params[name] = _number(name, val, f"par:{g}:{name}", positive=False)
    side.markdown("**Baseline**")
    for name, val in raw["baseline"].get("prices", {}).items():
        new_prices[name] = _number(f"price {name}", val, f"pr:{g}:{name}")
    base = raw["baseline"]
    out = inc = None
    if "output" in base:
        out = _number("output", base["output"], f"out:{g}")
    if "income" in base:
        inc = _number("income", base["income"], f"inc:{g}")
    if "utility" in base:
        side.caption(f"utility level {base['utility']:g}")
    cand = W.edited(raw, parameters=new_params, prices=new_prices, output=out, income=inc)
    if cand == raw:
        ss.pop("edit_error", None)
        return raw
    try:
        W.build(cand, ss.origin).build_model()
    except DualityError as exc:
        ss.edit_error = str(exc)
        return raw
    ss.pop("edit_error", None)
    ss.raw = cand
    return cand


# -- views --------------------------------------------------------------------------------
def _badge(route: str) -> None:
    label, colour = ROUTE_BADGE.get(route, (route, "gray"))
    st.badge(label, color=colour)


def _card(card) -> None:
    if isinstance(card, A.UnavailableCard):
        st.subheader(card.title)
        st.info(f"Not available: {card.reason}")
        return
    head = st.columns([4, 1])
    head[0].subheader(card.title)
    with head[1]:
        _badge(card.route)
    st.latex(card.latex)
    prov = A.ROUTE_TEXT.get(card.route, card.route)
    if card.method:
        prov += f" — {card.method}"
    st.markdown(f'<div class="dy-prov">{prov}</div>', unsafe_allow_html=True)
    if card.source:
        st.markdown(f'<div class="dy-prov">source: {card.source}</div>',
                    unsafe_allow_html=True)
    st.metric("value at the baseline", A.fmt(card.value))
    for c in card.conditions:
        st.latex(r"\text{valid where } " + c)
    if card.demands:
        with st.expander(f"demands ({len(card.demands)})", expanded=True):
            for d in card.demands:
                st.latex(d.latex)
                st.caption(f"{d.title} at the baseline: {A.fmt(d.value)}")
    if card.notes:
        with st.expander("how it was found"):
            for n in card.notes:
                st.markdown(f"- {n}")


def _derive(model):
    """Cards and baseline point, with a status box while symbolic work runs."""
    ss = st.session_state
    key = ("derived", model)
    if ss.get("last_derived") == key:
        return A.cards(model, ss.scenario.points()[0])
    with st.status("Deriving the dual functions…", expanded=False) as box:
        box.write(f"Symbolic solving is limited to {A.BUDGET:g} s per function; after "
                  "that the numeric route takes over.")
        out = A.cards(model, ss.scenario.points()[0])
        box.update(label="Dual functions ready", state="complete")
    ss.last_derived = key
    return out


def view_duals(model) -> None:
    st.latex(A.model_latex(model))
    cards, _pt = _derive(model)
    for card in cards:
        with st.container(border=True):
            _card(card)


def view_elasticities(model) -> None:
    _cards, pt = _derive(model)
    tabs = A.elasticity_tables(model, pt)
    if isinstance(tabs, dy.Unavailable):
        st.info(f"No elasticities: {tabs.reason}")
        return
    st.caption("at the baseline: " + ", ".join(f"{k} = {v:.4g}" for k, v in pt.items()))
    left, right = st.columns([2, 3])
    with left:
        st.markdown(f"**Shares and {model.role_info.shifter} elasticities**")
        st.dataframe(tabs["shares"].style.format("{:.4f}"))
        st.dataframe(tabs["meta"])
    choices = [k for k in A.ELASTICITY_TITLES if k in tabs]
    with right:
        which = st.selectbox("Matrix", choices, format_func=A.ELASTICITY_TITLES.get,
                             key="el_matrix")
        st.dataframe(tabs[which].style.format("{:.4f}"))
        if which == "morishima":
            st.caption("row i: the price that changes; column j: the ratio x_j / x_i")
        st.plotly_chart(F.elasticity_heatmap(tabs[which], A.ELASTICITY_TITLES[which]
                                             .capitalize()), key="el_heat")


#: check status → a mark from the icon font Streamlit ships (no colour-emoji font needed)
STATUS_ICONS = {"proved": ":material/verified:", "held": ":material/check:",
                "failed": ":material/close:"}


def view_checks(model) -> None:
    proofs = st.toggle("Try symbolic proofs first (slower; otherwise sampled points only)",
                       value=True, key="ck_proofs")
    what = "symbolic proofs, then sampled points" if proofs else "sampled points"
    with st.spinner(f"Running the checks ({what})…"):
        recs = A.checks(model, proofs)
    counts = pd.Series([r.status for r in recs]).value_counts()
    st.markdown(" · ".join(f"**{n}** {s}" for s, n in counts.items()))
    for r in recs:
        with st.expander(f"{r.name} — {r.status}", expanded=r.status == "failed",
                         icon=STATUS_ICONS.get(r.status, ":material/remove:")):
            if r.statement:
                st.latex(r.statement)
            st.write(r.evidence)
            if r.max_error is not None:
                st.caption(f"largest error {r.max_error:.3g} at {r.points} points")
            if r.counterexample:
                st.write("counterexample:", r.counterexample)
    st.dataframe(A.checks_frame(recs), hide_index=True)


def view_figures(model) -> None:
    _cards, pt = _derive(model)
    duals = A.derive_all(model)
    if model.is_technology:
        dual, level_dual = duals.get("cost"), duals.get("cost")
    else:
        dual, level_dual = duals.get("indirect_utility"), duals.get("expenditure")
    qs = [str(q) for q in model.quantities]
    if isinstance(level_dual, dy.Derived) and len(qs) >= 2:
        pair = qs[:2]
        if len(qs) > 2:
            c1, c2 = st.columns(2)
            pair = [c1.selectbox("horizontal axis", qs, index=0, key="fig_i"),
                    c2.selectbox("vertical axis", qs, index=1, key="fig_j")]
        _figure(lambda: F.level_curve(model, level_dual, pt, tuple(pair)), "fig_level")
    if model.is_technology and isinstance(dual, dy.Derived):
        _figure(lambda: F.cost_curves(dual, pt), "fig_cost")
    if isinstance(dual, dy.Derived):
        with st.spinner("Evaluating the demands along each price…"):
            _figure(lambda: F.demand_curves(dual, pt), "fig_demand")


def _figure(build, key: str) -> None:
    try:
        fig = build()
    except DualityError as exc:
        st.info(str(exc))
        return
    st.plotly_chart(fig, key=key)


def _variant_editor() -> None:
    """An editable table of the variants; valid edits replace the scenario's variants."""
    ss = st.session_state
    key = f"var_base:{ss.generation}"
    if key not in ss:  # the editor's edits are relative to the table it was first given
        ss[key] = W.variants_frame(ss.raw)
    with st.expander("Edit the variants (one row each; empty cells keep the baseline)"):
        edited = st.data_editor(ss[key], num_rows="dynamic", key=f"var_ed:{ss.generation}")
    if edited.equals(W.variants_frame(ss.raw)):
        return
    try:
        new = W.with_variants(ss.raw, edited)
        scenario = W.build(new, ss.origin)
    except DualityError as exc:
        st.error(f"Variants not applied: {exc}")
        return
    ss.raw, ss.scenario = new, scenario


def view_scenarios(model) -> None:
    ss = st.session_state
    _variant_editor()
    table = A.welfare(ss.scenario)
    if isinstance(table, dy.Unavailable):
        st.info(table.reason)
        return
    for name, v in ss.scenario.variants.items():
        st.markdown(f"**{name}** — {v.description or ''}")
    bars = A.welfare_bars_data(table, model.role)
    axis = ("change in cost or profit" if model.is_technology
            else "income equivalent (positive = gain)")
    _figure(lambda: F.welfare_bars(bars, "Cost and profit change per variant"
                                   if model.is_technology else
                                   "Welfare change per variant (CV, EV, ΔCS)", axis),
            "fig_welfare")
    flat = table.reset_index(names=["scenario variant", "measure"])
    st.dataframe(flat, hide_index=True)


def view_data(model) -> None:
    ss = st.session_state
    scen = ss.scenario
    data, columns, where = None, None, ""
    up = st.file_uploader("Data file (.csv): one row per observation; columns named as the "
                          "model's prices and " + model.role_info.shifter, type=["csv"],
                          key="data_upload")
    if up is not None:
        try:
            data = number_file_rows(pd.read_csv(up))
            where = up.name
        except (ValueError, UnicodeDecodeError) as exc:
            st.error(f"{up.name}: cannot be read as CSV ({exc})")
            return
    elif scen.data is not None and ss.origin is None:
        st.info(f"This scenario names the data file {scen.data.file}, which is not "
                "available for an uploaded scenario; upload the file here.")
        return
    elif scen.data is not None:
        try:
            data = W.read_data(scen, _save_dir())
            columns = dict(scen.data.columns)
            where = scen.data.file
        except DualityError as exc:
            st.error(str(exc))
            return
    if data is None:
        st.info("This scenario has no data file; upload one to check regularity at every "
                "observation.")
        return
    st.caption(f"{len(data)} rows from {where}")
    duals = A.derive_all(model)
    main = duals.get("cost" if model.is_technology else "indirect_utility")
    if isinstance(main, dy.Derived) and main.expr is None:
        _numeric_rows(main, data, columns or {})
        return
    try:
        with st.spinner("Checking every row…"):
            rep = A.regularity(model, data, columns)
    except DualityError as exc:
        st.error(str(exc))
        return
    s = rep.summary
    c = st.columns(3)
    c[0].metric("rows", s.n_rows)
    c[1].metric("monotonicity violations", s.monotonicity.count)
    c[2].metric("curvature violations", s.curvature.count)
    st.dataframe(rep.rows)
    with st.expander("full report"):
        st.text(rep.as_text())


def _numeric_rows(main, data: pd.DataFrame, columns: dict) -> None:
    """Evaluate a numeric dual at every row, in chunks, with a progress bar."""
    names = [str(a) for a in main.args]
    cols = {n: columns.get(n, n) for n in names}
    missing = [f"{n} (column {c})" for n, c in cols.items() if c not in data.columns]
    if missing:
        st.error("the data file lacks " + ", ".join(missing))
        return
    bar = st.progress(0.0, text=f"numeric {main.label} at every row")
    out = np.empty(len(data))
    chunk = max(1, len(data) // 20)
    for start in range(0, len(data), chunk):
        part = data.iloc[start:start + chunk]
        out[start:start + len(part)] = main(**{n: part[c].to_numpy(float)
                                               for n, c in cols.items()})
        bar.progress(min(1.0, (start + len(part)) / len(data)),
                     text=f"numeric {main.label}: {start + len(part)} of {len(data)} rows")
    frame = data.copy()
    frame[main.label] = out
    st.caption("Regularity needs a closed form; here the numeric dual is evaluated at every "
               "row instead (NaN marks a point where the solver did not converge).")
    st.dataframe(frame)


def view_estimation(model) -> None:
    st.markdown("Estimate the parameters from data with the equations derived from the "
                "model (log cost, shares, input–output or budget shares), homogeneity, "
                "symmetry and adding-up imposed. Map the model's names to your columns.")
    up = st.file_uploader("Data file (.csv)", type=["csv"], key="estimate_upload")
    if up is None:
        st.info("Upload a CSV file with observed prices, output (or total expenditure), "
                "cost and shares to estimate this model.")
        return
    try:
        data = pd.read_csv(up)
    except (ValueError, UnicodeDecodeError) as exc:
        st.error(f"{up.name}: cannot be read as CSV ({exc})")
        return
    st.caption(f"{len(data)} rows from {up.name}")
    options = [A.NONE] + [str(c) for c in data.columns]
    mapping = st.data_editor(
        A.mapping_table(model, list(map(str, data.columns))), key="estimate_mapping",
        hide_index=True, disabled=["name", "meaning"],
        column_config={"column": st.column_config.SelectboxColumn(
            "data column", options=options, required=True)})
    c = st.columns(3)
    equations = c[0].selectbox("equations", list(dy.estimation.EQUATIONS), key="est_eqs")
    method = c[1].selectbox("method", list(dy.estimation.METHODS), key="est_method")
    index = c[2].selectbox("price index (Almost Ideal)", ["exact", "stone"], key="est_index")
    fixed_text = st.text_input("fixed parameters (name=value, comma-separated)", "",
                               key="est_fixed")
    fixed = {}
    for part in (p for p in fixed_text.split(",") if p.strip()):
        name, _, value = part.partition("=")
        try:
            fixed[name.strip()] = float(value)
        except ValueError:
            st.error(f"fixed parameter {part.strip()!r}: expected name=value, e.g. a0=0")
            return
    if not st.button("Estimate", key="est_run", type="primary"):
        return
    kw = dict(equations=equations, method=method, fixed=fixed, index=index)
    with st.spinner("Estimating…"):
        res = A.estimate_from_mapping(model, data, mapping, **kw)
    st.caption(f"{res.estimator}; {res.n} rows; {len(res.system.equations)} equation(s)"
               + (f"; dropped for adding-up: {res.dropped}" if res.dropped else ""))
    with st.expander("estimating equations"):
        for eq in res.system.equations:
            st.latex(eq.as_latex())
        st.text(res.system.as_text())
    st.subheader("Estimates")
    st.dataframe(res.table)
    fits = pd.DataFrame([vars(f) for f in res.equation_fits])
    st.dataframe(fits, hide_index=True)
    st.caption(f"log likelihood {res.loglik:.4f}")
    st.subheader("Elasticities at the sample mean")
    el = res.elasticities()
    st.dataframe(el, hide_index=True)
    st.subheader("Tests of the theory restrictions")
    test = A.restriction_test(model, data, mapping, **kw)
    st.text(test if isinstance(test, str) else test.as_text())
    st.subheader("Regularity of the fitted model")
    rep = A.regularity_rows(res, data, mapping)
    if isinstance(rep, str):
        st.info(f"Not checked: {rep}")
    else:
        s = rep.summary
        m = st.columns(3)
        m[0].metric("rows", s.n_rows)
        m[1].metric("monotonicity violations", s.monotonicity.count)
        m[2].metric("curvature violations", s.curvature.count)
        _figure(lambda: F.regularity_by_row(rep.rows), "est_regularity")
    d = st.columns(3)
    d[0].download_button("estimates (.csv)", res.table.to_csv(), "estimates.csv",
                         key="dl_est")
    d[1].download_button("elasticities (.csv)", el.to_csv(index=False), "elasticities.csv",
                         key="dl_el")
    d[2].download_button("table (.tex)", res.as_latex(), "estimates.tex", key="dl_tex")
    st.caption("These estimates hold only for the assumed functional form and these data.")


def view_conjugate(model) -> None:
    st.markdown("The Legendre–Fenchel conjugate f*(s) = sup_x (s·x − f(x)) of a function "
                "of one variable. For a kinked or non-convex f it is the conjugate of the "
                "convex envelope, which the supporting lines trace.")
    c = st.columns([3, 1, 1, 1])
    formula = c[0].text_input("f(x)", "x^4 - 2*x^2 + abs(x)/2", key="cj_f")
    var = c[1].text_input("variable", "x", key="cj_x")
    lo = c[2].number_input("from", value=-2.0, key="cj_lo")
    hi = c[3].number_input("to", value=2.0, key="cj_hi")
    try:
        fig = F.conjugate_envelope(formula, var.strip(), lo, hi)
    except DualityError as exc:
        st.error(str(exc))
        return
    st.plotly_chart(fig, key="fig_conj")
    try:
        conj = A.closed_conjugate(formula, var.strip())
    except DualityError as exc:
        st.caption(f"closed form: none ({exc})")
        return
    if conj is not None:
        st.latex(conj)


def view_export_save(model) -> None:
    ss = st.session_state
    name = A.export_name(ss.scenario.title)
    left, right = st.columns(2)
    with left:
        st.markdown("**Exports** of every derived function with closed form")
        with st.spinner("Printing the exports…"):
            exports = A.exports(model, name)
        for target, (fname, text) in exports.items():
            if isinstance(text, dy.Unavailable):
                st.button(f"{target}: not available", disabled=True, help=text.reason,
                          key=f"ex_off_{target}")
                st.caption(text.reason)
            else:
                st.download_button(f"{target} — {fname}", text, file_name=fname,
                                   key=f"ex_{target}", mime="text/plain")
        st.download_button("scenario — edited .toml", sc.dumps(ss.scenario),
                           file_name=(ss.origin.name if ss.origin else "scenario.toml"),
                           key="ex_scenario", mime="text/plain")
    with right:
        st.markdown(f"**Save** the edited scenario into `{_save_dir()}`")
        default = ss.origin.name if ss.origin is not None else "my_scenario.toml"
        fname = st.text_input("file name", default, key=f"save_name:{ss.generation}")
        try:
            plan = W.plan_save(fname, _save_dir(), ss.origin)
        except DualityError as exc:
            st.error(str(exc))
            return
        st.caption(plan.message)
        ok = True
        if plan.needs_confirmation:
            ok = st.checkbox("Replace the existing file", key="save_confirm")
        if st.button("Save scenario", key="save_go", disabled=not ok):
            try:
                path = W.save(ss.raw, plan, confirmed=ok)
            except (DualityError, OSError) as exc:
                st.error(f"not saved: {exc}")
            else:
                ss.origin, ss.label, ss.loaded = path, path.name, ss.raw
                st.success(f"saved {path}")


#: the views, in the order the page offers them: label -> function drawing it (the one
#: table of views; the first is shown on opening)
VIEWS = {"Duals": view_duals, "Elasticities": view_elasticities, "Checks": view_checks,
         "Figures": view_figures, "Price scenarios": view_scenarios, "Data": view_data,
         "Estimation": view_estimation,
         "Conjugate": view_conjugate, "Export & save": view_export_save}
FIRST_VIEW = next(iter(VIEWS))


def run() -> None:
    """The whole page (called by ``app/main.py``)."""
    st.markdown(_CSS, unsafe_allow_html=True)
    _init()
    ss = st.session_state
    _source_picker()
    raw = _editors()
    in_use = st.sidebar.empty()   # filled last: a view may still edit the scenario
    try:
        ss.scenario = W.build(raw, ss.origin)
        model = ss.scenario.build_model()
    except DualityError as exc:
        st.error(str(exc))
        return
    st.title(ss.scenario.title)
    if ss.scenario.description:
        st.caption(ss.scenario.description)
    st.markdown(f'<div class="dy-caution"><b>Caution.</b> {CAUTION}</div>',
                unsafe_allow_html=True)
    if ss.get("start_error"):
        st.error(ss.pop("start_error"))
    if ss.get("edit_error"):
        st.error(f"Edit not applied: {ss.edit_error}")
    view = st.segmented_control("View", list(VIEWS), default=FIRST_VIEW, key="view",
                                label_visibility="collapsed") or FIRST_VIEW
    try:
        VIEWS[view](model)
    except DualityError as exc:
        st.error(str(exc))
    except Exception as exc:  # noqa: BLE001 - the page shows a message, never a traceback
        st.error(f"This view stopped on an unexpected problem ({type(exc).__name__}: "
                 f"{exc}). The other views still work; please report it with the scenario.")
    in_use.caption(f"In use: {ss.label}"
                   + (" — edited, not saved" if ss.raw != ss.loaded else ""))

"""The page: sidebar (where the model comes from, its numbers) and one view at a time.

Only the chosen view is computed on each run of the page, so an edit re-evaluates what
is on screen and nothing else.  Symbolic derivations are cached by model in
:mod:`app.analysis`; their solving runs in budgeted worker processes of the library.
"""
from __future__ import annotations

import math
import os
import re
from pathlib import Path

import numpy as np
import pandas as pd
import streamlit as st

import duality as dy
from duality.apply import scenario as sc
from duality.apply.estimation.fitting import CURVATURE
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
# The scenario in use lives in the session (``raw``, where it came from, the version last
# loaded or saved); widgets only propose edits to it, through callbacks.  While it differs
# from the loaded version it is also kept as a draft file in the save folder, named in the
# page address (``?draft=…``), so a reload of the page finds the edits again.
def _save_dir() -> Path:
    return Path(os.environ.get("DUALITY_APP_SAVE_DIR", W.SCENARIO_DIR))


def _start_file() -> Path:
    given = os.environ.get("DUALITY_APP_SCENARIO")
    return Path(given) if given else W.SCENARIO_DIR / W.DEFAULT_SCENARIO


def _use(raw: dict, origin: Path | None, label: str, loaded: dict | None = None) -> None:
    """Make ``raw`` the scenario in use (new widget keys, so inputs show its values)."""
    ss = st.session_state
    ss.raw, ss.origin, ss.label = raw, origin, label
    ss.loaded = raw if loaded is None else loaded
    if origin is not None or label == "typed formula":
        ss.pop("uploaded", None)   # the same file may be uploaded again later
    ss.generation = ss.get("generation", 0) + 1
    for key in ("edit_error", "pending", "pick_error"):
        ss.pop(key, None)


def _restore_draft() -> bool:
    """Take up the draft named in the page address, if any (after a reload)."""
    ss = st.session_state
    draft_id = st.query_params.get("draft")
    if not draft_id:
        return False
    try:
        raw, origin, label = W.read_draft(_save_dir(), draft_id)
    except DualityError as exc:
        ss.start_error = f"The unsaved edits of this page were not restored: {exc}"
        del st.query_params["draft"]
        return False
    try:
        loaded = W.read_file(origin)[0] if origin is not None else {}
    except DualityError:
        loaded = {}    # the file it came from is gone or changed: everything is unsaved
    _use(raw, origin, label, loaded=loaded)
    ss.draft_id, ss.draft_kept = draft_id, raw
    ss.restored = True
    return True


def _init() -> None:
    ss = st.session_state
    if "raw" in ss:
        return
    if _restore_draft():
        return
    path = _start_file()
    try:
        raw, origin = W.read_file(path)
        _use(raw, origin, path.name)
    except DualityError as exc:
        ss.start_error = str(exc)
        raw, origin = W.read_file(W.SCENARIO_DIR / W.DEFAULT_SCENARIO)
        _use(raw, origin, W.DEFAULT_SCENARIO)


def _unsaved() -> bool:
    ss = st.session_state
    return ss.raw != ss.loaded


def _keep_draft() -> None:
    """Write the draft when the scenario has unsaved edits; drop it when it has none."""
    ss = st.session_state
    folder = _save_dir()
    if not _unsaved():
        if ss.get("draft_id"):
            W.drop_draft(folder, ss.draft_id)
            ss.pop("draft_kept", None)
            if st.query_params.get("draft") == ss.draft_id:
                del st.query_params["draft"]
        return
    if ss.get("draft_kept") is ss.raw or ss.get("draft_kept") == ss.raw:
        return
    ss.draft_id = ss.get("draft_id") or W.new_draft_id()
    try:
        W.write_draft(folder, ss.draft_id, ss.raw, ss.origin, ss.label)
    except DualityError as exc:
        st.sidebar.warning(plain(f"Edits are not kept across a page reload: {exc}"))
        return
    ss.draft_kept = ss.raw
    st.query_params["draft"] = ss.draft_id


def _switch(raw: dict, origin: Path | None, label: str) -> None:
    """Use another scenario; with unsaved edits, ask first (see :func:`_ask_to_switch`)."""
    ss = st.session_state
    if _unsaved():
        ss.pending = (raw, origin, label)
        return
    _use(raw, origin, label)


def _confirm_switch() -> None:
    ss = st.session_state
    raw, origin, label = ss.pop("pending")
    ss.loaded = ss.raw         # the edits are dropped: no draft to keep
    _keep_draft()
    _use(raw, origin, label)


def _cancel_switch() -> None:
    ss = st.session_state
    ss.pop("pending", None)
    ss.pick = ss.picked = _pick_id(ss.origin) or ss.get("picked")


def _ask_to_switch() -> None:
    ss = st.session_state
    if not ss.get("pending"):
        return
    side = st.sidebar
    side.warning(plain(f"{ss.label} has unsaved edits. Open {ss.pending[2]} and drop "
                       "them, or keep editing (save them under Export & save)."))
    c = side.columns(2)
    c[0].button("Drop edits, open", key="switch_go", on_click=_confirm_switch)
    c[1].button("Keep editing", key="switch_stay", on_click=_cancel_switch)


# -- sidebar ------------------------------------------------------------------------------
def _entries() -> list[W.Entry]:
    """The demo scenarios, then the saved ones when the save folder is another folder."""
    entries = W.list_scenarios()
    folder = _save_dir()
    if folder.is_dir() and folder.resolve() != W.SCENARIO_DIR.resolve():
        entries += [W.Entry(f"saved: {e.name}", e.path, f"{e.title} (saved)", e.error)
                    for e in W.list_scenarios(folder)]
    return entries


def _pick_id(origin: Path | None) -> str | None:
    """The picker's entry for the file ``origin`` (None when it is not listed)."""
    if origin is None:
        return None
    where = Path(origin).resolve()
    return next((e.name for e in _entries() if e.path.resolve() == where), None)


def _load_pick(entries) -> None:
    """Open the scenario just chosen in the picker (asking first if there are edits)."""
    ss = st.session_state
    entry = next(e for e in entries if e.name == ss.pick)
    ss.picked = ss.pick    # the picker's own state goes while another source is shown
    ss.pop("pick_error", None)
    if entry.error:
        ss.pick_error = entry.error
        return
    try:
        raw, origin = W.read_file(entry.path)
    except DualityError as exc:
        ss.pick_error = str(exc)
        return
    _switch(raw, origin, entry.path.name)


def _source_changed() -> None:
    """Back to the picker from an upload or a typed model: open the picked scenario."""
    ss = st.session_state
    if ss.source != "Demo scenario":
        return
    entries = _entries()
    ss.pick = ss.get("picked") or W.DEFAULT_SCENARIO
    if ss.pick not in {e.name for e in entries}:
        ss.pick = W.DEFAULT_SCENARIO
    if _pick_id(ss.origin) != ss.pick:
        _load_pick(entries)


def _source_picker() -> None:
    ss = st.session_state
    side = st.sidebar
    side.markdown('<div class="dy-brand">duality</div>', unsafe_allow_html=True)
    side.caption("From a production or utility function to its duals, demands, "
                 "elasticities and checks.")
    how = side.radio("Model from", ["Demo scenario", "Upload a scenario", "Type a formula"],
                     key="source", horizontal=False, on_change=_source_changed)
    if how == "Demo scenario":
        entries = _entries()
        names = [e.name for e in entries]
        labels = {e.name: (e.title if not e.error else f"{e.name} (does not load)")
                  for e in entries}
        if ss.get("pick") not in names:
            start = _pick_id(ss.get("origin")) or ss.get("picked")
            ss.pick = start if start in names else W.DEFAULT_SCENARIO
        side.selectbox("Scenario", names, format_func=labels.get, key="pick",
                       on_change=_load_pick, args=(entries,))
        if ss.get("pick_error"):
            side.error(plain(ss.pick_error))
    elif how == "Upload a scenario":
        up = side.file_uploader("Scenario file (.toml)", type=["toml"], key="upload")
        if up is not None and ss.get("uploaded") != (up.name, up.size):
            try:
                raw = W.read_upload(up.getvalue(), up.name)
            except DualityError as exc:
                side.error(plain(str(exc)))
            else:
                ss.uploaded = (up.name, up.size)
                _switch(raw, None, up.name)
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
                _switch(raw, None, "typed formula")
                st.rerun()
        if ss.get("typed_error"):
            side.error(plain(ss.typed_error))
    _ask_to_switch()


def _step(v: float) -> float:
    v = abs(float(v))
    if v == 0 or not math.isfinite(v):
        return 0.1
    return float(10 ** (math.floor(math.log10(v)) - 1))


def _edit(key: str, what: str, name: str | None, label: str) -> None:
    """Apply the number just entered in the box ``key`` to the scenario in use.

    A value the model refuses leaves the scenario as it was, puts the box back to the
    value in use and keeps the message for display.
    """
    ss = st.session_state
    value = float(ss[key])
    change = {what: {name: value}} if name is not None else {what: value}
    cand = W.edited(ss.raw, **change)
    try:
        W.build(cand, ss.origin).build_model()
    except DualityError as exc:
        ss.edit_error = f"{label} = {value:g}: {exc}"
        ss[key] = _current(what, name)
        return
    ss.pop("edit_error", None)
    ss.raw = cand


def _current(what: str, name: str | None) -> float:
    raw = st.session_state.raw
    if what == "parameters":
        return float(raw["model"]["parameters"][name])
    if what == "prices":
        return float(raw["baseline"]["prices"][name])
    return float(raw["baseline"][what])


def _number(label: str, key: str, what: str, name: str | None = None,
            positive: bool = True) -> None:
    ss = st.session_state
    value = _current(what, name)
    if key not in ss:
        ss[key] = value     # the box starts at the value in use (kept in the session)
    st.sidebar.number_input(label, key=key, format="%g",
                            min_value=1e-12 if positive else None, step=_step(value),
                            on_change=_edit, args=(key, what, name, label))


def _editors() -> None:
    """Inputs for parameters, baseline prices and output or income; each edit is applied
    by :func:`_edit` before the page runs."""
    ss = st.session_state
    raw, g = ss.raw, ss.generation
    side = st.sidebar
    params = raw["model"].get("parameters", {})
    if params:
        side.markdown("**Parameters**")
        for name in params:
            _number(name, f"par:{g}:{name}", "parameters", name, positive=False)
    side.markdown("**Baseline**")
    for name in raw["baseline"].get("prices", {}):
        _number(f"price {name}", f"pr:{g}:{name}", "prices", name)
    base = raw["baseline"]
    if "output" in base:
        _number("output", f"out:{g}", "output")
    if "income" in base:
        _number("income", f"inc:{g}", "income")
    if "utility" in base:
        side.caption(f"utility level {base['utility']:g}")


def _status() -> None:
    """Which scenario is in use and whether it has unsaved edits (in the container
    opened by the caller)."""
    ss = st.session_state
    if not _unsaved():
        st.caption(plain(f"In use: {ss.label}"))
        return
    st.caption(plain(f"In use: {ss.label} — edited, not saved"))
    st.caption("The edits are kept as a draft and survive a reload of the page; "
               "save them under Export & save.")


_MARKDOWN = re.compile(r"([\\`*_{}\[\]()#+\-.!|~<>$:])")
_CARET = re.compile(r"^\s*\^+\s*$", re.MULTILINE)


def plain(text: str) -> str:
    """``text`` for a Streamlit message box, shown as written (no Markdown, no LaTeX).

    Markdown characters are escaped.  A message that points at a place in a formula (a
    line holding only a caret ``^``) keeps its later lines in a code block, so the caret
    stays under the place; other line breaks are kept as breaks.
    """
    text = str(text)
    first, _, rest = text.partition("\n")
    if rest and _CARET.search(rest):
        return (_MARKDOWN.sub(r"\\\1", first) + "\n\n```text\n"
                + rest.strip("\n").replace("```", "` ` `") + "\n```")
    return "  \n".join(_MARKDOWN.sub(r"\\\1", line) for line in text.split("\n"))


# -- views --------------------------------------------------------------------------------
def _badge(route: str) -> None:
    label, colour = ROUTE_BADGE.get(route, (route, "gray"))
    st.badge(label, color=colour)


def _card(card) -> None:
    if isinstance(card, A.UnavailableCard):
        st.subheader(card.title)
        st.info(plain(f"Not available: {card.reason}"))
        return
    head = st.columns([4, 1])
    head[0].subheader(card.title)
    with head[1]:
        _badge(card.route)
    st.latex(card.latex)
    if card.parameters:
        st.caption(plain(f"with the parameter values {card.parameters}"))
    prov = A.ROUTE_TEXT.get(card.route, card.route)
    if card.method:
        prov += f" — {card.method}"
    st.markdown(f'<div class="dy-prov">{prov}</div>', unsafe_allow_html=True)
    if card.source:
        st.markdown(f'<div class="dy-prov">source: {card.source}</div>',
                    unsafe_allow_html=True)
    st.metric(f"{card.title} at the baseline", A.fmt(card.value))
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
    if ss.get("last_derived") == key or A.instant(model):
        ss.last_derived = key
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
        st.info(plain(f"No elasticities: {tabs.reason}"))
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
        st.plotly_chart(F.elasticity_heatmap(tabs[which],
                                             A.ELASTICITY_TITLES[which].capitalize(),
                                             *A.ELASTICITY_AXES[which]), key="el_heat")


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
            st.text(r.evidence)
            if r.max_error is not None:
                st.caption(f"largest error {r.max_error:.3g} at {r.points} points")
            if r.counterexample:
                st.caption("counterexample: the point where it fails")
                st.dataframe(A.counterexample_frame(r.counterexample)
                             .style.format(_number_text, na_rep="—"))
    st.dataframe(A.checks_frame(recs).style.format(
        {"largest error": "{:.3g}", "points": "{:.0f}"}, na_rep="—"), hide_index=True)


def _number_text(v) -> str:
    return f"{v:.6g}" if isinstance(v, (int, float)) and not isinstance(v, bool) else str(v)


def view_figures(model) -> None:
    _cards, pt = _derive(model)
    duals = A.derive_all(model)
    if model.is_technology:
        dual, level_dual = duals.get("cost"), duals.get("cost")
    else:
        dual, level_dual = duals.get("indirect_utility"), duals.get("expenditure")
    qs = [str(q) for q in model.quantities]
    units = st.session_state.scenario.units
    if not model.is_primal and isinstance(level_dual, dy.Derived) and len(qs) >= 2:
        with st.spinner("Recovering the " + ("technology" if model.is_technology
                                             else "preference") + " behind the "
                        + level_dual.label + "…"):
            _figure(lambda: F.recovered_level_curve(
                model, A.recovered(model, tuple(sorted(pt.items()))), level_dual, pt,
                units=units),
                "fig_level")
    elif isinstance(level_dual, dy.Derived) and len(qs) >= 2:
        pair = qs[:2]
        if len(qs) > 2:
            c1, c2 = st.columns(2)
            pair = [c1.selectbox("horizontal axis", qs, index=0, key="fig_i"),
                    c2.selectbox("vertical axis", qs, index=1, key="fig_j")]
        _figure(lambda: F.level_curve(model, level_dual, pt, tuple(pair), units=units),
                "fig_level")
    if model.is_technology and isinstance(dual, dy.Derived):
        _figure(lambda: F.cost_curves(dual, pt, units=units), "fig_cost")
    if isinstance(dual, dy.Derived):
        with st.spinner("Evaluating the demands along each price…"):
            _figure(lambda: F.demand_curves(dual, pt, units=units), "fig_demand")


def _figure(build, key: str) -> None:
    try:
        fig = build()
    except DualityError as exc:
        st.info(plain(str(exc)))
        return
    st.plotly_chart(fig, key=key)


def _variant_editor() -> None:
    """An editable table of the variants; valid edits replace the scenario's variants.

    The table's edits are held by the editor relative to the table it was given; when
    the editor was not on the page in the previous run (another view was shown), it
    starts again from the scenario's current variants, so earlier edits stay.
    """
    ss = st.session_state
    g = ss.generation
    key, base = f"var_ed:{g}", f"var_base:{g}"
    if key not in ss or base not in ss:
        ss[base] = W.variants_frame(ss.raw)
    edited_before = ss.raw.get("variants") != ss.loaded.get("variants")
    with st.expander("Edit the variants (one row each; an empty cell, shown as None, "
                     "keeps the baseline value)",
                     expanded=edited_before):
        edited = st.data_editor(ss[base], num_rows="dynamic", key=key)
    if edited.equals(W.variants_frame(ss.raw)):
        return
    try:
        new = W.with_variants(ss.raw, edited)
        scenario = W.build(new, ss.origin)
    except DualityError as exc:
        st.error(plain(f"Variants not applied: {exc}"))
        return
    ss.raw, ss.scenario = new, scenario


def view_scenarios(model) -> None:
    ss = st.session_state
    _variant_editor()
    table = A.welfare(ss.scenario)
    if isinstance(table, dy.Unavailable):
        st.info(plain(table.reason))
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
    if ss.scenario.units:   # the measure's last word names a price, quantity or level
        flat.insert(2, "unit", [ss.scenario.units.get(m.split()[-1], "")
                                for m in flat["measure"]])
    st.dataframe(flat.style.format({c: "{:,.6g}" for c in ("baseline", "variant", "change")},
                                   na_rep="—"), hide_index=True)


def view_data(model) -> None:
    ss = st.session_state
    scen = ss.scenario
    data, columns, where = None, None, ""
    up = st.file_uploader("Data file (.csv): one row per observation; columns named as the "
                          "model's prices and " + model.role_info.shifter, type=["csv"],
                          key=f"data_upload:{ss.generation}")
    if up is not None:
        try:
            data = number_file_rows(pd.read_csv(up))
            where = up.name
        except (ValueError, UnicodeDecodeError) as exc:
            st.error(plain(f"{up.name}: cannot be read as CSV ({exc})"))
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
            st.error(plain(str(exc)))
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
        st.error(plain(str(exc)))
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
        st.error(plain("the data file lacks " + ", ".join(missing)))
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
    c = st.columns(4)
    equations = c[0].selectbox("equations", list(dy.estimation.EQUATIONS), key="est_eqs")
    method = c[1].selectbox("method", list(dy.estimation.METHODS), key="est_method")
    index = c[2].selectbox("price index (Almost Ideal)", ["exact", "stone"], key="est_index")
    curvature = c[3].selectbox("curvature", list(CURVATURE), key="est_curv",
                               help="check: count rows that violate it; local: impose it "
                                    "where every price and the output (or total "
                                    "expenditure) equal one")
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
        res = A.estimate_from_mapping(model, data, mapping, curvature=curvature, **kw)
    st.caption(f"{res.estimator}; {res.n} rows; {len(res.system.equations)} equation(s)"
               + (f"; dropped for adding-up: {res.dropped}" if res.dropped else ""))
    if res.curvature:
        st.caption("curvature — " + "; ".join(f"{k}: {v}" for k, v in res.curvature.items()))
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
        st.error(plain(str(exc)))
        return
    st.plotly_chart(fig, key="fig_conj")
    try:
        conj = A.closed_conjugate(formula, var.strip())
    except DualityError as exc:
        st.caption(plain(f"closed form: none ({exc})"))
        return
    if conj is not None:
        st.latex(conj)


def view_export_save(model) -> None:
    ss = st.session_state
    name = A.export_name(ss.origin.stem if ss.origin is not None else ss.scenario.title)
    left, right = st.columns(2)
    with left:
        st.markdown("**Exports** of every derived function with closed form")
        with st.spinner("Printing the exports…"):
            exports = A.exports(model, name)
        for target, (fname, text) in exports.items():
            if isinstance(text, dy.Unavailable):
                st.button(f"{target}: not available", disabled=True, help=text.reason,
                          key=f"ex_off_{target}")
                st.caption(plain(text.reason))
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
            st.error(plain(str(exc)))
            return
        st.caption(plan.message)
        ok = True
        if plan.needs_confirmation:
            ok = st.checkbox("Replace the existing file", key="save_confirm")
        st.button("Save scenario", key="save_go", disabled=not ok, on_click=_save,
                  args=(plan, ok))
        kind, text = ss.pop("save_result", (None, ""))
        if kind == "saved":
            st.success(plain(text))
        elif kind:
            st.error(plain(text))


def _save(plan: W.SavePlan, confirmed: bool) -> None:
    """Write the scenario in use as planned; it then counts as that file, unedited, and
    the picker shows it."""
    ss = st.session_state
    try:
        path = W.save(ss.raw, plan, confirmed=confirmed, origin=ss.origin)
    except (DualityError, OSError) as exc:
        ss.save_result = ("error", f"not saved: {exc}")
        return
    try:   # as written: a data file is now named from the new folder
        ss.raw, ss.origin = W.read_file(path)
    except DualityError as exc:
        ss.save_result = ("error", f"saved {path}, but it does not read back: {exc}")
        return
    ss.label, ss.loaded = path.name, ss.raw
    ss.save_result = ("saved", f"saved {path}")
    pick = _pick_id(path)
    if pick is not None:
        ss.picked = pick
        if ss.get("source", "Demo scenario") == "Demo scenario":
            ss.pick = pick


def view_compare(model) -> None:
    """The scenario in use beside its version as loaded (before the edits) or beside
    another scenario."""
    ss = st.session_state
    against = st.radio("Compare with", ["the scenario before the edits", "another scenario"],
                       horizontal=True, key="cmp_with")
    if against == "another scenario":
        entries = [e for e in _entries() if not e.error]
        pick = st.selectbox("Scenario", [e.name for e in entries], key="cmp_pick",
                            format_func={e.name: e.title for e in entries}.get)
        entry = next(e for e in entries if e.name == pick)
        other, other_name = sc.load(entry.path), f"{entry.path.stem}"
    else:
        if not ss.loaded:
            st.info(plain("This scenario has no saved version to compare with (it was "
                          "restored from a draft whose file is gone)."))
            return
        other, other_name = W.build(ss.loaded, ss.origin), "before the edits"
        if not _unsaved():
            st.caption("No edits yet: both columns are the same; edit a parameter, a "
                       "price or a variant to see the difference.")
    names = ("in use", other_name if other_name != "in use" else "other")
    with st.spinner("Evaluating both scenarios…"):
        frame = A.comparison(ss.scenario, other, names)
    _figure(lambda: F.comparison_bars(frame, names), "fig_compare")
    for section, part in frame.groupby("section", sort=False):
        st.markdown(f"**{section.capitalize()}**")
        st.dataframe(part.drop(columns="section").style.format(
            {**{c: "{:,.6g}" for c in (*names, "difference")}, "change %": "{:+.3g}"},
            na_rep="—"), hide_index=True)


#: the views, in the order the page offers them: label -> function drawing it (the one
#: table of views; the first is shown on opening)
VIEWS = {"Duals": view_duals, "Elasticities": view_elasticities, "Checks": view_checks,
         "Figures": view_figures, "Price scenarios": view_scenarios, "Data": view_data,
         "Compare": view_compare, "Estimation": view_estimation,
         "Conjugate": view_conjugate, "Export & save": view_export_save}
FIRST_VIEW = next(iter(VIEWS))


def _restriction_warning(model) -> None:
    """On every view: the theory restrictions the parameter values break, with a button
    that imposes them (dependent parameters replaced, the formula unchanged)."""
    broken = A.broken_restrictions(model)
    if broken is None:
        return
    lines = [f"These parameter values break {len(broken.messages)} theory restriction(s) "
             f"of the {model.side.replace('_', ' ')} function; demands and welfare "
             "figures may not be consistent:", *broken.messages]
    st.warning(plain("\n".join(lines)))
    if broken.imposed:
        change = ", ".join(f"{k} = {v:.6g}" for k, v in broken.imposed.items())
        st.button(f"Impose the restrictions ({change})", key="impose",
                  on_click=_impose, args=(broken.imposed,))


def _impose(values: dict) -> None:
    ss = st.session_state
    ss.raw = W.edited(ss.raw, parameters=values)
    for name, value in values.items():
        ss[f"par:{ss.generation}:{name}"] = value     # the boxes show the new values
    ss.pop("edit_error", None)


def _view_changed() -> None:
    """A click on the view already chosen deselects it: keep showing that view."""
    ss = st.session_state
    if ss.view is None:
        ss.view = ss.get("last_view", FIRST_VIEW)
    ss.last_view = ss.view


def run() -> None:
    """The whole page (called by ``app/main.py``)."""
    st.markdown(_CSS, unsafe_allow_html=True)
    _init()
    _source_picker()
    _editors()
    status = st.sidebar.container()   # filled last: a view may still edit the scenario
    try:
        _page()
    finally:
        _keep_draft()
        with status:
            _status()


def _page() -> None:
    ss = st.session_state
    try:
        ss.scenario = W.build(ss.raw, ss.origin)
        model = ss.scenario.build_model()
    except DualityError as exc:
        st.error(plain(str(exc)))
        return
    st.title(ss.scenario.title)
    if ss.scenario.description:
        st.caption(plain(" ".join(ss.scenario.description.split())))
    st.markdown(f'<div class="dy-caution"><b>Caution.</b> {CAUTION}</div>',
                unsafe_allow_html=True)
    if ss.get("start_error"):
        st.error(plain(ss.pop("start_error")))
    if ss.pop("restored", False):
        st.info(plain(f"Restored the unsaved edits of {ss.label} (kept as a draft when "
                      "the page was left)."))
    if ss.get("edit_error"):
        st.error(plain(f"Edit not applied: {ss.edit_error}"))
    _restriction_warning(model)
    if "view" not in ss:
        ss.view = FIRST_VIEW
    view = st.segmented_control("View", list(VIEWS), key="view", on_change=_view_changed,
                                label_visibility="collapsed") or FIRST_VIEW
    try:
        VIEWS[view](model)
    except DualityError as exc:
        st.error(plain(str(exc)))
    except Exception as exc:  # noqa: BLE001 - the page shows a message, never a traceback
        st.error(plain(f"This view stopped on an unexpected problem ({type(exc).__name__}: "
                       f"{exc}). The other views still work; please report it with the "
                       "scenario."))

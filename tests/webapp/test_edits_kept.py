"""No edit is lost: the scenario in use lives in the session, a draft survives a reload,
switching away asks first; and the page's state follows what the user chose.

Driven by Streamlit's AppTest (no browser); the browser tests repeat the reload and the
variant table in chromium.  Reference value: Cobb–Douglas cost function, Varian,
Microeconomic Analysis, 3rd ed. (1992), ch. 4 (from memory).
"""
import json
import math
import re
from pathlib import Path

from streamlit.testing.v1 import AppTest

import duality as dy

from app import views as V

ROOT = Path(__file__).resolve().parents[2]
MAIN = ROOT / "app" / "main.py"
SCENARIOS = ROOT / "scenarios"


def _plain(text):
    return re.sub(r"\\(.)", r"\1", text)


def _captions(at):
    return _plain(" ".join(c.value for c in at.caption))


def _metric(at):
    return float(next(m.value for m in at.metric
                      if m.label == "Cost function at the baseline"))


def _pottery_cost(A):
    a, w, y = (0.3, 0.2, 0.4), (0.9, 0.25, 16.0), 400.0
    r = sum(a)
    return r * (y / A) ** (1 / r) * math.prod((wi / ai) ** (ai / r) for wi, ai in zip(w, a))


def _ok(at):
    assert not at.exception, [e.value for e in at.exception]
    return at


def _fresh(tmp_path, draft=None):
    """A new visitor (new session), as after a page reload, with the address's draft."""
    at = AppTest.from_file(str(MAIN), default_timeout=180)
    if draft:
        at.query_params["draft"] = draft
    return _ok(at.run())


def _drafts(tmp_path):
    return sorted((tmp_path / ".drafts").glob("*.json"))


def test_an_edit_is_kept_as_a_draft_and_restored_after_a_reload(app, tmp_path):
    app.number_input(key="par:1:A").set_value(2.4).run()
    _ok(app)
    assert "edited, not saved" in _captions(app)
    (draft,) = _drafts(tmp_path)
    draft_id = app.query_params["draft"]
    draft_id = draft_id[0] if isinstance(draft_id, list) else draft_id
    assert draft.stem == draft_id
    assert json.loads(draft.read_text())["scenario"]["model"]["parameters"]["A"] == 2.4
    # a reload: a new session with the same address finds the edit again
    again = _fresh(tmp_path, draft_id)
    assert again.number_input(key="par:1:A").value == 2.4
    assert abs(_metric(again) / _pottery_cost(2.4) - 1) < 1e-5
    assert "pottery_workshop.toml — edited, not saved" in _captions(again)
    assert any("Restored the unsaved edits" in _plain(i.value) for i in again.info)
    # undoing the edit by hand leaves nothing unsaved: the draft goes
    again.number_input(key="par:1:A").set_value(1.8).run()
    assert "edited, not saved" not in _captions(_ok(again)) and not _drafts(tmp_path)


def test_a_missing_or_forged_draft_is_named_and_the_default_opens(app, tmp_path):
    for draft_id, message in [("0123456789abcdef", "the draft is gone"),
                              ("../../etc/passwd", "not a draft name")]:
        at = _fresh(tmp_path, draft_id)
        assert at.title[0].value.startswith("Brackenford")
        assert any(message in _plain(e.value) for e in at.error)


def test_leaving_a_view_keeps_the_edits_made_there(app, tmp_path):
    """The variant table is rebuilt from the scenario in use when the view comes back."""
    app.session_state["raw"] = dict(app.session_state["raw"], variants={
        "dearer_kiln": {"prices": {"w_kiln": 0.5}}})
    app.segmented_control(key="view").set_value("Price scenarios").run()
    _ok(app).segmented_control(key="view").set_value("Duals").run()
    _ok(app).segmented_control(key="view").set_value("Price scenarios").run()
    (editor,) = [d.value for d in _ok(app).dataframe if "description" in d.value.columns]
    assert list(editor.index) == ["dearer_kiln"]
    assert "edited, not saved" in _captions(app)


def test_switching_scenario_with_unsaved_edits_asks_first(app, tmp_path):
    app.number_input(key="par:1:A").set_value(2.4).run()
    app.selectbox(key="pick").set_value("saltmere_household.toml").run()
    assert _ok(app).title[0].value.startswith("Brackenford")       # not yet
    assert any("has unsaved edits" in _plain(w.value) for w in app.warning)
    app.button(key="switch_stay").click().run()
    assert _ok(app).selectbox(key="pick").value == "pottery_workshop.toml"
    assert app.number_input(key="par:1:A").value == 2.4 and _drafts(tmp_path)
    app.selectbox(key="pick").set_value("saltmere_household.toml").run()
    app.button(key="switch_go").click().run()
    assert _ok(app).title[0].value.startswith("A household budget in Saltmere")
    assert not _drafts(tmp_path) and "edited, not saved" not in _captions(app)


def test_back_to_the_picker_after_a_typed_model_opens_the_picked_scenario(app):
    app.radio(key="source").set_value("Type a formula").run()
    (button,) = [b for b in app.button if b.label == "Use this model"]
    button.click().run()
    assert _ok(app).title[0].value == "Typed model"
    app.radio(key="source").set_value("Demo scenario").run()
    assert _ok(app).title[0].value.startswith("Brackenford")


def test_clicking_the_chosen_view_keeps_it(app):
    app.segmented_control(key="view").set_value("Elasticities").run()
    app.segmented_control(key="view").set_value(None).run()     # a click on it again
    assert _ok(app).segmented_control(key="view").value == "Elasticities"
    assert any(s.label == "Matrix" for s in app.selectbox)


def test_a_scenario_with_a_data_file_saves_into_the_save_folder_and_is_listed(app, tmp_path):
    app.selectbox(key="pick").set_value("saltmere_household.toml").run()
    app.segmented_control(key="view").set_value("Export & save").run()
    app.text_input(key="save_name:2").set_value("my_week.toml").run()
    app.button(key="save_go").click().run()
    assert any("saved" in _plain(s.value) for s in _ok(app).success)
    saved = dy.load_scenario(tmp_path / "my_week.toml")
    # the data file is copied beside the saved file, so it reads from its own folder
    assert saved.data_path().resolve() == (tmp_path / saved.data.file).resolve()
    assert saved.data_path().read_bytes() == dy.load_scenario(
        SCENARIOS / "saltmere_household.toml").data_path().read_bytes()
    assert len(saved.read_data()) == len(dy.load_scenario(
        SCENARIOS / "saltmere_household.toml").read_data())
    assert app.selectbox(key="pick").options[-1].endswith("(saved)")
    assert app.selectbox(key="pick").value == "saved: my_week.toml"
    assert "In use: my_week.toml" in _captions(app)


def test_a_refused_formula_is_shown_as_written_with_its_caret(app):
    app.radio(key="source").set_value("Type a formula").run()
    app.text_input(key="t_formula").set_value("9**9**9*x1*x2")
    (button,) = [b for b in app.button if b.label == "Use this model"]
    button.click().run()
    (err,) = [e.value for e in _ok(app).error]
    assert "```text\n  9**9**9*x1*x2\n  ^\n```" in err     # a code block keeps the caret
    assert "**" not in err.split("```")[0]


def test_plain_keeps_markdown_characters_literal():
    assert V.plain("__import__ and 9**9**9 cost $5") == \
        r"\_\_import\_\_ and 9\*\*9\*\*9 cost \$5"
    assert V.plain("one\n  two\n  ^").endswith("```text\n  two\n  ^\n```")
    assert V.plain("a_b\nc") == "a\\_b  \nc"       # other line breaks stay breaks


def test_compare_puts_the_edited_scenario_beside_the_loaded_one(app):
    app.number_input(key="par:1:A").set_value(2.4).run()
    app.segmented_control(key="view").set_value("Compare").run()
    frames = [d.value for d in _ok(app).dataframe]
    base = next(f for f in frames if "Cost function" in set(f["item"]))
    row = base[base["item"] == "Cost function"].iloc[0]
    assert abs(row["in use"] / _pottery_cost(2.4) - 1) < 1e-9
    assert abs(row["before the edits"] / _pottery_cost(1.8) - 1) < 1e-9
    assert abs(row["difference"] - (_pottery_cost(2.4) - _pottery_cost(1.8))) < 1e-6
    # cost is proportional to A^(-1/r), r = 0.9: the change is (2.4/1.8)^(-1/0.9) - 1
    assert abs(row["change %"] - 100 * ((2.4 / 1.8) ** (-1 / 0.9) - 1)) < 1e-9
    # Cobb–Douglas: the own-price elasticity of a conditional demand is a_i/r - 1, the
    # same for any A (Varian 1992, ch. 4, from memory): no difference there
    own = next(f for f in frames if "clay" in set(f["item"]))
    clay = own[own["item"] == "clay"].iloc[0]
    assert abs(clay["in use"] - (0.3 / 0.9 - 1)) < 1e-9 and abs(clay["difference"]) < 1e-12
    assert len(app.get("plotly_chart")) == 1


def test_compare_with_another_scenario(app):
    app.segmented_control(key="view").set_value("Compare").run()
    app.radio(key="cmp_with").set_value("another scenario").run()
    app.selectbox(key="cmp_pick").set_value("kettle_lane_bakery.toml").run()
    frames = [d.value for d in _ok(app).dataframe]
    base = next(f for f in frames if "Cost function" in set(f["item"]))
    assert list(base.columns) == ["item", "in use", "kettle_lane_bakery", "difference",
                                  "change %"]
    row = base[base["item"] == "Cost function"].iloc[0]
    assert abs(row["in use"] / _pottery_cost(1.8) - 1) < 1e-9
    # the bakery's cost as its file writes it, y^1.25 (a w1^0.5 + (1 - a) w2^0.5)^2
    bakery = 8.0 ** 1.25 * (0.7 * 1.0 ** 0.5 + 0.3 * 2.0 ** 0.5) ** 2
    assert abs(row["kettle_lane_bakery"] / bakery - 1) < 1e-9


def test_broken_restrictions_are_named_on_every_view_and_can_be_imposed(app):
    """Translog cost: homogeneity of degree 1 in prices needs a1 + a2 + a3 = 1 and each
    row of g summing to 0 (Christensen, Jorgenson and Lau 1973, from memory)."""
    app.selectbox(key="pick").set_value("ferry_operator_translog.toml").run()
    assert not _ok(app).warning
    app.number_input(key="par:2:a1").set_value(0.6).run()
    for view in ("Duals", "Elasticities"):
        app.segmented_control(key="view").set_value(view).run()
        (warning,) = [_plain(w.value) for w in _ok(app).warning]
        assert "break 1 theory restriction" in warning and "a1 + a2 + a3" in warning
        assert "a1 + a2 + a3 = 1 is violated by 0.15" in warning
    # only the parameter that changes is named: a3 = 1 - a1 - a2 = 0.05
    assert app.button(key="impose").label == "Impose the restrictions (a3 = 0.05)"
    app.button(key="impose").click().run()
    assert not _ok(app).warning
    values = app.session_state["raw"]["model"]["parameters"]
    assert abs(values["a1"] + values["a2"] + values["a3"] - 1) < 1e-12
    assert values["a1"] == 0.6
    assert app.number_input(key="par:2:a3").value == values["a3"]


def test_a_dual_side_model_draws_its_recovered_level_curve(app):
    app.selectbox(key="pick").set_value("kettle_lane_bakery.toml").run()
    app.segmented_control(key="view").set_value("Figures").run()
    assert not _ok(app).info and len(app.get("plotly_chart")) == 3


def test_saving_the_edits_removes_their_draft(app, tmp_path):
    app.number_input(key="par:1:A").set_value(2.4).run()
    _ok(app)
    assert len(_drafts(tmp_path)) == 1
    app.segmented_control(key="view").set_value("Export & save").run()
    name_box = next(t for t in app.text_input if str(t.key).startswith("save_name"))
    name_box.set_value("pottery_edited.toml").run()
    app.button(key="save_go").click().run()
    assert any("saved" in _plain(s.value) for s in _ok(app).success)
    saved = dy.load_scenario(tmp_path / "pottery_edited.toml").build_model()
    assert {p.name: p.value for p in saved.params}["A"] == 2.4
    assert not _drafts(tmp_path) and "edited, not saved" not in _captions(app)

"""The app's scenario handling: typed formulas, uploads, edits and safe saving."""
from pathlib import Path

import pytest

import duality as dy
from duality.errors import DualityError, FormulaError

from app import workspace as W

SCENARIOS = Path(__file__).resolve().parents[2] / "scenarios"


def test_every_demo_scenario_is_listed_with_its_title():
    entries = W.list_scenarios()
    names = {e.name for e in entries}
    assert W.DEFAULT_SCENARIO in names
    assert names == {p.name for p in SCENARIOS.glob("*.toml")}
    assert all(not e.error for e in entries)


def test_a_broken_scenario_is_listed_with_its_error(tmp_path):
    (tmp_path / "bad.toml").write_text('title = "x"\n[model]\nrole = "firm"\n')
    (entry,) = W.list_scenarios(tmp_path)
    assert entry.error and "bad.toml" in entry.error and "baseline" in entry.error


def test_typed_formula_becomes_a_scenario_at_unit_prices():
    raw = W.from_formula("A*x1^a*x2^b", "technology", "x1, x2", "A=2, a=0.3, b=0.5")
    s = W.build(raw)
    m = s.build_model()
    assert [str(q) for q in m.quantities] == ["x1", "x2"]
    assert dict((p.name, p.value) for p in m.params) == {"A": 2.0, "a": 0.3, "b": 0.5}
    assert s.baseline.prices == {"w_x1": 1.0, "w_x2": 1.0, "p": 2.0}


@pytest.mark.parametrize("formula, quantities, params, message", [
    ("A*x1^a", "x1", "A=2", "give a value for a"),
    ("A*x1^a", "x1", "A=2, a=0.3, z=1", "z does not appear"),
    ("A*x1^a", "x1", "A=2, a=zero", "not a number"),
    ("A*x1^a", "x1", "A=2, A=3, a=1", "given twice"),
    ("A*x1", "x1, x9", "A=2", "x9 does not appear"),
    ("A*x1", "x1, 9x", "A=2", "not a valid name"),
    ("A*x1^-0.5*x2", "x1, x2", "A=1", "decreases in x1"),
])
def test_typed_formula_problems_are_named(formula, quantities, params, message):
    with pytest.raises(DualityError, match=message):
        W.from_formula(formula, "technology", quantities, params)


@pytest.mark.parametrize("formula", ['__import__("os").system("echo hi")',
                                     "x1.__class__", "open('/etc/passwd')", "x1^(0.5"])
def test_malicious_or_broken_formulas_are_refused_with_a_position(formula):
    with pytest.raises(FormulaError, match="position"):
        W.from_formula(formula, "technology", "x1", "")


def test_upload_reads_text_and_names_the_file():
    raw = W.read_upload((SCENARIOS / "pottery_workshop.toml").read_bytes(), "up.toml")
    assert raw["model"]["formula"].startswith("A * clay")
    with pytest.raises(DualityError, match="up.toml: not a UTF-8"):
        W.read_upload(b"\xff\xfe\x00", "up.toml")
    with pytest.raises(DualityError, match="up.toml"):
        W.read_upload(b'title = "t"\n', "up.toml")
    bad_model = (SCENARIOS / "pottery_workshop.toml").read_text().replace(
        "A * clay^0.3", "A * clay^-0.3")
    with pytest.raises(DualityError, match="up.toml.*decreases in clay"):
        W.read_upload(bad_model.encode(), "up.toml")


def test_edits_make_a_new_dictionary_and_leave_the_old_one_alone():
    raw, _ = W.read_file(SCENARIOS / "pottery_workshop.toml")
    new = W.edited(raw, parameters={"A": 2.5}, prices={"w_kiln": 0.3}, output=500.0)
    assert raw["model"]["parameters"]["A"] == 1.8
    s = W.build(new)
    assert s.baseline.prices["w_kiln"] == 0.3 and s.baseline.output == 500.0
    bad = W.edited(raw, prices={"w_kiln": -1.0})
    with pytest.raises(DualityError, match="baseline.prices.w_kiln"):
        W.build(bad)


def test_saving_a_new_file_then_over_its_origin_keeps_the_previous_version(tmp_path):
    raw, _ = W.read_file(SCENARIOS / "pottery_workshop.toml")
    plan = W.plan_save("workshop", tmp_path, None)
    assert not plan.needs_confirmation and plan.path == (tmp_path / "workshop.toml").resolve()
    path = W.save(raw, plan)
    first = path.read_text()
    assert dy.load_scenario(path).title == raw["title"]
    plan = W.plan_save("workshop.toml", tmp_path, path)   # its own origin: no question
    assert plan.exists and not plan.needs_confirmation
    W.save(W.edited(raw, parameters={"A": 2.2}), plan)
    assert (tmp_path / "workshop.toml.bak").read_text() == first
    assert dy.load_scenario(path).model.parameters["A"] == 2.2


def test_saving_over_another_file_needs_confirmation(tmp_path):
    other = tmp_path / "other.toml"
    other.write_text((SCENARIOS / "saltmere_household.toml").read_text())
    before = other.read_text()
    raw, _ = W.read_file(SCENARIOS / "pottery_workshop.toml")
    plan = W.plan_save("other.toml", tmp_path, SCENARIOS / "pottery_workshop.toml")
    assert plan.needs_confirmation and "confirm" in plan.message
    with pytest.raises(DualityError, match="already exists"):
        W.save(raw, plan)
    assert other.read_text() == before                      # untouched
    W.save(raw, plan, confirmed=True)
    assert (tmp_path / "other.toml.bak").read_text() == before
    assert dy.load_scenario(other).title == raw["title"]


@pytest.mark.parametrize("name", ["../escape.toml", "sub/x.toml", ".hidden.toml", "a;b.toml",
                                  "   "])
def test_save_names_must_be_plain_file_names(tmp_path, name):
    with pytest.raises(DualityError, match="file name"):
        W.plan_save(name, tmp_path, None)


def test_variants_table_round_trip_and_edits():
    raw, _ = W.read_file(SCENARIOS / "pottery_workshop.toml")
    frame = W.variants_frame(raw)
    assert list(frame.columns) == ["description", "w_clay", "w_kiln", "w_labour", "p_bowl",
                                   "output"]
    assert W.with_variants(raw, frame)["variants"] == raw["variants"]
    frame.loc["coal_strike"] = ["Kiln energy triples.", None, 0.75, None, None, None]
    frame.loc["festival_order", "output"] = 600.0
    new = W.with_variants(raw, frame)
    s = W.build(new)
    assert s.variants["coal_strike"].prices == {"w_kiln": 0.75}
    assert s.variants["festival_order"].output == 600.0
    assert raw["variants"]["festival_order"]["output"] == 550.0      # the old one untouched


@pytest.mark.parametrize("name, message", [("", "needs a name"), ("two words", "needs a name")])
def test_variant_names_are_checked(name, message):
    raw, _ = W.read_file(SCENARIOS / "pottery_workshop.toml")
    frame = W.variants_frame(raw).rename(index={"festival_order": name})
    with pytest.raises(DualityError, match=message):
        W.with_variants(raw, frame)


def test_a_negative_variant_price_is_named_by_its_key():
    raw, _ = W.read_file(SCENARIOS / "pottery_workshop.toml")
    frame = W.variants_frame(raw)
    frame.loc["kiln_energy_spike", "w_kiln"] = -1.0
    with pytest.raises(DualityError, match="variants.kiln_energy_spike.prices.w_kiln"):
        W.build(W.with_variants(raw, frame))


def test_drafts_nobody_came_back_to_are_removed_after_their_days(tmp_path):
    # the rule (common practice, no source): a draft goes when saved or undone, or once
    # it has been left unchanged for more than DRAFT_DAYS days
    import os
    import time
    raw, origin = W.read_file(W.SCENARIO_DIR / W.DEFAULT_SCENARIO)
    old = W.write_draft(tmp_path, "0" * 16, raw, origin, "old")
    recent = W.write_draft(tmp_path, "1" * 16, raw, origin, "recent")
    past = time.time() - (W.DRAFT_DAYS + 1) * 86400
    os.utime(old, (past, past))
    W.write_draft(tmp_path, "2" * 16, raw, origin, "new")
    assert not old.exists() and recent.exists()
    assert sorted(p.name for p in (tmp_path / W.DRAFTS).glob("*.json")) == \
        ["1" * 16 + ".json", "2" * 16 + ".json"]
    # a draft just under the limit stays
    edge = time.time() - (W.DRAFT_DAYS - 1) * 86400
    os.utime(recent, (edge, edge))
    assert W.prune_drafts(tmp_path) == [] and recent.exists()

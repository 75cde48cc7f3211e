"""Scenario files: reading, validation messages, atomic saving and the exact round trip."""
from __future__ import annotations

import os
import shutil
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import duality as dy
from duality.apply import export, files, scenario as sc
from duality.solve import dual_forms
from duality.errors import DualityError

SCENARIOS = Path(__file__).resolve().parents[2] / "scenarios"
DEMOS = sorted(SCENARIOS.glob("*.toml"))

BASE = '''
title = "Test household"
exports = ["python", "latex"]

[model]
role = "preference"
formula = "x1^a * x2^(1 - a)"
quantities = ["x1", "x2"]
prices = ["p1", "p2"]

[model.parameters]
a = 0.4

[baseline]
income = 100.0

[baseline.prices]
p1 = 1.0
p2 = 2.0

[variants.v]
description = "good 1 dearer"

[variants.v.prices]
p1 = 1.5
'''


def write(tmp_path: Path, text: str, name: str = "case.toml") -> Path:
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


# -- the demo folder ---------------------------------------------------------------------
def test_demo_folder_has_at_least_five_scenarios():
    # the brief asks for at least five demo files (common practice, no source)
    assert len(DEMOS) >= 5


@pytest.mark.parametrize("path", DEMOS, ids=lambda p: p.stem)
def test_demo_loads_and_round_trips(path, tmp_path):
    s = sc.load(path)
    assert s.path == path
    assert s.title.strip()
    assert sc.loads(sc.dumps(s)) == s
    copy = tmp_path / path.name
    if s.data is not None:  # the data file travels with the scenario
        shutil.copytree(SCENARIOS / "data", tmp_path / "data")
    sc.save(s, copy)
    assert sc.load(copy) == s


def test_demos_cover_sides_forms_and_data():
    specs = [sc.load(p) for p in DEMOS]
    roles = {s.model.role for s in specs}
    sides = {s.model.side for s in specs}
    assert roles == {"technology", "preference"}
    assert "primal" in sides and sides & {"cost", "expenditure", "indirect_utility"}
    assert any(s.model.form == "translog_cost" for s in specs)
    assert any(s.data is not None for s in specs)
    assert all(len(s.variants) >= 2 for s in specs)


def test_data_file_reads_with_column_mapping():
    s = sc.load(SCENARIOS / "saltmere_household.toml")
    df = s.read_data()
    assert s.data_path() == SCENARIOS / "data" / "saltmere_weeks.csv"
    assert set(s.data.columns.values()) <= set(df.columns)
    # the mapping feeds dy.evaluate directly: at the first week prices and income equal
    # the baseline, so indirect utility there equals the baseline utility
    v = dy.indirect_utility(s.build_model())
    out = dy.evaluate(v, df, columns=s.data.columns)
    base, _ = s.points()
    assert out["indirect_utility"].iloc[0] == pytest.approx(v(**base))
    assert len(out) == len(df)


def test_module_docstring_example_is_valid(tmp_path):
    text = sc.__doc__.split(".. code-block:: toml")[1].split("Python API")[0]
    text = "\n".join(line[4:] for line in text.splitlines())
    (tmp_path / "data").mkdir()
    (tmp_path / "data" / "bakery_weeks.csv").write_text("flour_price\n0.8\n")
    s = sc.load(write(tmp_path, text, "bakery.toml"))
    assert set(s.variants) == {"energy_shock", "bigger_orders"}
    assert s.build_model().is_technology
    assert sc.loads(sc.dumps(s)) == s


# -- reading a valid file ------------------------------------------------------------------
def test_loads_fills_defaults_and_points():
    s = sc.loads(BASE)
    assert s.path is None
    assert s.model.side == "primal"
    assert (s.model.income, s.model.utility) == ("m", "u")
    assert s.model.output is None and s.model.output_price is None
    assert s.model.parameters == {"a": 0.4}
    assert s.exports == ("python", "latex")
    base, variants = s.points()
    assert base == {"p1": 1.0, "p2": 2.0, "m": 100.0}
    assert variants == {"v": {"p1": 1.5}}


def test_integers_are_read_as_numbers():
    s = sc.loads(BASE.replace("income = 100.0", "income = 100").replace("p1 = 1.0", "p1 = 1"))
    assert s.baseline.income == 100.0 and isinstance(s.baseline.income, float)
    assert s.baseline.prices["p1"] == 1.0


def test_build_model_matches_direct_construction():
    s = sc.loads(BASE)
    direct = dy.preference("x1^a * x2^(1 - a)", ["x1", "x2"], ["p1", "p2"],
                           params={"a": 0.4})
    assert s.build_model() == direct


def test_form_defaults_price_names():
    text = '''
title = "GL"
[model]
form = "generalized_leontief_cost"
size = 2
[model.parameters]
b11 = 1.0
b12 = 0.5
b22 = 2.0
[baseline]
output = 3.0
[baseline.prices]
w1 = 1.0
w2 = 4.0
'''
    s = sc.loads(text)
    assert s.model.price_names == ("w1", "w2")
    assert (s.model.role, s.model.side) == ("technology", "cost")
    c = dy.cost(s.build_model())
    # c = y (b11 w1 + 2 b12 sqrt(w1 w2) + b22 w2) (Diewert 1971, from memory)
    assert c(w1=1.0, w2=4.0, y=3.0) == pytest.approx(3 * (1 + 2 * 0.5 * 2 + 2 * 4))


# -- validation messages: file, dotted key, expectation ----------------------------------
BAD = [
    # (replace this, by this, expected key, words in the message)
    ('title = "Test household"\n', "", "title", "missing required key"),
    ('title = "Test household"', 'title = "T"\ncolour = "red"', "colour", "unknown key"),
    ('role = "preference"', 'role = "preference"\ncolour = 1', "model.colour", "unknown key"),
    ('quantities = ["x1", "x2"]', 'quantities = "x1"', "model.quantities",
     "expected a list"),
    ("a = 0.4", 'a = "half"', "model.parameters.a", "expected a number"),
    ("a = 0.4", "a = true", "model.parameters.a", "expected a number"),
    ("a = 0.4", "a = nan", "model.parameters.a", "finite"),
    ("p1 = 1.0\np2", "p1 = 0.0\np2", "baseline.prices.p1", "positive"),
    ("p1 = 1.5", "p1 = -1.5", "variants.v.prices.p1", "positive"),
    ("p1 = 1.5", "p9 = 1.5", "variants.v.prices.p9", "no price of this name"),
    ("p1 = 1.0\np2 = 2.0", "p1 = 1.0", "baseline.prices.p2", "missing required key"),
    ('exports = ["python", "latex"]', 'exports = ["python", "pdf"]', "exports[1]",
     "unknown export target"),
    ('exports = ["python", "latex"]', 'exports = ["python", "python"]', "exports[1]",
     "twice"),
    ('exports = ["python", "latex"]', 'exports = "python"', "exports", "expected a list"),
    ('role = "preference"', 'role = "household"', "model.role", "expected"),
    ('role = "preference"', 'role = "preference"\nside = "cost"', "model.side",
     "belongs to a technology"),
    ('role = "preference"', 'role = "preference"\nside = "dual"', "model.side", "expected"),
    ('role = "preference"', 'role = "preference"\noutput = "y"', "model.output",
     "applies only to a technology"),
    ('role = "preference"\n', "", "model.role", "missing required key"),
    ('formula = "x1^a * x2^(1 - a)"\n', "", "model.formula", "missing required key"),
    ('formula = "x1^a * x2^(1 - a)"', 'formula = "x1^a * x2^(1 - a)"\nform = "ces"',
     "model.form", "unknown form"),
    ('formula = "x1^a * x2^(1 - a)"', 'form = "translog_cost"', "model.size",
     "missing required key"),
    ('prices = ["p1", "p2"]', 'prices = ["p1", "p1"]', "model.prices[1]", "appears twice"),
    ('prices = ["p1", "p2"]', 'prices = ["p1", "x2"]', "model.quantities",
     "already used"),
    ('prices = ["p1", "p2"]', 'prices = ["p1", "2p"]', "model.prices[1]",
     "not a valid name"),
    ('prices = ["p1", "p2"]', 'prices = ["p1", "p2", "p3"]', "model.quantities",
     "expected 3 names"),
    ("income = 100.0", "income = 100.0\nutility = 3.0", "baseline.income",
     "exactly one of"),
    ("income = 100.0", "income = 100.0\noutput = 3.0", "baseline.output", "unknown key"),
    ('description = "good 1 dearer"', 'description = "x"\noutput = 2.0', "variants.v.output",
     "unknown key"),
    ("[variants.v.prices]\np1 = 1.5", "[variants.v.prices]\np1 = 1.5\n[variants.v.extra]\n"
     "k = 1", "variants.v.extra", "unknown key"),
    ("[baseline.prices]", "[baseline.prices.nested]", "baseline.prices.nested",
     "no price of this name"),
]


@pytest.mark.parametrize("old,new,key,words", BAD, ids=[b[2] + ":" + b[3] for b in BAD])
def test_validation_messages_name_file_key_and_expectation(tmp_path, old, new, key, words):
    assert old in BASE, old
    path = write(tmp_path, BASE.replace(old, new, 1))
    with pytest.raises(DualityError) as info:
        sc.load(path)
    msg = str(info.value)
    assert str(path) in msg
    assert f"key '{key}'" in msg
    assert words in msg


def test_form_with_formula_and_wrong_role_are_refused():
    form = BASE.replace('role = "preference"\n', "").replace(
        'formula = "x1^a * x2^(1 - a)"', 'form = "aids_expenditure"\nsize = 2')
    assert sc.loads(form.replace("[model.parameters]\na = 0.4\n", "")).model.form == \
        "aids_expenditure"
    with pytest.raises(DualityError, match=r"key 'model.formula'.*not both"):
        sc.loads(form.replace("size = 2", 'size = 2\nformula = "x1"'))
    with pytest.raises(DualityError, match=r"key 'model.role'.*is a preference"):
        sc.loads(form.replace("size = 2", 'size = 2\nrole = "technology"'))
    with pytest.raises(DualityError, match=r"key 'model.size'.*at least 2"):
        sc.loads(form.replace("size = 2", "size = 1"))
    with pytest.raises(DualityError, match=r"key 'model.prices'.*expected 3 names"):
        sc.loads(form.replace("size = 2", "size = 3"))


def test_invalid_toml_names_the_file(tmp_path):
    path = write(tmp_path, "title = \n")
    with pytest.raises(DualityError, match=r"case\.toml: not valid TOML"):
        sc.load(path)


def test_missing_file_and_text_without_path():
    with pytest.raises(DualityError, match="no_such.toml"):
        sc.load("no_such.toml")
    with pytest.raises(DualityError, match=r"<scenario text>: key 'title'"):
        sc.loads(BASE.replace('title = "Test household"\n', ""))


def test_data_section_is_checked(tmp_path):
    (tmp_path / "d.csv").write_text("price_one,p2,m\n1,2,100\n")
    ok = BASE + '\n[data]\nfile = "d.csv"\n[data.columns]\np1 = "price_one"\n'
    s = sc.load(write(tmp_path, ok))
    assert s.data == sc.DataSpec(file="d.csv", columns={"p1": "price_one"})
    assert list(s.read_data().columns) == ["price_one", "p2", "m"]
    with pytest.raises(DualityError, match=r"case\.toml: key 'data\.file': expected an "
                                           r"existing file"):
        sc.load(write(tmp_path, ok.replace('"d.csv"', '"gone.csv"')))
    with pytest.raises(DualityError, match=r"key 'data\.columns\.p7': not a name of the "
                                           r"model"):
        sc.load(write(tmp_path, ok.replace("p1 = \"price_one\"", "p7 = \"x\"")))
    with pytest.raises(DualityError, match=r"key 'data\.file': missing required key"):
        sc.load(write(tmp_path, BASE + "\n[data]\n"))


# -- building the model ----------------------------------------------------------------------
def test_build_errors_name_the_file_and_key(tmp_path):
    p = write(tmp_path, BASE.replace('"x1^a * x2^(1 - a)"', '"x1^a * x3^(1 - a)"'))
    s = sc.load(p)  # the structure is fine; the formula is checked when building
    with pytest.raises(DualityError) as info:
        s.build_model()
    msg = str(info.value)
    assert str(p) in msg and "key 'model.formula'" in msg and "x3" in msg

    p = write(tmp_path, BASE.replace('"x1^a * x2^(1 - a)"', '"x1^a * * x2"'))
    with pytest.raises(dy.FormulaError, match=r"case\.toml: key 'model\.formula': the "
                                              r"formula could not be read"):
        sc.load(p).build_model()

    p = write(tmp_path, BASE.replace("a = 0.4\n", ""))
    with pytest.raises(DualityError, match=r"case\.toml: key 'model\.formula'.*unknown "
                                           r"symbol 'a'"):
        sc.load(p).build_model()


def test_form_parameter_errors_name_parameters_key(tmp_path):
    text = '''
title = "translog"
[model]
form = "translog_cost"
size = 2
[model.parameters]
a0 = 0.0
zeta = 1.0
[baseline]
[baseline.prices]
w1 = 1.0
w2 = 1.0
'''
    with pytest.raises(DualityError, match=r"key 'model\.parameters'.*zeta"):
        sc.load(write(tmp_path, text)).build_model()
    # a form with parameters left without values cannot be evaluated: named up front
    with pytest.raises(DualityError, match=r"key 'model\.parameters': no value for a1"):
        sc.load(write(tmp_path, text.replace("zeta = 1.0\n", ""))).build_model()


# -- saving --------------------------------------------------------------------------------
def test_save_keeps_previous_version(tmp_path):
    path = write(tmp_path, BASE)
    s = sc.load(path)
    original = path.read_text()
    changed = sc.loads(BASE.replace("income = 100.0", "income = 120.0"))
    sc.save(changed, path)
    assert sc.load(path).baseline.income == 120.0
    assert (tmp_path / "case.toml.bak").read_text() == original
    assert sc.load(tmp_path / "case.toml.bak") == s
    assert sorted(os.listdir(tmp_path)) == ["case.toml", "case.toml.bak"]


def test_save_uses_scenario_path_by_default(tmp_path):
    path = write(tmp_path, BASE)
    s = sc.load(path)
    assert sc.save(s) == path
    with pytest.raises(DualityError, match="no path"):
        sc.save(sc.loads(BASE))


def test_a_scenario_with_a_data_file_saves_into_any_folder(tmp_path):
    """The data file still resolves from the new folder (relative path rewritten)."""
    src = SCENARIOS / "saltmere_household.toml"
    s = sc.load(src)
    n = len(s.read_data())
    for folder in (tmp_path / "saves", tmp_path / "saves" / "deeper", tmp_path):
        folder.mkdir(parents=True, exist_ok=True)
        saved = sc.save(s, folder / "copy.toml")
        again = sc.load(saved)
        assert again.data_path().resolve() == s.data_path().resolve()
        assert len(again.read_data()) == n
        assert not Path(again.data.file).is_absolute()
    assert sc.rebased(s, src) is s      # same folder: unchanged


@pytest.mark.parametrize("fail_at", ["write", "replace-all", "replace-target"])
def test_interrupted_save_loses_nothing(tmp_path, monkeypatch, fail_at):
    path = write(tmp_path, BASE)
    original = path.read_bytes()
    changed = sc.loads(BASE.replace("income = 100.0", "income = 120.0"))
    real_replace = os.replace

    if fail_at == "write":
        def half_write(fd, data):
            os.write(fd, data[: len(data) // 2])
            raise OSError(28, "No space left on device")
        monkeypatch.setattr(files, "_write_and_sync", half_write)
    else:
        def failing_replace(src, dst):
            if fail_at == "replace-all" or Path(dst) == path:
                raise OSError(5, "Input/output error")
            return real_replace(src, dst)
        monkeypatch.setattr(sc.os, "replace", failing_replace)

    with pytest.raises(DualityError, match=r"case\.toml: could not save .*unchanged"):
        sc.save(changed, path)
    assert path.read_bytes() == original
    left = sorted(os.listdir(tmp_path))
    assert all(not name.endswith(".tmp") for name in left), left
    assert set(left) <= {"case.toml", "case.toml.bak"}
    if "case.toml.bak" in left:
        assert (tmp_path / "case.toml.bak").read_bytes() == original


def test_keyboard_interrupt_during_save_removes_temp(tmp_path, monkeypatch):
    path = write(tmp_path, BASE)
    original = path.read_bytes()

    def interrupted(fd, data):
        os.write(fd, data[:10])
        raise KeyboardInterrupt
    monkeypatch.setattr(files, "_write_and_sync", interrupted)
    with pytest.raises(KeyboardInterrupt):
        sc.save(sc.loads(BASE), path)
    assert path.read_bytes() == original
    assert os.listdir(tmp_path) == ["case.toml"]


# -- the exact round trip, over generated valid scenarios -------------------------------------
_RESERVED = {"y", "p", "u", "m"}
NAME = st.from_regex(r"[A-Za-z_][A-Za-z0-9_]{0,7}", fullmatch=True).filter(
    lambda s: s not in _RESERVED)
# the numbers a scenario accepts: zero, or about 1e-301..1e301 in size (the package's one
# number range, duality.model.formula.MAX_BINARY_EXPONENT)
_SIZE = st.floats(min_value=2.0 ** -1000, max_value=2.0 ** 1000)
POSITIVE = _SIZE
FINITE = st.one_of(st.just(0.0), _SIZE, _SIZE.map(lambda x: -x))
TEXT = st.text(max_size=30)
FORMULAS = ["{0}^a", "{0}^a * {1}^(1 - a)", "a*log({0}) + (1 - a)*log({1})",
            "min({0}, {1})", "({0}^r + {1}^r)^(1/r)", "{0} + b*log({1})"]


@st.composite
def scenarios(draw):
    form = draw(st.sampled_from([None, None, *dual_forms.BY_NAME]))
    n = draw(st.integers(2, 3))
    pool = draw(st.lists(NAME, min_size=2 * n + 6, max_size=2 * n + 6, unique=True))
    quantities, prices, rest = pool[:n], pool[n:2 * n], pool[2 * n:]
    model: dict = {}
    if form is None:
        role = draw(st.sampled_from(sc.ROLES))
        side = draw(st.sampled_from([s for s, r in sc.SIDES.items() if r in (None, role)]))
        model.update(role=role, side=side,
                     formula=draw(st.sampled_from(FORMULAS)).format(*quantities))
    else:
        role = dual_forms.BY_NAME[form].role
        model.update(form=form, size=n)
    if form is None or draw(st.booleans()):
        model["prices"] = prices
    if draw(st.booleans()) or (form is None and model["side"] == "primal"):
        model["quantities"] = quantities
    levels = ("output", "output_price") if role == "technology" else ("utility", "income")
    for k, nm in zip(levels, rest[:2]):
        if draw(st.booleans()) and not (form is not None and k == "output_price"):
            model[k] = nm
    model["parameters"] = draw(st.dictionaries(st.sampled_from(rest[2:]), FINITE, max_size=3))
    names = model.get("prices") or [f"{dual_forms.BY_NAME[form].price_letter}{i + 1}" for i in range(n)]
    if form is not None and "prices" not in model and set(names) & set(pool):
        model["prices"] = prices  # avoid generated names that clash with the defaults
        names = prices
    base_prices = {p: draw(POSITIVE) for p in names}
    baseline: dict = {"prices": base_prices}
    if role == "technology":
        if draw(st.booleans()):
            baseline["output"] = draw(POSITIVE)
    elif draw(st.booleans()):
        baseline["income"] = draw(POSITIVE)
    else:
        baseline["utility"] = draw(FINITE)
    variants = {}
    for vname in draw(st.lists(NAME, max_size=3, unique=True)):
        v: dict = {"prices": draw(st.dictionaries(st.sampled_from(names), POSITIVE,
                                                  max_size=n))}
        if draw(st.booleans()):
            v["description"] = draw(TEXT)
        if draw(st.booleans()):
            v["output" if role == "technology" else "income"] = draw(POSITIVE)
        variants[vname] = v
    raw = {"title": draw(TEXT.filter(lambda t: t.strip())), "model": model,
           "baseline": baseline, "variants": variants,
           "exports": draw(st.lists(st.sampled_from(export.NAMES), unique=True))}
    if draw(st.booleans()):
        raw["description"] = draw(TEXT)
    if draw(st.booleans()):
        raw["data"] = {"file": draw(TEXT.filter(lambda t: t.strip())),
                       "columns": draw(st.dictionaries(st.sampled_from(names), TEXT.filter(
                           lambda t: t.strip()), max_size=2))}
    return sc.from_dict(raw)


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(scenarios())
def test_round_trip_is_exact(s):
    text = sc.dumps(s)
    again = sc.loads(text)
    assert again == s
    assert sc.dumps(again) == text  # and the text is stable


@settings(max_examples=25, deadline=None)
@given(scenarios())
def test_round_trip_through_a_file(tmp_path_factory, s):
    path = tmp_path_factory.mktemp("rt") / "s.toml"
    sc.save(s, path)
    assert sc.load(path) == s if s.data is None else sc.loads(path.read_text()) == s


def test_exports_accept_exactly_the_registered_targets(tmp_path):
    # the schema reads the export registry: every registered target is accepted, and an
    # unknown one is refused with the registry's names listed (common practice, no source)
    for name in export.NAMES:
        text = BASE.replace('exports = ["python", "latex"]', f'exports = ["{name}"]')
        assert sc.load(write(tmp_path, text)).exports == (name,)
    text = BASE.replace('exports = ["python", "latex"]', 'exports = ["fortran"]')
    with pytest.raises(DualityError, match=r"exports\[0\].*'fortran'.*expected one of "
                       + ", ".join(export.NAMES)):
        sc.load(write(tmp_path, text))


def test_units_are_read_written_back_and_checked(tmp_path):
    text = BASE + '\n[units]\np1 = "£ per kg"\nx1 = "kg"\n'
    s = sc.loads(text)
    assert s.units == {"p1": "£ per kg", "x1": "kg"}
    assert sc.loads(sc.dumps(s)) == s
    with pytest.raises(DualityError, match=r"key 'units\.zz': not a price, quantity or level"):
        sc.loads(BASE + '\n[units]\nzz = "kg"\n')
    with pytest.raises(DualityError, match=r"key 'units\.p1': expected non-empty text"):
        sc.loads(BASE + '\n[units]\np1 = " "\n')

"""The dual-side catalogue is one table of DualForm records that the scenario schema reads.
Common practice, no source (the forms' own formulas are tested in test_dual_forms.py,
their identities in test_dual_properties.py and their elasticities in tests/analyse)."""
from __future__ import annotations

import pytest

import duality as dy
from duality.apply import scenario as sc
from duality.errors import DualityError, ModelError
from duality.solve import dual_forms
from duality.solve.dual_forms import BY_NAME, DUAL_FORMS, get_form


@pytest.mark.parametrize("form", DUAL_FORMS, ids=lambda f: f.name)
def test_each_record_builds_the_model_it_describes(form):
    m = form.build(3)
    assert m.form == form.name and m.side == form.side
    assert m.is_technology == (form.role == "technology")
    assert [str(p) for p in m.prices] == [f"{form.price_letter}{i}" for i in (1, 2, 3)]
    # the builder is the module's public function of that name
    assert getattr(dual_forms, form.name) is form.build
    assert dy.DUAL_CATALOGUE[form.name] == {"title": form.title, "source": form.source}


@pytest.mark.parametrize("form", DUAL_FORMS, ids=lambda f: f.name)
def test_a_scenario_builds_each_form_through_the_table(form):
    level = "output = 2.0" if form.role == "technology" else "income = 10.0"
    prices = "\n".join(f"{form.price_letter}{i} = 1.0" for i in (1, 2))
    text = (f'title = "t"\n[model]\nform = "{form.name}"\nsize = 2\n'
            f"[baseline]\n{level}\n[baseline.prices]\n{prices}\n")
    spec = sc.loads(text).model
    assert (spec.role, spec.side, spec.price_names) == \
        (form.role, form.side, (f"{form.price_letter}1", f"{form.price_letter}2"))


def test_unknown_form_lists_the_table():
    with pytest.raises(ModelError, match="unknown dual-side form 'ces'; the forms are "
                       + ", ".join(BY_NAME)):
        get_form("ces")
    text = 'title = "t"\n[model]\nform = "ces"\nsize = 2\n[baseline.prices]\nw1 = 1.0\n'
    with pytest.raises(DualityError, match="unknown form 'ces'; expected one of "
                       + ", ".join(BY_NAME)):
        sc.loads(text)

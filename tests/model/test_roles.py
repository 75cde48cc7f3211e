"""The role descriptor and the head letters, written once (duality.model.roles).
Notation as in Varian, Microeconomic Analysis, 3rd ed. (1992), chs. 5–7 (from memory):
c(w, y), π(p, w), e(p, u), v(p, m)."""
from __future__ import annotations

import pytest

import duality as dy
from duality.model.roles import DUAL_KINDS, FUNCTIONS, ROLE_OF, ROLES
from duality.solve.result import KINDS


def test_letters_of_the_duals():
    assert {k: FUNCTIONS[k].letter for k in DUAL_KINDS} == \
        {"cost": "c", "profit": "π", "expenditure": "e", "indirect_utility": "v"}
    assert FUNCTIONS["profit"].code == "pi" and FUNCTIONS["profit"].latex == r"\pi"
    # the derived-function table takes its labels and LaTeX heads from here
    for k in DUAL_KINDS:
        assert KINDS[k] == (FUNCTIONS[k].label, FUNCTIONS[k].latex)


def test_roles_and_their_duals():
    assert ROLE_OF == {"cost": "technology", "profit": "technology",
                       "indirect_utility": "preference", "expenditure": "preference"}
    assert ROLES["technology"].main_function.label == "cost function"
    assert ROLES["preference"].primal_function.letter == "U"


@pytest.mark.parametrize("model, role_level, text", [
    (dy.technology("x1^0.5*x2^0.5", ["x1", "x2"]), "output", "production function y = "),
    (dy.preference("x1*x2", ["x1", "x2"]), "utility level", "utility function u = "),
    (dy.profit_function("p^2/(w1 + w2)", ["w1", "w2"]), "output",
     "profit function π(p, w1, w2) = "),
    (dy.indirect_utility_function("m/(p1 + p2)", ["p1", "p2"]), "utility level",
     "indirect utility function v(p1, p2, m) = "),
])
def test_a_model_describes_itself_from_its_records(model, role_level, text):
    assert model.role_info.level == role_level
    assert model.describe().startswith(text)
    assert model.given.kind == (model.side if model.side != "primal"
                                else model.role_info.primal)

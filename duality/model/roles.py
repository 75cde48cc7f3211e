"""The words and letters of each role and each function, written once.

A technology has a production function f, its duals are the cost function c and the
profit function π, its level is output and its quantities are inputs; a preference has a
utility function U, the duals v and e, a utility level and goods.  Front ends, exports and
messages read these records instead of branching on ``role`` or ``side``:

* :data:`FUNCTIONS` — each function (primal or dual): label, head letter in text, in code
  and in LaTeX;
* :data:`ROLES` — each role: its primal function, its duals, the dual that recovery and
  estimation start from, and the words for level, quantity and level curve.

:attr:`Model.role_info <duality.model.base.Model.role_info>` and
:attr:`Model.given <duality.model.base.Model.given>` hand out the records of a model.
"""
from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Function:
    """One function of the theory and how it is written.

    ``letter`` in plain text (``π``), ``code`` as an identifier in exported code (``pi``),
    ``latex`` in formulas (``\\pi``).
    """

    kind: str
    label: str
    letter: str
    code: str
    latex: str


#: kind -> :class:`Function` (the two primal functions and the four duals)
FUNCTIONS: dict[str, Function] = {f.kind: f for f in (
    Function("production", "production function", "f", "f", "f"),
    Function("utility", "utility function", "U", "U", "U"),
    Function("cost", "cost function", "c", "c", "c"),
    Function("profit", "profit function", "π", "pi", r"\pi"),
    Function("expenditure", "expenditure function", "e", "e", "e"),
    Function("indirect_utility", "indirect utility function", "v", "v", "v"),
)}
#: the dual kinds, in the order of :data:`FUNCTIONS`
DUAL_KINDS: tuple[str, ...] = ("cost", "profit", "expenditure", "indirect_utility")


@dataclass(frozen=True)
class Role:
    """A technology or a preference, in words.

    ``primal`` and ``main_dual`` are keys of :data:`FUNCTIONS`: the function a primal model
    is given as, and the dual that recovery and estimation start from (cost, expenditure).
    ``shifter`` names what moves demand besides prices (output, income; its elasticities
    are the output or income elasticities), ``demand`` the demand system by Shephard's
    lemma or Roy's identity, ``price_line`` the line of equal spending in a figure.
    """

    name: str
    primal: str
    duals: tuple[str, ...]
    main_dual: str
    level: str
    quantity: str
    level_curve: str
    shifter: str
    demand: str
    price_line: str

    @property
    def primal_function(self) -> Function:
        return FUNCTIONS[self.primal]

    @property
    def main_function(self) -> Function:
        return FUNCTIONS[self.main_dual]


#: role name -> :class:`Role`
ROLES: dict[str, Role] = {r.name: r for r in (
    Role("technology", "production", ("cost", "profit"), "cost", "output", "input",
         "isoquant", "output", "conditional demand", "isocost line"),
    Role("preference", "utility", ("indirect_utility", "expenditure"), "expenditure",
         "utility level", "good", "indifference curve", "income", "Marshallian demand",
         "budget line"),
)}
#: dual kind -> the role it belongs to
ROLE_OF: dict[str, str] = {k: r.name for r in ROLES.values() for k in r.duals}

__all__ = ["Function", "FUNCTIONS", "DUAL_KINDS", "Role", "ROLES", "ROLE_OF"]

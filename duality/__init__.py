"""duality — from a production or utility function to its duals, demands and checks.

The public contract (kept stable)::

    technology, preference                     build a model (validated, immutable)
    cost_function, profit_function, ...        or start from the dual side
    cost, profit, expenditure, indirect_utility derive a dual (catalogue → symbolic → numeric)
    conjugate                                   Legendre / Legendre–Fenchel transform
    check                                       identities and properties as records

Results carry ``.expr``, ``.route``, ``.source`` and ``.demands`` and are callable with
keyword values.  Around them: :func:`elasticities`, :func:`shephard`, :func:`hotelling`,
:func:`roy`, :func:`shares`, :func:`allen_uzawa`, :func:`morishima`, :func:`parse`,
:func:`evaluate` (tables, dask, files).

Results hold only for the assumed functional form and parameter values.
"""
from __future__ import annotations

from .checks import CheckRecord, check
from .conjugate import Conjugate, biconjugate, conjugate
from .demand import hotelling, roy, shares, shephard
from .derive import DEFAULT_BUDGET, cost, expenditure, indirect_utility, profit
from .elasticity import ElasticityTable, allen_uzawa, elasticities, morishima, price_elasticities
from .evaluate import evaluate, evaluate_dask, evaluate_file
from .errors import (BudgetExceeded, DomainError, DualityError, FormulaError, ModelError,
                     NoSolutionError)
from .forms import CATALOGUE
from .dual_forms import (DUAL_CATALOGUE, aids_expenditure, aids_share_equations,
                         generalized_leontief_cost, translog_cost)
from .dual_side import (cost_function, expenditure_function, indirect_utility_function,
                        profit_function)
from .model import Model, Parameter, preference, technology
from .data_regularity import RegularityReport, regularity
from .recovery import Recovered, recover
from .scenario import load as load_scenario, save as save_scenario
from .theory import impose_restrictions, restrictions, violations
from .welfare import compare as price_change, scenario_table
from .result import Derived, NumericWarning

__version__ = "0.1.0"


def parse(text: str, **kwargs):
    """Read a formula safely (see :func:`duality.formula.parse`)."""
    from .formula import parse as _parse
    return _parse(text, **kwargs)


__all__ = [
    "technology", "preference", "cost", "profit", "expenditure", "indirect_utility",
    "conjugate", "check",
    "cost_function", "profit_function", "expenditure_function", "indirect_utility_function",
    "translog_cost", "generalized_leontief_cost", "aids_expenditure", "aids_share_equations",
    "DUAL_CATALOGUE", "restrictions", "violations", "impose_restrictions", "regularity",
    "RegularityReport", "recover", "Recovered", "load_scenario", "save_scenario",
    "scenario_table", "price_change",
    "biconjugate", "elasticities", "shephard", "hotelling", "roy", "shares", "allen_uzawa",
    "morishima", "price_elasticities", "parse", "evaluate", "evaluate_dask", "evaluate_file",
    "Model", "Parameter", "Derived", "Conjugate", "CheckRecord", "ElasticityTable",
    "CATALOGUE", "DEFAULT_BUDGET",
    "DualityError", "FormulaError", "ModelError", "NoSolutionError", "DomainError",
    "BudgetExceeded", "NumericWarning",
]

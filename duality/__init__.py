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
:func:`evaluate` (tables, dask, files).  Where a result may not exist (e.g. the
profit function of a constant-returns technology, in ``duality.solve.derive.duals``) it is
an :class:`Unavailable`: falsy, and ``.reason`` says why.

Results hold only for the assumed functional form and parameter values;
check them before they inform a policy or pricing decision.
"""
from __future__ import annotations

import importlib
import sys

from .analyse.checks import CheckRecord, check
from .conjugate import Conjugate, biconjugate, conjugate
from .analyse.demand import hotelling, roy, shares, shephard
from .solve.derive import DEFAULT_BUDGET, cost, expenditure, indirect_utility, profit
from .solve.budget import Budget, run_with_budget
from .analyse.elasticity import ElasticityTable, allen_uzawa, elasticities, morishima, price_elasticities
from .apply.estimation import Estimation, estimate
from .apply.evaluate import evaluate, evaluate_dask, evaluate_file
from .errors import (BudgetExceeded, DomainError, DualityError, FormulaError, ModelError,
                     NoSolutionError)
from .solve.forms import CATALOGUE
from .solve.dual_forms import (DUAL_CATALOGUE, aids_expenditure, aids_share_equations,
                               quaids_expenditure, quaids_indirect_utility,
                               normalized_quadratic_cost, symmetric_generalized_mcfadden_cost,
                               concave_block,
                         generalized_leontief_cost, translog_cost)
from .model.dual_side import (cost_function, expenditure_function, indirect_utility_function,
                        profit_function)
from .model.base import Model, Parameter, preference, technology
from .model.formula import parse
from ._version import __version__
from .analyse.regularity import RegularityReport, regularity
from .analyse.recovery import Recovered, recover
from .apply.scenario import load as load_scenario, save as save_scenario
from .analyse.theory import impose_restrictions, restrictions, violations
from .apply.welfare import compare as price_change, scenario_table
from .solve.result import Derived, NumericWarning, Unavailable


# Import paths from before the stages became folders (``duality.derive`` is now
# ``duality.solve.derive``): kept so that existing user code keeps working.
_FORMER_PATHS = {
    "formula": "model.formula", "dual_side": "model.dual_side", "lambdas": "model.lambdas",
    "derive": "solve.derive", "derive_dual": "solve.derive_dual", "budget": "solve.budget",
    "numeric": "solve.numeric", "batch": "solve.batch", "forms": "solve.forms",
    "dual_forms": "solve.dual_forms", "calculus": "solve.calculus", "result": "solve.result",
    "demand": "analyse.demand", "elasticity": "analyse.elasticity", "checks": "analyse.checks",
    "restrictions": "analyse.restrictions", "theory": "analyse.theory",
    "data_regularity": "analyse.regularity", "recovery": "analyse.recovery",
    "scenario": "apply.scenario", "welfare": "apply.welfare", "evaluate": "apply.evaluate",
    "estimation": "apply.estimation", "export": "apply.export",
}


def _register_former_paths() -> None:
    for old, new in _FORMER_PATHS.items():
        module = importlib.import_module(f"{__name__}.{new}")
        sys.modules.setdefault(f"{__name__}.{old}", module)
        if old not in globals():  # ``dy.export.TARGETS``; never shadows a function (evaluate)
            globals()[old] = module


_register_former_paths()


__all__ = [
    "technology", "preference", "cost", "profit", "expenditure", "indirect_utility",
    "conjugate", "check",
    "cost_function", "profit_function", "expenditure_function", "indirect_utility_function",
    "translog_cost", "generalized_leontief_cost", "aids_expenditure", "aids_share_equations",
    "quaids_expenditure", "quaids_indirect_utility", "normalized_quadratic_cost",
    "symmetric_generalized_mcfadden_cost", "concave_block",
    "DUAL_CATALOGUE", "restrictions", "violations", "impose_restrictions", "regularity",
    "RegularityReport", "recover", "Recovered", "load_scenario", "save_scenario",
    "scenario_table", "price_change",
    "estimate", "Estimation",
    "biconjugate", "elasticities", "shephard", "hotelling", "roy", "shares", "allen_uzawa",
    "morishima", "price_elasticities", "parse", "evaluate", "evaluate_dask", "evaluate_file",
    "Model", "Parameter", "Derived", "Conjugate", "CheckRecord", "ElasticityTable",
    "CATALOGUE", "DEFAULT_BUDGET",
    "DualityError", "FormulaError", "ModelError", "NoSolutionError", "DomainError",
    "BudgetExceeded", "NumericWarning", "Unavailable",
    "Budget", "run_with_budget",
]

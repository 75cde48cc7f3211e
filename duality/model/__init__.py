"""Stage 1, the model: what the user typed, read safely and validated into one immutable model.

``formula`` reads text into sympy (a whitelist, never ``eval``); ``base`` holds :class:`Model`
and its one builder for primal (production or utility) and dual-side (cost, profit,
expenditure, indirect utility) functions; ``dual_side`` the dual-side constructors; ``lambdas``
the one translation of a model's expressions into numpy.  Nothing here imports a later stage.
"""
from __future__ import annotations

from .base import Model, Parameter, preference, technology
from .dual_side import (cost_function, expenditure_function, indirect_utility_function,
                        profit_function)
from .formula import parse, to_latex, to_text

__all__ = ["Model", "Parameter", "technology", "preference", "cost_function",
           "profit_function", "expenditure_function", "indirect_utility_function", "parse",
           "to_text", "to_latex"]

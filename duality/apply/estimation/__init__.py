"""Estimation of the equations derived from a model, with theory imposed.

* :mod:`.equations` — the estimating equations of a model (log cost, shares, input–output,
  Almost Ideal budget shares) with the theory restrictions imposed and one share dropped;
* :mod:`.data` — the observed columns, checked with errors that name column and row;
* :mod:`.linear` — statsmodels OLS for one equation, linearmodels SUR for systems;
* :mod:`.nonlinear` — scipy ``least_squares`` for equations nonlinear in the parameters;
* :mod:`.result` — :class:`Estimation`: estimates, fit, elasticities with delta-method
  standard errors, Wald tests, the fitted model;
* :mod:`.fitting` — :func:`estimate`, the one entry point;
* :mod:`.loglinear` — the single log-linear equation of a dual (:func:`log_linear_equation`,
  :func:`fit`), kept for existing code.
"""
from .equations import EQUATIONS, EquationSystem, EstimatingEquation, derive_system
from .fitting import estimate
from .linear import METHODS
from .loglinear import Fit, LinearEquation, fit, log_linear_equation
from .result import EquationFit, Estimation, WaldTest

__all__ = ["estimate", "Estimation", "EquationFit", "WaldTest", "derive_system",
           "EquationSystem", "EstimatingEquation", "EQUATIONS", "METHODS",
           "LinearEquation", "log_linear_equation", "Fit", "fit"]

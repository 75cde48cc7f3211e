"""Texts that every front end shows in the same words (command line, app, exports, README).

:data:`CAUTION` is the one wording of the usual caution: results hold only for the assumed
functional form and parameters.  ``tests/test_texts.py`` keeps the README, the scenarios'
README and the package docstring in these words.
"""
from __future__ import annotations

#: the caution shown beside results (one line; exports print it as a comment)
CAUTION = ("Results hold only for the assumed functional form and parameter values; "
           "check them before they inform a policy or pricing decision.")

__all__ = ["CAUTION"]

"""The catalogue of standard forms with published closed-form duals.

Forms are tried in registry order on the core of a function (see :func:`recognise`).
To add one, write a module with a :class:`~duality.solve.forms.base.Form` subclass and
register it below (DEVELOPERS.md walks through it).
"""
from __future__ import annotations

from typing import Mapping, Sequence

import sympy as sp

from .base import CoreSolution, Form, Layer, Match, Registry, peel
from .ces import CES
from .cobb_douglas import CobbDouglas
from .leontief import Leontief
from .linear import Linear
from .nested_ces import NestedCES
from .quasi_linear import QuasiLinear
from .stone_geary import StoneGeary

CATALOGUE = Registry()
for _form in (CobbDouglas(), CES(), NestedCES(), Leontief(), Linear(), StoneGeary(),
              QuasiLinear()):
    CATALOGUE.register(_form)


def _cores(expr: sp.Expr, xs: Sequence[sp.Symbol], values: Mapping) -> list:
    """Candidate (core, layers) splits of ``expr``: as typed and with logs combined."""
    out = []

    def add(core, layers):
        if all(core != c for c, _ in out):
            out.append((core, layers))

    for e in (expr, sp.logcombine(expr, force=True)):
        core, layers = peel(e, xs, values)
        add(core, layers)  # as typed: a sum of logs may be quasi-linear
        combined = sp.logcombine(core, force=True)
        if combined != core:
            inner, more = peel(combined, xs, values)
            add(inner, layers + more)
    return out


def recognise(expr: sp.Expr, xs: Sequence[sp.Symbol], values: Mapping[sp.Symbol, float],
              role: str) -> tuple[Match | None, list[str]]:
    """The first catalogue form that ``expr`` reduces to, with notes on near misses.

    A form whose parameter conditions fail at the given values is skipped with a note.
    """
    notes: list[str] = []
    for core, layers in _cores(expr, xs, values):
        for form in CATALOGUE:
            if role not in form.roles:
                continue
            pieces = form.match(core, list(xs))
            if pieces is None:
                continue
            conds = [c for layer in layers for c in layer.conditions]
            conds += form.requirements(pieces, list(xs))
            kept, failed = [], []
            for c in conds:
                v = c.xreplace(dict(values)) if hasattr(c, "xreplace") else c
                if v is sp.true:
                    continue
                (failed if v is sp.false else kept).append(c)
            if failed:
                notes.append(f"looks like {form.title}, but its conditions fail here: "
                             + ", ".join(map(str, failed)))
                continue
            return Match(form, pieces, layers, tuple(kept)), notes
    return None, notes


__all__ = ["CATALOGUE", "CoreSolution", "Form", "Layer", "Match", "recognise"]

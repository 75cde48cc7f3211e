"""Exports: derived functions as code, LaTeX, JSON, and estimation bundles.

::

    export(what, target, *, name="model", values=True, **options) -> str
    write(what, target, path, **kw) -> Path        # atomic: temp file + os.replace
    load_json(text) -> dict                        # reads the "json" (and "bundle") export

``what`` is a :class:`~duality.model.base.Model` (every dual it has: for a technology the cost
function and its conditional demands, and the profit function with output supply and
input demands when it exists; for a preference the indirect utility function with
Marshallian demands and the expenditure function with Hicksian demands; duals that do not
exist or have no closed form are listed as not exported), a
:class:`~duality.solve.result.Derived` (with its demands), or a list or dict of them.

The targets are the records of :data:`REGISTRY` (name, exporter, file suffix, description),
the one list that the command line, the scenario schema and the app read; :data:`TARGETS`
and :data:`SUFFIXES` are derived from it.  How parameters appear with ``values=True`` and
``values=False`` in each target: see :mod:`duality.apply.export.code`.

Every target is strict: a construct it cannot express (Piecewise or min in Stata, a
function with no closed form anywhere) raises :class:`~duality.errors.DualityError`
naming the target and the construct; nothing wrong is ever printed.
"""
from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Callable

from ...errors import DualityError
from ..files import write_atomic
from ._collect import check_export_name, collect
from .bundle import export_bundle
from .code import (export_c, export_julia, export_octave, export_python, export_r,
                   export_stata)
from .equations import estimating_collection
from .jsonfmt import export_json, load_json
from .latex import export_latex, export_latex_document


def _on_collection(fn: Callable) -> Callable:
    def run(what, *, name: str, values: bool = True, equations: bool = False,
            fixed=None) -> str:
        if fixed is not None and not equations:
            raise DualityError("fixed parameters apply to the estimating equations; give "
                               "equations=True")
        col = estimating_collection(what, fixed=fixed) if equations else collect(what)
        return fn(col, name=name, values=values)
    run.__name__ = fn.__name__
    run.__doc__ = fn.__doc__
    return run


@dataclass(frozen=True)
class ExportTarget:
    """One export target: its name, its exporter, its file suffix and what it writes.

    ``function(what, *, name, values, **options) -> str``; ``stem`` is added to the export
    name in :func:`file_name` so that two targets with one suffix get distinct files;
    ``options`` are the keyword options the target accepts beyond ``name`` and ``values``.
    """

    name: str
    function: Callable[..., str]
    suffix: str
    description: str
    stem: str = ""
    options: tuple[str, ...] = ()


#: the options of the targets that also print estimating equations
_EQUATIONS = ("equations", "fixed")

#: every export target, in the order front ends list them (the one source of them)
REGISTRY: tuple[ExportTarget, ...] = (
    ExportTarget("python", _on_collection(export_python), ".py", "numpy module", options=_EQUATIONS),
    ExportTarget("latex", _on_collection(export_latex), ".tex", "LaTeX equation snippets", options=_EQUATIONS),
    ExportTarget("latex-document", _on_collection(export_latex_document), ".tex",
                 "standalone LaTeX article", stem="_document"),
    ExportTarget("json", _on_collection(export_json), ".json",
                 "JSON (schema in duality.apply.export.jsonfmt)", options=_EQUATIONS),
    ExportTarget("r", _on_collection(export_r), ".R", "R functions", options=_EQUATIONS),
    ExportTarget("julia", _on_collection(export_julia), ".jl", "Julia functions", options=_EQUATIONS),
    ExportTarget("octave", _on_collection(export_octave), ".m", "Octave/MATLAB functions", options=_EQUATIONS),
    ExportTarget("c", _on_collection(export_c), ".h", "C99 header", options=_EQUATIONS),
    ExportTarget("stata", _on_collection(export_stata), ".do", "Stata nl expressions", options=_EQUATIONS),
    ExportTarget("bundle", export_bundle, ".json",
                 "share equations for estimation (schema in duality.apply.export.bundle)",
                 stem="_bundle", options=("columns", "fixed")),
)

#: target name -> :class:`ExportTarget`
BY_NAME: dict[str, ExportTarget] = {t.name: t for t in REGISTRY}
#: target name -> exporter ``(what, *, name, values, **options) -> str``
TARGETS: dict[str, Callable[..., str]] = {t.name: t.function for t in REGISTRY}
#: target name -> usual file suffix (for front ends)
SUFFIXES: dict[str, str] = {t.name: t.suffix for t in REGISTRY}
#: the target names, in order
NAMES: tuple[str, ...] = tuple(BY_NAME)


def get_target(name: str) -> ExportTarget:
    """The :class:`ExportTarget` called ``name``; an unknown name's error lists the valid
    ones."""
    if not isinstance(name, str) or name not in BY_NAME:
        raise DualityError(f"unknown export target {name!r}; the targets are "
                           f"{', '.join(NAMES)}")
    return BY_NAME[name]


def file_name(name: str, target: str) -> str:
    """The usual file name of export ``name`` in ``target`` (distinct for every target:
    ``model.tex`` and ``model_document.tex``, ``model.json`` and ``model_bundle.json``)."""
    t = get_target(target)
    return name + t.stem + t.suffix


def export(what, target: str, *, name: str = "model", values: bool = True, **options) -> str:
    """The text of ``what`` exported to ``target``.

    Parameters
    ----------
    what : Model, Derived, or list/dict of Derived
    target : str
        One of :data:`TARGETS`.
    name : str
        Name of the export (module docstring, C constant prefix, JSON ``name``).
    values : bool
        True: parameters with values keep them (defaults, constants or start values, per
        target); False: every parameter is an argument.
    options
        Target options: ``columns`` and ``fixed`` for ``bundle``; ``equations=True``
        (with ``fixed``) for the code, LaTeX and JSON targets: the estimating equations of
        a model (:mod:`duality.apply.export.equations`) instead of its duals.

    Raises
    ------
    DualityError
        Unknown target (the message lists the valid ones), a function without a closed
        form, or a construct the target cannot express.
    """
    spec = get_target(target)
    check_export_name(name)
    if not isinstance(values, bool):
        raise DualityError(f"values must be True or False, not {values!r}")
    extra = sorted(set(options) - set(spec.options))
    if extra:
        raise DualityError(f"the {spec.name} export takes no option(s) {', '.join(extra)}")
    # looked up at call time, so that TARGETS stays the table a test may patch
    return TARGETS[spec.name](what, name=name, values=values, **options)


def write(what, target: str, path, **kw) -> Path:
    """Export and write to ``path`` atomically; returns the path.

    The text is produced first, then written with :func:`duality.apply.files.write_atomic`
    (a temporary file in the same folder, flushed to disk, moved over ``path``); on any
    failure an existing ``path`` is left as it was.
    """
    text = export(what, target, **kw)
    return write_atomic(path, text)


__all__ = ["ExportTarget", "REGISTRY", "BY_NAME", "NAMES", "TARGETS", "SUFFIXES", "get_target",
           "export", "file_name", "write", "load_json", "collect"]

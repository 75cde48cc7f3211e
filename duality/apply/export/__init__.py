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

Targets (:data:`TARGETS`): ``python`` (numpy module), ``latex`` (equation snippets),
``latex-document`` (standalone article), ``json`` (schema in
:mod:`duality.apply.export.jsonfmt`), ``r``, ``julia``, ``octave`` (Octave/MATLAB), ``c``
(C99), ``stata`` (``nl`` expressions) and ``bundle`` (share equations for estimation,
schema in :mod:`duality.apply.export.bundle`).  How parameters appear with ``values=True`` and
``values=False`` in each target: see :mod:`duality.apply.export.code`.

Every target is strict: a construct it cannot express (Piecewise or min in Stata, a
function with no closed form anywhere) raises :class:`~duality.errors.DualityError`
naming the target and the construct; nothing wrong is ever printed.
"""
from __future__ import annotations

import os
import tempfile
from pathlib import Path
from typing import Callable

from ...errors import DualityError
from ._collect import check_export_name, collect
from .bundle import export_bundle
from .code import (export_c, export_julia, export_octave, export_python, export_r,
                   export_stata)
from .jsonfmt import export_json, load_json
from .latex import export_latex, export_latex_document


def _on_collection(fn: Callable) -> Callable:
    def run(what, *, name: str, values: bool = True) -> str:
        return fn(collect(what), name=name, values=values)
    run.__name__ = fn.__name__
    run.__doc__ = fn.__doc__
    return run


#: target name -> exporter ``(what, *, name, values, **options) -> str``
TARGETS: dict[str, Callable[..., str]] = {
    "python": _on_collection(export_python),
    "latex": _on_collection(export_latex),
    "latex-document": _on_collection(export_latex_document),
    "json": _on_collection(export_json),
    "r": _on_collection(export_r),
    "julia": _on_collection(export_julia),
    "octave": _on_collection(export_octave),
    "c": _on_collection(export_c),
    "stata": _on_collection(export_stata),
    "bundle": export_bundle,
}

#: usual file suffix per target (for front ends)
SUFFIXES = {"python": ".py", "latex": ".tex", "latex-document": ".tex", "json": ".json",
            "r": ".R", "julia": ".jl", "octave": ".m", "c": ".h", "stata": ".do",
            "bundle": ".json"}


def file_name(name: str, target: str) -> str:
    """The usual file name of export ``name`` in ``target`` (distinct for every target:
    ``model.tex`` and ``model_document.tex``, ``model.json`` and ``model_bundle.json``)."""
    if target not in TARGETS:
        raise DualityError(f"unknown export target {target!r}; the targets are "
                           f"{', '.join(TARGETS)}")
    stem = name + {"latex-document": "_document", "bundle": "_bundle"}.get(target, "")
    return stem + SUFFIXES[target]


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
        Target options: ``columns`` and ``fixed`` for ``bundle``.

    Raises
    ------
    DualityError
        Unknown target (the message lists the valid ones), a function without a closed
        form, or a construct the target cannot express.
    """
    if not isinstance(target, str) or target not in TARGETS:
        raise DualityError(f"unknown export target {target!r}; the targets are "
                           f"{', '.join(TARGETS)}")
    check_export_name(name)
    if not isinstance(values, bool):
        raise DualityError(f"values must be True or False, not {values!r}")
    fn = TARGETS[target]
    if options and target != "bundle":
        raise DualityError(f"the {target} export takes no option(s) "
                           f"{', '.join(sorted(options))}")
    return fn(what, name=name, values=values, **options)


def write(what, target: str, path, **kw) -> Path:
    """Export and write to ``path`` atomically; returns the path.

    The text is produced first; it is then written to a temporary file in the same folder,
    flushed to disk and moved over ``path`` with :func:`os.replace`.  On any failure the
    temporary file is removed and an existing ``path`` is left as it was.
    """
    path = Path(path)
    text = export(what, target, **kw)
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise DualityError(f"cannot write {path}: folder {folder} does not exist")
    fd, tmp = tempfile.mkstemp(dir=folder, prefix=f".{path.name}.", suffix=".tmp")
    try:
        with os.fdopen(fd, "w", encoding="utf-8", newline="\n") as fh:
            fh.write(text)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except FileNotFoundError:
            pass
        raise
    return path


__all__ = ["TARGETS", "SUFFIXES", "export", "file_name", "write", "load_json", "collect"]

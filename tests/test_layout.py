"""The package's layout: imports point down the pipeline (model ← solve ← analyse ← apply ←
cli/app), and a function-level import says why it is there.  Common practice, no source."""
from __future__ import annotations

import ast
from pathlib import Path

import pytest

PKG = Path(__file__).resolve().parents[1] / "duality"

#: stage of each top-level part of the package; a module may import its own stage or lower
STAGE = {"errors": 0, "_version": 0, "texts": 0, "model": 1, "solve": 2, "analyse": 3,
         "conjugate": 3, "apply": 4, "cli": 5, "__init__": 5, "__main__": 5}
STAGES = ("model", "solve", "analyse", "apply", "conjugate")


def _modules():
    return sorted(p for p in PKG.rglob("*.py") if "__pycache__" not in p.parts)


def _dotted(path: Path) -> list[str]:
    parts = list(path.relative_to(PKG).with_suffix("").parts)
    return parts


def _part(path: Path) -> str:
    return _dotted(path)[0]


def _targets(path: Path, node: ast.AST) -> list[list[str]]:
    """The package-relative module paths an import statement reaches into."""
    if isinstance(node, ast.Import):
        return [n.name.split(".")[1:] for n in node.names if n.name.split(".")[0] == "duality"]
    assert isinstance(node, ast.ImportFrom)
    if node.level == 0:
        parts = (node.module or "").split(".")
        return [parts[1:]] if parts[0] == "duality" else []
    here = _dotted(path)
    base = here[:-1] if here[-1] != "__init__" else here[:-1]
    if here[-1] == "__init__":
        base = here[:-1]
    base = base[: len(base) - (node.level - 1)] if node.level > 1 else base
    mod = base + (node.module.split(".") if node.module else [])
    if node.module is None:  # from . import a, b: each name may be a module
        return [mod + [n.name] for n in node.names]
    return [mod]


def _stage_of(parts: list[str]) -> int:
    if not parts:
        return STAGE["__init__"]
    return STAGE.get(parts[0], STAGE["__init__"])


@pytest.mark.parametrize("path", _modules(), ids=lambda p: str(p.relative_to(PKG)))
def test_imports_point_down_the_pipeline(path):
    tree = ast.parse(path.read_text(), str(path))
    own = _stage_of(_dotted(path))
    for node in ast.walk(tree):
        if isinstance(node, (ast.Import, ast.ImportFrom)):
            for target in _targets(path, node):
                assert _stage_of(target) <= own, (
                    f"{path.relative_to(PKG)}:{node.lineno} imports "
                    f"duality.{'.'.join(target)} from a later stage")


@pytest.mark.parametrize("path", _modules(), ids=lambda p: str(p.relative_to(PKG)))
def test_function_level_imports_say_why(path):
    text = path.read_text()
    lines = text.splitlines()
    tree = ast.parse(text, str(path))
    for fn in ast.walk(tree):
        if not isinstance(fn, (ast.FunctionDef, ast.AsyncFunctionDef)):
            continue
        for node in ast.walk(fn):
            if isinstance(node, (ast.Import, ast.ImportFrom)):
                around = " ".join(lines[max(0, node.lineno - 2): node.end_lineno])
                assert "deferred" in around or "cycle" in around, (
                    f"{path.relative_to(PKG)}:{node.lineno}: a function-level import needs a "
                    "comment saying which cycle it breaks or which heavy optional dependency "
                    "it defers")


def test_every_stage_says_what_it_owns():
    for stage in STAGES:
        doc = ast.get_docstring(ast.parse((PKG / stage / "__init__.py").read_text()))
        assert doc and len(doc.splitlines()[0]) > 20, stage


def test_former_import_paths_still_work():
    import importlib

    import duality
    for old, new in duality._FORMER_PATHS.items():
        assert importlib.import_module(f"duality.{old}") is importlib.import_module(
            f"duality.{new}")

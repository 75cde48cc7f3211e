"""The package's layout: imports point down the pipeline (model ← solve ← analyse ← apply ←
cli/app), a function-level import says why it is there, and the tests mirror the package
(one test module per module, never skipping over the package itself).  Common practice, no
source."""
from __future__ import annotations

import ast
from pathlib import Path

import pytest

PKG = Path(__file__).resolve().parents[1] / "duality"
TESTS = Path(__file__).resolve().parent

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


def test_tests_never_skip_over_the_package_itself():
    # a missing or broken module of our own must fail loudly, not skip (importorskip is for
    # optional third-party packages only)
    for path in sorted(TESTS.rglob("*.py")):
        text = path.read_text()
        if "importorskip" not in text:
            continue
        for node in ast.walk(ast.parse(text, str(path))):
            if (isinstance(node, ast.Call) and isinstance(node.func, ast.Attribute)
                    and node.func.attr == "importorskip" and node.args
                    and isinstance(node.args[0], ast.Constant)):
                root = str(node.args[0].value).split(".")[0]
                assert root not in ("duality", "app"), (
                    f"{path.relative_to(TESTS)}:{node.lineno} skips when "
                    f"{node.args[0].value} cannot be imported; import it directly")


#: parts of the package whose test module has another name: the model builder, and each
#: sub-package or group of modules tested through its entry points by one module
TESTED_BY = {
    "model/base": "model/test_model.py",
    "solve/batch": "solve/test_batch.py",
    "solve/forms": "solve/test_catalogue.py",
    "analyse/recovery": "analyse/test_recover.py",
    "analyse/restrictions": "analyse/test_restrictions.py",
    "apply/export": "apply/test_export.py",
    "conjugate/grid": "conjugate/test_grid_conjugate.py",
    **{f"conjugate/{m}": "conjugate/test_conjugate.py"
       for m in ("common", "core", "multi", "piecewise", "univariate")},
    "app/main": "webapp/test_views.py",
    "app/serve": "webapp/test_launcher.py",
}


def _units() -> list[str]:
    """Each module directly in a stage folder or in app/, and each sub-package, as
    'folder/name'."""
    out = []
    for folder in [PKG / s for s in STAGES] + [PKG.parent / "app"]:
        for p in sorted(folder.iterdir()):
            if p.suffix == ".py" and not p.name.startswith("_"):
                out.append(f"{folder.name}/{p.stem}")
            elif p.is_dir() and (p / "__init__.py").is_file():
                out.append(f"{folder.name}/{p.name}")
    return out


@pytest.mark.parametrize("unit", _units())
def test_tests_mirror_the_package(unit):
    folder, name = unit.split("/")
    want = TESTED_BY.get(unit, f"{'webapp' if folder == 'app' else folder}/test_{name}.py")
    where = "app" if folder == "app" else f"duality/{folder}"
    assert (TESTS / want).is_file(), (
        f"{where}/{name} has no test module: write tests/{want} (tests mirror the package; "
        "a sub-package has one test module named in TESTED_BY)")

"""Tests of duality.apply.export: code targets executed where a tool is at hand, snapshots else.

Executed: python (imported with importlib), c (compiled with gcc when installed), r (run
with Rscript when installed; skipped with the reason otherwise), json (load_json round
trip), bundle (read back with load_json).  Snapshot-only: julia, octave, stata, latex.

Snapshots live in ``tests/apply/snapshots/export/<target>.txt`` and are compared exactly.  To
rewrite them after an intended change, run::

    DUALITY_UPDATE_SNAPSHOTS=1 python -m pytest tests/apply/test_export.py

and review the diff before committing.

Reference values are the engine's own numbers (``Derived.__call__``) at random points;
every exported function must reproduce them to rtol 1e-12 (1e-10 for R, which prints
through text).  The model parameters below are arbitrary test values (common practice,
no source).
"""
from __future__ import annotations

import importlib.util
import json
import keyword
import os
import shutil
import subprocess
from pathlib import Path

import numpy as np
import pytest

import duality as dy
from duality.errors import DualityError
from duality.apply.export import TARGETS, collect, export, load_json, write

SNAPSHOTS = Path(__file__).parent / "snapshots" / "export"
RTOL = 1e-12


# ----------------------------------------------------------------------------- models

@pytest.fixture(scope="module")
def cobb_douglas():
    # decreasing returns (a + b = 0.8) so that the profit function exists
    return dy.technology("A*x1^a*x2^b", ["x1", "x2"], params={"A": 2, "a": 0.3, "b": 0.5})


@pytest.fixture(scope="module")
def ces():
    return dy.preference("(a*x1^r + (1-a)*x2^r)^(1/r)", ["x1", "x2"],
                         params={"a": 0.4, "r": 0.5})


TRANSLOG_VALUES = dict(a0=0.1, a1=0.3, a2=0.3, a3=0.4, g11=0.1, g12=-0.05, g13=-0.05,
                       g22=0.1, g23=-0.05, g33=0.1, ay=1.0, gyy=0.05, g1y=0.02,
                       g2y=-0.01, g3y=-0.01)


@pytest.fixture(scope="module")
def translog():
    return dy.cost(dy.translog_cost(3, params=TRANSLOG_VALUES))


@pytest.fixture(scope="module")
def translog_with_shares(translog):
    return [translog, dy.shares(translog)]


@pytest.fixture(scope="module")
def normalized_quadratic_with_shares():
    # a negative definite block: concave for all prices (Diewert and Wales 1987, from memory)
    c = dy.cost(dy.normalized_quadratic_cost(3, params=dict(
        b1=0.5, b2=0.8, b3=0.3, s11=-0.4, s12=0.1, s22=-0.3)))
    return [c, dy.shares(c)]


@pytest.fixture(scope="module")
def substitutes():
    # perfect substitutes: cost y*min(a*w1, b*w2), demands by cases
    return dy.technology("x1/a + x2/b", ["x1", "x2"], params={"a": 0.5, "b": 2})


def _points(d, n=7, seed=0):
    rng = np.random.default_rng(seed)
    return {str(a): rng.uniform(0.6, 3.0, n) for a in d.args}


def _import(path: Path, modname: str):
    spec = importlib.util.spec_from_file_location(modname, path)
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


# ----------------------------------------------------------------------------- python

@pytest.mark.parametrize("case", ["cobb_douglas", "ces", "translog_with_shares",
                                  "normalized_quadratic_with_shares", "substitutes"])
def test_python_export_matches_engine(case, request, tmp_path):
    what = request.getfixturevalue(case)
    col = collect(what)
    path = write(what, "python", tmp_path / f"exp_{case}.py", name=f"exp_{case}")
    mod = _import(path, f"exp_{case}")
    assert set(mod.FUNCTIONS) == {it.name for it in col.items}
    for it in col.items:
        pts = _points(it.derived, seed=len(it.name))
        got = mod.FUNCTIONS[it.name](**pts)
        want = it.derived(**pts)
        np.testing.assert_allclose(got, want, rtol=RTOL, atol=0, err_msg=it.name)
        # scalars in, float out, same number
        one = {k: float(v[0]) for k, v in pts.items()}
        assert isinstance(mod.FUNCTIONS[it.name](**one), float)


def test_python_model_exports_every_dual(cobb_douglas, ces):
    names = {it.name for it in collect(cobb_douglas).items}
    assert names == {"cost", "demand_x1", "demand_x2", "profit", "supply_y",
                     "factor_demand_x1", "factor_demand_x2"}
    names = {it.name for it in collect(ces).items}
    assert names == {"indirect_utility", "marshallian_x1", "marshallian_x2",
                     "expenditure", "hicksian_x1", "hicksian_x2"}


def test_python_values_false_takes_every_parameter(cobb_douglas, tmp_path):
    c = dy.cost(cobb_douglas)
    path = write(c, "python", tmp_path / "novals.py", values=False)
    mod = _import(path, "novals")
    pts = _points(c)
    with pytest.raises(TypeError):
        mod.cost(**pts)  # parameters are required
    other = {"A": 1.5, "a": 0.25, "b": 0.6}
    want = c(**pts, **other)
    np.testing.assert_allclose(mod.cost(**pts, **other), want, rtol=RTOL)


def test_python_docstring_has_formula_route_source_values(cobb_douglas):
    text = export(dy.cost(cobb_douglas), "python")
    assert "import numpy as np" in text
    assert "Formula: ``c = " in text and "route: catalogue" in text
    assert "Varian" in text and "A=2.0" in text and "FUNCTIONS = {" in text


def test_model_export_lists_missing_profit():
    crs = dy.technology("x1^a*x2^b", ["x1", "x2"], params={"a": 0.5, "b": 0.5})
    text = export(crs, "python")
    assert "not exported: profit function" in text
    assert "def profit" not in text


# ----------------------------------------------------------------------------- C

_C_MAIN = """
#include <stdio.h>
int main(void)
{{
{body}
    return 0;
}}
"""


def test_c_export_compiles_and_matches(cobb_douglas, substitutes, tmp_path):
    gcc = shutil.which("gcc")
    if gcc is None:
        print("gcc not installed: the C export is not compiled")
        pytest.skip("gcc not installed: the C export is not compiled")
    cases = [("cd", cobb_douglas, True), ("ps", substitutes, False)]
    for tag, what, values in cases:
        col = collect(what)
        header = tmp_path / f"{tag}.h"
        write(what, "c", header, name=tag, values=values)
        calls, expected = [], []
        for it in col.items:
            pts = _points(it.derived, n=4, seed=3)
            want = it.derived(**pts)
            for k in range(4):
                argv = [repr(float(pts[str(a)][k])) for a in it.args]
                extra = [] if values else [repr(float(it.values[s])) for s in it.params]
                calls.append(f'    printf("%.17g\\n", {it.name}({", ".join(argv + extra)}));')
                expected.append(float(want[k]))
        src = tmp_path / f"{tag}_main.c"
        src.write_text(f'#include "{header.name}"\n' + _C_MAIN.format(body="\n".join(calls)))
        exe = tmp_path / f"{tag}_main"
        r = subprocess.run([gcc, "-std=c99", "-Wall", "-Werror", "-O0", str(src), "-o",
                            str(exe), "-lm"], capture_output=True, text=True)
        assert r.returncode == 0, r.stderr
        out = subprocess.run([str(exe)], capture_output=True, text=True, check=True).stdout
        got = [float(v) for v in out.split()]
        np.testing.assert_allclose(got, expected, rtol=RTOL, atol=0, err_msg=tag)


@pytest.mark.parametrize("compiler, flags, suffix", [
    ("gcc", ["-std=c99"], ".c"), ("g++", ["-std=c++17", "-x", "c++"], ".cpp")])
def test_c_header_links_into_two_files_as_c_and_cpp(cobb_douglas, tmp_path, compiler, flags,
                                                     suffix):
    # the header is included by two translation units of one program: every symbol is
    # static (inline), so nothing is defined twice; it also compiles as C++
    cc = shutil.which(compiler)
    if cc is None:
        pytest.skip(f"{compiler} not installed: the C export is not compiled as {suffix}")
    col = collect(cobb_douglas)
    write(cobb_douglas, "c", tmp_path / "cd.h", name="cd")
    it = col.items[0]
    pts = _points(it.derived, n=1, seed=5)
    args = ", ".join(repr(float(pts[str(a)][0])) for a in it.args)
    (tmp_path / f"other{suffix}").write_text(
        f'#include "cd.h"\ndouble from_other(void) {{ return {it.name}({args}); }}\n')
    (tmp_path / f"main{suffix}").write_text(
        '#include <stdio.h>\n#include "cd.h"\ndouble from_other(void);\n'
        f'int main(void) {{ printf("%.17g %.17g\\n", {it.name}({args}), from_other()); '
        'return 0; }\n')
    exe = tmp_path / "two"
    r = subprocess.run([cc, *flags, "-Wall", "-Werror", str(tmp_path / f"main{suffix}"),
                        str(tmp_path / f"other{suffix}"), "-o", str(exe), "-lm"],
                       capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    got = [float(v) for v in subprocess.run([str(exe)], capture_output=True, text=True,
                                            check=True).stdout.split()]
    want = float(it.derived(**pts)[0])
    np.testing.assert_allclose(got, [want, want], rtol=RTOL, atol=0)


@pytest.mark.parametrize("target, name", [
    # <math.h> macros and C++ keywords in C headers; keywords of Julia, Octave and Stata
    # (sources named beside each list in duality/apply/export/code.py)
    ("c", "FP_NAN"), ("c", "HUGE_VALF"), ("c", "M_PI"), ("c", "M_E"), ("c", "bool"),
    ("c", "class"), ("c", "sinf"), ("c", "isnan"), ("julia", "in"), ("julia", "isa"),
    ("julia", "where"), ("octave", "endif"), ("octave", "endfor"), ("octave", "parfor"),
    ("octave", "classdef"), ("stata", "str1"), ("stata", "str2045"), ("stata", "strL"),
])
def test_names_a_target_reserves_are_refused_by_name(target, name):
    m = dy.technology("x1^0.3*x2^0.5", ["x1", "x2"], prices=[name, "w2"])
    with pytest.raises(DualityError, match=rf"the {target} export cannot use the name "
                                           rf"'{name}': it is a reserved word"):
        export(dy.cost(m), target)
    # the same model exports to JSON (which writes formula text: Python keywords excepted)
    if not keyword.iskeyword(name):
        assert f'"{name}"' in export(dy.cost(m), "json")


def test_c_constant_names_cannot_become_math_macros():
    # name "M" and parameter "PI" would make the constant M_PI, a <math.h> macro
    m = dy.technology("PI*x1^0.3*x2^0.5", ["x1", "x2"], params={"PI": 2.0})
    with pytest.raises(DualityError, match="'M_PI'"):
        export(dy.cost(m), "c", name="M")


# ----------------------------------------------------------------------------- R

def test_r_export_runs_and_matches(cobb_douglas, substitutes, tmp_path):
    rscript = shutil.which("Rscript")
    if rscript is None:
        pytest.skip("Rscript not installed: the R export is run only where it is installed "
                    "(install r-base-core to run this test)")
    for tag, what in (("cd", cobb_douglas), ("ps", substitutes)):
        col = collect(what)
        path = write(what, "r", tmp_path / f"{tag}.R", name=tag)
        lines = [f'source("{path.as_posix()}")', "options(digits = 17)"]
        expected = []
        for it in col.items:
            pts = _points(it.derived, n=5, seed=4)
            args = ", ".join(f"{k} = c({', '.join(repr(float(v)) for v in pts[k])})"
                             for k in pts)
            lines.append(f'cat(sprintf("%.17g", {it.name}({args})), sep = "\\n")')
            lines.append('cat("\\n")')
            expected.extend(np.asarray(it.derived(**pts), dtype=float).tolist())
        script = tmp_path / f"{tag}_run.R"
        script.write_text("\n".join(lines) + "\n")
        r = subprocess.run([rscript, str(script)], capture_output=True, text=True)
        assert r.returncode == 0, r.stderr
        got = [float(v) for v in r.stdout.split()]
        np.testing.assert_allclose(got, expected, rtol=1e-10, atol=0, err_msg=tag)


# ----------------------------------------------------------------------------- JSON

@pytest.mark.parametrize("case", ["cobb_douglas", "ces", "translog_with_shares"])
def test_json_round_trip(case, request):
    what = request.getfixturevalue(case)
    col = collect(what)
    back = load_json(export(what, "json"))
    assert set(back["functions"]) == {it.name for it in col.items}
    for it in col.items:
        f = back["functions"][it.name]
        pts = _points(it.derived, seed=11)
        np.testing.assert_allclose(f(**pts), it.derived(**pts), rtol=RTOL, atol=0,
                                   err_msg=it.name)
        prov = back["provenance"][it.name]
        assert prov["route"] == it.derived.route
        assert prov["source"] == it.derived.source
        assert f.kind == it.derived.kind and tuple(map(str, f.args)) == tuple(
            map(str, it.derived.args))
    for p, v in col.params.items():
        assert back["params"][p.name] == v


def test_json_schema_fields(cobb_douglas):
    doc = json.loads(export(cobb_douglas, "json"))
    assert doc["format"] == "duality-export" and doc["version"] == 1
    assert doc["model"]["role"] == "technology"
    assert doc["model"]["formula"] == "A*x1**a*x2**b"
    assert {p["name"]: p["value"] for p in doc["model"]["parameters"]} == {
        "A": 2.0, "a": 0.3, "b": 0.5}
    assert doc["functions"]["cost"]["kind"] == "cost"


def test_load_json_never_evaluates_code():
    doc = {"format": "duality-export", "version": 1, "params": {},
           "functions": {"cost": {"kind": "cost", "args": ["w1"],
                                  "expr": "__import__('os').system('echo hi')",
                                  "route": "symbolic", "method": ""}}}
    with pytest.raises(DualityError):
        load_json(json.dumps(doc))


def test_json_refuses_cases(substitutes):
    with pytest.raises(DualityError, match=r"json.*Piecewise"):
        export(substitutes, "json")


# ----------------------------------------------------------------------------- snapshots

@pytest.fixture(scope="module")
def small_cost():
    m = dy.technology("A*x1^a*x2^b", ["x1", "x2"], params={"A": 2, "a": 0.3, "b": 0.5})
    return dy.cost(m)


@pytest.mark.parametrize("target", ["julia", "octave", "stata", "latex"])
def test_snapshot(target, small_cost):
    text = export(small_cost, target, name="cd")
    path = SNAPSHOTS / f"{target}.txt"
    if os.environ.get("DUALITY_UPDATE_SNAPSHOTS") == "1":
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(text, encoding="utf-8")
    assert path.exists(), f"no snapshot {path}; run with DUALITY_UPDATE_SNAPSHOTS=1"
    assert text == path.read_text(encoding="utf-8")


def test_octave_cases_select_not_mask(substitutes):
    text = export(substitutes, "octave")
    assert "dy_ifelse(" in text and "function r = dy_ifelse" in text
    assert ".*(~(" not in text


def test_latex_document(cobb_douglas):
    text = export(cobb_douglas, "latex-document")
    assert text.startswith("\\documentclass{article}") and text.rstrip().endswith(
        "\\end{document}")
    for part in ("\\section{Model}", "\\section{Cost function}", "\\section{Profit function}",
                 "Route: \\emph{catalogue}", "Varian", "\\section{Parameters}",
                 "Conditional input demand x1"):
        assert part in text


def test_latex_snippet_one_equation_per_function(cobb_douglas):
    text = export(dy.cost(cobb_douglas), "latex")
    assert text.count("\\begin{equation}") == 3
    assert "c(w_{1}, w_{2}, y) = " in text


# ----------------------------------------------------------------------------- strictness

def test_stata_refuses_min_and_cases(substitutes):
    with pytest.raises(DualityError, match=r"stata.*min"):
        export(dy.cost(substitutes), "stata")
    with pytest.raises(DualityError, match=r"stata.*Piecewise"):
        export(dy.cost(substitutes).demands["x1"], "stata")


def test_stata_parameters_braced(small_cost):
    text = export(small_cost, "stata", values=False)
    assert "nl (cost = " in text and "{A}" in text and "{A=" not in text
    text = export(small_cost, "stata")
    assert "{A=2.0}" in text


def test_numeric_only_has_no_closed_form():
    d = dy.cost(dy.technology("x1^0.3*x2^0.5 + log(1 + x1)", ["x1", "x2"]), budget=0.5)
    assert d.expr is None
    with pytest.raises(DualityError, match="no closed form"):
        export(d, "python")


def test_unknown_target_lists_targets(small_cost):
    with pytest.raises(DualityError) as exc:
        export(small_cost, "fortran")
    for t in TARGETS:
        assert t in str(exc.value)


def test_reserved_names_refused():
    m = dy.technology("x1^0.3*x2^0.5", ["x1", "x2"], prices=["double", "w2"])
    with pytest.raises(DualityError, match=r"c export.*double"):
        export(dy.cost(m), "c")


# ----------------------------------------------------------------------------- write

def test_write_is_atomic(small_cost, tmp_path, monkeypatch):
    path = tmp_path / "out.py"
    path.write_text("old contents\n")

    def broken(what, *, name, values=True):
        raise RuntimeError("exporter failed mid-way")

    monkeypatch.setitem(TARGETS, "python", broken)
    with pytest.raises(RuntimeError):
        write(small_cost, "python", path)
    monkeypatch.undo()
    assert path.read_text() == "old contents\n"
    assert os.listdir(tmp_path) == ["out.py"]

    def no_sync(fd):
        raise OSError("disk full")

    monkeypatch.setattr(os, "fsync", no_sync)
    with pytest.raises(DualityError, match=r"out\.py: could not write \(disk full\); the "
                                           "previous file is unchanged"):
        write(small_cost, "python", path)
    monkeypatch.undo()
    assert path.read_text() == "old contents\n"
    assert os.listdir(tmp_path) == ["out.py"]

    write(small_cost, "python", path)
    assert path.read_text().startswith('"""model: Python')
    assert os.listdir(tmp_path) == ["out.py"]


# ----------------------------------------------------------------------------- bundle

def test_bundle_translog(translog):
    doc = json.loads(export(translog, "bundle", columns={"w1": "price_labour"}))
    assert doc["format"] == "duality-estimation-bundle"
    assert [e["function"] for e in doc["equations"]] == ["share_x1", "share_x2"]
    assert doc["dropped"]["function"] == "share_x3"
    assert "add up to one" in doc["dropped"]["reason"]
    assert {p["name"] for p in doc["parameters"]} == set(TRANSLOG_VALUES)
    assert doc["columns"]["w1"] == "price_labour" and doc["columns"]["w2"] == "w2"
    assert doc["equations"][0]["dependent"] == "s_x1"
    eqs = {(r["lhs"], r["rhs"]) for r in doc["restrictions"]}
    assert ("a1 + a2 + a3", "1") in eqs
    assert ("g11 + g12 + g13", "0") in eqs
    assert all(r["kind"] in ("homogeneity", "adding-up", "symmetry")
               for r in doc["restrictions"])
    # equations evaluate to the engine's shares
    back = load_json(json.dumps(doc))
    shares = dy.shares(translog)
    for q in ("x1", "x2", "x3"):
        pts = _points(shares[q], seed=5)
        np.testing.assert_allclose(back["functions"][f"share_{q}"](**pts), shares[q](**pts),
                                   rtol=RTOL, atol=0)
    assert doc["adding_up_at_values"] is True


def test_bundle_rejects_unknown_column(translog):
    with pytest.raises(DualityError, match="unknown name"):
        export(translog, "bundle", columns={"price": "w"})


def test_options_only_for_bundle(small_cost):
    with pytest.raises(DualityError, match="takes no option"):
        export(small_cost, "python", columns={"w1": "x"})


def test_bundle_marks_fixed_parameters_and_gives_aids_marshallian_shares():
    import json as _json
    vals = dict(a0=0, a1=.3, a2=.45, a3=.25, g11=.08, g12=-.05, g13=-.03, g22=.09, g23=-.04,
                g33=.07, b0=1, b1=.05, b2=-.08, b3=.03)
    m = dy.aids_expenditure(3, params=vals)
    doc = _json.loads(dy.export.export(m, "bundle", name="aids", fixed={"a0": 0, "b0": 1}))
    par = {p["name"]: p for p in doc["parameters"]}
    assert par["a0"]["fixed"] and par["a0"]["value"] == 0 and par["a0"]["start"] is None
    assert not par["a1"]["fixed"] and par["a1"]["start"] == 0.3
    # Marshallian budget shares in prices and total expenditure, no utility
    # (Deaton and Muellbauer 1980, from memory): w_i = a_i + Σ_j g_ij ln p_j + b_i ln(m/P)
    assert "u" not in doc["columns"] and "m" in doc["columns"]
    text = doc["equations"][0]["expr"]
    assert "log(m)" in text and "u" not in {s.name for s in dy.parse(text).free_symbols}
    assert doc["adding_up_at_values"] is True
    with pytest.raises(dy.DualityError, match="fixed parameter zz"):
        dy.export.export(m, "bundle", name="aids", fixed={"zz": 0})


def test_bundle_holds_the_estimating_equations_with_theory_imposed():
    import json as _json
    m = dy.translog_cost(["pl", "pk", "pf"], quantities=["L", "K", "F"], output="q")
    doc = _json.loads(dy.export.export(m, "bundle", name="tl", fixed={"gyy": 0}))
    est = doc["estimating_equations"]
    assert [e["name"] for e in est["equations"]] == ["ln c", "share L", "share K"]
    assert est["dropped"] == "share F" and est["fixed"] == {"gyy": 0.0}
    # homogeneity (Christensen, Jorgenson and Lau 1973, from memory): a3 = 1 − a1 − a2
    assert dy.parse(est["eliminated"]["a3"]) == dy.parse("1 - a1 - a2")
    names = {s.name for e in est["equations"] for s in dy.parse(e["rhs"]).free_symbols}
    assert "a3" not in names and "gyy" not in names and "a1" in names
    assert est["equations"][1]["dependent"] == "s_L"


def test_estimating_equations_export_as_code(tmp_path):
    """export(model, target, equations=True): the equations duality.estimate fits, with the
    restrictions imposed; the Python module reproduces them and the cost stays finite for a
    negative coefficient (written as exp of its log)."""
    from duality.apply.estimation.equations import derive_system
    m = dy.translog_cost(["pl", "pk", "pf"], quantities=["L", "K", "F"], output="q")
    path = tmp_path / "tl_eq.py"
    write(m, "python", path, name="tl", equations=True, fixed={"gyy": 0})
    mod = _import(path, "tl_eq")
    assert list(mod.FUNCTIONS) == ["cost_equation", "share_L_equation", "share_K_equation"]
    system = derive_system(m, equations="cost+shares", shares=["L", "K", "F"],
                           fixed={"gyy": 0})
    rng = np.random.default_rng(5)
    point = {"pl": 1.3, "pk": 0.7, "pf": 2.1, "q": 4.0}
    theta = {p.name: float(rng.uniform(-0.3, 0.3)) for p in system.free}
    sub = {**{sp_sym: point[sp_sym.name] for sp_sym in system.data.values()
              if sp_sym.name in point},
           **{p: theta[p.name] for p in system.free}}
    for (fname, fn), eq in zip(mod.FUNCTIONS.items(), system.equations):
        kw = {k: v for k, v in {**point, **theta}.items()
              if k in fn.__code__.co_varnames[:fn.__code__.co_argcount]}
        got = fn(**kw)
        want = float(eq.rhs.xreplace(sub))
        got = np.log(got) if fname == "cost_equation" else got
        assert got == pytest.approx(want, rel=1e-12), fname
    cd = dy.cost_function("exp(b0)*q^bq*pl^bl*pk^bk*pf^bf", ["pl", "pk", "pf"], output="q",
                          params=dict.fromkeys(["b0", "bq", "bl", "bk", "bf"]))
    path = tmp_path / "cd_eq.py"
    write(cd, "python", path, name="cd", equations=True)
    cd_mod = _import(path, "cd_eq")
    v = cd_mod.cost_equation(pl=1.2, pk=0.8, pf=2.0, q=10.0, b0=-4.7, bq=0.72, bl=0.59,
                             bk=-0.0085)
    assert np.isfinite(v) and v > 0
    stata = export(m, "stata", name="tl", equations=True)
    assert "nl (c = pf*exp(" in stata and "nl (s_L = {a1}" in stata
    for target in ("r", "julia", "octave", "latex", "json", "c"):
        assert "share_L_equation" in export(m, target, name="tl", equations=True)
    with pytest.raises(DualityError, match="give equations=True"):
        export(m, "python", name="tl", fixed={"a0": 1})


def test_bundle_symmetric_generalized_mcfadden():
    c = dy.cost(dy.symmetric_generalized_mcfadden_cost(3, params=dict(
        b1=0.5, b2=0.8, b3=0.3, s11=-0.4, s12=0.1, s22=-0.3, c1=0.2, c2=0.1, c3=0.05,
        byy=0.04)))
    doc = json.loads(export(c, "bundle"))
    assert [e["function"] for e in doc["equations"]] == ["share_x1", "share_x2"]
    # homogeneity and S w* = 0 are built into the form: nothing left to restrict
    assert doc["restrictions"] == []
    back = load_json(json.dumps(doc))
    shares = dy.shares(c)
    for q in ("x1", "x2", "x3"):
        pts = _points(shares[q], seed=7)
        np.testing.assert_allclose(back["functions"][f"share_{q}"](**pts), shares[q](**pts),
                                   rtol=RTOL, atol=0)

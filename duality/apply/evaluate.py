"""Evaluating derived functions on data: arrays, DataFrames, dask, files larger than memory.

:func:`evaluate` takes derived functions (a dual, its demands, or a whole model) and a
table of prices and levels, and returns one column per function.  Closed forms run as
lambdified numpy code with common subexpressions shared, on contiguous float arrays;
numeric duals run through the batched solver.  The same evaluation maps over a dask
DataFrame (:func:`evaluate_dask`) and over CSV or Parquet files chunk by chunk with a
progress bar (:func:`evaluate_file`), writing the output atomically.
"""
from __future__ import annotations

import os
import warnings
from pathlib import Path
from typing import Iterable, Mapping

import numpy as np
import pandas as pd
from tqdm import tqdm

from ..errors import DualityError, number_file_rows, row_label
from .files import atomic_path
from ..model.base import Model
from ..solve.derive import cost, indirect_utility
from ..solve.result import Derived, NumericWarning


def functions_of(what) -> dict[str, Derived]:
    """Name -> derived function for a Derived (with its demands), a list, a dict or a Model.

    A dual contributes itself under its kind (``cost``, ``profit``...) and its demands under
    ``<quantity>``; profit's supply appears under the output's name.  A model contributes
    its cost function (technology) or indirect utility function (preference), with demands.
    """
    if isinstance(what, Derived):
        out = {what.kind if what.kind not in _DEMANDS else what.name: what}
        if what.demand_factory is not None:
            out.update(what.demands)
        return out
    if isinstance(what, Model):
        return functions_of(cost(what) if what.is_technology else indirect_utility(what))
    if isinstance(what, Mapping):
        bad = [k for k, v in what.items() if not isinstance(v, Derived)]
        if bad:
            raise DualityError(f"entries {bad} are not derived functions")
        return dict(what)
    if isinstance(what, Iterable):
        out = {}
        for d in what:
            out.update(functions_of(d))
        return out
    raise DualityError(f"cannot evaluate a {type(what).__name__}; give a derived function, "
                       "a list or dict of them, or a model")


_DEMANDS = ("conditional_demand", "factor_demand", "marshallian_demand", "hicksian_demand",
            "supply", "share")


def _needed(fns: Mapping[str, Derived]) -> list[str]:
    names: list[str] = []
    for d in fns.values():
        for a in d.args:
            if str(a) not in names:
                names.append(str(a))
    return names


def evaluate(what, data, *, columns: Mapping[str, str] | None = None):
    """Evaluate derived functions on a table.

    Parameters
    ----------
    what : Derived, list or dict of Derived, or Model
        The functions (see :func:`functions_of`).
    data : pandas.DataFrame or mapping of arrays
        One row per point.
    columns : mapping, optional
        Argument or parameter name -> column name, where they differ.

    Returns
    -------
    pandas.DataFrame (same index) when ``data`` is a DataFrame, else a dict of arrays.

    Raises
    ------
    DualityError
        A missing column (named), a non-numeric or non-positive value (row named).
    """
    fns = functions_of(what)
    columns = dict(columns or {})
    is_frame = _is_frame(data)
    arrays = {}
    for name in _needed(fns) + _param_names(fns):
        col = columns.get(name, name)
        if col not in data:
            if name in _param_names(fns) and name not in columns:
                continue  # parameters with values need no column
            have = ", ".join(map(str, list(data.columns if is_frame else data)[:12]))
            raise DualityError(f"no column '{col}' for argument '{name}'; the data has "
                               f"{have}")
        arrays[name] = _column(data, col, name)
    positive = {str(a) for d in fns.values() for a in d.positive_args}
    for name in positive & set(arrays):
        bad = np.flatnonzero(~(arrays[name] > 0))
        if bad.size:
            col = columns.get(name, name)
            raise DualityError(f"column '{col}' ({name}) must be positive; row "
                               f"{_row_label(data, bad[0])} holds {arrays[name][bad[0]]:g}")
    out = {}
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", NumericWarning)
        for key, d in fns.items():
            kw = {str(a): arrays[str(a)] for a in d.args}
            kw.update({str(s): arrays[str(s)] for s in d.free_params if str(s) in arrays})
            out[key] = np.asarray(d(**kw), dtype=float)
    if caught:
        # one warning counting every row with a NaN in any column, with each reason once
        nrows = len(data.index) if is_frame else max(
            (np.size(a) for a in arrays.values()), default=1)
        bad = np.zeros(nrows, dtype=bool)
        for v in out.values():
            bad |= np.broadcast_to(np.isnan(v), bad.shape) if np.ndim(v) else np.isnan(v)
        reasons = list(dict.fromkeys(str(w.message) for w in caught))
        warnings.warn(f"{int(bad.sum())} of {nrows} row(s) have no value in at least one "
                      f"column (returned as NaN): " + "; ".join(reasons),
                      NumericWarning, stacklevel=2)
    if is_frame:
        return pd.DataFrame(out, index=data.index)
    return out


def _param_names(fns) -> list[str]:
    names = []
    for d in fns.values():
        for s in d.free_params:
            if str(s) not in names:
                names.append(str(s))
    return names


def _is_frame(data) -> bool:
    return type(data).__name__ == "DataFrame" and hasattr(data, "columns")


def _column(data, col: str, name: str) -> np.ndarray:
    values = data[col]
    arr = values.to_numpy() if hasattr(values, "to_numpy") else np.asarray(values)
    try:
        arr = np.ascontiguousarray(arr, dtype=float)
    except (TypeError, ValueError):
        bad = _first_non_numeric(arr)
        raise DualityError(f"column '{col}' ({name}) is not numeric: row "
                           f"{_row_label(data, bad[0])} holds {bad[1]!r}") from None
    nan = np.flatnonzero(~np.isfinite(arr))
    if nan.size:
        raise DualityError(f"column '{col}' ({name}) has a missing or infinite value in row "
                           f"{_row_label(data, nan[0])}")
    return arr


def _row_label(data, i: int):
    return row_label(data, i) if _is_frame(data) else i + 1


def _first_non_numeric(arr):
    for i, v in enumerate(arr):
        try:
            float(v)
        except (TypeError, ValueError):
            return i, v
    return 0, None


# -- dask ------------------------------------------------------------------------------------
def evaluate_dask(what, ddf, *, columns: Mapping[str, str] | None = None):
    """The same evaluation over a dask DataFrame, partition by partition (lazy).

    The functions travel to the workers as expressions and are compiled there once.
    """
    fns = functions_of(what)
    meta = pd.DataFrame({k: pd.Series(dtype=float) for k in fns})
    return ddf.map_partitions(_evaluate_partition, fns, dict(columns or {}), meta=meta)


def _evaluate_partition(df, fns, columns):
    return evaluate(fns, df, columns=columns)


# -- files -------------------------------------------------------------------------------------
def evaluate_file(what, source: str | os.PathLike, target: str | os.PathLike, *,
                  columns: Mapping[str, str] | None = None, chunksize: int = 200_000,
                  keep: Iterable[str] = (), progress: bool = True) -> int:
    """Evaluate on a CSV or Parquet file chunk by chunk and write the result file.

    The input never has to fit in memory.  Rows in messages are the file's own rows as
    a spreadsheet numbers them (the header line is row 1).  The output (CSV or Parquet, by its suffix)
    holds the ``keep`` input columns and one column per function; it is written to a
    temporary file in the same folder and renamed only when complete, so an interrupted
    run leaves any earlier file of that name untouched.  Returns the number of rows.
    """
    source, target = Path(source), Path(target)
    if not source.exists():
        raise DualityError(f"input file {source} does not exist")
    if source.resolve() == target.resolve():
        raise DualityError("the output file must differ from the input file")
    if not target.parent.is_dir():
        raise DualityError(f"cannot write {target}: folder {target.parent} does not exist")
    kind_in, kind_out = _file_kind(source), _file_kind(target)
    fns = functions_of(what)
    keep = list(keep)
    total = _count_rows(source, kind_in)
    bar = _progress(total, progress, f"evaluating {source.name}")
    rows = 0
    writer = None
    try:
        with atomic_path(target) as tmp:
            try:
                for start, chunk in _chunks(source, kind_in, chunksize):
                    missing = [c for c in keep if c not in chunk.columns]
                    if missing:
                        raise DualityError(f"column(s) {', '.join(missing)} to keep are not "
                                           f"in {source.name}")
                    try:
                        res = evaluate(fns, chunk, columns=columns)
                    except DualityError as exc:
                        raise DualityError(f"{source.name}, rows {start + 2}–"
                                           f"{start + len(chunk) + 1}: {exc}") from None
                    out = pd.concat([chunk[keep].reset_index(drop=True),
                                     res.reset_index(drop=True)], axis=1)
                    writer = _write_chunk(out, tmp, kind_out, writer, first=rows == 0)
                    rows += len(chunk)
                    bar.update(len(chunk))
                if rows == 0 and writer is None:
                    pd.DataFrame(columns=keep + list(fns)).to_csv(tmp, index=False)
            finally:
                if writer is not None and kind_out == "parquet":
                    writer.close()
    finally:
        bar.close()
    return rows


def _file_kind(path: Path) -> str:
    suf = path.suffix.lower()
    if suf in (".csv", ".txt"):
        return "csv"
    if suf in (".parquet", ".pq"):
        return "parquet"
    raise DualityError(f"{path.name}: unknown file type '{suf}'; use .csv or .parquet")


def _count_rows(path: Path, kind: str) -> int | None:
    if kind == "parquet":
        import pyarrow.parquet as pq  # deferred: optional dependency (the 'scale' extra)
        return pq.ParquetFile(path).metadata.num_rows
    with open(path, "rb") as fh:
        return max(sum(buf.count(b"\n") for buf in iter(lambda: fh.read(1 << 20), b"")) - 1,
                   0)


def _chunks(path: Path, kind: str, chunksize: int):
    start = 0
    if kind == "parquet":
        import pyarrow.parquet as pq  # deferred: optional dependency (the 'scale' extra)
        for batch in pq.ParquetFile(path).iter_batches(batch_size=chunksize):
            df = number_file_rows(batch.to_pandas(), start)
            yield start, df
            start += len(df)
        return
    for df in pd.read_csv(path, chunksize=chunksize):
        yield start, number_file_rows(df, start)
        start += len(df)


def _write_chunk(df, tmp, kind, writer, first):
    if kind == "csv":
        df.to_csv(tmp, mode="w" if first else "a", header=first, index=False)
        return writer
    import pyarrow as pa  # deferred: optional dependency (the 'scale' extra)
    import pyarrow.parquet as pq  # deferred: optional dependency
    table = pa.Table.from_pandas(df, preserve_index=False)
    if writer is None:
        writer = pq.ParquetWriter(tmp, table.schema)
    writer.write_table(table)
    return writer


class _NoBar:
    def update(self, n):
        pass

    def close(self):
        pass


def _progress(total, enabled: bool, desc: str):
    if not enabled:
        return _NoBar()
    return tqdm(total=total, desc=desc, unit="rows", unit_scale=True, leave=False)


__all__ = ["evaluate", "evaluate_dask", "evaluate_file", "functions_of"]

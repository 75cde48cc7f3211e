"""Evaluation on tables, dask DataFrames and files."""
from __future__ import annotations

import os
import warnings

import numpy as np
import pandas as pd
import pytest

import duality as dy
from duality.apply.evaluate import evaluate, evaluate_dask, evaluate_file


@pytest.fixture
def frame(rng):
    n = 500
    return pd.DataFrame({"w1": rng.uniform(0.5, 2, n), "w2": rng.uniform(0.5, 2, n),
                         "y": rng.uniform(1, 3, n)}, index=pd.RangeIndex(100, 100 + n))


@pytest.fixture(scope="module")
def closed():
    return dy.cost(dy.technology("A*x1^a*x2^b", ["x1", "x2"],
                                 params={"A": 2, "a": 0.3, "b": 0.5}))


@pytest.fixture(scope="module")
def numeric():
    c = dy.cost(dy.technology("x1^0.3*x2^0.5 + log(1 + x1)", ["x1", "x2"]), budget=1)
    assert c.route == "numeric"
    return c


def test_dataframe_in_dataframe_out(frame, closed):
    out = evaluate(closed, frame)
    assert list(out.columns) == ["cost", "x1", "x2"]
    assert out.index.equals(frame.index)
    direct = closed(w1=frame.w1.to_numpy(), w2=frame.w2.to_numpy(), y=frame.y.to_numpy())
    assert np.array_equal(out["cost"].to_numpy(), direct)


def test_column_mapping_and_a_whole_model(frame):
    pref = dy.preference("x1^0.3*x2^0.7", ["x1", "x2"])
    data = pd.DataFrame({"price_a": frame.w1, "price_b": frame.w2, "budget": 10 * frame.y})
    out = evaluate(pref, data, columns={"p1": "price_a", "p2": "price_b", "m": "budget"},)
    # Marshallian x1 = 0.3 m / p1 (Varian 1992, ch. 7; from memory)
    assert np.allclose(out["x1"], 0.3 * data.budget / data.price_a, rtol=1e-13)
    assert list(out.columns) == ["indirect_utility", "x1", "x2"]


@pytest.mark.parametrize("change, message", [
    (lambda d: d.drop(columns="w2"), "no column 'w2' for argument 'w2'"),
    (lambda d: d.assign(y=d.y.astype(object).where(d.index != 103, "n/a")),
     r"column 'y' \(y\) is not numeric: row 103 holds 'n/a'"),
    (lambda d: d.assign(w1=d.w1.where(d.index != 104)), "missing or infinite value in row 104"),
    (lambda d: d.assign(w1=d.w1.where(d.index != 105, -1.0)),
     r"column 'w1' \(w1\) must be positive; row 105 holds -1"),
])
def test_bad_tables_name_the_column_and_row(frame, closed, change, message):
    with pytest.raises(dy.DualityError, match=message):
        evaluate(closed, change(frame))


def test_numeric_duals_evaluate_on_tables(frame, numeric):
    out = evaluate(numeric, frame.head(50))
    assert np.all(np.isfinite(out.to_numpy()))
    # the demands are the cost minimisers: w·x = c (common practice, no source)
    assert np.allclose(out.x1 * frame.w1.head(50) + out.x2 * frame.w2.head(50), out.cost,
                       rtol=1e-12)


def test_dask_path_equals_in_memory_path_on_a_local_cluster(frame, closed, numeric):
    dd = pytest.importorskip("dask.dataframe")
    distributed = pytest.importorskip("dask.distributed")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  host="127.0.0.1", dashboard_address=None) as cluster, \
            distributed.Client(cluster):
        ddf = dd.from_pandas(frame, npartitions=4)
        got = evaluate_dask(closed, ddf).compute()
        got_num = evaluate_dask(numeric, dd.from_pandas(frame.head(40), npartitions=2)).compute()
    pd.testing.assert_frame_equal(got, evaluate(closed, frame))
    pd.testing.assert_frame_equal(got_num, evaluate(numeric, frame.head(40)), rtol=1e-12)


@pytest.mark.parametrize("suffix", [".csv", ".parquet"])
def test_chunked_file_evaluation_equals_in_memory(tmp_path, frame, closed, suffix):
    src = tmp_path / "prices.csv"
    frame.to_csv(src, index=False)
    dst = tmp_path / f"costs{suffix}"
    rows = evaluate_file(closed, src, dst, chunksize=64, keep=["y"], progress=False)
    assert rows == len(frame)
    back = pd.read_csv(dst) if suffix == ".csv" else pd.read_parquet(dst)
    want = evaluate(closed, frame).reset_index(drop=True)
    assert np.allclose(back["cost"], want["cost"], rtol=1e-15)
    assert np.allclose(back["y"], frame.y.to_numpy())


def test_interrupted_file_evaluation_keeps_the_old_output(tmp_path, frame, closed):
    src = tmp_path / "prices.csv"
    bad = frame.copy()
    bad.loc[450, "w1"] = -3.0                      # a bad row in a late chunk
    bad.to_csv(src, index=False)
    dst = tmp_path / "costs.csv"
    dst.write_text("earlier results\n")
    # rows as a spreadsheet shows the file: the header is row 1, data position 350 row 352
    with pytest.raises(dy.DualityError, match=r"prices.csv, rows 322–385: column 'w1' \(w1\) "
                       r"must be positive; row 352 holds -3"):
        evaluate_file(closed, src, dst, chunksize=64, progress=False)
    assert dst.read_text() == "earlier results\n"
    assert sorted(os.listdir(tmp_path)) == ["costs.csv", "prices.csv"]  # no temporary left


def test_file_errors(tmp_path, closed):
    with pytest.raises(dy.DualityError, match="does not exist"):
        evaluate_file(closed, tmp_path / "none.csv", tmp_path / "out.csv")
    (tmp_path / "a.xlsx").write_text("x")
    with pytest.raises(dy.DualityError, match="unknown file type"):
        evaluate_file(closed, tmp_path / "a.xlsx", tmp_path / "out.csv")


def test_long_columns_are_evaluated_block_by_block_with_the_same_numbers(rng):
    # Cobb–Douglas cost, written out (Varian, Microeconomic Analysis, 3rd ed. 1992, ch. 4;
    # from memory); 3 blocks and a remainder, one scalar argument broadcast
    from duality.solve.result import EVAL_BLOCK
    t = dy.technology("A*x1^a*x2^b", ["x1", "x2"], params={"A": 2, "a": 0.3, "b": 0.5})
    c = dy.cost(t)
    n = 3 * EVAL_BLOCK + 7
    w1, w2 = rng.uniform(0.5, 2, n), rng.uniform(0.5, 2, n)
    k = 0.8
    expect = k * (4.0 / 2) ** (1 / k) * (w1 / 0.3) ** (0.3 / k) * (w2 / 0.5) ** (0.5 / k)
    np.testing.assert_allclose(c(w1=w1, w2=w2, y=4.0), expect, rtol=1e-13)
    # a 2-D argument is evaluated in one call, same numbers
    got = c(w1=w1[:2 * EVAL_BLOCK].reshape(2, -1), w2=w2[:2 * EVAL_BLOCK].reshape(2, -1), y=4.0)
    np.testing.assert_allclose(got.reshape(-1), expect[:2 * EVAL_BLOCK], rtol=1e-13)
    # a bad value far into the column is still named
    w1[-1] = -1.0
    with pytest.raises(dy.DualityError, match="w1 must be positive"):
        c(w1=w1, w2=w2, y=4.0)


def test_the_warning_counts_every_row_without_a_value():
    # u = log(x1 − 2) + 0.5 log x2 + √x3 at p = (1, 1, 1): incomes 1.5 and 1.9 do not buy the
    # subsistence bundle (p1·2 = 2), so those two rows have no demands; the other three
    # are interior (the demands solve a quadratic in 1/λ by hand: at m = 6, x = (4, 1, 1))
    u = dy.preference("log(x1-2) + 0.5*log(x2) + x3^0.5", ["x1", "x2", "x3"])
    v = dy.indirect_utility(u, budget=30)
    df = pd.DataFrame({"p1": 1.0, "p2": 1.0, "p3": 1.0, "m": [1.5, 2.5, 6.0, 1.9, 3.0]})
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", dy.NumericWarning)
        out = dy.evaluate(v, df)
    msgs = [str(w.message) for w in caught if issubclass(w.category, dy.NumericWarning)]
    assert len(msgs) == 1 and msgs[0].startswith("2 of 5 row(s)")
    assert out["x1"].isna().tolist() == [True, False, False, True, False]
    assert out.loc[2, ["x1", "x2", "x3"]].tolist() == pytest.approx([4.0, 1.0, 1.0], rel=1e-9)

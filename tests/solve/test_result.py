"""Derived functions (:mod:`duality.solve.result`): evaluation at points and arrays against
the closed form written out here, validity regions, clear errors, display and pickling."""
from __future__ import annotations

import pickle
import warnings

import numpy as np
import pytest
import sympy as sp

from duality.errors import DomainError, DualityError
from duality.solve import result
from duality.solve.result import ROUTES, Derived, NumericWarning

w1, w2, y = sp.symbols("w1 w2 y", positive=True)
A = sp.Symbol("A", positive=True)

# Cobb–Douglas y = A x1^½ x2^½: c = 2 y (w1 w2)^½ / A, x1 = y (w2/w1)^½ / A
# (Varian, Microeconomic Analysis, 3rd ed. (1992), ch. 4; from memory)
CD = 2 * y * sp.sqrt(w1 * w2) / A


def cd_cost(w1_, w2_, y_, A_=2.0):
    return 2 * y_ * np.sqrt(w1_ * w2_) / A_


def _cost(**kw) -> Derived:
    base = dict(kind="cost", args=(w1, w2, y), expr=CD, route="catalogue",
                method="Cobb–Douglas", params={A: 2.0}, positive_args=frozenset({w1, w2, y}))
    base.update(kw)
    return Derived(**base)


def test_scalar_and_array_evaluation_match_the_closed_form(rng):
    c = _cost()
    got = c(w1=1.5, w2=0.6, y=3.0)
    assert isinstance(got, float)
    assert got == pytest.approx(cd_cost(1.5, 0.6, 3.0), rel=1e-14)
    W1, W2 = np.exp(rng.uniform(-1, 1, 7)), np.exp(rng.uniform(-1, 1, (3, 1)))
    out = c(w1=W1, w2=W2, y=2.0)          # broadcasts to (3, 7)
    assert out.shape == (3, 7)
    assert np.allclose(out, cd_cost(W1, W2, 2.0), rtol=1e-14)


def test_long_arrays_are_evaluated_block_by_block_with_the_same_answer(rng):
    c = _cost()
    n = 2 * result.EVAL_BLOCK + 17
    W1, W2 = np.exp(rng.uniform(-1, 1, n)), np.exp(rng.uniform(-1, 1, n))
    assert np.allclose(c(w1=W1, w2=W2, y=1.5), cd_cost(W1, W2, 1.5), rtol=1e-14)


def test_a_free_parameter_is_given_by_keyword_or_named_when_missing():
    c = _cost(params={})
    assert c.free_params == (A,)
    assert c(w1=1.0, w2=4.0, y=1.0, A=0.5) == pytest.approx(8.0, rel=1e-14)
    with pytest.raises(DualityError, match="no value for parameter.s. A"):
        c(w1=1.0, w2=4.0, y=1.0)


@pytest.mark.parametrize("values, message", [
    (dict(w1=1.0, w2=1.0), "no value for y"),
    (dict(w1=1.0, w2=1.0, y=1.0, x=2.0), "unknown argument 'x'; the cost function takes "
                                         "w1, w2, y"),
    (dict(w1=1.0, w2=0.0, y=1.0), "w2 must be positive; got 0"),
    (dict(w1=[1.0, 2.0, -3.0], w2=1.0, y=1.0), "w1 must be positive; got -3 at index 2"),
    (dict(w1=[1.0, np.nan], w2=1.0, y=1.0), "w1 must be finite; got nan at index 1"),
    (dict(w1=1.0, w2=np.inf, y=1.0), "w2 must be finite; got inf"),
    (dict(w1=[1.0, 2.0], w2=[1.0, 2.0, 3.0], y=1.0), "do not broadcast"),
])
def test_bad_points_are_named(values, message):
    with pytest.raises(DualityError) as err:
        _cost()(**values)
    assert message in str(err.value)
    assert "\n" not in str(err.value).strip()


def test_validity_region_a_scalar_raises_an_array_gets_nan_and_a_warning():
    # Stone–Geary demand is valid only above subsistence spending (common practice, no
    # source): here, a toy condition y > 1 on the Cobb–Douglas cost
    c = _cost(conditions=(sp.StrictGreaterThan(y, 1),))
    assert c(w1=1.0, w2=1.0, y=2.0) == pytest.approx(2.0, rel=1e-14)
    with pytest.raises(DomainError, match="valid only where y > 1"):
        c(w1=1.0, w2=1.0, y=0.5)
    with pytest.warns(NumericWarning, match="1 point"):
        out = c(w1=1.0, w2=1.0, y=np.array([2.0, 0.5, 3.0]))
    assert np.isnan(out[1]) and np.allclose(out[[0, 2]], [2.0, 3.0])


def test_numeric_only_result_calls_its_evaluator_and_never_returns_a_non_number():
    def numeric(point):
        v = cd_cost(point[w1], point[w2], point[y])
        return np.where(point[w1] > 5, np.nan, v)

    c = _cost(expr=None, route="numeric", numeric=numeric)
    assert c(w1=1.5, w2=0.6, y=3.0) == pytest.approx(cd_cost(1.5, 0.6, 3.0), rel=1e-14)
    with pytest.raises(DomainError, match="no interior optimum"):
        c(w1=6.0, w2=0.6, y=3.0)
    assert c.free_params == () and c.expr_at_values is None
    assert c.latex() == r"c(w_{1}, w_{2}, y) \;\text{(numeric only)}"
    with pytest.raises(DualityError, match="no solver report"):
        _cost().solver_report(w1=1.0, w2=1.0, y=1.0)


def test_a_record_needs_a_known_route_and_something_to_evaluate():
    assert ROUTES == ("catalogue", "symbolic", "numeric")
    with pytest.raises(ValueError, match="route 'guessed'"):
        _cost(route="guessed")
    with pytest.raises(ValueError, match="expression or a numeric evaluator"):
        _cost(expr=None)


def test_latex_summary_and_repr_show_route_source_and_conditions():
    c = _cost(source="Varian (1992), ch. 4", notes=("interior solution",),
              conditions=(sp.StrictGreaterThan(y, 1),))
    assert c.latex() == r"c(w_{1}, w_{2}, y) = " + sp.latex(CD)
    assert c.latex(at_values=True) == r"c(w_{1}, w_{2}, y) = " + sp.latex(CD.xreplace({A: 2.0}))
    assert c._repr_latex_() == f"${c.latex()}$"
    lines = c.summary().splitlines()
    assert lines[0] == f"cost function: c(w1, w2, y) = {CD}"
    assert "  route: catalogue (Cobb–Douglas)" in lines
    assert "  source: Varian (1992), ch. 4" in lines
    assert "  valid where: y > 1" in lines and "  note: interior solution" in lines
    assert "[catalogue, source: Varian (1992), ch. 4]" in repr(c)


def test_a_demand_is_shown_under_its_own_name():
    x1 = _cost(kind="conditional_demand", expr=y * sp.sqrt(w2 / w1) / A, name="labour")
    assert x1.label == "conditional input demand"
    assert x1.latex().startswith(r"\mathrm{labour}(w_{1}, w_{2}, y) = ") or \
        x1.latex().startswith("labour(w_{1}, w_{2}, y) = ")
    assert x1.summary().startswith("conditional input demand: labour(w1, w2, y) = ")


def test_demands_come_from_the_factory_or_are_refused():
    with pytest.raises(DualityError, match="has no demand system of its own"):
        _ = _cost().demands
    calls = []

    def factory():
        calls.append(1)
        return {"x1": _cost(kind="conditional_demand", expr=y * sp.sqrt(w2 / w1) / A,
                            name="x1")}

    c = _cost(demand_factory=factory)
    assert c.demands["x1"](w1=4.0, w2=1.0, y=2.0) == pytest.approx(0.5, rel=1e-14)
    _ = c.demands
    assert calls == [1]          # built once


def test_a_derived_function_survives_pickling():
    # compiled code is dropped and rebuilt on the other side
    c = _cost(source="Varian (1992), ch. 4")
    before = c(w1=1.5, w2=0.6, y=3.0)           # compiles
    back = pickle.loads(pickle.dumps(c))
    assert "_lambda" not in back.__dict__
    assert back(w1=1.5, w2=0.6, y=3.0) == pytest.approx(before, rel=1e-15)
    assert before == pytest.approx(cd_cost(1.5, 0.6, 3.0), rel=1e-14)
    assert (back.route, back.source, back.params) == (c.route, c.source, c.params)


def test_array_results_are_writeable_copies():
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        out = _cost()(w1=np.ones(3), w2=1.0, y=1.0)
    out[0] = -1.0          # the caller owns the result
    assert out.flags.writeable

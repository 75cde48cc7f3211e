"""Exports of the quadratic Almost Ideal system (Banks, Blundell and Lewbel, 'Quadratic Engel
curves and consumer demand', Review of Economics and Statistics 79 (1997), from memory): the
exported Python estimating equations and duals reproduce the engine's budget shares and
Marshallian demands (the engine's own route is checked against the published share
equation in tests/solve/test_quaids.py)."""
from __future__ import annotations

import importlib.util

import numpy as np
import pytest

import duality as dy
from duality.apply.export import write

Q = dict(a0=0.0, a1=0.3, a2=0.5, a3=0.2, g11=0.08, g12=-0.05, g13=-0.03, g22=0.09,
         g23=-0.04, g33=0.07, b1=0.1, b2=-0.06, b3=-0.04, l1=0.03, l2=-0.01, l3=-0.02)


def _import(path, modname):
    spec = importlib.util.spec_from_file_location(modname, path)
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


@pytest.fixture(scope="module")
def points():
    rng = np.random.default_rng(97)
    P = np.exp(rng.normal(0, 0.3, (50, 3)))
    m = np.exp(rng.normal(1.0, 0.6, 50))
    return P, m


def _engine_shares(P, m):
    v = dy.indirect_utility(dy.quaids_expenditure(3, params=Q))
    return np.column_stack([
        v.demands[f"x{i + 1}"](p1=P[:, 0], p2=P[:, 1], p3=P[:, 2], m=m) * P[:, i] / m
        for i in range(3)])


def test_exported_estimating_equations_reproduce_the_engine_shares(points, tmp_path):
    P, m = points
    model = dy.quaids_expenditure(3, params=Q)
    path = write(model, "python", tmp_path / "quaids_eq.py", name="quaids_eq",
                 equations=True, fixed={"a0": 0})
    mod = _import(path, "quaids_eq")
    # one share dropped for adding-up (the last); the parameters it holds are eliminated
    assert set(mod.FUNCTIONS) == {"share_x1_equation", "share_x2_equation"}
    want = _engine_shares(P, m)
    for i in (1, 2):
        got = mod.FUNCTIONS[f"share_x{i}_equation"](p1=P[:, 0], p2=P[:, 1], p3=P[:, 2], m=m)
        np.testing.assert_allclose(got, want[:, i - 1], rtol=1e-10, atol=1e-12)


def test_exported_duals_reproduce_the_engine(points, tmp_path):
    P, m = points
    model = dy.quaids_expenditure(3, params=Q)
    path = write(model, "python", tmp_path / "quaids_duals.py", name="quaids_duals")
    mod = _import(path, "quaids_duals")
    want = _engine_shares(P, m)
    for i in range(3):
        x = mod.FUNCTIONS[f"marshallian_x{i + 1}"](p1=P[:, 0], p2=P[:, 1], p3=P[:, 2], m=m)
        np.testing.assert_allclose(x * P[:, i] / m, want[:, i], rtol=1e-10, atol=1e-12)

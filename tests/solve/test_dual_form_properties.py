"""Property tests of the dual-side catalogue: duality identities at random valid parameter
points, per form of :data:`duality.solve.dual_forms.DUAL_FORMS`.

``DUAL_STRATEGIES`` maps every form name to a hypothesis strategy of (parameter values,
point) over parameters that satisfy the form's theory restrictions; the meta-test fails
until a new form has one.  Each form is derived once with free parameters, and the
derived functions are evaluated with the drawn values.

The identities (Shephard's lemma, Roy's identity, homogeneity, adding-up, e(p, v(p, m)) =
m) are textbook duality theory: Varian, Microeconomic Analysis, 3rd ed. (1992), ch. 5–8;
Mas-Colell, Whinston & Green (1995), §3.E–3.G (from memory).
"""
from __future__ import annotations

from functools import lru_cache

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import duality as dy
from duality.solve.dual_forms import BY_NAME

N = 3
SETTINGS = settings(max_examples=12, deadline=None,
                    suppress_health_check=[HealthCheck.too_slow])
REL = 1e-9
FD_REL = 1e-6


def _floats(lo, hi):
    return st.floats(lo, hi, allow_nan=False, allow_infinity=False)


def _vec(lo, hi, n=N):
    return st.lists(_floats(lo, hi), min_size=n, max_size=n).map(np.array)


def _centred(v):
    return v - v.mean()


def _sym_centred(draw, scale):
    """A symmetric matrix whose rows and columns sum to zero (homogeneity and adding-up)."""
    A = np.array(draw(st.lists(_floats(-scale, scale), min_size=N * N, max_size=N * N)))
    A = A.reshape(N, N)
    P = np.eye(N) - 1.0 / N
    return P @ (A + A.T) / 2 @ P


def _upper(G, prefix, k=N):
    return {f"{prefix}{i + 1}{j + 1}": float(G[i, j]) for i in range(k) for j in range(i, k)}


def _shares(draw):
    a = draw(_vec(0.2, 1.0))
    return a / a.sum()


@st.composite
def translog_cases(draw):
    a, G, gy = _shares(draw), _sym_centred(draw, 0.05), _centred(draw(_vec(-0.05, 0.05)))
    vals = dict(a0=draw(_floats(-0.5, 0.5)), ay=draw(_floats(0.5, 1.5)),
                gyy=draw(_floats(0.0, 0.1)), **_upper(G, "g"),
                **{f"a{i + 1}": float(a[i]) for i in range(N)},
                **{f"g{i + 1}y": float(gy[i]) for i in range(N)})
    return vals, draw(_cost_point())


@st.composite
def generalized_leontief_cases(draw):
    B = draw(_vec(0.1, 1.0, N * (N + 1) // 2))
    names = [f"b{i + 1}{j + 1}" for i in range(N) for j in range(i, N)]
    return dict(zip(names, map(float, B))), draw(_cost_point())


@st.composite
def _aids_values(draw):
    a, G, b = _shares(draw), _sym_centred(draw, 0.05), _centred(draw(_vec(-0.1, 0.1)))
    return dict(a0=draw(_floats(0.0, 0.5)), **_upper(G, "g"),
                **{f"a{i + 1}": float(a[i]) for i in range(N)},
                **{f"b{i + 1}": float(b[i]) for i in range(N)})


@st.composite
def aids_cases(draw):
    return dict(draw(_aids_values()), b0=draw(_floats(0.5, 2.0))), draw(_income_point())


@st.composite
def quaids_cases(draw):
    lam = _centred(draw(_vec(-0.02, 0.02)))
    return (dict(draw(_aids_values()), **{f"l{i + 1}": float(lam[i]) for i in range(N)}),
            draw(_income_point()))


@st.composite
def _diewert_wales(draw, fixed):
    L = np.tril(np.array(draw(st.lists(_floats(-0.5, 0.5), min_size=4, max_size=4)))
                .reshape(2, 2))
    vals = dict(dy.concave_block(L), **{f"b{i + 1}": float(v)
                                        for i, v in enumerate(draw(_vec(0.2, 1.0)))})
    if fixed:
        vals.update({f"c{i + 1}": float(v) for i, v in enumerate(draw(_vec(0.0, 0.5)))},
                    byy=draw(_floats(0.0, 0.2)))
    return vals, draw(_cost_point())


@st.composite
def _cost_point(draw):
    w = draw(_vec(0.3, 3.0))
    return {**{f"w{i + 1}": float(v) for i, v in enumerate(w)}, "y": draw(_floats(0.3, 3.0))}


@st.composite
def _income_point(draw):
    p = draw(_vec(0.5, 2.0))
    return {**{f"p{i + 1}": float(v) for i, v in enumerate(p)}, "m": draw(_floats(1.0, 5.0))}


DUAL_STRATEGIES = {
    "translog_cost": translog_cases(),
    "generalized_leontief_cost": generalized_leontief_cases(),
    "aids_expenditure": aids_cases(),
    "quaids_expenditure": quaids_cases(),
    "normalized_quadratic_cost": _diewert_wales(False),
    "symmetric_generalized_mcfadden_cost": _diewert_wales(True),
}
FORMS = list(DUAL_STRATEGIES)
COST = [f for f in FORMS if BY_NAME[f].side == "cost"]
SPENDING = [f for f in FORMS if BY_NAME[f].side == "expenditure"]


def test_every_dual_side_form_has_a_strategy():
    assert set(DUAL_STRATEGIES) == set(BY_NAME)


@lru_cache(maxsize=None)
def derived(form: str):
    model = BY_NAME[form].build(N)
    if model.is_technology:
        return {"spend": dy.cost(model)}
    return {"spend": dy.expenditure(model), "v": dy.indirect_utility(model)}


def call(fn, **kw):
    """Evaluate a derived function, passing only the arguments and parameters it takes."""
    takes = {str(s) for s in (*fn.args, *fn.params, *fn.free_params)}
    return fn(**{k: v for k, v in kw.items() if k in takes})


def scaled(point, t, keys):
    return {k: (t * v if k in keys else v) for k, v in point.items()}


@pytest.mark.parametrize("form", COST)
def test_cost_forms_shephard_and_homogeneity(form):
    c = derived(form)["spend"]
    assert c.route == "catalogue" and c.source == BY_NAME[form].source

    @SETTINGS
    @given(DUAL_STRATEGIES[form], _floats(0.2, 5.0))
    def run(case, t):
        vals, pt = case
        prices = [f"w{i + 1}" for i in range(N)]
        value = call(c, **vals, **pt)
        for i, w in enumerate(prices):
            x = call(c.demands[f"x{i + 1}"], **vals, **pt)
            h = 1e-5 * pt[w]
            up = call(c, **vals, **{**pt, w: pt[w] + h})
            dn = call(c, **vals, **{**pt, w: pt[w] - h})
            assert abs((up - dn) / (2 * h) - x) <= FD_REL * max(1.0, abs(value))
            # demands are homogeneous of degree zero in prices
            xt = call(c.demands[f"x{i + 1}"], **vals, **scaled(pt, t, prices))
            assert abs(xt - x) <= REL * max(1.0, abs(x))
        # cost is homogeneous of degree one in prices
        assert abs(call(c, **vals, **scaled(pt, t, prices)) - t * value) <= \
            REL * max(1.0, abs(t * value))
    run()


@pytest.mark.parametrize("form", SPENDING)
def test_demand_systems_roy_adding_up_and_duality(form):
    d = derived(form)
    e, v = d["spend"], d["v"]
    assert e.source == BY_NAME[form].source

    @SETTINGS
    @given(DUAL_STRATEGIES[form], _floats(0.2, 5.0))
    def run(case, t):
        vals, pt = case
        prices = [f"p{i + 1}" for i in range(N)]
        u = call(v, **vals, **pt)
        # e(p, v(p, m)) = m
        back = call(e, **vals, **{k: pt[k] for k in prices}, u=u)
        assert abs(back - pt["m"]) <= REL * pt["m"]
        x = np.array([call(v.demands[f"x{i + 1}"], **vals, **pt) for i in range(N)])
        # adding-up p·x = m
        assert abs(np.array([pt[k] for k in prices]) @ x - pt["m"]) <= REL * pt["m"]
        # homogeneity of degree zero of v and x in (p, m)
        sc = scaled(pt, t, prices + ["m"])
        assert abs(call(v, **vals, **sc) - u) <= REL * max(1.0, abs(u))
        xt = np.array([call(v.demands[f"x{i + 1}"], **vals, **sc) for i in range(N)])
        assert np.allclose(xt, x, rtol=REL, atol=REL)
        # Roy's identity x_i = −(∂v/∂p_i)/(∂v/∂m), by central differences
        def dv(k):
            h = 1e-5 * pt[k]
            return (call(v, **vals, **{**pt, k: pt[k] + h})
                    - call(v, **vals, **{**pt, k: pt[k] - h})) / (2 * h)
        vm = dv("m")
        for i, k in enumerate(prices):
            assert abs(-dv(k) / vm - x[i]) <= FD_REL * max(1.0, abs(x[i]))
    run()

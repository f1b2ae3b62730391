"""Properties of the speciation solver over the whole supported box."""
import itertools

import numpy as np
from hypothesis import given, settings, strategies as st

from ventsource.chemistry.buffers import log10_fo2_from_dfmq
from ventsource.chemistry.species import ELEMENT_MATRIX, INDEX
from ventsource.chemistry.speciation import speciate, STATUS_OK

BOX = dict(temperature_c=(600.0, 1300.0), pressure_bar=(1.0, 5000.0), dfmq=(-4.0, 4.0),
           c_h=(1e-4, 10.0), s_h=(1e-5, 1.0))


def check_closure(t_k, p, dfmq, c_h, s_h, eos):
    lf = log10_fo2_from_dfmq(dfmq, t_k, p)
    r = speciate(t_k, p, lf, 1.0, c_h, s_h, eos=eos)
    assert np.all(r.status == STATUS_OK)
    x = r.mole_fractions
    atoms = x @ ELEMENT_MATRIX
    # element balances: relative 1e-10 (issue acceptance)
    np.testing.assert_allclose(atoms[:, 1] / atoms[:, 0], c_h, rtol=1e-10)
    np.testing.assert_allclose(atoms[:, 3] / atoms[:, 0], s_h, rtol=1e-10)
    np.testing.assert_allclose(x.sum(axis=1), 1.0, rtol=1e-12)
    # imposed fO2 to 1e-8 in log units
    log_fo2 = np.log10(x[:, INDEX["O2"]] * r.fugacity_coefficients[:, INDEX["O2"]] * p)
    np.testing.assert_allclose(log_fo2, lf, atol=1e-8)
    assert np.all(x >= 0.0)


@settings(max_examples=300, deadline=None)
@given(t_c=st.floats(*BOX["temperature_c"]), log_p=st.floats(0.0, np.log10(5000.0)),
       dfmq=st.floats(*BOX["dfmq"]), log_c_h=st.floats(-4.0, 1.0), log_s_h=st.floats(-5.0, 0.0),
       eos=st.sampled_from(["ideal", "real"]))
def test_balances_close_everywhere(t_c, log_p, dfmq, log_c_h, log_s_h, eos):
    check_closure(np.array([t_c + 273.15]), np.array([10 ** log_p]), np.array([dfmq]),
                  np.array([10 ** log_c_h]), np.array([10 ** log_s_h]), eos)


def test_every_corner_and_a_dense_random_sweep_converge():
    corners = np.array(list(itertools.product(*BOX.values())))
    rng = np.random.default_rng(5)
    n = 20000
    sweep = np.column_stack([
        rng.uniform(*BOX["temperature_c"], n), 10 ** rng.uniform(0, np.log10(5000), n),
        rng.uniform(*BOX["dfmq"], n), 10 ** rng.uniform(-4, 1, n), 10 ** rng.uniform(-5, 0, n)])
    states = np.vstack([corners, sweep])
    for eos in ("ideal", "real"):
        check_closure(states[:, 0] + 273.15, states[:, 1], states[:, 2], states[:, 3],
                      states[:, 4], eos)


def h2s_over_so2(t_c, p, dfmq, eos="real"):
    t = np.full_like(np.atleast_1d(p), t_c + 273.15, dtype=float)
    p = np.broadcast_to(p, t.shape).astype(float)
    dfmq = np.broadcast_to(dfmq, t.shape).astype(float)
    r = speciate(t, p, log10_fo2_from_dfmq(dfmq, t, p), 2 * 90.0, 8.0, 2.0, eos=eos)
    x = r.mole_fractions
    return x[:, INDEX["H2S"]] / x[:, INDEX["SO2"]]


def test_h2s_so2_rises_with_pressure():
    # common practice, no source: at fixed element totals, pressure favours
    # H2S (fewer moles: SO2 + 3 H2 = H2S + 2 H2O)
    ratio = h2s_over_so2(1100.0, np.array([1.0, 10.0, 100.0, 1000.0, 3000.0]), 0.5)
    assert np.all(np.diff(ratio) > 0)


def test_h2s_so2_falls_as_fo2_rises():
    # common practice, no source: oxidation converts H2S to SO2
    ratio = h2s_over_so2(1100.0, np.full(5, 500.0), np.array([-2.0, -1.0, 0.0, 1.0, 2.0]))
    assert np.all(np.diff(ratio) < 0)


def test_magmatic_gas_is_mostly_water():
    # common practice, no source: high-temperature arc gas is tens to over
    # 90 mol% H2O, then CO2 and total S
    t = np.array([1373.15])
    p = np.array([1.0])
    r = speciate(t, p, log10_fo2_from_dfmq(1.0, t, p), 2 * 90.0, 8.0, 2.0)
    x = r.as_dict()
    assert 0.8 < x["H2O"] < 0.95
    assert x["H2O"] > x["CO2"] > x["SO2"] + x["H2S"] > x["H2"] * 0.1

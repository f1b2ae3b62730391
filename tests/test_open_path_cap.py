"""Open-system degassing of a magma still gas-saturated at the saturation-search
cap (P_SAT_CAP_BAR): the path starts at the cap from the closed-system gas there."""
import os

import numpy as np
import pytest

from ventsource.magma import degassing
from ventsource.forward.model import ForwardModel
from ventsource.inference.priors import load_prior_file
from ventsource.chemistry.species import ELEMENT_MATRIX, INDEX, MOLAR_MASS_G_MOL

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
ARC_PRIORS = [os.path.join(ROOT, "priors", name) for name in ("arc_basalt.toml", "arc_andesite.toml")]
CAP = degassing.P_SAT_CAP_BAR

# molar masses used by degassing.py for bulk and melt contents
M_H2O, M_CO2, M_S = 18.015, 44.009, 32.06

# An oxidised, S-rich arc basalt whose gas can take up most of its S only as a
# large gas fraction (D_S * S ~ 0.84): gas-saturated at every pressure of the
# search range, status 2 in the open style before the path could start at the cap.
# (T degC, dFMQ, H2O wt%, CO2 ppm, S ppm, D_S); invented for this test.
CAP_STATE = (1199.0, 1.8, 5.3, 1980.0, 2380.0, 354.0)


def _arc_basalt_laws():
    model = ForwardModel(load_prior_file(ARC_PRIORS[0]))
    return model.h2o_law, model.co2_law


def _bulk_hcs(h2o_wt, co2_ppm, s_ppm):
    """H, C, S moles per gram (conventions of degassing.py)."""
    return np.array([2.0 * h2o_wt / 100.0 / M_H2O, co2_ppm * 1e-6 / M_CO2, s_ppm * 1e-6 / M_S])


def _gas_hcs(x):
    """H, C, S moles per gram of gas of mole fractions x."""
    return (x @ ELEMENT_MATRIX)[[0, 1, 3]] / (x @ MOLAR_MASS_G_MOL)


def test_cap_state_is_saturated_at_the_cap():
    # The premise: the closed-system search finds gas at the cap, so there is no
    # saturation pressure (inf) and the open path starts at the cap (flag set).
    h2o_law, co2_law = _arc_basalt_laws()
    t_c, dfmq, h2o, co2, s, d_s = CAP_STATE
    at_cap = degassing.degas(t_c, CAP, dfmq, h2o, co2, s, d_s, h2o_law, co2_law, saturation=False)
    assert at_cap.status[0] == degassing.STATUS_GAS and at_cap.gas_wt_fraction[0] > 0.0
    res = degassing.degas(t_c, 1000.0, dfmq, h2o, co2, s, d_s, h2o_law, co2_law, style="open")
    assert np.isinf(res.saturation_pressure_bar[0])
    assert res.closed_above_cap[0]
    assert res.status[0] == degassing.STATUS_GAS
    # the closed style never sets the flag
    closed = degassing.degas(t_c, 1000.0, dfmq, h2o, co2, s, d_s, h2o_law, co2_law)
    assert not closed.closed_above_cap[0]


def test_cap_path_matches_closed_steps_and_conserves_h_c_s():
    # Definition of open-system (fractional) degassing: each step is a closed-system
    # equilibrium of the melt the previous step left, its gas removed. Rebuild the
    # path by hand from the cap (the closed-system gas at the cap is the first batch
    # removed), compare with the kernel, and check that every H, C and S atom of the
    # magma is either in a removed gas batch, in the last gas or in the final melt.
    h2o_law, co2_law = _arc_basalt_laws()
    t_c, dfmq, h2o, co2, s, d_s = CAP_STATE
    p_final, n_steps = 800.0, 20
    opened = degassing.degas(t_c, p_final, dfmq, h2o, co2, s, d_s, h2o_law, co2_law,
                             style="open", open_steps=n_steps)
    assert opened.status[0] == degassing.STATUS_GAS and opened.closed_above_cap[0]
    bulk0 = _bulk_hcs(h2o, co2, s)
    ratio = (p_final / CAP) ** (1.0 / n_steps)
    pressures = [CAP] + [CAP * ratio ** (k + 1) if k < n_steps - 1 else p_final
                         for k in range(n_steps)]
    magma_left = 1.0          # grams of the original gram still melt
    in_gas = np.zeros(3)      # mol H, C, S carried off in gas batches (per original gram)
    for k, p in enumerate(pressures):
        step = degassing.degas(t_c, p, dfmq, h2o, co2, s, d_s, h2o_law, co2_law, saturation=False)
        assert step.status[0] == degassing.STATUS_GAS, k
        g = step.gas_wt_fraction[0]
        in_gas += magma_left * g * _gas_hcs(step.gas[0])
        magma_left *= 1.0 - g
        h2o, co2, s = step.melt_h2o_wt[0], step.melt_co2_ppm[0], step.melt_s_ppm[0]
    np.testing.assert_allclose(opened.gas[0], step.gas[0], rtol=1e-6, atol=1e-30)
    np.testing.assert_allclose(opened.gas_wt_fraction[0], step.gas_wt_fraction[0], rtol=1e-6)
    np.testing.assert_allclose([opened.melt_h2o_wt[0], opened.melt_co2_ppm[0], opened.melt_s_ppm[0]],
                               [h2o, co2, s], rtol=1e-6)
    rebuilt = in_gas + magma_left * _bulk_hcs(h2o, co2, s)
    np.testing.assert_allclose(rebuilt / bulk0, 1.0, rtol=1e-8)
    # the melt really lost volatiles on the way: most of its S and CO2 went to gas
    assert magma_left < 1.0 and co2 < 0.1 * CAP_STATE[3]


def test_cap_path_gas_is_co2_richer_at_depth():
    # Common practice, no source: CO2 is far less soluble than H2O, so deeper gas
    # is CO2-richer; and an open system loses its CO2 early, so its gas is poorer
    # in CO2 than the closed-system gas at the same pressure. Checked over the
    # pressures of the arc priors (< 5 kbar).
    h2o_law, co2_law = _arc_basalt_laws()
    t_c, dfmq, h2o, co2, s, d_s = CAP_STATE
    p = np.array([50.0, 200.0, 1000.0, 3000.0])
    opened = degassing.degas(t_c, p, dfmq, h2o, co2, s, d_s, h2o_law, co2_law, style="open")
    closed = degassing.degas(t_c, p, dfmq, h2o, co2, s, d_s, h2o_law, co2_law, style="closed")
    assert np.all(opened.status == degassing.STATUS_GAS) and np.all(opened.closed_above_cap)
    assert np.all(np.isfinite(opened.gas))
    np.testing.assert_allclose(opened.gas.sum(axis=1), 1.0, rtol=1e-12)
    co2_h2o_open = opened.gas[:, INDEX["CO2"]] / opened.gas[:, INDEX["H2O"]]
    co2_h2o_closed = closed.gas[:, INDEX["CO2"]] / closed.gas[:, INDEX["H2O"]]
    assert np.all(co2_h2o_open > 0.0)
    assert np.all(np.diff(co2_h2o_open) > 0), co2_h2o_open
    assert np.all(co2_h2o_open < co2_h2o_closed)


def test_at_or_above_the_cap_pressure_open_equals_closed():
    # Nothing has been removed yet at P >= the cap (gas kept with its magma deeper
    # than the cap), so the open-style gas is the closed-system gas there.
    h2o_law, co2_law = _arc_basalt_laws()
    t_c, dfmq, h2o, co2, s, d_s = CAP_STATE
    p = np.array([CAP, 1.2 * CAP])
    opened = degassing.degas(t_c, p, dfmq, h2o, co2, s, d_s, h2o_law, co2_law, style="open")
    closed = degassing.degas(t_c, p, dfmq, h2o, co2, s, d_s, h2o_law, co2_law, style="closed")
    assert np.all(opened.status == 0) and np.all(opened.closed_above_cap)
    np.testing.assert_allclose(opened.gas, closed.gas, rtol=1e-10, atol=1e-300)
    np.testing.assert_allclose(opened.gas_wt_fraction, closed.gas_wt_fraction, rtol=1e-10)


def _partition_version(path):
    """The prior with the partition sulfur option and the D_S range the arc priors
    shipped before sulfur = "capacity" (log-uniform 10-500, from memory): with it a gas
    can stay saturated up to the cap, the case these tests are about."""
    import tomllib
    from ventsource.inference.priors import parse_prior
    with open(path, "rb") as fh:
        data = tomllib.load(fh)
    data["models"]["sulfur"] = "partition"
    data["parameters"]["s_partition"] = {"distribution": "loguniform", "min": 10.0, "max": 500.0,
                                         "source": "from memory: D_S of tens to hundreds in basalt"}
    return parse_prior(data, file=path)


@pytest.mark.parametrize("path", ARC_PRIORS, ids=os.path.basename)
def test_open_style_prior_draws_no_longer_fail_at_the_cap(path):
    # Before the path could start at the cap, ~14 % of open-style draws of the arc
    # priors had status 2 (all with saturation pressure inf). Now such draws give
    # gas (flagged), and the flag marks exactly the draws without a saturation
    # pressure. 400 draws per prior.
    spec = _partition_version(path)
    model = ForwardModel(spec)
    theta = spec.full(spec.sample(np.random.default_rng(21), 400))
    col = {name: theta[:, i] for i, name in enumerate(spec.parameter_names)}
    res = degassing.degas(col["temperature_c"], col["pressure_bar"], col["dfmq"], col["h2o_wt"],
                          col["co2_ppm"], col["s_ppm"], col["s_partition"], model.h2o_law,
                          model.co2_law, style="open", eos=model.eos)
    cap = res.closed_above_cap
    np.testing.assert_array_equal(cap, np.isinf(res.saturation_pressure_bar))
    assert cap.sum() >= 5  # the case is common in these priors (3-14 % of draws), so the test bites
    assert np.mean(res.status == degassing.STATUS_FAILED) < 0.01
    assert np.all(res.status[cap] == degassing.STATUS_GAS)
    assert np.all(np.isfinite(res.gas[cap]))

"""Oxygen buffers against Frost (1991), Reviews in Mineralogy 25, Table 1."""
import numpy as np

from ventsource.chemistry import buffers


def test_fmq_formula_frost_1991():
    # Frost 1991, FMQ (beta quartz): log fO2 = -25096.3/T + 8.735 + 0.110 (P-1)/T
    t = np.array([1073.15, 1273.15, 1473.15])
    for p in (1.0, 1000.0, 5000.0):
        expected = -25096.3 / t + 8.735 + 0.110 * (p - 1) / t
        np.testing.assert_allclose(buffers.log10_fo2_fmq(t, p), expected, rtol=0, atol=1e-12)


def test_nno_formula_frost_1991():
    # Frost 1991, NNO: log fO2 = -24930/T + 9.36 + 0.046 (P-1)/T
    t = np.array([1073.15, 1273.15, 1473.15])
    for p in (1.0, 2000.0):
        expected = -24930.0 / t + 9.36 + 0.046 * (p - 1) / t
        np.testing.assert_allclose(buffers.log10_fo2_nno(t, p), expected, rtol=0, atol=1e-12)


def test_buffer_values_at_1200_c():
    # Widely tabulated values at 1200 C, 1 bar (from memory): FMQ about -8.30,
    # NNO about -7.56, NNO about 0.7 log units above FMQ.
    t = 1473.15
    assert abs(float(buffers.log10_fo2_fmq(t, 1.0)) - (-8.30)) < 0.02
    assert abs(float(buffers.log10_fo2_nno(t, 1.0)) - (-7.56)) < 0.02
    assert 0.6 < float(buffers.dnno_from_dfmq(0.0, t, 1.0) * -1) < 0.85


def test_conversions_round_trip():
    rng = np.random.default_rng(0)
    t = rng.uniform(873, 1573, 50)
    p = rng.uniform(1, 5000, 50)
    d = rng.uniform(-4, 4, 50)
    lf = buffers.log10_fo2_from_dfmq(d, t, p)
    np.testing.assert_allclose(buffers.dfmq_from_log10_fo2(lf, t, p), d, atol=1e-12)
    np.testing.assert_allclose(buffers.dfmq_from_dnno(buffers.dnno_from_dfmq(d, t, p), t, p), d,
                               atol=1e-12)
    # pressure raises the buffer (positive volume term, Frost 1991)
    assert np.all(buffers.log10_fo2_fmq(t, p + 1000) > buffers.log10_fo2_fmq(t, p))

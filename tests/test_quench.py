"""The quench stage (ascent/quench.py) against Cantera's Gibbs-energy minimiser.

Reference: Cantera `equilibrate('TP')` on an ideal gas of the same ten species
from Cantera's bundled NASA Glenn data (nasa_gas.yaml, rebuilt at the 1 bar
reference pressure of McBride et al. 2002; bench.speed.cantera_reference_gas).
At fixed elements this is exactly the gas-buffered quench; with the O content
adjusted until fO2 sits on FMQ + dFMQ (Frost 1991, Reviews in Mineralogy 25,
Table 1) it is the rock-buffered quench.
"""
import numpy as np
import pytest
from scipy.optimize import brentq

from ventsource.ascent.quench import (
    EXCESS_O, FO2_EXPONENTS, QUENCH_MODELS, _residual4, element_totals, gas_buffered, quench,
)
from ventsource.chemistry.buffers import log10_fo2_from_dfmq
from ventsource.chemistry.speciation import UNKNOWN_EXPONENTS, speciate
from ventsource.chemistry.species import SPECIES, INDEX

ct = pytest.importorskip("cantera")


def _deep_gases(n, seed):
    """Gas made at depth by the package's own speciation: T 1000-1250 C, 10-3000 bar,
    dFMQ -2..+3, C/H and S/H over three decades (real-gas EOS)."""
    rng = np.random.default_rng(seed)
    t_k = rng.uniform(1000, 1250, n) + 273.15
    p = 10 ** rng.uniform(1, 3.5, n)
    dfmq = rng.uniform(-2, 3, n)
    res = speciate(t_k, p, log10_fo2_from_dfmq(dfmq, t_k, p), 1.0, 10 ** rng.uniform(-3, 0, n),
                   10 ** rng.uniform(-3, -0.5, n))
    assert res.converged.all()
    return res.mole_fractions, dfmq


def _cantera_gas():
    from ventsource.bench.speed import cantera_reference_gas
    gas = cantera_reference_gas()
    return gas, [gas.species_index(s) for s in SPECIES]


def test_gas_buffered_matches_cantera_at_fixed_elements():
    # acceptance (issue): 200 states, 1 bar, 600-1200 C; species above 1e-6 within
    # 0.5 %, element totals conserved to 1e-10
    deep, _ = _deep_gases(200, seed=5)
    t_q = np.random.default_rng(6).uniform(600, 1200, 200)
    ours, ok, _ = gas_buffered(deep, t_q, 1.0, eos="ideal")
    assert ok.all()
    gas, order = _cantera_gas()
    worst = 0.0
    for j in range(200):
        gas.TPX = t_q[j] + 273.15, 1e5, dict(zip(SPECIES, deep[j]))
        gas.equilibrate("TP")
        xc = gas.X[order]
        big = xc > 1e-6
        rel = np.abs(ours[j, big] - xc[big]) / xc[big]
        worst = max(worst, rel.max())
        assert rel.max() < 0.005, (j, dict(zip(SPECIES, xc)), dict(zip(SPECIES, ours[j])))
    before, after = element_totals(deep), element_totals(ours)
    # per mole of H: the quench changes the number of moles, not the atoms
    drift = np.abs(after / after[:, :1] - before / before[:, :1])
    assert drift.max() < 1e-10
    # the quench does something: H2S/SO2 moves by orders of magnitude over this range
    shift = np.abs(np.log10(ours[:, INDEX["H2S"]] / ours[:, INDEX["SO2"]])
                   - np.log10(deep[:, INDEX["H2S"]] / deep[:, INDEX["SO2"]]))
    assert shift.max() > 1.0
    print(f"largest relative deviation from Cantera: {worst:.2e}")


def _mixture_with_oxygen(h, c, s, excess_o):
    """A start composition with H, C, S atoms and O = H/2 + 2C + 2S + excess_o:
    surplus O as O2; a deficit taken from SO2 (to S2), then CO2 (to CO), then H2O (to H2)."""
    x = {"H2O": h / 2, "CO2": c, "SO2": s, "O2": 0.0, "S2": 0.0, "CO": 0.0, "H2": 0.0}
    if excess_o >= 0:
        x["O2"] = excess_o / 2
        return x
    need = -excess_o
    take = min(need, 2 * s)
    x["SO2"] -= take / 2
    x["S2"] += take / 4
    need -= take
    take = min(need, c)
    x["CO2"] -= take
    x["CO"] += take
    need -= take
    x["H2O"] -= need
    x["H2"] += need
    return x


def _cantera_at_fo2(gas, order, x0, t_k, log10_fo2):
    """Cantera equilibrium of x0's H, C, S at (t_k, 1 bar) with its O content moved
    until log10 fO2 hits the target: fO2 held by an outside buffer."""
    h, c, _, s = element_totals(x0[None])[0]

    def miss(excess_o):
        gas.TPX = t_k, 1e5, _mixture_with_oxygen(h, c, s, excess_o)
        gas.equilibrate("TP")
        return np.log10(gas.X[order][SPECIES.index("O2")]) - log10_fo2

    lowest = -(2 * s + c + h / 2) * (1 - 1e-9)
    brentq(miss, lowest, 1.0, xtol=1e-16, rtol=1e-14, maxiter=500)
    return gas.X[order]


def test_rock_buffered_matches_fixed_fo2_speciation_and_cantera():
    deep, dfmq = _deep_gases(40, seed=8)
    t_q = np.random.default_rng(9).uniform(600, 1200, 40)
    ours, ok = quench(deep, "rock_buffered", t_q, 1.0, dfmq=dfmq, eos="ideal")
    assert ok.all()
    el = element_totals(deep)
    lf = log10_fo2_from_dfmq(dfmq, t_q + 273.15, 1.0)
    direct = speciate(t_q + 273.15, 1.0, lf, el[:, 0], el[:, 1], el[:, 3], eos="ideal")
    assert np.allclose(ours, direct.mole_fractions, rtol=1e-12, atol=0)
    gas, order = _cantera_gas()
    for j in range(40):
        xc = _cantera_at_fo2(gas, order, deep[j], t_q[j] + 273.15, lf[j])
        big = xc > 1e-6
        rel = np.abs(ours[j, big] - xc[big]) / xc[big]
        assert rel.max() < 0.005, (j, dict(zip(SPECIES, xc)), dict(zip(SPECIES, ours[j])))
        # fO2 of the rock-buffered gas is the buffer's (Frost 1991)
        assert abs(np.log10(ours[j, INDEX["O2"]]) - lf[j]) < 1e-9


def test_gas_buffered_at_its_own_state_returns_the_same_gas():
    # re-equilibrating a gas where it was made must give it back, with its fO2
    # (the oxygen balance recovers the buffer value the gas was made at)
    rng = np.random.default_rng(12)
    t_k = rng.uniform(900, 1300, 50) + 273.15
    dfmq = rng.uniform(-3, 3, 50)
    lf = log10_fo2_from_dfmq(dfmq, t_k, 1.0)
    made = speciate(t_k, 1.0, lf, 1.0, 10 ** rng.uniform(-3, 0, 50), 10 ** rng.uniform(-3, -0.5, 50),
                    eos="ideal").mole_fractions
    again, ok, _ = gas_buffered(made, t_k - 273.15, 1.0, eos="ideal")
    assert ok.all()
    assert np.allclose(again, made, rtol=1e-8, atol=1e-300)
    assert np.allclose(np.log10(again[:, INDEX["O2"]]), lf, atol=1e-8)


def test_monomial_exponents_are_the_speciation_reactions():
    # the compiled residual's monomials against exp(offset + exponents . v)
    rng = np.random.default_rng(3)
    c = np.exp(rng.uniform(-5, 0, 10))
    v = rng.uniform(-3, 0, 4)
    x = np.empty(10)
    _residual4(v, c, EXCESS_O.copy(), 0.0, 0.0, x, np.empty(4), np.empty((4, 4)))
    expected = c * np.exp(UNKNOWN_EXPONENTS @ v[:3] + FO2_EXPONENTS * v[3])
    assert np.allclose(x, expected, rtol=1e-12)


def test_none_and_nan_rows():
    deep, dfmq = _deep_gases(3, seed=1)
    deep[1] = np.nan
    assert QUENCH_MODELS == ("gas_buffered", "rock_buffered", "none")
    same, ok = quench(deep, "none", 800.0)
    assert np.array_equal(same, deep, equal_nan=True) and list(ok) == [True, False, True]
    for model in ("gas_buffered", "rock_buffered"):
        x, ok = quench(deep, model, 800.0, 1.0, dfmq=dfmq)
        assert list(ok) == [True, False, True] and np.isnan(x[1]).all()
    with pytest.raises(ValueError):
        quench(deep, "frozen", 800.0)

"""Scrubbing of magmatic gas on its way up."""
import numpy as np
import pytest

from ventsource.ascent.scrubbing import PRODUCTS, scrub
from ventsource.chemistry.species import ELEMENT_MATRIX, INDEX, N_SPECIES

# Henry's-law solubilities near 25 C, mol/(kg bar): Sander (2015), Atmos. Chem.
# Phys. 15:4399 (values from memory): SO2 ~1.2-1.4, H2S ~0.1, CO2 ~0.034.
HENRY_SO2, HENRY_H2S, HENRY_CO2 = 1.3, 0.1, 0.034


def _gases(n=50, seed=3):
    # Random H-C-O-S gas compositions (synthetic), every species present.
    rng = np.random.default_rng(seed)
    x = rng.uniform(0.01, 1.0, (n, N_SPECIES)) * 10 ** rng.uniform(-4, 0, (n, N_SPECIES))
    x[:, INDEX["H2O"]] += 5.0
    return x / x.sum(axis=1, keepdims=True)


def _r(x, a, b):
    return x[:, INDEX[a]] / x[:, INDEX[b]]


def test_henry_constants_order_justifies_scrubbing_direction():
    # The physics behind the model: SO2 is the most water-soluble, CO2 the least.
    assert HENRY_SO2 > HENRY_H2S > HENRY_CO2


@pytest.mark.parametrize("product", PRODUCTS)
def test_scrubbing_lowers_so2_co2_and_raises_h2s_so2(product):
    # Common practice, no source (direction from the Henry's constants above).
    x = _gases()
    f = np.random.default_rng(4).uniform(0.05, 0.95, x.shape[0])
    y = scrub(x, f, product)
    assert np.all(_r(y, "SO2", "CO2") < _r(x, "SO2", "CO2"))
    assert np.all(_r(y, "H2S", "SO2") > _r(x, "H2S", "SO2"))
    np.testing.assert_allclose(y.sum(axis=1), 1.0, rtol=1e-12)
    # SO2 removed in the stated fraction (relative to an unscrubbed species)
    np.testing.assert_allclose(_r(y, "SO2", "CO2"), (1 - f) * _r(x, "SO2", "CO2"), rtol=1e-12)


@pytest.mark.parametrize("product", PRODUCTS)
def test_co2_is_not_removed(product):
    # CO2 barely dissolves (Henry constant ~40x below SO2, Sander 2015): its
    # moles stay as they were; only the normalisation changes. Carbon species
    # ratios are therefore unchanged.
    x = _gases()
    y = scrub(x, 0.7, product)
    for other in ("CO", "CH4", "H2", "COS"):
        np.testing.assert_allclose(_r(y, "CO2", other), _r(x, "CO2", other), rtol=1e-12)
    if product == "loss":
        # moles before renormalisation: total left = 1 - 0.7 x_SO2
        kept = 1.0 - 0.7 * x[:, INDEX["SO2"]]
        np.testing.assert_allclose(y[:, INDEX["CO2"]] * kept, x[:, INDEX["CO2"]], rtol=1e-12)


def test_h2s_sulfate_stoichiometry():
    # 4 SO2 + 4 H2O = H2S + 3 H2SO4 (SO2 disproportionation; balanced: S 4 = 1 + 3,
    # H 8 = 2 + 6, O 12 = 12). All H2S returned: S left in the gas falls by
    # 3/4 of the SO2 removed, H2O by the SO2 removed.
    x = _gases(20)
    f = 0.6
    y = scrub(x, f, "h2s_sulfate", h2s_return=1.0)
    scale = x[:, INDEX["CO2"]] / y[:, INDEX["CO2"]]  # undo the normalisation
    moles = y * scale[:, None]
    removed = f * x[:, INDEX["SO2"]]
    s_before = x @ ELEMENT_MATRIX[:, 3]
    s_after = moles @ ELEMENT_MATRIX[:, 3]
    np.testing.assert_allclose(s_before - s_after, 0.75 * removed, rtol=1e-10)
    np.testing.assert_allclose(x[:, INDEX["H2O"]] - moles[:, INDEX["H2O"]], removed, rtol=1e-10)


def test_no_scrubbing_is_identity_and_nan_rows_stay_nan():
    x = _gases(10)
    for product in PRODUCTS:
        np.testing.assert_allclose(scrub(x, 0.0, product), x, rtol=1e-14)
    x[3] = np.nan
    y = scrub(x, 0.5)
    assert np.all(np.isnan(y[3]))
    assert np.all(np.isfinite(np.delete(y, 3, axis=0)))


def test_h2s_scrubbing_lowers_h2s():
    x = _gases(10)
    y = scrub(x, 0.0, "loss", scrubbed_h2s=0.5)
    np.testing.assert_allclose(_r(y, "H2S", "CO2"), 0.5 * _r(x, "H2S", "CO2"), rtol=1e-12)


def test_unknown_product_is_a_clear_error():
    with pytest.raises(ValueError, match="unknown scrubbing product 'acid'"):
        scrub(_gases(2), 0.5, "acid")

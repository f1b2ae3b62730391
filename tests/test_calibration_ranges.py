"""Calibration ranges of the solubility laws: kept as data, a prior that pairs a law
with a melt far outside its calibration is refused, rows and priors report the share
of mass outside a law's pressure or temperature range.

Ranges are the source papers' as recalled (from memory; magma/calibration_ranges.py):
Moore et al. 1998 (basalt to rhyolite, to 3 kbar, 700-1200 C), Liu et al. 2005
(rhyolite, to 5 kbar, 700-1200 C), Shishkina et al. 2014 (mafic to intermediate,
0.5-5 kbar, 1200-1250 C).
"""
import tomllib
from pathlib import Path

import numpy as np
import pytest

from ventsource.inference.calibration_flag import FLAG, calibration_flags, shares_outside
from ventsource.inference.priors import load_prior_file, parse_prior
from ventsource.inference.priors.fields import PriorFileError
from ventsource.magma.calibration_ranges import CALIBRATION_RANGES

ROOT = Path(__file__).resolve().parents[1]
BASALT = ROOT / "priors" / "arc_basalt.toml"


def _basalt_with(**models):
    data = tomllib.loads(BASALT.read_text())
    data["models"].update(models)
    return data


def test_every_shipped_law_with_a_range_has_a_sane_one():
    for (key, law), rng in CALIBRATION_RANGES.items():
        assert key in ("h2o_solubility", "co2_solubility")
        for lo, hi in (rng.sio2_wt, rng.pressure_bar, rng.temperature_c):
            assert lo < hi


def test_rhyolite_law_on_a_basalt_is_refused_in_one_line():
    data = _basalt_with(h2o_solubility="liu2005")
    with pytest.raises(PriorFileError) as err:
        parse_prior(data, "basalt_liu.toml")
    text = str(err.value)
    assert "models.h2o_solubility" in text and "SiO2 50" in text and "allow_out_of_calibration" in text
    assert "\n" not in text
    spec = parse_prior(_basalt_with(h2o_solubility="liu2005", allow_out_of_calibration=True), "x.toml")
    assert spec.models["h2o_solubility"] == "liu2005"


def test_allow_key_must_be_boolean():
    with pytest.raises(PriorFileError, match="allow_out_of_calibration"):
        parse_prior(_basalt_with(allow_out_of_calibration="yes"), "x.toml")


def test_every_shipped_prior_loads_inside_calibration():
    for path in sorted((ROOT / "priors").glob("*.toml")):
        assert load_prior_file(path).models["allow_out_of_calibration"] is False


class _Posterior:
    def __init__(self, **arrays):
        self.posterior = {k: _Var(v) for k, v in arrays.items()}


class _Var:
    def __init__(self, values):
        self.values = np.asarray(values)


def test_share_outside_and_the_flag():
    spec = load_prior_file(BASALT)  # moore1998 (1-3000 bar, 700-1200 C), shishkina2014 (500-5000, 1200-1250)
    inside = _Posterior(pressure_bar=np.full(100, 1000.0), temperature_c=np.full(100, 1200.0))
    assert calibration_flags(spec, inside) == []
    # 9 % of draws below 500 bar: under the 10 % limit
    p = np.r_[np.full(9, 300.0), np.full(91, 1000.0)]
    assert calibration_flags(spec, _Posterior(pressure_bar=p, temperature_c=np.full(100, 1200.0))) == []
    p = np.r_[np.full(11, 300.0), np.full(89, 1000.0)]
    shares = shares_outside(spec, {"pressure_bar": p, "temperature_c": np.full(100, 1200.0)})
    assert shares == {"h2o_solubility = moore1998": 0.0, "co2_solubility = shishkina2014": 0.11}
    assert calibration_flags(spec, _Posterior(pressure_bar=p, temperature_c=np.full(100, 1200.0))) == [FLAG]
    # a fixed parameter counts with its value
    fixed = spec.with_fixed("temperature_c", 1100.0)
    assert shares_outside(fixed, {"pressure_bar": np.full(10, 1000.0)})["co2_solubility = shishkina2014"] == 1.0


def test_flag_is_in_the_glossary_and_docs():
    from ventsource.common.flag_glossary import FLAG_GLOSSARY
    assert FLAG in FLAG_GLOSSARY
    assert f"`{FLAG}`" in (ROOT / "docs" / "flags.md").read_text()

"""A prior file that pairs a solubility law with a melt far outside the law's
calibration is refused, unless it says `[models] allow_out_of_calibration = true`.

The ranges are data (magma/calibration_ranges.py); "far outside" is an
anhydrous SiO2 more than SIO2_TOLERANCE_WT beyond the calibrated range.
"""
from __future__ import annotations

from typing import Mapping

from ventsource.inference.priors.fields import key_error, read_boolean
from ventsource.magma.calibration_ranges import SIO2_TOLERANCE_WT, ranges_for

ALLOW_KEY = "allow_out_of_calibration"


def read_allow(file: str, models_t: Mapping) -> bool:
    return read_boolean(file, models_t, ALLOW_KEY, f"models.{ALLOW_KEY}", False)


def melt_sio2_anhydrous(melt: Mapping) -> float:
    """SiO2 wt% of the melt renormalised to an anhydrous total of 100."""
    return 100.0 * melt["SiO2"] / sum(melt.values())


def check_calibration(file: str, models: Mapping, melt: Mapping) -> None:
    if models.get(ALLOW_KEY, False):
        return
    sio2 = melt_sio2_anhydrous(melt)
    for key, law, rng in ranges_for(models):
        lo, hi = rng.sio2_wt
        if sio2 < lo - SIO2_TOLERANCE_WT or sio2 > hi + SIO2_TOLERANCE_WT:
            raise key_error(file, f"models.{key}",
                            f"{law!r} ({rng.citation}) is calibrated for {rng.melt}, SiO2 {lo:g}-{hi:g} "
                            f"wt%, but [melt] has SiO2 {sio2:.1f} wt% (anhydrous); choose a law for this "
                            f"melt or set models.{ALLOW_KEY} = true")

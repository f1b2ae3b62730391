"""The quench parameters of a prior file and the [models] quench choice, checked together.

quench_temperature_c is required with a quench stage ("gas_buffered" or
"rock_buffered") and refused without one; quench_pressure_bar is optional
(default 1 bar, forward.model.DEFAULTS) and also refused without a quench stage.
"""
from __future__ import annotations

from typing import Mapping

from ventsource.inference.priors.fields import key_error

QUENCH_PARAMETERS = ("quench_temperature_c", "quench_pressure_bar")


def check_quench_parameters(file: str, dists: Mapping, models: Mapping) -> None:
    quench = models.get("quench", "none")
    if quench != "none" and "quench_temperature_c" not in dists:
        raise key_error(file, "parameters.quench_temperature_c",
                        f"missing: required when models.quench = {quench!r}")
    if quench == "none":
        for name in QUENCH_PARAMETERS:
            if name in dists:
                raise key_error(file, f"parameters.{name}",
                                "only used with a quench stage (models.quench = 'gas_buffered' "
                                "or 'rock_buffered'), not 'none'")

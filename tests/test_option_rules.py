"""Options of infer: one table of type and range, checked before any work."""
import pytest

from ventsource.inference.likelihood import Measurement
from ventsource.inference.row.one_measurement import _DEFAULTS, InferenceError, infer
from ventsource.inference.option_rules import OPTION_RULES, OptionError, check_option, check_options


def test_every_infer_option_has_a_rule():
    assert sorted(_DEFAULTS) == sorted(OPTION_RULES)


def test_every_default_passes_its_own_rule():
    assert check_options(_DEFAULTS, _DEFAULTS) == {k: v for k, v in _DEFAULTS.items()}


@pytest.mark.parametrize("name,value,needle", [
    ("pi0", 1.5, "range (0, 1)"), ("epsilon", 2, "range (0, 1)"), ("target_ess", -5, "range"),
    ("target_ess", "x", "must be a number"), ("max_steps", 0, "range [1,"), ("n_walkers", 2.5, "whole"),
    ("model_choice", 1, "true or false"), ("moves", "foo", "one of"), ("alpha", float("nan"), "range"),
    ("max_steps", True, "must be a number"), ("nonsense", 1, "unknown option"),
])
def test_bad_values_are_one_line(name, value, needle):
    with pytest.raises(OptionError) as err:
        check_option(name, value, _DEFAULTS)
    assert needle in str(err.value) and name in str(err.value) and "\n" not in str(err.value)


def test_values_are_converted_to_their_kind():
    assert check_options({"target_ess": 20, "max_steps": 200.0}) == {"target_ess": 20.0, "max_steps": 200}
    assert type(check_option("max_steps", 200.0)) is int
    assert check_option("pi0", None, _DEFAULTS) is None


def test_infer_refuses_before_sampling():
    from ventsource.inference.priors import load_prior_file
    from ventsource.inference.priors.shipped import resolve_prior
    m = Measurement(("SO2/CO2",), [0.5])
    spec = load_prior_file(resolve_prior("demo_mount_kerrow_fast"))
    with pytest.raises(InferenceError, match="prior must be a PriorSpec"):
        infer(m, None)
    with pytest.raises(InferenceError, match="seed"):
        infer(m, spec, seed="abc")
    with pytest.raises(InferenceError, match="pi0"):
        infer(m, spec, pi0=1.5)

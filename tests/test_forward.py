"""The forward model: parameter arrays in, gas ratios out."""
import os

import numpy as np
import pytest

from ventsource.common.errors import InputError
from ventsource.forward.model import ForwardModel, STATUS_OK
from ventsource.inference.priors import load_prior_file
from ventsource.chemistry.species import INDEX

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


def _model(name, ratios=("SO2/CO2", "H2S/SO2", "H2O/CO2")):
    spec = load_prior_file(os.path.join(ROOT, "priors", name))
    return spec, ForwardModel(spec, ratios)


@pytest.mark.parametrize("name", ["arc_basalt.toml", "rhyolite_silicic.toml",
                                  "ocean_island_basalt.toml"])
def test_ratio_shape_and_nan_rows_match_status(name):
    spec, model = _model(name)
    theta = spec.full(spec.sample(np.random.default_rng(21), 120))
    r = model.ratios(theta)
    st = model.status(theta)
    assert r.shape == (120, 3)
    bad = st != STATUS_OK
    assert np.all(np.isnan(r[bad]))
    assert np.all(np.isfinite(r[~bad]))
    assert np.all(r[~bad] > 0)
    assert model.parameter_names == spec.parameter_names
    r2, st2 = model.ratios_and_status(theta)
    np.testing.assert_array_equal(r2, r)
    np.testing.assert_array_equal(st2, st)


def test_states_without_gas_give_nan_rows():
    # Rhyolite prior: a good share of states are undersaturated at P (status 1).
    spec, model = _model("rhyolite_silicic.toml")
    theta = spec.full(spec.sample(np.random.default_rng(22), 120))
    st = model.status(theta)
    assert np.any(st == 1)
    assert np.all(np.isnan(model.ratios(theta)[st == 1]))


def test_wrong_column_count_is_a_value_error():
    spec, model = _model("arc_basalt.toml")
    theta = spec.full(spec.sample(np.random.default_rng(23), 3))
    with pytest.raises(ValueError, match="columns"):
        model.ratios(theta[:, :-1])


def test_unknown_ratio_name_is_a_one_line_input_error():
    spec = load_prior_file(os.path.join(ROOT, "priors", "arc_basalt.toml"))
    with pytest.raises(InputError) as err:
        ForwardModel(spec, ("SO2/CO2", "SO2/XY3"))
    msg = str(err.value)
    assert "\n" not in msg and "XY3" in msg
    with pytest.raises(InputError) as err:
        ForwardModel(spec, ("SO2-CO2",))
    assert "\n" not in str(err.value)


def test_co2_over_total_sulfur():
    # ST = SO2 + H2S (total sulfur as in-plume sensors see it; common practice, no source)
    spec, model = _model("arc_basalt.toml", ("CO2/ST", "SO2/CO2"))
    theta = spec.full(spec.sample(np.random.default_rng(24), 60))
    state = model.state(theta)
    gas = state["gas"]
    ok = state["status"] == STATUS_OK
    assert ok.sum() > 30
    expected = gas[ok, INDEX["CO2"]] / (gas[ok, INDEX["SO2"]] + gas[ok, INDEX["H2S"]])
    np.testing.assert_allclose(state["ratios"][ok, 0], expected, rtol=1e-12)
    np.testing.assert_allclose(model.ratios(theta)[ok, 0], expected, rtol=1e-12)


def test_scrubbing_parameter_acts_on_ratios():
    # Same magma, more SO2 scrubbed: lower SO2/CO2 (common practice, no source).
    spec, model = _model("arc_basalt.toml")
    theta = spec.full(spec.sample(np.random.default_rng(25), 20))
    col = spec.parameter_names.index("scrubbed_so2")
    theta[:, col] = 0.0
    clean = model.ratios(theta)
    theta[:, col] = 0.8
    scrubbed = model.ratios(theta)
    ok = np.isfinite(clean[:, 0])
    assert ok.sum() > 10
    np.testing.assert_allclose(scrubbed[ok, 0], 0.2 * clean[ok, 0], rtol=1e-12)
    assert np.all(scrubbed[ok, 1] > clean[ok, 1])


def test_gas_exsolved_at_depth_makes_the_gas_co2_richer():
    # common practice, no source: gas accumulated from depth (first, CO2-rich
    # gas of the magma) flushing through lowers SO2/CO2 and H2O/CO2 at the vent
    from ventsource.forward.model import ForwardModel
    from ventsource.inference.priors import load_prior_file
    spec = load_prior_file("priors/demo_mount_kerrow.toml")
    model = ForwardModel(spec, ("SO2/CO2", "H2O/CO2"))
    base = dict(pressure_bar=150, temperature_c=1080, dfmq=1, scrubbed_so2=0, h2o_wt=4,
                co2_ppm=1500, s_ppm=1500, s_partition=80, scrubbed_h2s=0, h2s_return=0.5,
                quench_temperature_c=900)
    rows = [[dict(base, exsolved_gas_wt=w)[n] for n in spec.parameter_names] for w in (0.0, 0.2, 1.0)]
    r = model.ratios(np.array(rows, dtype=float))
    assert np.all(np.isfinite(r))
    assert r[0, 0] > r[1, 0] > r[2, 0]
    assert r[0, 1] > r[1, 1] > r[2, 1]


def _capacity_spec(ln_a, b_k=0.0):
    import tomllib
    from ventsource.inference.priors import parse_prior
    with open("priors/arc_basalt.toml", "rb") as fh:
        data = tomllib.load(fh)
    data["models"]["sulfur"] = "sulfide_capacity"
    data["models"]["sulfide_capacity_ln_a"] = ln_a
    data["models"]["sulfide_capacity_b_k"] = b_k
    data["parameters"].pop("s_partition", None)
    return parse_prior(data, file="capacity-test.toml")


def test_sulfide_capacity_closes_the_sulfur_balance_and_retains_sulfur():
    from ventsource.chemistry.species import ELEMENT_MATRIX, MOLAR_MASS_G_MOL
    # log10 C_S about -4.5 for a basalt near 1200 C (from memory), and 100x more
    low, high = _capacity_spec(np.log(10 ** -4.5)), _capacity_spec(np.log(10 ** -2.5))
    theta = low.full(low.sample(np.random.default_rng(4), 300))
    theta[:, low.parameter_names.index("scrubbed_so2")] = 0.0
    states = [ForwardModel(spec).state(theta, saturation=False) for spec in (low, high)]
    for st in states:
        ok = st["status"] == STATUS_OK
        assert ok.mean() > 0.9
        # the gas the melt exchanged with (at depth): air oxidation of H2 in the plume adds O
        x, g = st["deep_gas"][ok], st["gas_wt_fraction"][ok]
        per_gram = (x @ ELEMENT_MATRIX) / (x @ MOLAR_MASS_G_MOL)[:, None]
        s_bulk = theta[ok, low.parameter_names.index("s_ppm")] * 1e-6 / 32.06
        s_back = g * per_gram[:, 3] + (1 - g) * st["melt_s_ppm"][ok] * 1e-6 / 32.06
        np.testing.assert_allclose(s_back, s_bulk, rtol=1e-8)
    # common practice, no source: a melt that holds more sulfur leaves less in the gas
    both = (states[0]["status"] == STATUS_OK) & (states[1]["status"] == STATUS_OK)
    so2_co2 = [st["ratios"][both, 0] for st in states]
    assert np.median(so2_co2[1] / so2_co2[0]) < 1.0
    assert np.median(states[1]["melt_s_ppm"][both]) > np.median(states[0]["melt_s_ppm"][both])


def test_sulfide_capacity_keys_are_checked():
    import tomllib
    from ventsource.inference.priors import PriorFileError, parse_prior
    with open("priors/arc_basalt.toml", "rb") as fh:
        data = tomllib.load(fh)
    data["models"]["sulfide_capacity_ln_a"] = -10.0
    with pytest.raises(PriorFileError, match="only allowed with sulfur"):
        parse_prior(data, file="x.toml")
    data["models"]["sulfur"] = "sulfide_capacity"
    data["parameters"].pop("s_partition", None)
    with pytest.raises(PriorFileError, match="sulfide_capacity_b_k"):
        parse_prior(data, file="x.toml")


def test_partition_draws_whose_first_gas_would_exceed_all_sulfur_get_zero_prior_mass():
    # D_S = w_S,gas / w_S,melt: with D_S x S >= 1 the first gas would be more than 100 %
    # sulfur by mass (definition of D_S); such draws are excluded (status 3, NaN ratios)
    # and counted by prior-predictive
    import tomllib
    from ventsource.inference.priors import parse_prior
    from ventsource.forward.model import STATUS_EXCLUDED
    from ventsource.workflow.prior_predictive import excluded_note, prior_predictive_table
    with open("priors/arc_basalt.toml", "rb") as fh:
        data = tomllib.load(fh)
    data["models"]["sulfur"] = "partition"
    data["parameters"]["s_partition"] = {"distribution": "loguniform", "min": 10.0, "max": 500.0,
                                         "source": "from memory"}
    spec = parse_prior(data, file="partition.toml")
    table = prior_predictive_table(spec, 400, seed=2)
    m1 = table[table["model"] == "M1 with scrubbing"]
    impossible = (m1["s_partition"] * m1["s_ppm"] * 1e-6 >= 1.0).to_numpy()
    assert impossible.sum() > 5
    np.testing.assert_array_equal(m1["status"].to_numpy() == STATUS_EXCLUDED, impossible)
    assert m1.loc[impossible, "SO2/CO2"].isna().all()
    assert excluded_note(table).startswith(f"{impossible.sum()} of 400 draws")

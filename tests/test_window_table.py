"""The [window] table of prior files: which parameters vary per row in the window model.

Parse checks are fast. The shared-pressure window is checked against two other paths
of the package: the per-row-pressure quadrature (exact at its solved pressures) and
the single-row inversion, which samples pressure itself (a window of one row with
shared pressure is the same model). Synthetic rows come from the package's forward
model at ONE pressure on the fictional Mount Kerrow fast prior.
"""
import json
import tomllib
from pathlib import Path

import numpy as np
import pytest

from ventsource.forward.model import ForwardModel
from ventsource.inference.likelihood import Likelihood, Measurement
from ventsource.inference.priors import PriorFileError, parse_prior
from ventsource.inference.window.target import WindowTarget
from ventsource.inference.window.sampling import infer_window

ROOT = Path(__file__).resolve().parents[1]
FAST = ROOT / "priors" / "demo_mount_kerrow_fast.toml"
NAMES = ("SO2/CO2", "H2S/SO2", "H2O/CO2")
SMALL = dict(n_particles=100, n_runs=4, n_source_check=200)  # small and fast, Monte Carlo error reported


def fast_data():
    with open(FAST, "rb") as fh:
        return tomllib.load(fh)


def with_window(table, **params):
    data = fast_data()
    data["parameters"] = dict(data["parameters"], **params)
    return parse_prior(dict(data, window=table), "w.toml")


# --------------------------------------------------------------------------- parsing

def test_default_and_explicit_sets():
    spec = parse_prior(fast_data(), "w.toml")
    assert spec.window_per_row == ("pressure_bar", "scrubbed_so2") and spec.window is None
    assert "window" not in spec.to_dict()
    shared = with_window({"per_row": ["scrubbed_so2"], "source": "one vent, one depth"})
    assert shared.window_per_row == ("scrubbed_so2",)
    assert with_window({"per_row": ["scrubbed_so2", "pressure_bar"]}).window_per_row == \
        ("pressure_bar", "scrubbed_so2")            # recorded in one order whatever the file's
    assert with_window({"source": "defaults"}).window_per_row == ("pressure_bar", "scrubbed_so2")
    d = shared.to_dict()
    assert d["window"] == {"per_row": ["scrubbed_so2"], "source": "one vent, one depth"}
    again = parse_prior({k: v for k, v in d.items() if k != "path"}, "again")
    assert again.window_per_row == ("scrubbed_so2",)
    assert shared.with_fixed("dfmq", 1.0).window_per_row == ("scrubbed_so2",)  # variants keep it


FIXED_P = {"distribution": "fixed", "value": 300.0, "source": "test"}
FIXED_S = {"distribution": "fixed", "value": 0.0, "source": "test"}


@pytest.mark.parametrize("table,params,needle", [
    ({"per_row": ["scrubbed_so2", "temperature_c"]}, {}, "'temperature_c' cannot vary per row: only "
                                                         "pressure_bar and scrubbed_so2 can"),
    ({"per_row": ["scrubbed_so2", "s_ppm"]}, {}, "'s_ppm' cannot vary per row"),
    ({"per_row": ["scrubbed_so2", "depth_m"]}, {}, "unknown parameter 'depth_m' (only pressure_bar and "
                                                   "scrubbed_so2 can vary per row)"),
    ({"per_row": ["scrubbed_so2", "released_so2"]}, {}, "'released_so2' is per row whenever [hypotheses]"),
    ({"per_row": "scrubbed_so2"}, {}, "must be an array of parameter names, got string"),
    ({"per_row": [1]}, {}, "entries must be parameter names (strings), got number 1"),
    ({"per_row": ["scrubbed_so2", "pressure_bar", "scrubbed_so2"]}, {}, "'scrubbed_so2' is listed twice"),
    ({"per_row": ["pressure_bar"]}, {}, "must include 'scrubbed_so2'"),
    ({"per_row": []}, {}, "must include 'scrubbed_so2'"),
    ({"per_row": ["pressure_bar", "scrubbed_so2"]}, {"pressure_bar": FIXED_P}, "'pressure_bar' is fixed"),
    ({"per_row": ["scrubbed_so2"]}, {"scrubbed_so2": FIXED_S}, "'scrubbed_so2' is fixed"),
])
def test_bad_per_row_is_one_line_naming_file_and_key(table, params, needle):
    with pytest.raises(PriorFileError) as info:
        with_window(table, **params)
    msg = str(info.value)
    assert msg.startswith("w.toml: key 'window.per_row': ") and "\n" not in msg, msg
    assert needle in msg, msg


def test_unknown_key_and_non_table():
    with pytest.raises(PriorFileError, match=r"^w.toml: key 'window.shared': unknown key"):
        with_window({"per_row": ["scrubbed_so2"], "shared": ["dfmq"]})
    with pytest.raises(PriorFileError, match=r"^w.toml: key 'window': must be a table"):
        with_window(["scrubbed_so2"])


def test_fixed_pressure_may_be_shared():
    spec = with_window({"per_row": ["scrubbed_so2"]}, pressure_bar=FIXED_P)
    assert spec.window_per_row == ("scrubbed_so2",) and "pressure_bar" not in spec.free_names


# --------------------------------------------------------------------------- shared pressure

@pytest.fixture(scope="module")
def one_pressure():
    """Two magmatic and two scrubbed rows (60 %, 80 %) of one source degassing at 300 bar."""
    data = fast_data()
    per = parse_prior(data, "per-row")
    shared = parse_prior(dict(data, window={"per_row": ["scrubbed_so2"]}), "shared")
    fwd = ForwardModel(per, ratio_names=NAMES)
    rng = np.random.default_rng(4)
    names = list(per.free_names)
    theta = np.repeat(per.sample(rng, 1), 4, axis=0)
    theta[:, names.index("pressure_bar")] = 300.0
    theta[:, names.index("scrubbed_so2")] = [0.0, 0.0, 0.6, 0.8]
    pred = fwd.ratios(per.full(theta))
    assert np.all(np.isfinite(pred))
    obs = pred * np.exp(np.log1p(0.15) * rng.standard_normal(pred.shape))
    meas = [Measurement(NAMES, obs[i], 0.15, label=f"r{i}") for i in range(4)]
    return per, shared, fwd, meas


def test_shared_pressure_equals_the_quadrature_at_its_solved_pressures(one_pressure):
    """At a solved node of the per-row grid no interpolation happens, so the per-row path's
    row log-likelihoods there and the shared path's at that pressure are the same numbers
    (one warm-started sweep against one cold solve: equal to 1e-8 relative, the speciation
    solver's tolerance; common practice, no source)."""
    per, shared, fwd, meas = one_pressure
    liks = [Likelihood(m, prediction_names=NAMES) for m in meas]
    # the fixed grid (adaptive=False): with pooled pressures (the default) each draw otherwise
    # solves on its own pool's range, and the nodes below are the fixed grid's
    quad, one = WindowTarget(per, fwd, liks, 0.5, adaptive=False), WindowTarget(shared, fwd, liks, 0.5)
    assert one.per_row == ("scrubbed_so2",) and "pressure_bar" in one.shared_prior.free_names
    assert quad.per_row == ("pressure_bar", "scrubbed_so2")
    assert "pressure_bar" not in quad.shared_prior.free_names
    psi = quad.shared_prior.sample(np.random.default_rng(1), 5)
    gas, h2s, edges = quad.gas_on_grid(psi)
    ll_quad = quad.row_log_likelihoods(gas, h2s)
    ln_p = np.array(np.broadcast_to(quad.ln_quad, (len(psi), quad.ln_quad.size)))
    if edges is not None:  # draws whose gas ends inside the grid have their own points there
        ln_p[edges[0]] = edges[1]
    psi = psi[:, :len(quad.shared_prior.base.free_names)] if quad.pooled else psi  # the magma's part
    j = one.shared_prior.free_names.index("pressure_bar")
    compared = 0
    for node in (0, 7, 15, 23):
        ll_one = one.row_log_likelihoods(*one.gas_on_grid(np.insert(psi, j, quad.p_solve[node], axis=1))[:2])
        at_node = ln_p[:, node * quad.refine] == quad.ln_quad[node * quad.refine]
        for a, b in zip(ll_quad, ll_one):
            a, b = a[:, at_node, node * quad.refine], b[:, at_node, 0]
            assert np.array_equal(np.isfinite(a), np.isfinite(b))
            fin = np.isfinite(a)
            compared += fin.sum()
            np.testing.assert_allclose(a[fin], b[fin], rtol=1e-8, atol=1e-9)
    assert compared > 50


def test_one_row_shared_pressure_window_matches_the_single_row_inversion(one_pressure):
    """One row with shared pressure is the single-row model (pressure sampled, the scrubbed
    fraction integrated out): P(M0) within 4 combined Monte Carlo errors + 0.03 (as for
    the per-row-pressure window in test_window.py), and the pressure median likewise
    inside the single-row 90 % interval."""
    from ventsource.inference.row.one_measurement import infer
    per, shared, fwd, meas = one_pressure
    single = infer(meas[0], per, forward=fwd, seed=3)
    window = infer_window(meas[:1], shared, forward=fwd, seed=3)
    row = window.rows[0]
    err = np.hypot(single.p_magmatic_error, row.p_magmatic_error)
    assert abs(single.p_magmatic - row.p_magmatic) < 4 * err + 0.03, (single.p_magmatic, row.p_magmatic, err)
    assert window.diagnostics["per_row"] == ["scrubbed_so2"]
    assert window.diagnostics["n_solve_pressures"] == 1


def test_shared_pressure_window_on_one_pressure_rows(one_pressure):
    """Rows made at one pressure: the shared-pressure window keeps the per-row window's
    pattern (every scrubbed row below every magmatic row) and separates the scrubbed rows
    at least as sharply; every row reports the one shared pressure, whose 90 % interval
    holds the true 300 bar. Measured (seed 3, 100 particles x 4 runs): per-row pressure
    P(M0) = 0.41, 0.85, 0.10, 0.008; shared 0.48, 0.84, 0.000, 0.000."""
    per, shared, fwd, meas = one_pressure
    a = infer_window(meas, per, forward=fwd, seed=3, **SMALL)
    b = infer_window(meas, shared, forward=fwd, seed=3, **SMALL)
    pa = np.array([r.p_magmatic for r in a.rows])
    pb = np.array([r.p_magmatic for r in b.rows])
    eb = np.array([r.p_magmatic_error for r in b.rows])
    ea = np.array([r.p_magmatic_error for r in a.rows])
    assert pa[:2].min() > pa[2:].max() and pb[:2].min() > pb[2:].max(), (pa, pb)
    assert np.all(pb[2:] <= pa[2:] + 4 * np.hypot(ea[2:], eb[2:])), (pa, pb)
    assert b.shared_names[0] == "pressure_bar" and "pressure_bar" not in a.shared_names
    q = tuple(np.quantile(b.shared_draws[:, :, 0], [0.05, 0.5, 0.95]))
    for r in b.rows:  # per-row outputs report the shared pressure draws
        np.testing.assert_allclose(r.pressure_bar, q, rtol=1e-12)
    assert q[0] < 300.0 < q[2], q


def test_per_row_set_is_recorded_and_a_changed_set_refused_on_resume(tmp_path):
    """run.json and hazard.json record the per-row set; --resume with another prior [window]
    is refused with one line (the set, or the prior checksum, named)."""
    from ventsource.common.errors import InputError
    from ventsource.workflow.series import _earlier_run
    run = {"data_sha256": "d", "prior_sha256": "p", "seed": 1, "sigma": None, "options": {},
           "package_version": "x", "window": None, "window_per_row": ["pressure_bar", "scrubbed_so2"],
           "status": "stopped"}
    (tmp_path / "run.json").write_text(json.dumps(run))
    assert _earlier_run(str(tmp_path), dict(run), resume=True)["window_per_row"] == run["window_per_row"]
    with pytest.raises(InputError, match="--resume with a different per-row set of the window model"):
        _earlier_run(str(tmp_path), dict(run, window_per_row=["scrubbed_so2"]), resume=True)
    legacy = {k: v for k, v in run.items() if k != "window_per_row"}   # a run.json from before the table
    (tmp_path / "run.json").write_text(json.dumps(legacy))
    _earlier_run(str(tmp_path), dict(run), resume=True)
    with pytest.raises(InputError, match="per-row set"):
        _earlier_run(str(tmp_path), dict(run, window_per_row=["scrubbed_so2"]), resume=True)


def test_window_run_records_its_per_row_set(tmp_path, one_pressure):
    """A window run with shared pressure writes the set into run.json and hazard.json (the
    schema in docs/ validates it); a resume after the prior's [window] table changed is
    refused before anything is inverted."""
    import jsonschema
    from ventsource.common.errors import InputError
    from ventsource.workflow.measurements import read_measurements
    from ventsource.workflow.series import run_series
    _, _, _, meas = one_pressure
    text = FAST.read_text()
    prior = tmp_path / "shared.toml"
    prior.write_text(text + '\n[window]\nper_row = ["scrubbed_so2"]\nsource = "test: one depth"\n')
    csv = tmp_path / "d.csv"
    lines = ["id,time," + ",".join(NAMES)]
    lines += [f"r{i},2026-01-0{i + 1}T00:00:00Z," + ",".join(f"{v:.6g}" for v in m.values)
              for i, m in enumerate(meas[:3])]
    csv.write_text("\n".join(lines) + "\n")
    out = tmp_path / "o"
    opts = dict(n_particles=60, n_runs=2)
    run_series(read_measurements(str(csv)), str(prior), str(out), seed=1, window=30 * 86400.0, options=opts)
    run = json.loads((out / "run.json").read_text())
    hazard = json.loads((out / "hazard.json").read_text())
    assert run["window_per_row"] == ["scrubbed_so2"] and hazard["window_per_row"] == ["scrubbed_so2"]
    jsonschema.validate(hazard, json.loads((ROOT / "docs" / "hazard.schema.json").read_text()))
    prior.write_text(text)   # back to the default set: pressure per row
    with pytest.raises(InputError, match="--resume with a different"):
        run_series(read_measurements(str(csv)), str(prior), str(out), seed=1, window=30 * 86400.0,
                   options=opts, resume=True)


def test_pressure_rows_default_choice_and_bad_value():
    assert parse_prior(fast_data(), "w.toml").window_pressure_rows == "pooled"   # the default since 0.4.0
    assert with_window({"pressure_rows": "independent"}).window_pressure_rows == "independent"
    spec = with_window({"pressure_rows": "pooled"})
    assert spec.window_pressure_rows == "pooled"
    assert spec.to_dict()["window"]["pressure_rows"] == "pooled"
    with pytest.raises(PriorFileError) as info:
        with_window({"pressure_rows": "together"})
    msg = str(info.value)
    assert "\n" not in msg and "w.toml" in msg and "window.pressure_rows" in msg and "pooled" in msg



def test_hypothesis_rows_default_choice_and_bad_value():
    assert parse_prior(fast_data(), "w.toml").window_hypothesis_rows == "persistent"   # the default since 0.5.0
    spec = with_window({"hypothesis_rows": "independent"})
    assert spec.window_hypothesis_rows == "independent"
    assert spec.to_dict()["window"]["hypothesis_rows"] == "independent"
    with pytest.raises(PriorFileError) as info:
        with_window({"hypothesis_rows": "sticky"})
    msg = str(info.value)
    assert "\n" not in msg and "w.toml" in msg and "window.hypothesis_rows" in msg and "persistent" in msg

# --------------------------------------------------------------------------- "if scrubbed" columns

def _log10_uniform_var(lo, hi):
    return np.log10(hi / lo) ** 2 / 12.0   # variance of a uniform in log10 (scipy.stats.uniform(0, w).var())


def test_window_rows_if_scrubbed_columns_from_the_draws(one_pressure):
    """A window row's posterior if scrubbed: the shared parameters' quantiles, P(s < epsilon)
    and the contractions equal a direct computation from the window's draws in which that
    row is M1 (budget_draws["model"] == 1); the contractions' prior variances against
    scipy.stats (log-uniform CO2 and pressure in log10 units: a uniform's; dFMQ the truncated
    normal's, scipy.stats.truncnorm; scrubbed fraction beta(1, 1), scipy.stats.beta)."""
    from scipy import stats
    from ventsource.workflow.windows import _window_fields, window_row_summary
    per, _, fwd, meas = one_pressure
    res = infer_window(meas, per, forward=fwd, seed=5, split_check=False, **SMALL)
    shared = _window_fields("w", [f"2026-01-0{i + 1}T00:00:00Z" for i in range(4)], res, per)
    psi = res.shared_draws.reshape(-1, len(res.shared_names))
    prior_var = {"co2_ppm": _log10_uniform_var(300.0, 6000.0), "pressure_bar": _log10_uniform_var(5.0, 2500.0),
                 "dfmq": stats.truncnorm(-3.0, 3.0, loc=1.0, scale=0.5).var(),
                 "scrubbed_so2": stats.beta(1.0, 1.0).var()}
    checked = 0
    for i, r in enumerate(res.rows):
        row = window_row_summary(f"r{i}", "2026-01-01T00:00:00Z", r, res, 5, per, shared)
        m1 = np.asarray(r.budget_draws["model"]) == 1
        if m1.sum() < 50:   # a row the window holds magmatic: few M1 draws, nothing to compare
            continue
        checked += 1
        s = 1.0 - r.budget_draws["so2_factor"][m1]
        assert row["p_scrubbed_below_epsilon"] == pytest.approx(np.mean(s < per.epsilon), abs=1e-12)
        assert row["p_scrubbed_below_epsilon_error"] is None or 0.0 <= row["p_scrubbed_below_epsilon_error"] < 0.5
        post = {"scrubbed_so2": s, "pressure_bar": np.log10(r.budget_draws["pressure_bar"][m1])}
        for j, name in enumerate(res.shared_names):
            if name not in per.free_names:
                assert f"{name}_if_scrubbed_median" not in row   # pooling hyperparameters: .nc only
                continue
            q = np.quantile(psi[m1, j], [0.05, 0.5, 0.95])
            got = [row[f"{name}_if_scrubbed_{k}"] for k in ("q05", "median", "q95")]
            np.testing.assert_allclose(got, q, rtol=1e-12)
            post[name] = np.log10(psi[m1, j]) if name in ("co2_ppm",) else psi[m1, j]
        for name, v0 in prior_var.items():
            expect = 1.0 - np.var(post[name], ddof=1) / v0
            # the code's prior variance is from 4000 prior draws (sd of a variance ~2.2 %)
            assert row[f"{name}_contraction"] == pytest.approx(expect, abs=0.08 * (1.0 - expect) + 1e-9), name
    assert checked >= 2   # the two scrubbed rows (60 %, 80 %)

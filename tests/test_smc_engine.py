"""Tempered SMC engine (engines/smc_engine.py) on a toy with known evidence, its seeding,
and up-front validation of the SMC options through infer().

Toy: Gaussian likelihood N(y; theta, sigma^2 I) under a uniform prior box. The evidence
is a product of normal CDF differences over the box volume and the posterior is a
truncated normal per axis: reference values from scipy.stats.norm and
scipy.stats.truncnorm.
"""
import warnings
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

from toy_models import ScrubToyForward, scrub_toy_prior
from ventsource.inference.engines.smc_engine import tempered_smc
from ventsource.inference.evidence.bridge import Transform
from ventsource.inference.likelihood import Measurement
from ventsource.inference.row.one_measurement import InferenceError, infer
from ventsource.inference.priors import load_prior_file

LO = np.array([-2.0, 0.0, -5.0])
HI = np.array([3.0, 1.0, 5.0])
Y = np.array([0.4, 0.95, -1.0])   # second axis: posterior piled against the upper bound
SIGMA = np.array([0.1, 0.2, 0.05])


def _toy(y=Y, sigma=SIGMA, lo=LO, hi=HI):
    def log_prior(theta):
        inside = np.all((theta >= lo) & (theta <= hi), axis=1)
        return np.where(inside, -np.sum(np.log(hi - lo)), -np.inf)

    def log_like(theta):
        ll = stats.norm.logpdf(theta, y, sigma).sum(axis=1)
        return ll, {"first": theta[:, 0].copy()}

    def sample_prior(rng, n):
        return rng.uniform(lo, hi, size=(n, lo.size))

    transform = Transform(np.column_stack([lo, hi]))
    return log_prior, log_like, sample_prior, transform


def _analytic(y=Y, sigma=SIGMA, lo=LO, hi=HI):
    mass = stats.norm.cdf((hi - y) / sigma) - stats.norm.cdf((lo - y) / sigma)
    log_z = float(np.sum(np.log(mass) - np.log(hi - lo)))
    post = stats.truncnorm((lo - y) / sigma, (hi - y) / sigma, loc=y, scale=sigma)
    return log_z, post.mean(), post.std()


def test_log_evidence_and_posterior_match_analytic():
    res = tempered_smc(*_toy(), n_particles=1000, n_runs=4, seed=3)
    log_z_ref, mean_ref, sd_ref = _analytic()
    log_z, err = res.log_z_mean_error
    # reference log Z = -4.425 (scipy.stats.norm); measured with seeds 3, 4, 5:
    # -4.443 +- 0.035, -4.448 +- 0.015, -4.464 +- 0.053 (mean of 4 runs +- standard error)
    assert abs(log_z - log_z_ref) < 4.0 * err + 0.02, (log_z, err, log_z_ref)
    assert np.all(res.n_stages > 3) and np.all(res.distinct > 0.5 * 1000)
    flat = res.theta.reshape(-1, 3)
    n_eff = float(np.sum(res.distinct))
    np.testing.assert_allclose(flat.mean(axis=0), mean_ref, atol=5.0 * sd_ref.max() / np.sqrt(n_eff))
    np.testing.assert_allclose(flat.std(axis=0), sd_ref, rtol=0.08)
    # aux arrays travel with their particles
    np.testing.assert_array_equal(res.aux["first"], res.theta[:, :, 0])


def test_same_seed_same_numbers_other_seed_other_numbers():
    a = tempered_smc(*_toy(), n_particles=200, n_runs=3, seed=11)
    b = tempered_smc(*_toy(), n_particles=200, n_runs=3, seed=11)
    c = tempered_smc(*_toy(), n_particles=200, n_runs=3, seed=12)
    np.testing.assert_array_equal(a.theta, b.theta)
    np.testing.assert_array_equal(a.log_z, b.log_z)
    assert a.n_evals == b.n_evals
    assert not np.any(a.log_z == c.log_z)


def test_runs_do_not_depend_on_how_many_runs_there_are():
    # Each run draws from its own child of SeedSequence(seed).spawn(n_runs); child r is the
    # same whatever n_runs (numpy's spawn keys), so run r must give the same numbers with
    # 2 or 5 runs as long as nothing else couples the runs.
    two = tempered_smc(*_toy(), n_particles=200, n_runs=2, seed=5)
    five = tempered_smc(*_toy(), n_particles=200, n_runs=5, seed=5)
    np.testing.assert_array_equal(two.log_z, five.log_z[:2])
    np.testing.assert_array_equal(two.theta, five.theta[:2])


# ---- options checked up front, before any sampling ------------------------------------

class _NoCallForward(ScrubToyForward):
    """The toy forward model, failing the test if infer() reaches the physics."""

    def ratios(self, theta_full):
        raise AssertionError("sampling started before the options were checked")

    state = ratios


BAD_OPTIONS = [({"engine": "nested"}, "engine"), ({"n_particles": 0}, "n_particles"),
               ({"n_particles": 1.5}, "n_particles"), ({"n_particles": "500"}, "n_particles"),
               ({"n_runs": 1}, "n_runs"), ({"n_runs": True}, "n_runs"),
               ({"ess_target": 1.5}, "ess_target"), ({"ess_target": 0.0}, "ess_target"),
               ({"ess_target": float("nan")}, "ess_target"), ({"ess_target": "0.5"}, "ess_target"),
               ({"max_moves": 0}, "max_moves"), ({"max_moves": 2.5}, "max_moves"),  # 2.0 is read as 2
               ({"smc_rhat_max": 0.9}, "smc_rhat_max"), ({"n_particle": 100}, "unknown")]


@pytest.mark.parametrize("options,word", BAD_OPTIONS)
def test_bad_engine_options_raise_one_line_before_sampling(options, word):
    pr = scrub_toy_prior()
    m = Measurement(ScrubToyForward.ratio_names, (1.0, 0.2, 20.0), 0.15)
    with pytest.raises(InferenceError) as info:
        infer(m, pr, _NoCallForward(pr), seed=0, **options)
    text = str(info.value)
    assert "\n" not in text and word in text, text


def test_valid_engine_options_pass_the_check():
    # numpy integers, and plain ints for float options, are accepted; a small real run
    spec = load_prior_file(Path(__file__).resolve().parents[1] / "priors" / "demo_mount_kerrow_fast.toml")
    names = ("SO2/CO2", "H2S/SO2", "H2O/CO2")
    m = Measurement(names, (0.8, 0.1, 30.0), 0.15)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        r = infer(m, spec, seed=0, n_particles=np.int64(100), n_runs=2, ess_target=0.6,
                  max_moves=np.int32(4), smc_rhat_max=2)
    assert r.engine == "smc" and r.diagnostics["n_particles"] == 100
    assert 0.0 <= r.p_magmatic <= 1.0


# ---- the "jump" move rule: independence moves, moved until decorrelated ---------------

@pytest.mark.parametrize("rule", ["jump", "ridge"])
def test_jump_rule_evidence_and_posterior_match_analytic(rule):
    # same toy and reference (scipy.stats.norm / truncnorm) as the default rule above
    res = tempered_smc(*_toy(), n_particles=1000, n_runs=4, seed=3, move_rule=rule)
    log_z_ref, mean_ref, sd_ref = _analytic()
    log_z, err = res.log_z_mean_error
    assert abs(log_z - log_z_ref) < 4.0 * err + 0.02, (log_z, err, log_z_ref)
    flat = res.theta.reshape(-1, 3)
    np.testing.assert_allclose(flat.mean(axis=0), mean_ref, atol=5.0 * sd_ref.max() / np.sqrt(flat.shape[0] / 2))
    np.testing.assert_allclose(flat.std(axis=0), sd_ref, rtol=0.08)
    np.testing.assert_array_equal(res.aux["first"], res.theta[:, :, 0])
    # the rule's own promise, from the stage diagnostics: the particles moved far each stage
    # (summed squared Mahalanobis jump above d = 3 on average) unless the move cap stopped it
    for rec in res.stage_log:
        ran = np.isfinite(rec["sq_jump"])
        assert np.all((rec["sq_jump"][ran] >= 3.0) | (rec["n_moves"][ran] == 30)), rec


def test_jump_rule_seeded_and_runs_independent_of_their_number():
    a = tempered_smc(*_toy(), n_particles=200, n_runs=2, seed=5, move_rule="jump")
    b = tempered_smc(*_toy(), n_particles=200, n_runs=5, seed=5, move_rule="jump")
    np.testing.assert_array_equal(a.theta, b.theta[:2])
    np.testing.assert_array_equal(a.log_z, b.log_z[:2])


def test_independence_proposal_density_ratio_matches_scipy_multivariate_t():
    from ventsource.inference.engines.independence_move import NU, propose_independent
    rng = np.random.default_rng(4)
    mean = np.array([0.3, -1.0, 2.0])
    a = rng.standard_normal((3, 3))
    cov = a @ a.T + 0.5 * np.eye(3)
    lower = np.linalg.cholesky(cov)
    u = rng.standard_normal((400, 3))
    prop, log_corr = propose_independent(u, np.zeros(400, int), {0: (mean, lower)},
                                         [np.random.default_rng(1)])
    ref = stats.multivariate_t(loc=mean, shape=cov, df=NU)
    np.testing.assert_allclose(log_corr, ref.logpdf(u) - ref.logpdf(prop), rtol=1e-10, atol=1e-10)
    # the proposals are draws of that t: their covariance is df / (df - 2) times the shape
    # (scipy.stats.multivariate_t); 400 draws, a loose 3-sigma-ish bound on the diagonal
    np.testing.assert_allclose(np.cov(prop, rowvar=False).diagonal(), NU / (NU - 2) * cov.diagonal(), rtol=0.35)


def test_unknown_move_rule_is_refused_before_sampling():
    from ventsource.inference.engines.smc_engine import SMCError
    with pytest.raises(SMCError, match="move_rule"):
        tempered_smc(*_toy(), n_particles=50, n_runs=2, seed=0, move_rule="leap")


def test_mixture_proposal_density_ratio_matches_scipy_mixture_of_t():
    """The k-means mixture of t (independence_move.fit_mixture) against the same mixture
    written with scipy.stats.multivariate_t, on a curved (banana) population."""
    from ventsource.inference.engines.independence_move import NU, SHRINK, fit_mixture, propose_independent
    rng = np.random.default_rng(11)
    x = rng.standard_normal(600)
    u = np.column_stack([x, 0.5 * x ** 2 + 0.05 * rng.standard_normal(600), rng.standard_normal(600)])
    lower = np.linalg.cholesky(np.cov(u, rowvar=False))
    fit = fit_mixture(u, lower, 4, np.random.default_rng(2))
    assert isinstance(fit, list) and 2 <= len(fit) <= 4
    assert sum(w for w, _, _ in fit) == pytest.approx(1.0)
    prop, log_corr = propose_independent(u, np.zeros(600, int), {0: fit}, [np.random.default_rng(3)])

    def ref_logpdf(v):
        return np.logaddexp.reduce([np.log(w) + stats.multivariate_t(loc=m, shape=low @ low.T, df=NU).logpdf(v)
                                    for w, m, low in fit], axis=0)
    np.testing.assert_allclose(log_corr, ref_logpdf(u) - ref_logpdf(prop), rtol=1e-9, atol=1e-9)
    # each component's covariance keeps SHRINK of the population's: no component is thinner
    # than SHRINK times the population's variance along any axis
    for _, _, low in fit:
        assert np.all((low @ low.T).diagonal() >= SHRINK * np.cov(u, rowvar=False).diagonal() - 1e-12)
    # one component (k = 1) is the single t of the population, drawing no random numbers
    one = fit_mixture(u, lower, 1, None)
    np.testing.assert_allclose(one[0], u.mean(axis=0))
    assert one[1] is lower


def test_final_sweep_moves_capped_runs_at_beta_one_and_keeps_the_posterior():
    """final_moves: runs whose last stage hit max_moves (here 2, far too few) move on at
    beta = 1; the posterior still matches the toy's scipy.stats.truncnorm reference and the
    runs stay independent of how many there are."""
    res = tempered_smc(*_toy(), n_particles=1000, n_runs=4, seed=3, move_rule="jump", max_moves=2,
                       final_moves=40)
    last = res.stage_log[-1]
    assert np.all(last["beta"] == 1.0) and np.all(np.isnan(last["kish_ess"]))
    assert np.all(last["n_moves"] > 2), last["n_moves"]
    _, mean_ref, sd_ref = _analytic()
    flat = res.theta.reshape(-1, 3)
    np.testing.assert_allclose(flat.mean(axis=0), mean_ref, atol=5.0 * sd_ref.max() / np.sqrt(flat.shape[0] / 2))
    np.testing.assert_allclose(flat.std(axis=0), sd_ref, rtol=0.08)
    a = tempered_smc(*_toy(), n_particles=200, n_runs=2, seed=5, move_rule="jump", max_moves=2, final_moves=10)
    b = tempered_smc(*_toy(), n_particles=200, n_runs=5, seed=5, move_rule="jump", max_moves=2, final_moves=10)
    np.testing.assert_array_equal(a.theta, b.theta[:2])
    # no run capped (max_moves 30 on the toy): no sweep, the same numbers as without it
    c = tempered_smc(*_toy(), n_particles=200, n_runs=2, seed=5, move_rule="jump")
    d = tempered_smc(*_toy(), n_particles=200, n_runs=2, seed=5, move_rule="jump", final_moves=10)
    assert all(np.nanmax(rec["n_moves"]) < 30 for rec in c.stage_log)
    np.testing.assert_array_equal(c.theta, d.theta)
    assert len(c.stage_log) == len(d.stage_log)


def _banana(bend=0.1):
    """Twisted Gaussian (Haario, Saksman and Tamminen 1999, Computational Statistics 14:375;
    from memory): x1 ~ N(0, 10^2), x2 + bend (x1^2 - 100) ~ N(0, 1), x3 ~ N(0, 0.5^2),
    inside a uniform box. The twist has unit Jacobian, so the likelihood integrates to 1
    and Z = 1 / box volume (mass outside the box below 1e-6); E[x1] = E[x2] = 0,
    Var[x1] = 100."""
    lo, hi = np.array([-50.0, -300.0, -5.0]), np.array([50.0, 40.0, 5.0])

    def log_like(t):
        y = t[:, 1] + bend * (t[:, 0] ** 2 - 100.0)
        return (stats.norm.logpdf(t[:, 0], 0, 10) + stats.norm.logpdf(y) + stats.norm.logpdf(t[:, 2], 0, 0.5)), {}

    def log_prior(t):
        return np.where(np.all((t >= lo) & (t <= hi), axis=1), -np.sum(np.log(hi - lo)), -np.inf)
    return (log_prior, log_like, lambda rng, n: rng.uniform(lo, hi, size=(n, 3)),
            Transform(np.column_stack([lo, hi]))), -float(np.sum(np.log(hi - lo)))


def test_mixture_proposal_on_a_curved_posterior_keeps_evidence_and_moments():
    """proposal_components 8 on the twisted Gaussian: once one t's acceptance fell below
    MIX_BELOW the runs switch to the mixture, which the later stages accept more often than
    one t (measured 0.14 against 0.07); evidence and moments still match the closed form."""
    args, log_z_ref = _banana()
    one = tempered_smc(*args, n_particles=500, n_runs=4, seed=1, move_rule="jump")
    mix = tempered_smc(*args, n_particles=500, n_runs=4, seed=1, move_rule="jump", proposal_components=8)
    assert np.nanmean(mix.stage_log[-1]["acc_independent"]) > 1.5 * np.nanmean(one.stage_log[-1]["acc_independent"])
    log_z, err = mix.log_z_mean_error
    assert abs(log_z - log_z_ref) < 4.0 * err + 0.05, (log_z, err, log_z_ref)
    flat = mix.theta.reshape(-1, 3)
    assert abs(flat[:, 0].mean()) < 1.5 and abs(flat[:, 1].mean()) < 3.0, flat.mean(axis=0)
    assert flat[:, 0].var() == pytest.approx(100.0, rel=0.2)


# ---- the "ridge" move rule: moves in coordinates that straighten a bent ridge ----------

def test_ridge_map_is_a_unit_jacobian_bijection_that_straightens_the_twist():
    """Exact draws of the twisted Gaussian (_banana's closed form, bend 0.1): the twist
    x2 -> x2 + bend (x1^2 - 100) has unit Jacobian, so straightened the covariance is
    diag(100, 1, 0.25), log det = ln 25 = 3.22, against ln(100 x 201 x 0.25) = 8.52
    twisted (Var x2 = 1 + bend^2 Var x1^2 = 1 + 0.01 x 2 x 10^4)."""
    from ventsource.inference.engines.ridge_move import RidgeMap
    rng = np.random.default_rng(8)
    x1 = rng.normal(0.0, 10.0, 4000)
    u = np.column_stack([x1, rng.normal(size=4000) - 0.1 * (x1 ** 2 - 100.0), rng.normal(0.0, 0.5, 4000)])
    ridge = RidgeMap(u)
    y = ridge.to_y(u)
    np.testing.assert_allclose(ridge.from_y(y), u, atol=1e-10)
    assert np.linalg.slogdet(np.cov(u, rowvar=False))[1] == pytest.approx(np.log(100 * 201 * 0.25), abs=0.15)
    assert np.linalg.slogdet(np.cov(y, rowvar=False))[1] == pytest.approx(np.log(25.0), abs=0.1)
    eps = 1e-6
    jac = np.array([(ridge.to_y(u[:1] + eps * e) - ridge.to_y(u[:1] - eps * e))[0] / (2 * eps) for e in np.eye(3)])
    assert abs(np.linalg.det(jac)) == pytest.approx(1.0, abs=1e-6)


def test_ridge_rule_on_a_curved_posterior_keeps_evidence_and_moments_and_moves_further():
    """move_rule "ridge" on the twisted Gaussian: evidence and moments match the closed
    form (_banana), and in the last stage its independence proposals are accepted more
    often than the straight t of the "jump" rule (measured 0.24 against 0.07)."""
    args, log_z_ref = _banana()
    jump = tempered_smc(*args, n_particles=500, n_runs=4, seed=1, move_rule="jump")
    ridge = tempered_smc(*args, n_particles=500, n_runs=4, seed=1, move_rule="ridge")
    last = ridge.stage_log[-1]
    assert np.nanmean(last["acc_ridge_independent"]) > 2.0 * np.nanmean(jump.stage_log[-1]["acc_independent"])
    log_z, err = ridge.log_z_mean_error
    assert abs(log_z - log_z_ref) < 4.0 * err + 0.05, (log_z, err, log_z_ref)
    flat = ridge.theta.reshape(-1, 3)
    assert abs(flat[:, 0].mean()) < 1.5 and abs(flat[:, 1].mean()) < 3.0, flat.mean(axis=0)
    assert flat[:, 0].var() == pytest.approx(100.0, rel=0.2)
    a = tempered_smc(*args, n_particles=200, n_runs=2, seed=5, move_rule="ridge")
    b = tempered_smc(*args, n_particles=200, n_runs=3, seed=5, move_rule="ridge")
    np.testing.assert_array_equal(a.theta, b.theta[:2])   # seeded, runs independent of their number

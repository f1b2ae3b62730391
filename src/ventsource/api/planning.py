"""`plan`: which added measurement would sharpen the answer most (workflow/plan.py)."""


def plan(prior, ratios=("SO2/CO2", "H2S/SO2", "H2O/CO2"), sigma=0.15, n=20, seed=0,
         n_particles=300, candidates=None, data=None, truths_from_prior=False, window_rows=0):
    """Preposterior comparison of candidate measurements, ranked by expected Brier score.

    Truths are drawn from ``prior`` (purely magmatic with probability pi0), measured
    with the ratios ``ratios`` at relative 1-sigma ``sigma`` and with each candidate
    (default: add H2/H2O, add CO/CO2, add both, errors to 5 %, 3 rows of the same gas,
    melt inclusions giving S to +-150 ppm and dFMQ to +-0.15 as a narrower prior),
    with the same noise for every candidate, and inverted (``n`` data sets each, SMC
    with ``n_particles`` per run, 2 runs). Returns a pandas DataFrame, one row per
    candidate: ``brier_mean``, ``width90_scrubbed_mean``, ``width90_pressure_mean``,
    ``shift_p_magmatic_mean``, ``contraction_scrubbed_mean``, each with ``_mc_error``
    and the paired ``_minus_baseline`` (and its error). ``candidates``: {name: (ratio
    names, {ratio: sigma}, repeats, {parameter: melt-inclusion sd})} to compare others.
    ``data`` (a measurement CSV or MeasurementSeries): its ratios and median errors
    replace ``ratios`` and ``sigma``, and the truths are drawn from the posteriors of up
    to 8 of its rows (what the data already say) unless ``truths_from_prior``. Adding
    CO2/ST is a candidate only when the ratios do not already fix it. ``window_rows`` k
    (2-8) also scores k rows of the gas inverted together by the window model (about
    20 CPU-s per data set). Estimates are
    model- and prior-dependent and support, never replace, the observatory's own planning.

    >>> import ventsource as vs
    >>> table = vs.plan("demo_mount_kerrow_fast", n=2, n_particles=60, seed=3)
    >>> "baseline" in set(table["candidate"]) and list(table["rank"])[:2] == [1, 2]
    True
    >>> {"brier_mean", "brier_mc_error", "width90_pressure_mean"} <= set(table.columns)
    True
    >>> on_data = vs.plan("demo_mount_kerrow_fast", data="examples/mount_kerrow_synthetic.csv",
    ...                   n=2, n_particles=60, seed=3)
    >>> set(on_data["truths_from"])
    {'posterior of the data'}
    """
    from ventsource.api.inputs import load_prior
    from ventsource.workflow.plan import default_candidates, run_plan, summarise_plan
    spec = load_prior(prior) if not hasattr(prior, "free_names") else prior
    truths, series = None, None
    if data is not None:
        import numpy as np
        from ventsource.api.inputs import read_measurements
        series = read_measurements(data, default_sigma=sigma) if isinstance(data, str) else data
        ratios = tuple(series.ratio_names)
        sigma = np.nanmedian(np.asarray(series.measurements.sigmas, dtype=float), axis=0)
        if not truths_from_prior:
            from ventsource.workflow.plan_posterior import posterior_truths

            def truths(ratio_names, n_sim, s):
                return posterior_truths(spec, series, ratio_names, n_sim, s, n_particles)
    cands = (candidates if candidates is not None
             else default_candidates(tuple(ratios), sigma, spec.free_names, window_rows))
    table = summarise_plan(run_plan(spec, cands, n_sim=n, seed=seed, n_particles=n_particles,
                                    truths=truths))
    table["truths_from"] = "prior" if truths is None else "posterior of the data"
    return table

"""One row (`infer`) and rows that share one magma source (`infer_window`) from Python."""
from ventsource.api.inputs import load_prior


def infer(measurement, prior, seed=0, **options):
    """Posterior of the degassing conditions and P(purely magmatic) for one measurement.

    ``prior``: a PriorSpec, a prior file or a shipped prior name (see load_prior).
    ``options``: any option of the inversion (engine="smc" by default, n_particles,
    n_runs, epsilon, ...; the table is ventsource.inference.option_rules). Returns an
    InferenceResult: ``p_magmatic`` (P(M0 | data)) and its error, ``flags``,
    ``information`` (how much the data said: contraction per parameter, shift of P(M0)
    from pi0, the least resolved direction in words, ``near_prior``), ``summary()`` (a pandas DataFrame of the model-averaged posterior; ``summary("M1")``
    if scrubbed, ``summary("M0")`` purely magmatic), ``posterior("M1")`` (ArviZ
    InferenceData; ``idata`` is M1's), ``corner_plot()``. Results are model- and
    prior-dependent and support, never replace, the observatory's assessment.

    >>> import ventsource as vs
    >>> m = vs.Measurement.from_strings({"SO2/CO2": 0.55, "H2S/SO2": 0.22, "H2O/CO2": "<60"},
    ...                                 relative_sigma=0.15, label="synthetic")
    >>> result = vs.infer(m, "demo_mount_kerrow_fast", seed=1, n_particles=200, n_runs=2)
    >>> 0.0 <= result.p_magmatic <= 1.0
    True
    >>> table = result.summary()          # model-averaged over M0 and M1
    >>> list(table.columns[:4])
    ['units', 'median', '5%', '95%']
    >>> bool(table.loc["scrubbed_so2", "5%"] >= 0.0)
    True
    >>> "scrubbed_so2" in result.posterior("M1").posterior
    True
    >>> info = result.information         # how much the data said
    >>> 0.0 < info["contraction"]["dfmq"] <= 1.0   # 1 - var_post / var_prior
    True
    >>> info["p_magmatic_shift"] == result.p_magmatic - result.pi0
    True
    >>> "along one direction" in info["unresolved_words"]
    True
    """
    from ventsource.inference.row.one_measurement import infer as _infer
    return _infer(measurement, load_prior(prior), seed=seed, **options)


def infer_window(measurements, prior, seed=0, **options):
    """Rows that share one magma source, inverted together (the window model).

    ``measurements``: a sequence of Measurement, or a MeasurementSeries (all its rows).
    Only ``pressure_bar`` and the scrubbed fraction vary per row (or the prior's
    [window] per_row set); everything else is shared. ``options``: n_particles,
    n_runs, split_check, ... (ventsource.inference.window.sampling.WINDOW_DEFAULTS), and
    ``progress``, a function called with the fraction done (0 to 1) as the window advances.
    Returns a WindowResult: ``summary()`` (one row per measurement, model-averaged;
    ``summary("M1")`` the scrubbed fraction if scrubbed), ``idata()`` (the shared
    posterior), ``log10_bf_shared`` (one source against each row its own; NaN for one
    row), ``source_check`` (the change-of-source check: "run", "not_run" below 4 rows or
    with split_check=False, "failed"), ``flags``.

    >>> import ventsource as vs
    >>> rows = vs.read_measurements("examples/mount_kerrow_synthetic.csv").measurements[:3]
    >>> w = vs.infer_window(rows, "demo_mount_kerrow_fast", seed=2, n_particles=40, n_runs=2,
    ...                     split_check=False, n_source_check=200)
    >>> table = w.summary()
    >>> len(table), bool(table["p_magmatic"].between(0, 1).all())
    (3, True)
    >>> "dfmq" in w.idata().posterior         # a shared parameter
    True
    """
    from ventsource.inference.window.sampling import infer_window as _infer_window
    rows = list(getattr(measurements, "measurements", measurements))
    return _infer_window(rows, load_prior(prior), seed=seed, **options)


__all__ = ["infer", "infer_window"]

"""A series inverted into a run folder (`run`) and the same data under several priors
(`compare`), each returning its table as a pandas DataFrame."""
import os

from ventsource.api.inputs import load_prior, read_measurements


def _series(data, default_sigma):
    return read_measurements(data, default_sigma) if isinstance(data, (str, os.PathLike)) else data


def _prior_path(prior):
    """The file of a prior given as a path or a shipped name (one-line error otherwise)."""
    from ventsource.inference.priors.shipped import resolve_prior
    load_prior(prior)
    return resolve_prior(prior)


def run(data, prior, out, seed=0, workers=1, resume=False, window=None, default_sigma=0.15,
        figures=False, dask_scheduler=None, dask_local=False, oversubscribe=False,
        budget_max_gap_days=None, shift_reference=0, **options):
    """Invert every row of a measurement file into the folder ``out``; returns its
    summary.csv as a pandas DataFrame (one row per measurement, as ``ventsource run``
    writes it; columns: docs/outputs.md).

    ``data``: a measurement CSV or a MeasurementSeries (read_measurements); ``prior``: a
    file or a shipped name; ``window``: None (the file's window column if it has one,
    else row by row), "rows", "column" or a span in seconds (rows sharing a source).
    The folder also gets hazard.json, rows/*.nc (each row's InferenceData) and run.json;
    ``resume=True`` keeps verified finished rows; ``figures=True`` draws the figures.
    ``dask_scheduler`` (an address) or ``dask_local`` spread the rows over Dask
    workers; ``oversubscribe`` allows more workers than cores;
    ``budget_max_gap_days``: longest interval the sulfur budget bridges (files with
    flux columns); ``shift_reference``: data sets simulated from the prior to learn how far
    data usually move P(M0) (hazard.json's p_magmatic_shift_reference; 0: not run).
    ``options``: options of infer (n_particles, engine, ...). Bad input raises
    InputError (a ValueError) with one line. Results are model- and prior-dependent and
    support, never replace, the responsible observatory's assessment.

    >>> import os, tempfile, pandas as pd, ventsource as vs
    >>> folder = tempfile.mkdtemp()
    >>> data = os.path.join(folder, "two_rows.csv")
    >>> pd.read_csv("examples/mount_kerrow_synthetic.csv", dtype=str).head(2).to_csv(data, index=False)
    >>> table = vs.run(data, "demo_mount_kerrow_fast", os.path.join(folder, "run"), seed=1,
    ...                window="rows", n_particles=100, n_runs=2)
    >>> list(table["id"]) == list(vs.read_measurements(data).ids)
    True
    >>> bool(table["p_magmatic"].between(0, 1).all())
    True
    >>> all(os.path.exists(os.path.join(folder, "run", f)) for f in ("summary.csv", "hazard.json"))
    True
    >>> import shutil; shutil.rmtree(folder)
    """
    from ventsource.workflow.series import SUMMARY_NAME, run_series
    import pandas as pd
    series = _series(data, default_sigma)
    prior_path = _prior_path(prior)
    run_series(series, prior_path, out, seed=seed, workers=workers, resume=resume,
               options=options, dask_scheduler=dask_scheduler, dask_local=dask_local, window=window,
               oversubscribe=oversubscribe, budget_max_gap_days=budget_max_gap_days,
               shift_reference=shift_reference)
    if figures:
        from ventsource.workflow.figures import run_figures
        run_figures(out, series, load_prior(prior_path))
        from ventsource.workflow.report_html import write_report
        write_report(out)  # report.html again, with the figures embedded
    return pd.read_csv(os.path.join(out, SUMMARY_NAME), dtype={"id": str})


def compare(data, priors, out, seed=0, workers=1, resume=False, window=None, default_sigma=None,
            **options):
    """The same measurement file under two or more priors; returns compare.csv as a
    pandas DataFrame (P(M0) per row under each prior, its spread across priors, overlap
    of the posteriors) and writes compare.png and one complete run per prior under
    ``out``/runs/. ``default_sigma``: None takes each prior file's
    likelihood.relative_sigma, as ``ventsource compare`` does.

    >>> import os, tempfile, pandas as pd, ventsource as vs
    >>> folder = tempfile.mkdtemp()
    >>> data = os.path.join(folder, "two_rows.csv")
    >>> pd.read_csv("examples/mount_kerrow_synthetic.csv", dtype=str).head(2).to_csv(data, index=False)
    >>> table = vs.compare(data, ["demo_mount_kerrow_fast", "demo_mount_kerrow_fast_release"],
    ...                    os.path.join(folder, "cmp"), window="rows", n_particles=100, n_runs=2)
    >>> len(table), sorted(os.listdir(os.path.join(folder, "cmp", "runs")))
    (2, ['demo_mount_kerrow_fast', 'demo_mount_kerrow_fast_release'])
    >>> import shutil; shutil.rmtree(folder)
    """
    from ventsource.common.errors import InputError
    from ventsource.workflow.compare import run_compare
    import pandas as pd
    paths = [_prior_path(p) for p in priors]
    if len(paths) < 2:
        raise InputError("compare: give at least two priors")
    series = {}
    for path in paths:
        sigma = default_sigma
        if sigma is None:
            sigma = float(load_prior(path).likelihood.get("relative_sigma", 0.15))
        series[path] = _series(data, sigma)
    csv_path, _ = run_compare(series, paths, out, seed=seed, workers=workers, resume=resume,
                              options=options, window=window)
    return pd.read_csv(csv_path, dtype={"id": str})


__all__ = ["run", "compare"]

"""Reading a prior (a file or a shipped name) and a measurement file from Python."""
import os

from ventsource.inference.likelihood import Measurement
from ventsource.inference.priors import PriorFileError, load_prior_file
from ventsource.inference.priors.shipped import resolve_prior, shipped_prior_names


def load_prior(prior):
    """The prior of a TOML file, or of a shipped prior given by name.

    ``prior``: a path (str or os.PathLike) or a shipped name (``ventsource priors``
    lists them); a PriorSpec is returned unchanged. A file that does not exist and is
    no shipped name raises PriorFileError with one line naming both.

    >>> import ventsource as vs
    >>> prior = vs.load_prior("demo_mount_kerrow_fast")
    >>> prior.name
    'demo_mount_kerrow_fast'
    >>> "pressure_bar" in prior.free_names
    True
    >>> vs.load_prior("priors/no_such_prior.toml")
    Traceback (most recent call last):
    ...
    ventsource.inference.priors.fields.PriorFileError: priors/no_such_prior.toml: no such file, and no shipped prior of that name (shipped: ...)
    """
    if hasattr(prior, "free_names") and hasattr(prior, "log_prob"):
        return prior
    text = os.fspath(prior)
    if not os.path.exists(resolve_prior(text)):
        names = ", ".join(shipped_prior_names())
        raise PriorFileError(f"{text}: no such file, and no shipped prior of that name (shipped: {names})")
    return load_prior_file(text)


def read_measurements(path, default_sigma=0.15):
    """Read and check a measurement CSV (format: docs/measurements.md).

    Returns a MeasurementSeries: ``.ids``, ``.times``, ``.measurements`` (one
    Measurement per row), ``.ratio_names``. ``default_sigma``: relative 1-sigma of
    cells without their own ``sigma RATIO`` column, one number or {ratio: sigma} with
    an optional "*" entry. A bad file raises InputError (a ValueError) with one line
    naming file, row and column.

    >>> import ventsource as vs
    >>> series = vs.read_measurements("examples/mount_kerrow_synthetic.csv")
    >>> len(series.ids) > 10, series.ratio_names[:2]
    (True, ('SO2/CO2', 'H2S/SO2'))
    >>> isinstance(series.measurements[0], vs.Measurement)
    True
    """
    from ventsource.workflow.measurements import read_measurements as _read
    return _read(path, default_sigma=default_sigma)


__all__ = ["Measurement", "load_prior", "read_measurements"]

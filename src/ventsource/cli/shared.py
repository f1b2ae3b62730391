"""What the commands share: number parsing and range checks of options, reading a
prior file with a one-line error, the note that the first call compiles, and library
warnings routed to OUT/warnings.log.
"""
import argparse
import math
import os
import sys

from ventsource.common.errors import InputError


def _number(name):
    def parse(text):
        try:
            value = float(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{name} '{text}' is not a number") from None
        if not math.isfinite(value):
            raise argparse.ArgumentTypeError(f"{name} '{text}' is not finite")
        return value
    return parse


def _check_range(label, value, bounds, unit=""):
    lo, hi = bounds
    if not lo <= value <= hi:
        raise InputError(f"{label} {value:g}{unit} is outside the supported range "
                         f"{lo:g} to {hi:g}{unit}")


def _load_prior(path):
    from ventsource.inference.priors import PriorFileError, load_prior_file
    try:
        return load_prior_file(path)
    except PriorFileError as exc:
        raise InputError(str(exc)) from None


def _finite_or_none(value):
    value = float(value)
    return value if math.isfinite(value) else None


COMPILE_NOTICE = "compiling the model's kernels (first run only, about 30 s)"


def kernel_cache_empty():
    """True when numba has no cached kernels (*.nbi) beside the kernel modules or in
    NUMBA_CACHE_DIR: the first call then compiles."""
    import glob
    import ventsource
    root = os.path.dirname(ventsource.__file__)
    places = [os.path.join(root, sub, "__pycache__", "*.nbi") for sub in ("chemistry", "magma")]
    if any(glob.glob(p) for p in places):
        return False
    # numba falls back to a per-user cache when the package folder is read-only
    for extra in (os.environ.get("NUMBA_CACHE_DIR"), os.path.expanduser("~/.cache/numba")):
        for path in glob.glob(os.path.join(extra or "/nonexistent", "**", "*.nbi"), recursive=True):
            if "ventsource" in path:
                return False
    return True


def announce_compilation(stream=None):
    """Say once on stderr why the first call waits."""
    if kernel_cache_empty():
        print(COMPILE_NOTICE, file=stream or sys.stderr, flush=True)


def route_warnings(out_dir):
    """Library warnings go to OUT/warnings.log instead of the progress lines."""
    import warnings
    path = os.path.join(out_dir, "warnings.log")

    def to_file(message, category, filename, lineno, file=None, line=None):
        # the folder is made (after its checks) by the run itself; nothing is created here
        try:
            with open(path, "a") as fh:
                fh.write(warnings.formatwarning(message, category, filename, lineno, line))
        except OSError:
            pass
    warnings.showwarning = to_file

"""One BLAS thread per process for series runs.

Multithreaded OpenBLAS may split a matrix product differently from run to run,
which changes the last bits of the results; a series run places one row per
core anyway. Environment variables only act before NumPy loads, so for a
process where it is already loaded the OpenBLAS libraries it mapped are told
directly through their `*openblas_set_num_threads*` entry points (ctypes).
"""
import ctypes
import os

_VARS = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")


def single_thread_environment():
    """Set the thread variables (inherited by worker processes started later)."""
    for name in _VARS:
        os.environ[name] = "1"


def limit_blas_threads():
    """Set every OpenBLAS already loaded in this process to one thread; returns how many."""
    single_thread_environment()
    done = 0
    try:
        with open("/proc/self/maps") as fh:
            libs = {line.split()[-1] for line in fh if "openblas" in line.lower() and ".so" in line}
    except OSError:
        return 0
    for path in libs:
        try:
            lib = ctypes.CDLL(path)
        except OSError:
            continue
        for sym in ("openblas_set_num_threads", "openblas_set_num_threads64_",
                    "scipy_openblas_set_num_threads", "scipy_openblas_set_num_threads64_"):
            fn = getattr(lib, sym, None)
            if fn is not None:
                fn(1)
                done += 1
                break
    return done

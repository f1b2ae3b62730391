"""Oxygen fugacity buffers and conversions between redox scales.

Frost (1991), Reviews in Mineralogy 25, 1-9, Table 1:
log fO2 = A/T + B + C (P - 1)/T, T in K, P in bar.
"""
import numpy as np

# (A, B, C) from Frost 1991 Table 1. FMQ: the beta-quartz branch (T > 573 C),
# which covers the magmatic range of this package. NNO: single expression.
FMQ_COEFFICIENTS = (-25096.3, 8.735, 0.110)
NNO_COEFFICIENTS = (-24930.0, 9.36, 0.046)


def _buffer(coefficients, temperature_k, pressure_bar):
    a, b, c = coefficients
    t = np.asarray(temperature_k, dtype=float)
    p = np.asarray(pressure_bar, dtype=float)
    return a / t + b + c * (p - 1.0) / t


def log10_fo2_fmq(temperature_k, pressure_bar):
    """log10 fO2 (bar) of the fayalite-magnetite-quartz buffer."""
    return _buffer(FMQ_COEFFICIENTS, temperature_k, pressure_bar)


def log10_fo2_nno(temperature_k, pressure_bar):
    """log10 fO2 (bar) of the nickel-nickel oxide buffer."""
    return _buffer(NNO_COEFFICIENTS, temperature_k, pressure_bar)


def log10_fo2_from_dfmq(dfmq, temperature_k, pressure_bar):
    return log10_fo2_fmq(temperature_k, pressure_bar) + np.asarray(dfmq, dtype=float)


def dfmq_from_log10_fo2(log10_fo2, temperature_k, pressure_bar):
    return np.asarray(log10_fo2, dtype=float) - log10_fo2_fmq(temperature_k, pressure_bar)


def log10_fo2_from_dnno(dnno, temperature_k, pressure_bar):
    return log10_fo2_nno(temperature_k, pressure_bar) + np.asarray(dnno, dtype=float)


def dnno_from_log10_fo2(log10_fo2, temperature_k, pressure_bar):
    return np.asarray(log10_fo2, dtype=float) - log10_fo2_nno(temperature_k, pressure_bar)


def dfmq_from_dnno(dnno, temperature_k, pressure_bar):
    return dfmq_from_log10_fo2(log10_fo2_from_dnno(dnno, temperature_k, pressure_bar),
                               temperature_k, pressure_bar)


def dnno_from_dfmq(dfmq, temperature_k, pressure_bar):
    return dnno_from_log10_fo2(log10_fo2_from_dfmq(dfmq, temperature_k, pressure_bar),
                               temperature_k, pressure_bar)

"""Gas chemistry: species, NASA-7 thermochemistry and log K, oxygen buffers,
fugacity coefficients (equation of state) and speciation at fixed T, P, fO2.

May import: ventsource.common.
"""

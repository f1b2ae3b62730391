"""The gas's path to the surface: re-equilibration until it freezes at a
quench temperature, scrubbing of SO2 (and H2S) by a hydrothermal system, and
the observable molar ratios.

May import: ventsource.common, ventsource.chemistry, ventsource.magma.
"""

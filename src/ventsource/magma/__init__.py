"""The magma: melt composition, H2O/CO2/S solubility laws, and degassing
(saturation pressure, closed- and open-system paths).

May import: ventsource.common, ventsource.chemistry.
"""

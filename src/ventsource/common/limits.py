"""The supported range of the physical model (checked at every entry point)."""
TEMPERATURE_C = (600.0, 1300.0)
PRESSURE_BAR = (1.0, 5000.0)
DFMQ = (-4.0, 4.0)

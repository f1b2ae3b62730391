"""The public Python interface, re-exported at the top level (`ventsource.infer`, ...):
prior and measurement reading (`inputs`), one row and a window (`inversion`), a series
and a comparison of priors written to a folder (`runs`), the forward model (`model`).

May import: every layer below (common ... workflow).
"""

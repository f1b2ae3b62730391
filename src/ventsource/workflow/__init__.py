"""Workflow at the edges: measurement files, series runs (resumable,
processes or Dask), prior comparison, figures, the demo and prior-predictive
tables. File I/O and plotting live here and in the CLI only.

May import: every layer below (common ... inference).
"""

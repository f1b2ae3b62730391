"""Log evidence of one candidate segment (rows start..end-1 share one magma source).

The score is the change-of-source check's own evidence (inference/window/sampling.py,
check (b)): the window model with every row's SO2 a free factor (So2FreeWindowTarget),
so that a change of scrubbing (or released sulfur), which moves SO2 only, is never read
as a change of source. Each segment is run once: evidences are cached by (start, end),
and each run is seeded from (run seed, start, end), so the numbers do not depend on the
order in which the search asks for them, nor on the number of workers.
"""
from __future__ import annotations

import numpy as np

from ventsource.inference.window.sampling import WINDOW_DEFAULTS, WindowError, _log_evidence


class SegmentEvidence:
    """log Z of the SO2-free window model for any stretch of a series, computed once.

    likelihoods: one Likelihood per row in time order; opt: the window options
    (split_particles, split_runs, ess_target, split_max_moves are used)."""

    def __init__(self, prior, forward, likelihoods, seed=0, opt=None):
        self.prior, self.forward, self.liks = prior, forward, list(likelihoods)
        self.seed = int(seed)
        self.opt = dict(WINDOW_DEFAULTS, **(opt or {}))
        self.cache = {}

    @property
    def n_rows(self):
        return len(self.liks)

    def segment_seed(self, start, end):
        return int(np.random.SeedSequence([self.seed, 0x5E6, int(start), int(end)]).generate_state(1)[0])

    def log_z(self, start, end):
        """(log Z, Monte Carlo error) of rows start..end-1 as one source; (-inf, nan)
        when no prior draw gives a finite likelihood (that stretch cannot be one source)."""
        key = (int(start), int(end))
        if key not in self.cache:
            try:
                lz, err = _log_evidence(self.prior, self.forward, self.liks[start:end],
                                        self.segment_seed(*key), self.opt)
            except WindowError:
                lz, err = -np.inf, np.nan
            self.cache[key] = (float(lz), float(err))
        return self.cache[key]

    def many(self, keys):
        """log Z of several segments (cached ones are not run again)."""
        return [self.log_z(a, b) for a, b in keys]

"""How far a window's inversion has gone, as a fraction for progress bars.

A window's time goes to its tempered SMC run (the stages until every run reaches
beta = 1), then to the per-row results, then to the change-of-source check (1 + 2 x
cuts small SMC runs, one after another). Neither the number of stages nor of moves is
known in advance; the remaining stages of a run are estimated from its temperature
ladder: with the conditional-ESS rule each stage multiplies beta by roughly the same
factor once the likelihood dominates (for a Gaussian-shaped likelihood the spread of
log L under the tempered posterior falls as 1/beta, so the step in beta grows in
proportion to beta; common practice, no source), so the stages left are about
ln(1/beta) / ln(beta_k / beta_(k-1)). Only the reporting uses these numbers: nothing
here touches a random stream, so a window's numbers do not depend on it.
"""
from __future__ import annotations

import numpy as np

# Shares of a window's CPU time. Measured on the demo prior (fast variant), 8 and 12 rows,
# 200 particles x 4 runs: the main run 55-60 %, the per-row results and the one-source
# check 3-5 %, the change-of-source check 35-40 % (docs/running.md, "Progress").
MAIN_SHARE, ROWS_SHARE, CHECK_SHARE = 0.58, 0.04, 0.38
FIRST_STAGE_GUESS = 10.0     # stages left assumed after the first one (no ladder yet)


class StageFraction:
    """Fraction done of one tempered SMC run (several runs in lockstep: the slowest)."""

    def __init__(self):
        self.stages, self.prev, self.best = 0, None, 0.0

    def update(self, beta):
        b = float(np.min(beta))
        self.stages += 1
        if b >= 1.0:
            f = 1.0
        elif self.prev is None or self.prev <= 0.0 or b <= self.prev:
            f = self.stages / (self.stages + FIRST_STAGE_GUESS)
        else:
            left = np.log(1.0 / b) / np.log(b / self.prev)
            f = self.stages / (self.stages + left)
        self.prev = b
        self.best = max(self.best, min(f, 1.0))   # a bar never goes back
        return self.best


class WindowProgress:
    """Calls report(fraction) as a window advances; fraction in [0, 1], never decreasing.

    n_check_runs: SMC runs of the change-of-source check (0 when it does not run)."""

    def __init__(self, report, n_check_runs):
        self.report, self.n_check = report, int(n_check_runs)
        scale = 1.0 if self.n_check else 1.0 / (MAIN_SHARE + ROWS_SHARE)
        self.main, self.rows = MAIN_SHARE * scale, ROWS_SHARE * scale
        self.check = CHECK_SHARE if self.n_check else 0.0
        self.done_checks, self.run = 0, StageFraction()
        self.last = 0.0

    def _emit(self, fraction):
        fraction = min(max(fraction, self.last), 1.0)
        if fraction > self.last or fraction == 1.0:
            self.last = fraction
            self.report(fraction)

    def main_stage(self, beta, stage=None):
        """Callback of the window's SMC run (tempered_smc on_stage)."""
        self._emit(self.main * self.run.update(beta))

    def rows_done(self):
        self.run = StageFraction()
        self._emit(self.main + self.rows)

    def check_stage(self, beta, stage=None):
        """Callback of each SMC run of the change-of-source check, in turn."""
        f = self.run.update(beta)
        k = self.done_checks + f
        if f >= 1.0:
            self.done_checks += 1
            self.run = StageFraction()
        self._emit(self.main + self.rows + self.check * min(k / max(self.n_check, 1), 1.0))

    def finished(self):
        self._emit(1.0)

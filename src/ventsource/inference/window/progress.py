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

FIRST_STAGE_GUESS = 10.0     # stages left assumed after the first one (no ladder yet)
# Cost of one SMC run, relative: particles x runs x (1 + ln rows) (solves per draw: below).
# The stages grow with the information the rows carry about the shared magma, which for d
# shared parameters grows as (d/2) ln n (Schwarz 1978, Ann. Stat. 6:461; from memory).
# CHECK_FACTOR: the check's smaller runs (24 solves, fewer stages) per unit. Measured on
# the demo prior (fast variant): 40 x 2 particles, windows of 1, 3, 4 rows, with the
# forward-model states solved as the clock: 50, 118, 493 (the 4-row window's check 76 %;
# fits 0.44); 200 x 4 particles (the defaults), 8 and 12 rows: the check 28 % and 29 % of
# the CPU time (fits 0.30). 1 + ln n fits 1 -> 3 rows (2.1 against 2.4) and the window
# bench's 6 -> 24 rows (1.50 against 1.44, DEVELOPERS.md).
CHECK_FACTOR = 0.37


def _run_cost(n_particles, n_runs, n_rows):
    return n_particles * n_runs * (1.0 + np.log(max(n_rows, 1)))


def window_costs(n_rows, opt, check_rows):
    """(main run, per-row results, [each check run]) relative costs of one window;
    check_rows: rows of each SMC run of the change-of-source check, in order."""
    main = _run_cost(opt["n_particles"], opt["n_runs"], n_rows)
    checks = [CHECK_FACTOR * _run_cost(opt["split_particles"], opt["split_runs"], k) for k in check_rows]
    return main, 0.05 * main, checks


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

    costs: window_costs(n_rows, options): the main run, the per-row results, each check run."""

    def __init__(self, report, costs):
        main, rows, checks = costs
        total = main + rows + sum(checks)
        self.report = report
        self.main, self.rows = main / total, rows / total
        self.checks = [c / total for c in checks]
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
        k = min(self.done_checks, len(self.checks) - 1)
        f = self.run.update(beta)
        done = sum(self.checks[:k]) + self.checks[k] * f
        if f >= 1.0:
            self.done_checks += 1
            self.run = StageFraction()
        self._emit(self.main + self.rows + done)

    def finished(self):
        self._emit(1.0)

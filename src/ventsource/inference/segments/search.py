"""Where the magma source of a series changes: binary segmentation by model comparison.

A segmentation's log posterior score is the sum of its segments' log evidences (each
segment one source, inference/segments/evidence.py) plus its log prior
(inference/segments/change_prior.py). The search (binary segmentation; Scott and Knott
1974, Biometrics 30:507, from memory, for the splitting scheme) asks of each stretch
between changes already found whether it holds one more: the posterior odds of "a
change somewhere inside" against "none", summed over the change's position (not its
best position, so that looking in many places is paid for), with the global prior
odds of one more change. A stretch whose odds exceed 1 is split at the most probable
position, and passes repeat until no stretch splits. Long stretches are first scanned
on a grid of every `step`-th position (the sum scaled by the positions it stands for)
and the best position refined to the row. Evidences are cached, so no segment is
scored twice.

Per row, p_change_before is the posterior probability that a change lies just before
that row, with the other changes found held fixed: for a row whose nearest found change
is c_k, over the stretch between the changes on either side of c_k (every position
scored, plus "no change there"); with no change found, over the whole series. It is
not averaged over segmentations.
"""
from __future__ import annotations

import time
from dataclasses import dataclass, field

import numpy as np
from scipy import special

from ventsource.inference.segments.change_prior import (DEFAULT_CHANGE_PRIOR, DEFAULT_MIN_ROWS,
                                                         log_prior, log_prior_odds_one_more,
                                                         parse_change_prior)
from ventsource.inference.segments.evidence import SegmentEvidence
from ventsource.inference.likelihood import Likelihood

GRID_POSITIONS = 16   # a stretch with more candidate positions is first scanned on a grid


@dataclass
class Segmentation:
    starts: list                 # first row of each segment (time order), starts[0] == 0
    n_rows: int
    segments: list               # per segment: start, end, log_z, log_z_error, log10_odds_change_inside
    p_change_before: np.ndarray  # (n_rows,), NaN for the first row
    log_score: float             # sum of segment log evidences + log prior of the segmentation
    log_prior: float
    change_prior: tuple
    min_rows: int
    diagnostics: dict = field(default_factory=dict)

    @property
    def labels(self):
        return [f"s{k + 1:02d}" for k in range(len(self.starts))]

    def groups(self):
        """[(label, [row positions in time order])] of each segment."""
        ends = list(self.starts[1:]) + [self.n_rows]
        return [(lab, list(range(a, b))) for lab, a, b in zip(self.labels, self.starts, ends)]


def segment_series(measurements, prior, forward=None, seed=0, min_rows=DEFAULT_MIN_ROWS,
                   change_prior=DEFAULT_CHANGE_PRIOR, options=None):
    """Segments of a series (measurements in time order) that share one magma source.

    options: the window options (split_particles, split_runs, ess_target, split_max_moves,
    kind, dof) of each segment's evidence run. Returns a Segmentation."""
    start_cpu = time.process_time()
    kind_value = parse_change_prior(change_prior)
    opt = dict(options or {})
    if forward is None:
        from ventsource.forward.model import ForwardModel
        names = tuple(dict.fromkeys(n for m in measurements for n in m.ratio_names))
        forward = ForwardModel(prior, ratio_names=names)
    kind = opt.get("kind") or prior.likelihood.get("kind", "normal")
    dof = opt.get("dof") or prior.likelihood.get("dof", 4.0)
    liks = [Likelihood(m, kind=kind, dof=dof, prediction_names=forward.ratio_names) for m in measurements]
    ev = SegmentEvidence(prior, forward, liks, seed, {k: v for k, v in opt.items() if k not in ("kind", "dof")})
    n = len(liks)
    starts = _binary_segmentation(ev, n, kind_value, min_rows)
    p = change_probabilities(ev, starts, n, kind_value, min_rows)
    bounds = list(zip(starts, list(starts[1:]) + [n]))
    segments = []
    for a, b in bounds:
        lz, err = ev.log_z(a, b)
        odds, _ = _stretch_odds(ev, a, b, n, len(starts) - 1, kind_value, min_rows)
        segments.append({"start": a, "end": b, "log_z": lz, "log_z_error": err,
                         "log10_odds_change_inside": float(odds / np.log(10.0))})
    lp = log_prior(n, len(starts) - 1, *kind_value, min_rows)
    score = float(sum(s["log_z"] for s in segments) + lp)
    diag = {"n_segment_evidences": len(ev.cache), "cpu_s": time.process_time() - start_cpu}
    return Segmentation(starts, n, segments, p, score, lp, kind_value, min_rows, diag)


def _positions(a, b, m):
    return list(range(a + m, b - m + 1))


def _scan(ev, a, b, cuts):
    """log Z(a, c) + log Z(c, b) for each cut c."""
    return np.array([ev.log_z(a, c)[0] + ev.log_z(c, b)[0] for c in cuts])


def _stretch_odds(ev, a, b, n, k, kind_value, m):
    """(log posterior odds of one more change inside rows a..b-1 against none, its most
    probable position), the other k changes held fixed."""
    every = _positions(a, b, m)
    if not every:
        return -np.inf, None
    step = max(1, int(np.ceil(len(every) / GRID_POSITIONS)))
    grid = every[::step]
    lz = _scan(ev, a, b, grid)
    if not np.isfinite(lz).any():
        return -np.inf, None
    log_sum = special.logsumexp(lz) + np.log(len(every) / len(grid))  # each grid point stands for `step`
    best = grid[int(np.argmax(lz))]
    if step > 1:   # refine the position to the row
        near = [c for c in every if abs(c - best) < step]
        best = near[int(np.argmax(_scan(ev, a, b, near)))]
    lz_none = ev.log_z(a, b)[0]
    if not np.isfinite(lz_none):
        return np.inf, best
    return float(log_sum - lz_none + log_prior_odds_one_more(n, k, *kind_value, m)), best


def _binary_segmentation(ev, n, kind_value, m):
    """Starts of the segments: split stretches while one more change is more probable
    than none; stretches in time order, passes until nothing splits (deterministic)."""
    starts = [0]
    while True:
        bounds = list(zip(starts, list(starts[1:]) + [n]))
        split = None
        for a, b in bounds:
            odds, best = _stretch_odds(ev, a, b, n, len(starts) - 1, kind_value, m)
            if odds > 0.0 and best is not None:
                split = best
                break
        if split is None:
            return starts
        starts = sorted(starts + [split])


def change_probabilities(ev, starts, n, kind_value, m):
    """p_change_before per row (see the module's docstring)."""
    p = np.zeros(n)
    p[0] = np.nan
    changes = list(starts[1:])
    k = len(changes)
    if not changes:
        _fill(p, ev, 0, n, n, 0, kind_value, m, range(1, n))
        return p
    edges = [0] + changes + [n]
    for j, c in enumerate(changes):
        a, b = edges[j], edges[j + 2]
        lo = (edges[j] + c) // 2 + 1 if j > 0 else 1            # rows nearer to c than to
        hi = (c + edges[j + 2]) // 2 + 1 if j < k - 1 else n     # the changes beside it
        _fill(p, ev, a, b, n, k - 1, kind_value, m, range(lo, hi))
    return p


def _fill(p, ev, a, b, n, k_other, kind_value, m, rows):
    """Posterior of a change at each position in a..b-1 (or none), k_other changes fixed.

    Long stretches: every position near a grid point within a factor 1e4 of the best
    grid point is scored; positions farther off get 0 (below 1e-4 of the largest
    neighbour, to the grid's resolution)."""
    cuts = _scored_positions(ev, a, b, m)
    if not cuts:
        return
    lz = _scan(ev, a, b, cuts)
    lz_none = ev.log_z(a, b)[0]
    log_one = lz + log_prior_odds_one_more(n, k_other, *kind_value, m)
    total = special.logsumexp(np.r_[log_one, lz_none])
    post = dict(zip(cuts, np.exp(log_one - total)))
    for i in rows:
        p[i] = post.get(i, 0.0)   # a position closer than m rows to an end has no prior mass


def _scored_positions(ev, a, b, m):
    every = _positions(a, b, m)
    step = max(1, int(np.ceil(len(every) / GRID_POSITIONS))) if every else 1
    if step == 1:
        return every
    grid = every[::step]
    lz = _scan(ev, a, b, grid)
    if not np.isfinite(lz).any():
        return grid
    keep = [g for g, v in zip(grid, lz) if v >= lz.max() - np.log(1e4)]
    return sorted(set(grid) | {c for c in every if any(abs(c - g) < step for g in keep)})

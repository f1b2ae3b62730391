"""Averaging windows over a stream of chunks: fixed time windows or plume passages.

Rows of a window that is not yet complete at the end of a chunk are carried
into the next chunk, so a window straddling chunks is cut exactly as if the
whole file had been read at once.
"""
import re
from dataclasses import dataclass

import numpy as np

from ventsource.common.errors import InputError
from ventsource.workflow.plume.reader import Chunk

NS = 1_000_000_000
_DURATION = re.compile(r"^\s*(\d+(?:\.\d+)?)\s*(s|sec|min|h|hr|d)\s*$")
_UNIT_S = {"s": 1, "sec": 1, "min": 60, "h": 3600, "hr": 3600, "d": 86400}


def parse_duration_s(text, option="--window"):
    m = _DURATION.match(str(text))
    if not m or float(m.group(1)) <= 0:
        raise InputError(f"{option} '{text}': expected a positive duration such as 90s, 30min, 1h")
    return float(m.group(1)) * _UNIT_S[m.group(2)]


@dataclass
class FixedWindows:
    """Consecutive windows of `seconds`, aligned to whole multiples since 1970-01-01 UTC
    (30 min windows start at :00 and :30)."""
    seconds: float

    def split(self, times_ns, tracer, final):
        k = times_ns // int(self.seconds * NS)
        cuts = np.flatnonzero(np.diff(k)) + 1
        starts = np.concatenate([[0], cuts])
        ends = np.concatenate([cuts, [times_ns.size]])
        if not final:   # the last window may continue in the next chunk
            return list(zip(starts[:-1], ends[:-1])), int(starts[-1])
        return list(zip(starts, ends)), times_ns.size


@dataclass
class PlumeWindows:
    """Plume passages: runs where the tracer gas exceeds `threshold` (ppmv), merged when
    closer than `merge_gap_s`, each padded by `pad_s` on both sides (background and
    rise for the regression), cut at `max_duration_s`."""
    threshold: float
    pad_s: float = 30.0
    merge_gap_s: float = 10.0
    max_duration_s: float = 3600.0

    def _passages(self, t, tracer):
        above = tracer > self.threshold
        if not above.any():
            return np.empty(0, np.int64), np.empty(0, np.int64)
        edges = np.diff(np.concatenate([[0], above.astype(np.int8), [0]]))
        first, last = np.flatnonzero(edges == 1), np.flatnonzero(edges == -1) - 1
        join = max(self.merge_gap_s, 2 * self.pad_s) * NS
        keep = np.concatenate([[True], t[first[1:]] - t[last[:-1]] > join])
        return first[keep], np.maximum.reduceat(last, np.flatnonzero(keep))

    def split(self, times_ns, tracer, final):
        t = times_ns
        if t.size == 0:
            return [], 0
        first, last = self._passages(t, tracer)
        pad, join, cap = self.pad_s * NS, max(self.merge_gap_s, 2 * self.pad_s) * NS, self.max_duration_s * NS
        out, carry = [], int(np.searchsorted(t, t[-1] - pad, "left")) if not final else t.size
        for f, l in zip(first, last):
            start = int(np.searchsorted(t, t[f] - pad, "left"))
            complete = final or t[-1] - t[l] > join
            while t[l] + pad - t[start] > cap and t[-1] - t[start] > cap:
                cut = int(np.searchsorted(t, t[start] + cap, "left"))
                out.append((start, cut))
                start = cut
            if not complete:
                carry = min(carry, start)
                break
            out.append((start, int(np.searchsorted(t, t[l] + pad, "right"))))
        return out, carry


def _concat(a, b):
    if a is None:
        return b
    return Chunk(np.concatenate([a.times_ns, b.times_ns]),
                 {k: np.concatenate([a.values[k], b.values[k]]) for k in b.values},
                 np.concatenate([a.lines, b.lines]))


def _slice(c, i, j):
    return Chunk(c.times_ns[i:j], {k: v[i:j] for k, v in c.values.items()}, c.lines[i:j])


def iter_windows(chunks, windower, tracer_name):
    """Yield one Chunk per complete window, in time order."""
    carry = None
    for chunk in chunks:
        buf = _concat(carry, chunk)
        spans, keep_from = windower.split(buf.times_ns, buf.values[tracer_name], final=False)
        for i, j in spans:
            if j > i:
                yield _slice(buf, i, j)
        carry = _slice(buf, keep_from, buf.times_ns.size)
    if carry is not None and carry.times_ns.size:
        spans, _ = windower.split(carry.times_ns, carry.values[tracer_name], final=True)
        for i, j in spans:
            if j > i:
                yield _slice(carry, i, j)

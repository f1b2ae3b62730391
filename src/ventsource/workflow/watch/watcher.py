"""The watch loop: new complete lines -> instant answers -> window update -> files -> alerts.

Per batch of new lines: each is checked alone (a bad line is logged, listed and skipped);
rows are placed in windows (`--window` spans from the first row's time, or the file's
window column); every new row of the current window is answered at once against the
window's population as it stands (one batch of forward solves for all of them,
answers.csv); then the rows update the window one at a time in file order
(inference/window/sequential.py), and the tables, state and alerts follow. Numbers
depend only on the rows and the seed: the population after row k is the same whether
the watcher ran through or was stopped and restarted (the answers' `window_rows_before`
says which population answered a row, which depends on when rows arrived).

Rows out of order: a row whose window is already closed is skipped (listed); within the
current window the order does not matter to the model (its rows are exchangeable given
the source), such a row is taken and logged. A row dated more than CLOCK_AHEAD_S after
the computer's clock is skipped (a station clock jump would otherwise open a window in
the future and strand every later row). A change of source found by the window's check
(run at check_every, 2 check_every, 4 check_every ... rows) closes the window; the next row starts a new one.
"""
from __future__ import annotations

import math
from collections import deque
import os
import sys
import time
import warnings

import numpy as np

from ventsource.common.errors import InputError
from ventsource.inference.window.sequential_result import source_checks
from ventsource.workflow.watch import alerts as alert_rules
from ventsource.workflow.watch.follow import FollowedFile, parse_row
from ventsource.workflow.watch.outputs import write_answers, write_figure_and_report, write_readme, write_tables
from ventsource.workflow.watch.state import check_settings, load_state, save_state

CLOCK_AHEAD_S = 86400
ALERTS_NAME = "alerts.jsonl"
LOG_NAME = "watch.log"


class Watcher:
    def __init__(self, ctx, stream=None):
        self.ctx, self.stream = ctx, stream or sys.stderr
        self.forward = None
        self.answered_at = {}   # row id -> wall-clock time (s) its answer was written
        self.pending = deque()  # (line, text, byte offset after it, NewRow or None) read, not yet taken
        self._answered, self._lz_cache, self.version, self._moves = set(), {}, None, 0
        self.raw, self.once, self._raw_looked, self._raw_look_t, self.poll_s = None, False, False, -math.inf, 1.0

    def log(self, text):
        stamp = time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime())
        with open(os.path.join(self.ctx.out_dir, LOG_NAME), "a") as fh:
            fh.write(f"{stamp} {text}\n")
        self.stream.write(text + "\n")

    def start(self):
        from ventsource.forward.model import ForwardModel
        from ventsource.inference.window.sequential import WindowPopulation
        c = self.ctx
        state, arrays = load_state(c.out_dir)
        if state is None:
            state = dict(settings=c.settings, offset=0, line=0, header=None, rows_taken=0, t0=None, window=None,
                         closed_rows=[], skipped=[], streaks={}, answers=[], alerts_sent=0)
            write_readme(c.out_dir, c.synthetic)
        else:
            check_settings(c.out_dir, state.get("settings") or {}, c.settings)
        self.state = state
        if c.raw_folder:
            from ventsource.workflow.watch.raw_folder import RawFolder
            self.raw = RawFolder(c.raw_folder, c.out_dir, c.raw_options, self.log)
        self.file = FollowedFile(c.data, state["offset"], state["line"], state["header"])
        self.pop = WindowPopulation.from_arrays(arrays) if arrays is not None else None
        self.window_rows = [self._reparse(r) for r in (state["window"] or {}).get("rows", [])]
        if self.window_rows:
            self.forward = ForwardModel(c.spec, ratio_names=self.window_rows[0].ratio_names)

    def _reparse(self, rec):
        return parse_row(self.ctx.data, self.state["header"], rec["line"], rec["text"], self.ctx.sigma)

    def _read(self):
        """Lines completed since the last look: each checked, queued, and the new rows of
        the current window answered at once; returns how many lines were read."""
        lines = self.file.new_lines()
        fresh = []
        for line, text, end in lines:
            row = self._accept(line, text)
            self.pending.append((line, text, end, row))
            if row is not None:
                fresh.append(row)
        if fresh:
            self._answer_batch(fresh)
        return len(lines)

    def poll(self):
        """Take every line completed so far, one row at a time; between rows, lines that
        arrived meanwhile are answered at once. Returns how many lines were read (and raw files
        decided, watching a raw folder: looked at once per run with --once)."""
        n = 0
        now = time.monotonic()   # looks at the raw folder at least poll_s apart (once per run with --once)
        if self.raw is not None and not (self.once and self._raw_looked) and now - self._raw_look_t >= self.poll_s:
            self._raw_looked, self._raw_look_t = True, now
            n += self.raw.step(self.state, self._save)
        n += self._read()
        while self.pending:
            line, text, end, row = self.pending.popleft()
            if row is not None:
                self._take(row, text, last=not self.pending)
            self.state.update(offset=end, line=line, header=self.file.header)
            self._save()
            n += self._read()
        return n

    def _save(self):
        save_state(self.ctx.out_dir, self.state, None if self.pop is None else self.pop.arrays())

    def _skip(self, line, row_id, reason):
        if any(s["line"] == line for s in self.state["skipped"]):
            return   # read again after a restart: listed and logged once
        self.state["skipped"].append({"line": line, "id": row_id, "reason": reason})
        self.log(f"skipped line {line}: {reason}")

    def _accept(self, line, text):
        """NewRow, or None (logged and listed) for a line that cannot be taken."""
        try:
            row = parse_row(self.ctx.data, self.file.header, line, text, self.ctx.sigma)
        except InputError as exc:
            self._skip(line, None, str(exc))
            return None
        taken = ({r["id"] for r in self.state["closed_rows"]} | {r.row_id for r in self.window_rows}
                 | {p[3].row_id for p in self.pending if p[3] is not None})
        if row.row_id in taken:
            self._skip(line, row.row_id, f"duplicate identifier '{row.row_id}'")
            return None
        if self.ctx.clock_check and row.time_s > time.time() + CLOCK_AHEAD_S:
            self._skip(line, row.row_id, "time more than a day ahead of this computer's clock")
            return None
        return row

    def _label(self, row):
        """(window label, order) of a row: span index from the first row's time, or its column."""
        w = self.ctx.window
        if w == "column":
            if row.window is None:
                raise InputError(f"{self.ctx.data}: --window column needs a 'window' column in the file")
            return row.window, None
        if self.state["t0"] is None:
            self.state["t0"] = row.time_s
        k = math.floor((row.time_s - self.state["t0"]) / w)
        return f"w{k:04d}", k

    def _answer_batch(self, rows):
        """Instant answers of new rows (one batch of solves per window): a row of the current
        window against its population, a row of a window not yet open against that window's
        starting prior draws. Each row's evidences are kept for its update while the
        particles stay where they are."""
        cur, closed = self.state["window"], set(self.state.get("closed_labels", []))
        self._likelihoods([r.measurement for r in rows[:1]])   # the forward model, on the first row
        groups = {}
        for r in rows:
            label = self._label(r)[0]
            if r.row_id not in self._answered and label not in closed:
                groups.setdefault(label, []).append(r)
        for label, batch in groups.items():
            if cur is not None and label == cur["base"] and not cur.get("closed") and self.pop is not None:
                pop, version, before = self.pop, self.version, len(self.window_rows)
            elif cur is None or label != cur["base"]:
                pop, version, before = self._start_pop(label), ("start", label), 0
            else:
                continue
            self._answer_rows(batch, pop, version, label if before == 0 else cur["label"], before)

    def _answer_rows(self, batch, pop, version, label, before):
        from ventsource.inference.window.sequential import arrival_log_pis, new_row_evidences, row_answer
        liks = self._likelihoods([r.measurement for r in batch])
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            lz, target = new_row_evidences(self.ctx.spec, self.forward, liks, self.ctx.pi0, pop.theta)
        for j, r in enumerate(batch):
            self._record_answer(r, row_answer(pop, lz, arrival_log_pis(target, pop), j), label, before)
            self._lz_cache[r.row_id] = (version, lz[:, :, [j]])

    def _start_pop(self, label):
        """A window's starting population: prior draws seeded from the run seed and its label."""
        from ventsource.inference.window.sequential import start_population
        from ventsource.inference.window.target import WindowTarget
        from ventsource.workflow.row_jobs import row_seed
        c = self.ctx
        shared = WindowTarget(c.spec, self.forward, self._likelihoods([]), c.pi0).shared_prior
        return start_population(shared, c.n_particles, c.n_runs, [row_seed(c.seed, f"window-{label}"), 7],
                                n_hypotheses=2 if getattr(c.spec, "release", None) is None else 3)

    def _record_answer(self, row, p_runs, label, before):
        self._answered.add(row.row_id)
        if any(a["id"] == row.row_id for a in self.state["answers"]):
            return   # answered before a restart
        p = p_runs[:, 0]
        err = float(np.std(p, ddof=1) / np.sqrt(p.size)) if p.size > 1 else float("nan")
        self.state["answers"].append({"id": row.row_id, "time": _time_text(row.time_s), "line": row.line,
                                      "window": label, "window_rows_before": before,
                                      "p_magmatic_on_arrival": float(np.mean(p)),
                                      "p_magmatic_on_arrival_error": err,
                                      "answered_at": _time_text(time.time(), decimals=True)})
        write_answers(self.ctx.out_dir, self.state["answers"])
        self.answered_at[row.row_id] = time.time()

    def _likelihoods(self, measurements):
        from ventsource.forward.model import ForwardModel
        from ventsource.inference.window.sequential_result import window_likelihoods
        if self.forward is None:
            self.forward = ForwardModel(self.ctx.spec, ratio_names=measurements[0].ratio_names)
        return window_likelihoods(measurements, self.forward, self.ctx.spec)

    def _take(self, row, text, last):
        from ventsource.inference.window.sequential import add_row
        label, k = self._label(row)
        if not self._place(row, label, k):
            return
        c, st = self.ctx, self.state
        liks = self._likelihoods([r.measurement for r in self.window_rows] + [row.measurement])
        if self.pop is None:   # the window's first row: prior draws, then the same update
            self.pop, self.version = self._start_pop(st["window"]["label"]), ("start", st["window"]["label"])
        version, lz_new = self._lz_cache.pop(row.row_id, (None, None))
        lz_new = lz_new if version == self.version else None
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            if row.row_id not in self._answered:
                from ventsource.inference.window.sequential import arrival_log_pis, new_row_evidences, row_answer
                lz_new, target = new_row_evidences(c.spec, self.forward, liks[-1:], c.pi0, self.pop.theta)
                self._record_answer(row, row_answer(self.pop, lz_new, arrival_log_pis(target, self.pop)),
                                    st["window"]["label"],
                                    len(self.window_rows))
            self.pop, info = add_row(self.pop, c.spec, self.forward, liks, c.pi0, c.seed, st["rows_taken"],
                                     lz_new=lz_new, between=self._read)
        if info.moved_runs or info.rerun:   # the particles moved: evidences kept for waiting rows are stale
            self._moves += 1
            self.version = ("moved", self._moves)
        if info.rerun:
            self.log(f"row {row.row_id}: window run again from the prior ({info.rerun})")
        self.window_rows.append(row)
        st["window"]["rows"].append({"line": row.line, "text": text})
        st["rows_taken"] += 1
        self._after_update(row, liks, last)

    def _place(self, row, label, k):
        """Open or close windows for the row; False when it is skipped (out of order)."""
        st, cur = self.state, self.state["window"]
        closed = set(st.get("closed_labels", []))
        if label in closed or (cur is not None and k is not None and cur["order"] is not None and k < cur["order"]):
            self._skip(row.line, row.row_id, f"out of order: its window {label} is already closed")
            return False
        if cur is not None and (label != cur["base"] or cur.get("closed")):
            self._close_window(reopen=label == cur["base"])
            cur = None
        if cur is None:
            n = st.setdefault("reopened", {}).get(label, 0)
            st["window"] = {"base": label, "label": label if n == 0 else f"{label}.{n + 1}", "order": k,
                            "rows": []}
            self.pop, self.window_rows = None, []
        elif self.window_rows and row.time_s < self.window_rows[-1].time_s:
            self.log(f"row {row.row_id} (line {row.line}) is earlier than the row before it; taken "
                     "into the current window (its rows are exchangeable given the source)")
        return True

    def _close_window(self, reopen=False):
        """The current window's rows become final (their numbers of its last update)."""
        st = self.state
        if len(st.get("window_rows_now") or []) != len(self.window_rows):
            self._summarise()   # rows taken since the last summary (a backlog)
        st["closed_rows"].extend(st.pop("window_rows_now", []))
        if reopen:   # a change of source closed it: the same span goes on in a new window
            st.setdefault("reopened", {})[st["window"]["base"]] = st["reopened"].get(st["window"]["base"], 0) + 1
        else:
            st.setdefault("closed_labels", []).append(st["window"]["base"])
        st["window"], self.pop, self.window_rows = None, None, []

    def _after_update(self, row, liks, last):
        """The change-of-source check, summaries, files and alerts after a new row. The
        window's summaries (a second batch of forward solves) are drawn when no other row
        waits, on check rows and when the window closes; alerts on probabilities use the
        row's own P(M0) after its update (the same whenever the rows arrived)."""
        from ventsource.inference.window.sequential import arrival_log_pis, row_answer
        from ventsource.inference.window.target import WindowTarget
        c, st = self.ctx, self.state
        checks, events, n = None, (), len(self.window_rows)
        self._read()   # rows that arrived during the update are answered before the slower steps
        if c.check_every and n % c.check_every == 0 and ((n // c.check_every) & (n // c.check_every - 1)) == 0:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                checks = source_checks(c.spec, self.forward, liks, c.pi0, float(np.mean(self.pop.log_z)),
                                       [c.seed, st["rows_taken"], 5], between=self._read,
                                       draws=(self.pop.lz, self.pop.log_w))
            st["window"]["checks"] = [None if not np.isfinite(x) else float(x) for x in checks[:3]] + [checks[3]]
            if checks[0] < 0.0 or checks[1] < -2.0:   # infer_window's mixed_sources rule
                events = ("change_of_source",)
                st["window"]["closed"] = True
                self.log(f"window {st['window']['label']}: change of source flagged at row {row.row_id}; "
                         "the next row starts a new window")
        fresh = (last and not self.pending) or checks is not None
        if fresh:
            self._summarise()
        target = WindowTarget(c.spec, self.forward, self._likelihoods([]), c.pi0)
        p = row_answer(self.pop, self.pop.lz[:, :, -1:], arrival_log_pis(target, self.pop, before=self.pop.n_rows - 1))[:, 0]
        now = {"id": row.row_id, "time": _time_text(row.time_s), "line": row.line,
               "window": st["window"]["label"], "p_magmatic": float(np.mean(p)),
               "p_magmatic_error": float(np.std(p, ddof=1) / np.sqrt(p.size)) if p.size > 1 else None}
        if fresh:
            last_row = st["window_rows_now"][-1]
            now.update({k: last_row.get(k) for k in ("scrubbed_so2_avg_median", "scrubbed_so2_avg_q95")})
        for alert in alert_rules.evaluate(c.rules, st["streaks"], now, events):
            st["alerts_sent"] += 1
            alert_rules.emit(os.path.join(c.out_dir, ALERTS_NAME), alert, c.argv, self.log)

    def _checks(self):
        saved = self.state["window"].get("checks")
        return None if not saved else tuple(np.nan if x is None else x for x in saved[:3]) + (saved[3],)

    def _summarise(self):
        """The window's rows summarised from its population; tables and report rewritten."""
        from ventsource.inference.window.sequential_result import window_result
        from ventsource.workflow.windows import _window_fields, window_row_summary
        c, st = self.ctx, self.state
        meas = [r.measurement for r in self.window_rows]
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            res = window_result(self.pop, c.spec, self.forward, meas, self._likelihoods(meas), c.pi0, c.seed,
                                self._checks())
        if not np.isfinite(res.log10_bf_split):
            res.source_check = "not_run"   # the check runs at 8, 16, 32 ... rows of a window
        times = [_time_text(r.time_s) for r in self.window_rows]
        shared = _window_fields(st["window"]["label"], times, res, c.spec)
        summaries = []
        for r, rr, t in zip(self.window_rows, res.rows, times):
            s = window_row_summary(r.row_id, t, rr, res, c.seed, c.spec, shared)
            s.pop("budget_draws", None)
            s["line"] = r.line
            summaries.append(s)
        st["window_rows_now"] = summaries
        write_tables(c.out_dir, c, st["closed_rows"] + summaries, st["skipped"], self.forward.ratio_names)
        figures = c.figures and c.figures_every and st["rows_taken"] // c.figures_every > st.get("figure_at", -1)
        if figures:
            st["figure_at"] = st["rows_taken"] // c.figures_every
        write_figure_and_report(c.out_dir, figures=figures)

    def run(self, once=False, poll_s=1.0, stop=None):
        """Follow the file until stopped (Ctrl-C, stop() true) or, with once, until no new line."""
        self.once, self.poll_s = once, poll_s
        self.start()
        while True:
            n = self.poll()
            if n == 0 and (once or (stop is not None and stop())):
                break
            if n == 0:
                time.sleep(poll_s)
        if self.window_rows:
            if len(self.state.get("window_rows_now") or []) != len(self.window_rows):
                self._summarise()
            write_figure_and_report(self.ctx.out_dir, figures=self.ctx.figures)


def _time_text(t, decimals=False):
    text = time.strftime("%Y-%m-%dT%H:%M:%S", time.gmtime(int(t)))
    return text + (f"{t % 1:.3f}"[1:] if decimals else "") + "Z"

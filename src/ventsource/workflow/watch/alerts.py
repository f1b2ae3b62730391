"""Alerts: thresholds from a small TOML file, each alert a JSON line and optionally a command.

Format (docs/running.md, "Alerts"):

    [[rule]]
    name = "likely scrubbed"          # free text, names the alert
    field = "p_scrubbed"              # p_magmatic, p_scrubbed (1 - P(M0)), scrubbed_median,
                                      # scrubbed_q95 (model-averaged scrubbed SO2 fraction)
    above = 0.9                       # or below = ...
    consecutive = 2                   # rows in a row that must pass (default 1)

    [[rule]]
    name = "change of source"
    event = "change_of_source"        # the window's change-of-source check flagged it

    [command]
    argv = ["/usr/local/bin/notify", "--channel", "gas"]   # run per alert, no shell

The alert's JSON is given to the command on its standard input; the command runs
without a shell (an argument list, never a command line), with a time limit.
"""
from __future__ import annotations

import json
import os
import subprocess
import tomllib

from ventsource.common.caution import CAUTION
from ventsource.common.errors import InputError

FIELDS = ("p_magmatic", "p_scrubbed", "scrubbed_median", "scrubbed_q95")
EVENTS = ("change_of_source",)
COMMAND_TIMEOUT_S = 30


def read_alert_rules(path):
    """{"rules": [...], "argv": [...] or None}; one line naming file and key on a problem."""
    try:
        with open(path, "rb") as fh:
            data = tomllib.load(fh)
    except FileNotFoundError:
        raise InputError(f"{path}: file not found") from None
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise InputError(f"{path}: not valid TOML ({exc})") from None
    unknown = sorted(set(data) - {"rule", "command"})
    if unknown:
        raise InputError(f"{path}: unknown table(s) {unknown}; known: rule, command")
    rules = [_rule(path, k, r) for k, r in enumerate(data.get("rule", []))]
    argv = (data.get("command") or {}).get("argv")
    if argv is not None and (not isinstance(argv, list) or not argv or
                             not all(isinstance(a, str) and a for a in argv)):
        raise InputError(f"{path}: command.argv must be a list of non-empty strings (program first)")
    return {"rules": rules, "argv": argv}


def _rule(path, k, r):
    where = f"{path}: rule {k + 1}"
    if not isinstance(r, dict):
        raise InputError(f"{where}: must be a table")
    unknown = sorted(set(r) - {"name", "field", "above", "below", "consecutive", "event"})
    if unknown:
        raise InputError(f"{where}: unknown key(s) {unknown}")
    name = str(r.get("name") or f"rule {k + 1}")
    if "event" in r:
        if r["event"] not in EVENTS or "field" in r:
            raise InputError(f"{where}: event must be one of {list(EVENTS)}, without field")
        return {"name": name, "event": r["event"]}
    if r.get("field") not in FIELDS:
        raise InputError(f"{where}: field must be one of {list(FIELDS)}")
    if ("above" in r) == ("below" in r):
        raise InputError(f"{where}: give exactly one of above, below")
    level = r.get("above", r.get("below"))
    if isinstance(level, bool) or not isinstance(level, (int, float)):
        raise InputError(f"{where}: above/below must be a number")
    n = r.get("consecutive", 1)
    if isinstance(n, bool) or not isinstance(n, int) or n < 1:
        raise InputError(f"{where}: consecutive must be a whole number >= 1")
    return {"name": name, "field": r["field"], "op": "above" if "above" in r else "below",
            "level": float(level), "consecutive": n}


def row_values(row):
    p = row.get("p_magmatic")
    return {"p_magmatic": p, "p_scrubbed": None if p is None else 1.0 - p,
            "scrubbed_median": row.get("scrubbed_so2_avg_median"), "scrubbed_q95": row.get("scrubbed_so2_avg_q95")}


def evaluate(rules, streaks, row, events=()):
    """Alerts (dicts) the row raises; streaks (rule name -> rows passed in a row) updated."""
    values, out = row_values(row), []
    for rule in rules:
        if "event" in rule:
            if rule["event"] in events:
                out.append(_alert(rule, row, {"event": rule["event"]}))
            continue
        v = values[rule["field"]]
        if v is None:   # not drawn for this row (a backlog): the streak neither grows nor ends
            continue
        ok = v > rule["level"] if rule["op"] == "above" else v < rule["level"]
        streaks[rule["name"]] = streaks.get(rule["name"], 0) + 1 if ok else 0
        if ok and streaks[rule["name"]] == rule["consecutive"]:   # once per streak
            out.append(_alert(rule, row, {"field": rule["field"], "value": v, rule["op"]: rule["level"],
                                          "consecutive": rule["consecutive"]}))
    return out


def _alert(rule, row, what):
    return {"alert": rule["name"], **what, "row": row.get("id"), "line": row.get("line"),
            "time": row.get("time"), "window": row.get("window"),
            "p_magmatic": row.get("p_magmatic"), "p_magmatic_error": row.get("p_magmatic_error"),
            "scrubbed_so2_avg_median": row.get("scrubbed_so2_avg_median"), "caution": CAUTION}


def emit(alerts_path, alert, argv=None, log=None):
    """Append the alert as one JSON line (one write); run the command with it on stdin."""
    line = (json.dumps(alert, sort_keys=True, default=str) + "\n").encode()
    fd = os.open(alerts_path, os.O_WRONLY | os.O_APPEND | os.O_CREAT, 0o644)
    try:
        os.write(fd, line)
    finally:
        os.close(fd)
    if argv:
        try:
            done = subprocess.run(list(argv), input=line, timeout=COMMAND_TIMEOUT_S,
                                  stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, check=False)
            if done.returncode != 0 and log:
                log(f"alert command {argv[0]} exited with status {done.returncode}")
        except (OSError, subprocess.TimeoutExpired) as exc:
            if log:
                log(f"alert command {argv[0]} failed: {exc}")

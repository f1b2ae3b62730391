"""The watch's state folder (OUT/state): what a restart needs to go on with identical numbers.

* `watch.json`: the settings (data and prior checksums of the prior, seed, window, options,
  package version: a restart with others is refused), where the file was read to (byte
  offset, line, header), the rows taken so far (each with its line's text, re-read on
  restart), the current window, the closed windows' final summary rows, skipped lines,
  the alert rules' running state, and the name of the population file;
* `population-NNNNNN.npz`: the current window's particle population after NNNNNN rows.

The population file is written first, then watch.json (both atomically, temp file +
rename), then the older population file is removed: whenever the watcher stops, watch.json
names a complete population that matches it. Random streams are seeded from the run seed
and the row index (inference/window/sequential.py), so no generator state is stored.
"""
from __future__ import annotations

import io
import json
import os

import numpy as np

from ventsource.common.errors import InputError
from ventsource.workflow.run_folder import _atomic, _write_json

STATE_DIR = "state"
STATE_NAME = "watch.json"
# entries of watch.json that change a number; a restart refuses a change in any
SETTINGS_KEYS = ("prior_sha256", "seed", "window", "options", "sigma", "package_version", "data", "raw")


def state_dir(out_dir):
    return os.path.join(out_dir, STATE_DIR)


def load_state(out_dir):
    """watch.json as a dict and the population arrays it names (or None), or (None, None)."""
    path = os.path.join(state_dir(out_dir), STATE_NAME)
    if not os.path.exists(path):
        return None, None
    try:
        with open(path) as fh:
            state = json.load(fh)
        assert isinstance(state, dict)
    except (OSError, ValueError, AssertionError):
        raise InputError(f"{path}: unreadable; choose another --out") from None
    arrays = None
    if state.get("population"):
        pop_path = os.path.join(state_dir(out_dir), state["population"])
        try:
            with np.load(pop_path) as data:
                arrays = {k: data[k] for k in data.files}
        except (OSError, ValueError):
            raise InputError(f"{pop_path}: missing or unreadable; choose another --out") from None
    return state, arrays


def check_settings(out_dir, old, now):
    for key in SETTINGS_KEYS:
        if json.loads(json.dumps(old.get(key), default=str)) != json.loads(json.dumps(now.get(key), default=str)):
            raise InputError(f"{out_dir}: a watch with another {key} ran here ({old.get(key)!r} there, "
                             f"{now.get(key)!r} now); use the same settings or choose another --out")


def save_state(out_dir, state, arrays):
    """Population file (if any), then watch.json, then drop the older population file."""
    folder = state_dir(out_dir)
    os.makedirs(folder, exist_ok=True)
    old = state.get("population")
    if arrays is not None:
        name = f"population-{int(state['rows_taken']):06d}.npz"

        def write(part):
            buf = io.BytesIO()
            np.savez(buf, **arrays)
            with open(part, "wb") as fh:
                fh.write(buf.getvalue())
        _atomic(os.path.join(folder, name), write)
        state["population"] = name
    else:
        state["population"] = None
    _write_json(os.path.join(folder, STATE_NAME), state)
    for f in os.listdir(folder):
        if f.startswith("population-") and f != state["population"]:
            try:
                os.remove(os.path.join(folder, f))
            except OSError:
                pass

"""Output folders and files that never destroy what the user already has.

One guard for every command that writes: an output path that is one of its own
inputs is refused, and a run folder that holds files a run would write, but no
run record of ours, is refused rather than overwritten.
"""
from __future__ import annotations

import os

from ventsource.common.errors import InputError

# What a series run writes at the top of its folder (workflow.series and its notes).
RUN_FOLDER_NAMES = ("summary.csv", "summary.running.csv", "hazard.json", "README.txt",
                    "compare.csv", "compare.png", "report.html", "segments.csv", "segments.json")


def _same_file(a, b):
    try:
        return os.path.samefile(a, b)
    except OSError:  # one of them does not exist (yet)
        return os.path.abspath(a) == os.path.abspath(b)


def refuse_input_as_output(out_paths, input_paths, option="--out"):
    """Refuse writing any of out_paths over one of input_paths."""
    for out in out_paths:
        for inp in input_paths:
            if inp is not None and _same_file(out, inp):
                raise InputError(f"{option} {out}: is the input file {inp}; writing there would "
                                 "destroy it: choose another name")


def refuse_foreign_run_folder(out_dir, input_paths=()):
    """A folder without our run.json that holds a file a run would write is the user's own."""
    for inp in input_paths:
        if inp is None:
            continue
        for name in RUN_FOLDER_NAMES:
            if _same_file(os.path.join(out_dir, name), inp):
                raise InputError(f"--out {out_dir}: the run would write {name} over the input file "
                                 f"{inp}; choose another --out")
    if not os.path.isdir(out_dir) or os.path.exists(os.path.join(out_dir, "run.json")):
        return
    found = [n for n in RUN_FOLDER_NAMES if os.path.exists(os.path.join(out_dir, n))]
    if found:
        raise InputError(f"--out {out_dir}: holds {', '.join(found)} not written by a ventsource run "
                         "(no run.json); choose another --out")

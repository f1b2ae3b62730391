"""README.txt written beside every table: the caution and what each file holds.

The tables stay plain CSV (one header row, readable by any CSV reader); the
caution travels with them in this text file in the same folder.
"""
import os

from ventsource.common.caution import CAUTION

README_NAME = "README.txt"


def write_table_readme(folder, files, synthetic=False):
    """Write (or extend) folder/README.txt naming each file with its description.

    files: {file name relative to folder: one-line description}."""
    path = os.path.join(folder, README_NAME)
    known = {}
    if os.path.exists(path):
        with open(path) as fh:
            for line in fh:
                if line.startswith("* ") and ": " in line:
                    name, text = line[2:].rstrip("\n").split(": ", 1)
                    known[name] = text
    known.update(files)
    lines = ["Results written by ventsource.", "",
             "CAUTION: " + CAUTION, ""]
    if synthetic:
        lines += ["SYNTHETIC: the prior or the data here are fictional (made for a demonstration "
                  "or a test); they describe no real volcano.", ""]
    lines += ["Files:"] + [f"* {name}: {text}" for name, text in sorted(known.items())]
    lines += ["", "Flag meanings: docs/flags.md of the ventsource package, and 'flag_glossary' "
              "in hazard.json."]
    return _write_lines(path, lines)


def write_table_sidecar(table_path, description, synthetic=False):
    """TABLE.README.txt beside a single table written where the user chose (never a shared
    README.txt that could belong to someone else)."""
    path = str(table_path) + ".README.txt"
    lines = [f"{os.path.basename(str(table_path))}: {description}", "", "CAUTION: " + CAUTION]
    if synthetic:
        lines += ["", "SYNTHETIC: the prior is fictional (made for a demonstration or a test); it "
                  "describes no real volcano."]
    return _write_lines(path, lines)


def _write_lines(path, lines):
    """The text file in one piece: written beside it, then renamed over it."""
    with open(path + ".part", "w") as fh:
        fh.write("\n".join(lines) + "\n")
    os.replace(path + ".part", path)
    return path

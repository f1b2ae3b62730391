"""README.txt written beside every table: the caution and what each file holds.

The tables stay plain CSV (one header row, readable by any CSV reader); the
caution travels with them in this text file in the same folder.
"""
import os

from ventsource.common.caution import CAUTION

README_NAME = "README.txt"


def write_table_readme(folder, files, synthetic=False, notes=None):
    """Write (or extend) folder/README.txt naming each file with its description.

    files: {file name relative to folder: one-line description}; notes: further lines
    (how much the data said, information_notes) written after the flag note."""
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
    if notes:
        lines += [""] + list(notes)
    return _write_lines(path, lines)


MAX_NOTED_ROWS = 20


def information_notes(rows):
    """README lines on how much the data said: rows flagged near_prior and, per row (the
    first MAX_NOTED_ROWS), the shift of P(M0) from its prior and the direction the data
    resolved least (summary.csv columns p_magmatic_shift, *_contraction, unresolved_direction)."""
    told = [r for r in rows if r.get("unresolved_direction")]
    if not told:
        return []
    near = [r["id"] for r in told if "near_prior" in (r.get("flags") or "").split(";")]
    lines = ["How much the data said (contraction 1 - var_post/var_prior per parameter in "
             "summary.csv; a value near 0 means the prior, not the data, sets that parameter):",
             f"- rows flagged near_prior (P(M0) or the scrubbed fraction barely moved from the "
             f"prior): {len(near)} of {len(told)}" + (f" ({', '.join(near[:10])}"
                                                    f"{' ...' if len(near) > 10 else ''})" if near else "")]
    for r in told[:MAX_NOTED_ROWS]:
        shift = r.get("p_magmatic_shift")
        moved = "" if shift is None else f"P(M0) moved {shift:+.3f} from its prior; "
        lines.append(f"- {r['id']}: {moved}least resolved: {r['unresolved_direction']}")
    if len(told) > MAX_NOTED_ROWS:
        lines.append(f"- ... {len(told) - MAX_NOTED_ROWS} more rows in summary.csv")
    lines.append("To see which added measurement would sharpen the answer: ventsource plan.")
    return lines


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

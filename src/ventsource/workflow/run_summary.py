"""End-of-run console summary: rows per flag, each with one line on what to do.

A run can finish normally while every row is flagged; the summary says so at the
end of the output, where a reader looks, instead of leaving it to the tables.
"""
from ventsource.common.flag_glossary import FLAG_GLOSSARY


def flag_counts(rows):
    """{flag: number of rows carrying it}, flags in the order of FLAG_GLOSSARY."""
    counts = {}
    for r in rows:
        for f in [f for f in (r.get("flags") or "").split(";") if f]:
            counts[f] = counts.get(f, 0) + 1
    order = {f: i for i, f in enumerate(FLAG_GLOSSARY)}
    return dict(sorted(counts.items(), key=lambda kv: order.get(kv[0], len(order))))


def flag_summary(rows):
    """Lines for the console: 'N of M rows: flag - what to do'."""
    from ventsource.workflow.hazard_text import WHAT_TO_DO
    counts = flag_counts(rows)
    n = len(rows)
    if not counts:
        return [f"flags: none of the {n} rows carries a flag"]
    lines = [f"flags ({n} rows):"]
    for flag, k in counts.items():
        todo = WHAT_TO_DO.get(flag, "see README.txt or report.html in the run folder")
        lines.append(f"  {k} of {n} rows {flag}: {todo}")
    if counts.get("unexplained", 0) == n:
        lines.append("  every row is unexplained: no probability of this run should be read; "
                     "check the data, its errors and the prior's ranges")
    return lines

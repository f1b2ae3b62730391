"""report.html: a run folder on one self-contained page for a hazard panel.

Built from the folder's own hazard.json (so the page and the file never disagree) and
its figures (embedded as base64 PNG: the page needs no network and no other file).
Sections: caution, what was asked, the data, the answer per window and per row, the
flags in words, the prior dependence, the sulfur budget, the figures, settings and
provenance, and the caution again. Written atomically (temp file, then rename).
"""
import base64
import glob
import html
import json
import os

from ventsource.common.caution import CAUTION

REPORT_NAME = "report.html"
SECTIONS = ("caution-top", "question", "data", "answer-windows", "answer-rows", "flags",
            "prior-dependence", "sulfur-budget", "figures", "provenance", "caution-bottom")

_CSS = """
body{font-family:sans-serif;font-size:18px;line-height:1.45;max-width:70em;margin:1em auto;padding:0 1em;color:#111}
h1{font-size:1.7em}h2{font-size:1.35em;border-bottom:2px solid #444;margin-top:1.6em}
.caution{border:3px solid #a00;background:#fff3f3;padding:.6em 1em;font-weight:bold}
.synthetic{border:3px dashed #555;padding:.4em 1em;margin:.5em 0}
table{border-collapse:collapse;margin:.5em 0;font-size:.95em}td,th{border:1px solid #888;padding:.25em .5em;text-align:left;vertical-align:top}
th{background:#eee}img{max-width:100%;border:1px solid #ccc;margin:.5em 0}
.flag{color:#a00;font-weight:bold}.small{font-size:.85em;color:#333}
@media print{body{font-size:11pt;max-width:none}h2{page-break-after:avoid}table,img{page-break-inside:avoid}}
"""


def _e(x):
    return html.escape("" if x is None else str(x))


def _table(header, rows):
    head = "".join(f"<th>{_e(h)}</th>" for h in header)
    body = "".join("<tr>" + "".join(f"<td>{c}</td>" for c in r) + "</tr>" for r in rows)
    return f"<table><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"


def _section(key, title, body):
    return f'<section id="{key}"><h2>{_e(title)}</h2>{body}</section>'


def _band(q):
    if not q or q.get("median") is None:
        return "n/a"
    return f"{q['median']:.2f} (5-95 %: {q['q05']:.2f} to {q['q95']:.2f})"


_SHORT = {"M0": "purely magmatic", "M1": "SO2 scrubbed", "M2": "stored sulfur released"}


def _headline(row, hyp):
    """One sentence per row in plain words: the most probable hypothesis and its probability."""
    if "unexplained" in row["flags"]:
        return "No hypothesis reproduces this measurement: read no probability from it."
    texts = {"M0": row.get("p_magmatic_text")}
    texts["M1"] = row.get("p_scrubbed_text") if "M2" in hyp else _complement_text(row)
    if "M2" in hyp:
        texts["M2"] = row.get("p_released_text")
    values = {"M0": row.get("p_magmatic"), "M1": row.get("p_scrubbed"), "M2": row.get("p_released")}
    if "M2" not in hyp and values["M0"] is not None:
        values["M1"] = 1.0 - values["M0"]
    known = {k: v for k, v in values.items() if k in texts and v is not None}
    if not known:
        return "No probability was computed for this row."
    best = max(known, key=known.get)
    return f"Most probable: {best} {_SHORT[best]} ({texts[best]})."


def _complement_text(row):
    """P(M1) = 1 - P(M0) with two hypotheses, shown by the same rule (bounds mirrored)."""
    from ventsource.workflow.hazard_format import decimals_for_error, probability_text
    text, p, err = row.get("p_magmatic_text", ""), row.get("p_magmatic"), row.get("p_magmatic_error")
    if p is None:
        return "n/a"
    d = decimals_for_error(err)
    if text.startswith("<"):
        return f"> {1.0 - 10.0 ** -d:.{d}f}"
    if text.startswith(">"):
        return f"< {10.0 ** -d:.{d}f}"
    return probability_text(1.0 - p, err)


def _question(doc):
    hyp = "".join(f"<li><b>{_e(k)}</b>: {_e(v)} (prior probability {doc['prior_model_probabilities'][k]:.2f})</li>"
                  for k, v in doc["hypotheses"].items())
    pi0 = doc["pi0"]
    return (f"<p>{_e(doc['what'])}</p><ul>{hyp}</ul>"
            f"<p class='small'>pi0 = {pi0['value']:.3g} ({_e(pi0['meaning'])}; from the {_e(pi0['source'])}).</p>"
            f"<p class='small'>Rounding: {_e(doc['rounding'])}</p>")


def _data(doc):
    rows = doc["rows"]
    times = sorted(r["time"] for r in rows)
    span = f"{times[0]} to {times[-1]}" if times else "no rows"
    return (f"<p>Measurement file <code>{_e(doc['input_file'])}</code>: {len(rows)} rows, {span}.</p>"
            + ("<p class='synthetic'>SYNTHETIC: the prior or the data are fictional; they describe "
               "no real volcano.</p>" if doc.get("synthetic") else ""))


def _windows(doc):
    if not doc.get("windows"):
        return "<p>Rows were inverted one by one (no windows).</p>"
    rows = [[_e(w["window"]), _e(f"{w['first_time']} to {w['last_time']}"), str(len(w["rows"])),
             _e(w["log10_bf_one_source"]), _e(w["log10_bf_one_vs_split"]), _e(_window_words(w)),
             "<span class='flag'>" + _e(", ".join(w["flags"])) + "</span>" if w["flags"] else "none"]
            for w in doc["windows"]]
    return ("<p>The rows of a window share one magmatic source. A log10 Bayes factor below 0 "
            "(one source against each row its own) or below -2 (one source against a change "
            "inside the window) flags <b>mixed_sources</b>.</p>"
            + _table(["window", "span", "rows", "log10 BF one source", "log10 BF one vs change", "in words",
                      "flags"], rows))


def _window_words(w):
    if "mixed_sources" in w["flags"]:
        return ("The rows do not share one source: the window may span a change of magma; its "
                "rows' numbers assume a shared source and should be read with that in mind.")
    if "source_check_failed" in w["flags"]:
        return "The change-of-source check could not run: the shared source is unchecked."
    if w.get("source_check") == "not_run":
        return ("Too few rows to check for a change of source inside the window (not run; 4 rows "
                "or more are checked): a change of magma here would go unnoticed.")
    return "The rows are consistent with one shared magmatic source."


def _rows(doc):
    hyp = doc["hypotheses"]
    out = []
    for r in doc["rows"]:
        flags = "; ".join(f"<span class='flag'>{_e(f)}</span>: {_e(doc['flag_glossary'].get(f, ''))}"
                          for f in r["flags"]) or "none"
        probs = [_e(r.get("p_magmatic_text"))]
        if "M2" not in hyp:
            probs.append(_e(_complement_text(r)))
        else:
            probs += [_e(r.get("p_scrubbed_text", "n/a")), _e(r.get("p_released_text", "n/a"))]
        out.append([_e(r["id"]), _e(r["time"].replace("T", " ").replace(":00Z", " UTC")),
                    _e(r.get("window") or "-"), *probs,
                    _e("not to be read" if "unexplained" in r["flags"]
                       else _band(r.get("scrubbed_so2_model_averaged"))),
                    _e(_headline(r, hyp)), flags])
    header = ["id", "time", "window", "P(M0)", "P(M1)"] + (["P(M2)"] if "M2" in hyp else [])
    return _table(header + ["scrubbed SO2 fraction (model-averaged)", "in words", "flags"], out)


def _flags(doc):
    if not doc["flag_glossary"]:
        return "<p>No row carries a flag.</p>"
    from ventsource.workflow.hazard_text import WHAT_TO_DO
    from ventsource.workflow.run_summary import flag_counts
    counts = flag_counts([{"flags": ";".join(r["flags"])} for r in doc["rows"]])
    rows = [[f"<span class='flag'>{_e(f)}</span>", str(counts.get(f, 0)), _e(text),
             _e(WHAT_TO_DO.get(f, "see the meaning"))] for f, text in doc["flag_glossary"].items()]
    return _table(["flag", "rows", "meaning", "what to do"], rows)


def _prior_dependence(doc):
    ps = doc.get("prior_sensitivity") or {}
    if not ps.get("priors"):
        return (f"<p>{_e(ps.get('note', 'not run'))}.</p><p>Without it, read every probability "
                "here as valid for this one prior only.</p>")
    rows = [[_e(k), _e(v)] for k, v in ps.get("spread", {}).items()]
    still = ps.get("rows_data_barely_moved") or []
    warn = (f"<p class='flag'>In {len(still)} row(s) the data moved P(M0) by less than 0.05 from its "
            f"prior value under every prior ({_e(', '.join(still[:10]))}{' ...' if len(still) > 10 else ''}): "
            "there a small spread reflects the priors, not the data.</p>") if still else ""
    return (f"<p>Priors compared: {_e(', '.join(ps['priors']))}. {_e(ps.get('note', ''))}</p>"
            + _table(["probability", "largest spread across priors (over rows)"], rows) + warn)


def _budget(doc):
    sb = doc.get("sulfur_budget")
    if not sb:
        return "<p>No flux columns in the measurement file: no sulfur budget.</p>"

    def q(r, tag):
        m = r.get(f"{tag}_median")
        return "n/a" if m is None else f"{_t(m)} ({_t(r[f'{tag}_q05'])} to {_t(r[f'{tag}_q95'])})"
    rows = [[_e(r["id"]), _e(q(r, "magmatic_s_tpd")), _e(q(r, "magmatic_so2_flux_tpd")),
             _e(q(r, "retained_s_tpd")), _e(r.get("budget_direction") or "n/a"),
             _e(q(r, "cumulative_retained_s_t")),
             _e(_budget_note(r))]
            for r in doc["rows"]]
    notes = "".join(f"<li>{_e(sb[k])}</li>" for k in ("units", "sign", "restarts", "band_width", "limits")
                    if sb.get(k))
    return (f"<ul>{notes}</ul>" + _table(["id", "magmatic S, t S/d", "as SO2, t SO2/d", "net retained S, t S/d",
                                          "direction", "running total, t S", "note"], rows))


def _t(x):
    """Tonnes as plain numbers (already 3 significant digits): 183,000 not 1.83e+05."""
    return f"{x:,.0f}" if abs(x) >= 100 else f"{x:.3g}"


def _budget_note(r):
    if "mixed_sources" in r["flags"]:
        return "not summed: window flagged mixed_sources"
    if r.get("budget_restarted"):
        return "total restarts here (after a mixed_sources window)"
    return "gap before: not bridged" if r.get("budget_gap_before") else ""


def _figures(folder):
    parts = []
    for path in sorted(glob.glob(os.path.join(folder, "figures", "*.png"))):
        with open(path, "rb") as fh:
            data = base64.b64encode(fh.read()).decode("ascii")
        name = os.path.basename(path)
        parts.append(f"<figure><img alt='{_e(name)}' src='data:image/png;base64,{data}'>"
                     f"<figcaption>{_e(name)}</figcaption></figure>")
    return "".join(parts) or "<p>No figures were drawn for this run (--no-figures).</p>"


def _provenance(doc):
    prior = doc["priors"][0]
    rows = [["package", _e(f"{doc['package']} {doc['package_version']}")],
            ["input file", _e(f"{doc['input_file']} (sha256 {doc['input_sha256']})")],
            ["prior", _e(f"{prior['name']} - {prior['file']} (sha256 {prior['sha256']})"
                         + (", fictional" if prior.get("fictional") else ""))],
            ["models", _e(", ".join(f"{k}: {v}" for k, v in prior["models"].items()))],
            ["free parameters", _e(", ".join(prior["free_parameters"]))],
            ["run seed", _e(doc["run_seed"])], ["row seeds", _e(doc["row_seed_rule"])],
            ["inference options given", _e(json.dumps(doc.get("inference_options", {})))],
            ["options in effect", _e(json.dumps(doc.get("inference_options_in_effect", {}), default=str))],
            ["note", _e(doc.get("note", ""))]]
    return _table(["item", "value"], rows)


def report_page(doc, folder):
    """The page as one string, from a hazard.json document and the folder's figures."""
    caution = f"<p class='caution'>CAUTION: {_e(CAUTION)}</p>"
    body = [_section("caution-top", "Caution", caution),
            _section("question", "What was asked", _question(doc)),
            _section("data", "The data", _data(doc)),
            _section("answer-windows", "The answer per window", _windows(doc)),
            _section("answer-rows", "The answer per measurement", _rows(doc)),
            _section("flags", "Flags in words", _flags(doc)),
            _section("prior-dependence", "How much the answer depends on the prior", _prior_dependence(doc)),
            _section("sulfur-budget", "Sulfur budget", _budget(doc)),
            _section("figures", "Figures", _figures(folder)),
            _section("provenance", "Settings and provenance", _provenance(doc)),
            _section("caution-bottom", "Caution", caution)]
    title = "ventsource run report" + (" (SYNTHETIC)" if doc.get("synthetic") else "")
    return ("<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'>"
            f"<meta name='viewport' content='width=device-width'><title>{_e(title)}</title>"
            f"<style>{_CSS}</style></head><body><h1>{_e(title)}</h1>{''.join(body)}</body></html>\n")


def write_report(folder):
    """folder/report.html from folder/hazard.json and folder/figures (atomic); its path."""
    with open(os.path.join(folder, "hazard.json"), encoding="utf-8") as fh:
        doc = json.load(fh)
    path = os.path.join(folder, REPORT_NAME)
    with open(path + ".part", "w", encoding="utf-8") as fh:
        fh.write(report_page(doc, folder))
    os.replace(path + ".part", path)
    return path

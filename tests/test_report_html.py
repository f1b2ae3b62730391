"""report.html: one self-contained page per run folder, for a hazard panel.

Check values: the page is parsed by Python's own HTML parser (html.parser, the
standard library's reading of the WHATWG HTML syntax); the embedded figures are
decoded with base64 (RFC 4648, the standard library) and compared byte for byte with
the figure files; the slow test renders the page in a real headless Chromium from the
system's packages with the network cut off and keeps a screenshot. Everything else
checked is the package's own contract (sections, caution at top and bottom, flags in
words, the rounding rule of workflow/hazard_format.py).
"""
import base64
import hashlib
import json
import os
from html.parser import HTMLParser
from pathlib import Path

import pytest

from ventsource.cli.main import main
from ventsource.common.caution import CAUTION
from ventsource.workflow.report_html import SECTIONS, report_page

ROOT = Path(__file__).resolve().parents[1]
FAST_PRIOR = ROOT / "priors" / "demo_mount_kerrow_fast.toml"
FAST = ["--infer-option", "n_particles=100", "--infer-option", "n_runs=2"]
DATA = ("id,time,SO2/CO2,H2S/SO2,H2O/CO2\n"
        "KRW-001,2025-01-10T00:00:00Z,0.70351,0.28689,36.746\n"
        "KRW-002,2025-01-23T00:00:00Z,0.94951,<0.5,45.756\n"
        "KRW-003,2025-02-05T00:00:00Z,0.74351,0.3017,45.693\n")
ARTEFACTS = Path(os.environ.get("VENTSOURCE_TEST_ARTEFACTS", ROOT / "tests" / "artefacts"))


class _Page(HTMLParser):
    """Section ids, image sources, links and the visible text of a page."""

    def __init__(self):
        super().__init__()
        self.sections, self.images, self.links, self.text = [], [], [], []

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "section":
            self.sections.append(a.get("id"))
        if tag == "img":
            self.images.append(a.get("src", ""))
        for key in ("href", "src"):
            if key in a and tag != "img":
                self.links.append(a[key])

    def handle_data(self, data):
        self.text.append(data)


def _parse(text):
    page = _Page()
    page.feed(text)
    page.text = " ".join(" ".join(page.text).split())
    return page


@pytest.fixture(scope="module")
def run_folder(tmp_path_factory):
    base = tmp_path_factory.mktemp("report")
    data = base / "kerrow_small.csv"
    data.write_text(DATA)
    out = base / "run"
    assert main(["run", str(data), "--prior", str(FAST_PRIOR), "--out", str(out)] + FAST) == 0
    return out


def test_every_section_in_order_with_the_caution_at_top_and_bottom(run_folder):
    page = _parse((run_folder / "report.html").read_text(encoding="utf-8"))
    assert page.sections == list(SECTIONS)
    assert page.text.count(CAUTION) == 2
    assert page.text.index(CAUTION) < page.text.index("What was asked")
    assert page.text.rindex(CAUTION) > page.text.index("Settings and provenance")
    assert "SYNTHETIC" in page.text  # the demo prior is fictional


def test_page_is_self_contained_with_the_figures_embedded(run_folder):
    """No link to anything outside the page; every figure file embedded byte for byte."""
    page = _parse((run_folder / "report.html").read_text(encoding="utf-8"))
    assert all(not link.startswith(("http:", "https:", "//", "file:")) for link in page.links)
    figures = sorted((run_folder / "figures").glob("*.png"))
    assert len(figures) >= 2 and len(page.images) == len(figures)
    prefix = "data:image/png;base64,"
    embedded = sorted(hashlib.sha256(base64.b64decode(src[len(prefix):])).hexdigest()
                      for src in page.images if src.startswith(prefix))
    assert embedded == sorted(hashlib.sha256(f.read_bytes()).hexdigest() for f in figures)


def test_rows_flags_and_provenance_as_in_hazard_json(run_folder):
    doc = json.loads((run_folder / "hazard.json").read_text(encoding="utf-8"))
    page = _parse((run_folder / "report.html").read_text(encoding="utf-8"))
    for row in doc["rows"]:
        assert row["id"] in page.text and row["p_magmatic_text"] in page.text
    for flag, meaning in doc["flag_glossary"].items():
        assert flag in page.text and meaning in page.text
    assert doc["input_sha256"] in page.text and doc["priors"][0]["sha256"] in page.text
    assert f"run seed {doc['run_seed']}" in page.text
    assert "not run" in page.text  # no compare on these data: the page says so


def test_probabilities_never_read_as_zero_or_one():
    """A row whose P(M0) estimate is 0.00002 +- 0.0004 reads '< 0.0001', never '0.0'."""
    from ventsource.workflow.hazard_format import probability_text
    doc = {"what": "w", "hypotheses": {"M0": "a", "M1": "b"}, "prior_model_probabilities": {"M0": 0.5, "M1": 0.5},
           "pi0": {"value": 0.5, "meaning": "m", "source": "s"}, "rounding": "r", "input_file": "x.csv",
           "rows": [{"id": "R1", "time": "2025-01-01T00:00:00Z", "p_magmatic": 0.0001,
                     "p_magmatic_error": 0.0004, "p_magmatic_text": probability_text(0.00002, 0.0004),
                     "scrubbed_so2_model_averaged": {"q05": 0.9, "median": 0.95, "q95": 0.99},
                     "flags": []}],
           "flag_glossary": {}, "package": "ventsource", "package_version": "0", "input_sha256": "0" * 64,
           "priors": [{"name": "p", "file": "p.toml", "sha256": "1" * 64, "models": {}, "free_parameters": []}],
           "run_seed": 1, "row_seed_rule": "rule"}
    page = _parse(report_page(doc, "/nonexistent"))
    assert "< 0.0001" in page.text and "Most probable: M1 SO2 scrubbed (> 0.9999)" in page.text
    assert "0.0000" not in page.text


@pytest.mark.slow
def test_page_renders_in_a_headless_browser_without_network(run_folder, tmp_path):
    """Chromium (system package) loads the page with every proxy pointed at a closed port:
    every section is in the rendered DOM, every image decoded, and a screenshot is kept."""
    from report_checks import chromium, render_offline
    if chromium() is None:
        pytest.skip("no Chromium on this machine (Debian: apt-get install chromium-headless-shell)")
    render_offline(run_folder / "report.html", tmp_path, ARTEFACTS / "report_screenshot.png")

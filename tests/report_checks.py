"""A report.html rendered by a real headless browser with the network cut off.

Used by the report test (a small run) and by the README test (the demo's pages, slow).
Chromium comes from the system's packages (Debian: chromium-headless-shell); every proxy
points at a closed local port, so a page that needed the network would show it.
"""
import shutil
import subprocess
from html.parser import HTMLParser

from ventsource.workflow.report_html import SECTIONS


def chromium():
    for name in ("chromium-headless-shell", "chromium", "chromium-browser"):
        if shutil.which(name):
            return shutil.which(name)
    return None


class _Sections(HTMLParser):
    def __init__(self):
        super().__init__()
        self.ids = []

    def handle_starttag(self, tag, attrs):
        if tag == "section":
            self.ids.append(dict(attrs).get("id"))


def render_offline(report, work_dir, screenshot):
    """Assert the rendered DOM holds every section and every image decoded; keep a screenshot."""
    browser = chromium()
    probe = work_dir / "probe.html"  # the page plus one line that records whether images decoded
    script = ("<script>document.body.setAttribute('data-images-ok', String(Array.from(document.images)"
              ".every(i => i.complete && i.naturalWidth > 0)));</script></body>")
    probe.write_text(report.read_text(encoding="utf-8").replace("</body>", script), encoding="utf-8")
    offline = ["--no-sandbox", "--disable-gpu", "--proxy-server=http://127.0.0.1:9",
               "--proxy-bypass-list=<-loopback>", "--virtual-time-budget=5000"]
    dom = subprocess.run([browser, *offline, "--dump-dom", probe.as_uri()], capture_output=True,
                         text=True, timeout=180).stdout
    parser = _Sections()
    parser.feed(dom)
    assert parser.ids == list(SECTIONS)
    assert 'data-images-ok="true"' in dom
    screenshot.parent.mkdir(parents=True, exist_ok=True)
    subprocess.run([browser, *offline, f"--screenshot={screenshot}", "--window-size=1280,3000",
                    report.as_uri()], capture_output=True, timeout=180)
    assert screenshot.exists() and screenshot.stat().st_size > 10_000

"""The README's shell commands, run in the order the README gives them, in a fresh copy.

Slow (it creates a virtual environment, installs the package from the package
index, runs the demo and the test suite): `python -m pytest -m slow
tests/test_readme_commands.py`. Needs network access for pip.
"""
import json
import os
import re
import shutil
import subprocess
import textwrap
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


def readme_blocks(text):
    """(language, code) of every fenced block, in order."""
    return [(m.group(1), textwrap.dedent(m.group(2))) for m in
            re.finditer(r"^ *```(\w*)\n(.*?)^ *```", text, re.S | re.M)]


def test_readme_blocks_are_found():
    blocks = readme_blocks((ROOT / "README.md").read_text())
    bash = [code for lang, code in blocks if lang == "bash"]
    assert bash[0].startswith("python3 -m venv .venv") and "ventsource demo" in bash[0]
    assert any(lang == "csv" for lang, _ in blocks)


def _copy_tree(dest):
    files = subprocess.run(["git", "ls-files"], cwd=ROOT, capture_output=True, text=True,
                           check=True).stdout.split()
    for f in files:
        target = dest / f
        target.parent.mkdir(parents=True, exist_ok=True)
        shutil.copy2(ROOT / f, target)


@pytest.mark.slow
def test_readme_commands_in_order(tmp_path):
    """Every bash block runs (exit 0) in README order; the csv block is the user's DATA.csv."""
    work = tmp_path / "ventsource"
    _copy_tree(work)
    env = {k: v for k, v in os.environ.items() if k not in ("PYTHONPATH", "VIRTUAL_ENV")}
    activated = ". .venv/bin/activate && "
    for lang, code in readme_blocks((ROOT / "README.md").read_text()):
        if lang == "csv" and code.startswith("id,time,") and not (work / "DATA.csv").exists():
            (work / "DATA.csv").write_text(code)
            continue
        if lang != "bash":
            continue
        for line in [c for c in code.splitlines() if c.strip() and not c.lstrip().startswith("#")]:
            command = line if line.startswith("python3 -m venv") else activated + line
            done = subprocess.run(["bash", "-c", command], cwd=work, env=env, capture_output=True,
                                  text=True)
            assert done.returncode == 0, f"{line}\n{done.stdout[-2000:]}\n{done.stderr[-2000:]}"
    assert (work / "demo-output" / "hazard.json").exists()
    import jsonschema  # the demo's hazard files follow the published schema
    schema = json.loads((ROOT / "docs" / "hazard.schema.json").read_text())
    from hazard_checks import assert_rounding_rule
    for doc in (work / "demo-output" / "hazard.json", work / "demo-output" / "row_by_row" / "hazard.json"):
        hazard = json.loads(doc.read_text(encoding="utf-8"))
        jsonschema.validate(hazard, schema)
        assert_rounding_rule(hazard)  # every probability to its Monte Carlo error, never 0 or 1
        assert (doc.parent / "report.html").exists()
    from report_checks import chromium, render_offline
    if chromium() is not None:  # the demo's page in a real browser, network cut off
        render_offline(work / "demo-output" / "report.html", tmp_path,
                       ROOT / "tests" / "artefacts" / "demo_report_screenshot.png")
    assert (work / "results" / "summary.csv").exists()
    assert (work / "results-30d" / "summary.csv").exists()
    assert (work / "cmp" / "compare.csv").exists()
    assert (work / "pp.csv").exists() and (work / "pp.png").exists()

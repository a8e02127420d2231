"""The report page: self-contained, escaped, rendered by headless Chromium with no network request,
and the stationarity warning leading the report, the console and model.json.

The data are an invented Tarn Hill program with a trend of +1.0 per 100 m east (so the trend check
is flagged) and one hole renamed ``<b>X</b>`` with a survey row in error (so its id appears in the
findings, escaped).
"""

import html
import json
import re
import subprocess
import sys
from pathlib import Path

import pandas as pd
import pytest

from synthetic_holes.program import FieldSpec, Structure, generate_program
from synthetic_holes.recovery import recovery_spec
from tests.viewer.browsing import Proxy, browser_or_skip, non_blank
from viewer.browser import screenshot
from viewer.report import SECTIONS

pytestmark = pytest.mark.slow  # every test here reads one whole run of the workflow

ROOT = Path(__file__).resolve().parents[2]
ODD_HOLE = "<b>X</b>"


@pytest.fixture(scope="module")
def run(tmp_path_factory):
    folder = tmp_path_factory.mktemp("report")
    field = FieldSpec(nugget=0.1, structures=[Structure("spherical", 0.9, 120.0, 60.0, 25.0)],
                      mean={"OXIDE": 5.0, "FRESH": 5.0}, trend_per_100m=(1.0, 0.0, 0.0))
    program = generate_program(recovery_spec(n_along=10, n_lines=8, hole_length_m=160.0, field=field), seed=6)
    first = program.collars["hole_id"].iloc[0]
    for table in (program.collars, program.surveys, program.intervals):
        table["hole_id"] = table["hole_id"].replace(first, ODD_HOLE)
    bad = program.surveys.iloc[[0]].copy()
    bad["depth"] = -5.0  # an error: a negative survey depth, left out with --skip-bad-rows
    program.surveys = pd.concat([program.surveys, bad], ignore_index=True)
    paths = program.write(folder / "data")
    out = folder / "run"
    command = [sys.executable, "-m", "engine", "run", "--collars", str(paths["collars"]), "--surveys",
               str(paths["surveys"]), "--intervals", str(paths["intervals"]), "--value", "au_gpt",
               "--bootstrap", "5", "--skip-bad-rows", "--out", str(out)]
    done = subprocess.run(command, capture_output=True, text=True, cwd=ROOT)
    assert done.returncode == 0, done.stderr
    return out, done.stdout, done.stderr


def test_the_run_writes_the_report_and_the_stationarity_file(run):
    out = run[0]
    st = json.loads((out / "stationarity.json").read_text())
    assert st["variable"] == "au_gpt"
    for name in ("trend", "proportional_effect", "mixture", "sill"):  # the contract's four, each with a sentence
        assert isinstance(st["checks"][name]["flag"], bool) and st["checks"][name]["sentence"]
    assert st["checks"]["trend"]["flag"]
    assert [a["name"] for a in st["model_axes_trend"]["axes"]] == ["model major", "model semi-major", "model minor"]
    for name in ("swaths", "proportional_effect", "mixture", "sill", "halves"):
        assert (out / f"stationarity_{name}.png").stat().st_size > 10_000


def test_the_stationarity_warning_leads_model_json_the_console_and_the_report(run):
    out, stdout, stderr = run
    model = json.loads((out / "model.json").read_text())
    assert list(model)[:2] == ["schema", "warnings"]
    assert model["warnings"] and model["warnings"][0].startswith("Stationarity: Trend in the mean along east")
    assert stdout.splitlines()[0].startswith("stationarity of au_gpt: ")
    assert "WARNING (stationarity): Trend in the mean along east" in stdout.splitlines()[1]
    page = (out / "report.html").read_text(encoding="utf-8")
    lead = page.index("Read first:")
    assert lead < page.index('<section id="summary">')
    assert page.index("Stationarity: Trend in the mean along east", lead) < page.index("</ul>", lead)
    # every warning the console printed is in model.json's warnings, and leads the report
    printed = [re.split(r"WARNING(?: \(stationarity\))?: ", line, maxsplit=1)[1]
               for line in (stdout + stderr).splitlines() if "WARNING" in line]
    assert printed
    for text in printed:
        assert any(w.endswith(text) for w in model["warnings"]), text
        assert html.escape(text, quote=False)[:60] in page[lead:page.index('<section id="summary">')], text


def test_the_report_is_self_contained_and_escapes_data_text(run):
    out = run[0]
    page = (out / "report.html").read_text(encoding="utf-8")
    sources = re.findall(r'\bsrc="([^"]*)"', page)
    links = re.findall(r'\bhref="([^"]*)"', page)
    assert len(sources) >= 10 and all(s.startswith("data:image/png;base64,") for s in sources)
    assert links and all(h.startswith("#") for h in links)
    assert "<script" not in page.lower() and "@import" not in page and "url(" not in page
    # the hole id <b>X</b> appears in the findings, escaped, never as markup
    assert ODD_HOLE not in page
    assert "&lt;b&gt;X&lt;/b&gt;" in page
    for key, _ in SECTIONS:
        assert f'<section id="{key}">' in page
    assert "competent or qualified person" in page


def test_chromium_renders_the_report_with_no_network_request(run, tmp_path):
    browser_or_skip()
    out = run[0]
    proxy = Proxy()
    try:
        # the check can fail: a page that asks for two outside files is caught
        planted = tmp_path / "planted.html"
        planted.write_text('<html><body><h1>x</h1><img src="http://drillaxis.invalid/a.png">'
                           '<link rel="stylesheet" href="https://fonts.drillaxis.invalid/b.css"></body></html>')
        screenshot(planted, tmp_path / "planted.png", proxy=proxy.address)
        assert {"drillaxis.invalid", "fonts.drillaxis.invalid"} <= set(proxy.page_requests())
        proxy.lines.clear()
        shot = tmp_path / "report.png"
        done = screenshot(out / "report.html", shot, proxy=proxy.address)
        assert done.returncode == 0 and shot.exists(), done.stderr[-2000:]
        assert proxy.page_requests() == []
    finally:
        proxy.close()
    share, spread = non_blank(shot)
    assert share > 0.05 and spread > 0.05  # text, tables and figures, not an empty page


def test_each_section_renders_alone_for_the_screenshots(run, tmp_path):
    browser_or_skip()
    out = run[0]
    url = (out / "report.html").resolve().as_uri()
    for key in ("stationarity", "ellipsoid"):
        shot = tmp_path / f"{key}.png"
        screenshot(f"{url}#only-{key}", shot, height=1200)
        share, _ = non_blank(shot)
        assert share > 0.05, key

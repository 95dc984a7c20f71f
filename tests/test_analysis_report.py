"""The HTML report: self-contained, every figure embedded as an SVG, renders in headless Chromium."""

from __future__ import annotations

import base64
import json
import os
import re
import subprocess
from pathlib import Path

import pandas as pd
import pytest
from matplotlib import image
from xml.etree import ElementTree

from analysis_campaign import run_campaign_in
from calib.analysis.plots import figure_ids
from calib.analysis.records import SafeKTable
from calib.analysis.tables import NOTICE
from calib.cli import main

CHROMIUM = "/usr/bin/chromium"
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"  # PNG specification (ISO/IEC 15948), section 5.2


@pytest.fixture(scope="module")
def report(tmp_path_factory):
    folder = tmp_path_factory.mktemp("report")
    store = run_campaign_in(folder)
    html = folder / "report.html"
    table = folder / "table.json"
    timings = folder / "timings.csv"
    assert main(["report", str(store), "--html", str(html), "--tau", "0.05", "0.1"]) == 0
    assert main(["tables", str(store), "--json", str(table), "--timings", str(timings), "--tau", "0.05", "0.1"]) == 0
    frame = pd.read_csv(timings, dtype={"params": str})
    return html, json.loads(table.read_text()), frame


def test_report_embeds_every_figure_as_an_svg(report):
    html_path, table, timings = report
    html = html_path.read_text()
    embedded = dict(re.findall(r'<figure id="fig-([^"]+)"><img alt="[^"]*" src="data:image/svg\+xml;base64,([^"]+)"', html))
    typed = SafeKTable.from_dict(table)
    expected = figure_ids(typed, typed.analyses[0], timings)
    assert sorted(embedded) == sorted(expected)
    assert {f"{kind}-lp-planted" for kind in ("success", "law", "speedup")} <= set(embedded)
    for fig_id, data in embedded.items():
        # SVG 1.1 (W3C): an <svg> root element in the SVG namespace; text kept as <text> (readable, searchable)
        root = ElementTree.fromstring(base64.b64decode(data))
        assert root.tag == "{http://www.w3.org/2000/svg}svg", fig_id
        assert float(root.get("width").removesuffix("pt")) > 100 and float(root.get("height").removesuffix("pt")) > 100
        assert root.iter("{http://www.w3.org/2000/svg}text").__next__() is not None, fig_id


def test_report_is_self_contained_and_carries_tables_spec_and_notice(report):
    html = report[0].read_text()
    # no external resource: every src is a data URI, no stylesheet or script is fetched
    assert all(src.startswith("data:") for src in re.findall(r'src="([^"]*)"', html))
    assert "<link" not in html and "<script" not in html
    assert NOTICE.replace("`", "") in html.replace("`", "") and "calib probe" in html
    assert html.count("<h2>Detailed table: ") == 2  # one section per tolerance of the ladder
    assert "Scaling law across sizes" in html and "Speed-up at the safe k" in html
    assert "<h2>A k predicted from features</h2>" in html  # the predictor's errors on this table's cells
    assert "&quot;root_seed&quot;: 7" in html  # the sweep spec


def test_report_leads_with_one_answer_card_per_class(report):
    html_path, table, _ = report
    html = html_path.read_text()
    first = table["analyses"][0]
    classes = {(e["family"], json.dumps(e["class_params"], sort_keys=True), e["projector"], e["retrieval"])
               for e in first["entries"]}
    assert html.count('<div class="card">') == len(classes)
    # the answer comes before the figures, the detailed tables and the campaign metadata
    order = [html.index(marker) for marker in ("<h2>The answer</h2>", '<div class="fold glance">', "<h2>Per class",
                                               "<h2>Figures", "<h2>Detailed table", "<h2>Campaign")]
    assert order == sorted(order)
    # a card states both scopes and the law or why there is none, and the time verdict
    card = html[html.index('<div class="card">'):]
    card = card[:card.index("</div>\n<div") if "</div>\n<div" in card else len(card)]
    assert "class safe k" in card and "these instances" in card and "Time: " in card
    assert "Law (" in card or "No law across sizes" in card


def test_report_text_has_no_python_representations(report):
    html = report[0].read_text()
    text = re.sub(r"<pre>.*?</pre>", "", html, flags=re.S)  # the spec is shown as JSON on purpose
    text = re.sub(r'src="[^"]*"', "", text)
    for fragment in ("= None", "None,", "{'", "'}", "True,", "nan"):
        assert fragment not in text, fragment
    # a Wilson bound of 0 successes prints as 0, not as a rounding residue like 6.4e-18
    assert "e-18" not in text and "e-17" not in text


def _chromium() -> str:
    """The browser, or a skip on a developer's machine without it; CI installs it (.ci/run) and never skips."""
    if not Path(CHROMIUM).exists():
        if os.environ.get("CI"):
            pytest.fail(f"{CHROMIUM} is missing under CI: .ci/run installs Debian's chromium")
        pytest.skip("no /usr/bin/chromium on this machine (CI installs it)")
    return CHROMIUM


def test_report_renders_in_headless_chromium(report, tmp_path):
    html_path, table, timings = report
    _chromium()
    common = [CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu", "--allow-file-access-from-files"]
    dom = subprocess.run(common + ["--dump-dom", html_path.resolve().as_uri()], capture_output=True, text=True,
                         timeout=120, check=True).stdout
    typed = SafeKTable.from_dict(table)
    for fig_id in figure_ids(typed, typed.analyses[0], timings):
        assert f'id="fig-{fig_id}"' in dom
    shot = tmp_path / "shot.png"
    subprocess.run(common + [f"--screenshot={shot}", "--window-size=1280,2000", html_path.resolve().as_uri()],
                   capture_output=True, timeout=120, check=True)
    assert shot.read_bytes().startswith(PNG_SIGNATURE)
    pixels = image.imread(shot, format="png")
    assert pixels.shape[:2] == (2000, 1280)  # the window asked for
    # a page that rendered: mostly the white background, but with ink (text, tables, figures) on it
    ink = (pixels[..., :3].mean(axis=2) < 0.5).mean()
    assert 0.005 < ink < 0.5, ink


def test_report_refuses_a_missing_store(tmp_path):
    assert main(["report", str(tmp_path / "none.sqlite"), "--html", str(tmp_path / "r.html")]) == 2


def test_card_time_verdict_counts_a_saving_only_at_a_policy_k():
    from dataclasses import replace

    from calib.analysis.answers import policy_time_line
    from calib.analysis.records import ABSENT, Entry, Policy

    golden = json.loads((Path(__file__).parent / "golden" / "quickstart" / "safe_k.json").read_text(encoding="utf-8"))
    template = Entry.from_dict(golden["analyses"][0]["entries"][0])  # a real entry, its policy block set below

    def entry(size, k=None, speedup=None, policy=True):
        block = Policy(k=k, answer="", time_median_s=None, baseline_median_s=None, speedup=speedup, grid=[])
        return replace(template, size=size, policy=block if policy else ABSENT)

    fast_but_unusable = entry("rows=60")
    usable_and_faster = entry("rows=240", 12, 20.7)
    assert policy_time_line([entry("s", policy=False)]) is None  # no policy block: the caller falls back to timings
    assert policy_time_line([fast_but_unusable]).startswith("no saving")
    line = policy_time_line([fast_but_unusable, usable_and_faster])
    assert line.startswith("saves time: policy k = 12 at rows=240") and "20.7×" in line

"""The report page as a reader's 1280 px browser window shows it: nothing wide runs out of its box.

A copy of the page gets a small script that measures, in headless Chromium, every table, pre box,
figure, image and scrolling box: its right edge must stay inside the content box of each enclosing
box (up to the window), and a box that scrolls or clips must not hide any of its content at this
width (a screenshot or a printout would lose those columns). The screenshot is written beside it.

Skipped when Chromium is not installed (`apt-get install chromium`); `.ci/run` installs it.
"""

from __future__ import annotations

import json
import re
import struct
from pathlib import Path
from typing import Any

import pytest
from test_report import CONFIG, _render_script

import codebench
from codebench.analysis import analyze
from codebench.report import write_report

WIDTH = 1280  # the window width a design review is read at (issue 15)
TIMEOUT = 120.0  # seconds for one Chromium run; generous, as on a loaded machine

SCRIPT = _render_script()
pytestmark = pytest.mark.skipif(
    SCRIPT.find_chromium() is None,
    reason="headless Chromium not found (looked for chromium, chromium-browser, /usr/bin/chromium); "
           "install it with `apt-get install chromium` to check the report's layout (.ci/run does)")

# What a real sweep file carries besides its keys: long comment lines and a long unbroken file name.
SWEEP_COMMENTS = """\
# Design review, repetition-code memory under circuit-level depolarizing noise around its threshold (near p = 0.05):
# does growing d from 3 to 7 suppress the logical error per round enough at p = 0.02, and does mwpm_correlated help?
# calibration this was compared with: devices/larkspur_current_calibration_after_cooldown_all_couplers_recalibrated.toml
"""

# Runs in the page after it is laid out; writes what it found into <script id="layout-probe">.
PROBE = """
(function () {
  "use strict";
  var SLACK = 1;
  function hides(el) { return getComputedStyle(el).overflowX !== "visible"; }
  function name(el) {
    var cls = typeof el.className === "string" && el.className.trim() ? "." + el.className.trim().split(/\\s+/).join(".") : "";
    var section = el.closest("section");
    return el.tagName.toLowerCase() + (el.id ? "#" + el.id : "") + cls
      + (section && section !== el ? " in section #" + section.id : "");
  }
  function contentRight(box) {
    return box.getBoundingClientRect().left + box.clientLeft + box.clientWidth
      - (parseFloat(getComputedStyle(box).paddingRight) || 0);
  }
  var root = document.documentElement, found = [], measured = [];
  var all = document.body.querySelectorAll("*");
  for (var i = 0; i < all.length; i++) {
    var el = all[i], tag = el.tagName.toLowerCase();
    var scroller = el instanceof HTMLElement && hides(el);
    if (!(scroller || tag === "table" || tag === "pre" || tag === "img" || tag === "figure"
          || (tag === "svg" && !el.parentElement.closest("svg")))) continue;
    measured.push(tag);
    var right = el.getBoundingClientRect().right, box = el.parentElement;
    while (box !== document.body && !hides(box) && right <= contentRight(box) + SLACK) box = box.parentElement;
    if (box !== document.body && !hides(box)) {
      found.push(name(el) + " sticks out of " + name(box) + " by " + Math.round(right - contentRight(box)) + " px");
    } else if (box === document.body && right > root.clientWidth + SLACK) {
      found.push(name(el) + " sticks out of the window by " + Math.round(right - root.clientWidth) + " px");
    }
    if (scroller && el.scrollWidth > el.clientWidth + SLACK) {
      found.push(name(el) + " hides " + (el.scrollWidth - el.clientWidth) + " px of its content (it scrolls or clips)");
    }
  }
  if (root.scrollWidth > root.clientWidth + SLACK) {
    found.push("the page scrolls sideways by " + (root.scrollWidth - root.clientWidth) + " px");
  }
  var out = document.createElement("script");
  out.type = "application/json";
  out.id = "layout-probe";
  out.textContent = JSON.stringify({width: root.clientWidth, measured: measured, overflows: found});
  document.body.appendChild(out);
})();
"""

_RESULT = re.compile(r'<script type="application/json" id="layout-probe">(.*?)</script>', re.S)


def measure(page: Path, work: Path) -> dict[str, Any]:
    """Lays out a copy of ``page`` (in ``work``) at ``WIDTH`` px and returns what the probe found."""
    work.mkdir(parents=True, exist_ok=True)
    copy = work / "probed.html"
    text = page.read_text(encoding="utf-8")
    assert text.count("</body>") == 1
    copy.write_text(text.replace("</body>", f"<script>{PROBE}</script>\n</body>"), encoding="utf-8")
    dom = SCRIPT.dump_dom(copy, WIDTH, 2000, timeout=TIMEOUT)
    match = _RESULT.search(dom)
    assert match is not None, "the probe script did not run in Chromium"
    result: dict[str, Any] = json.loads(match.group(1))
    return result


def _toml(config: dict[str, Any]) -> str:
    """``config`` (plain values, tables and arrays of tables) as TOML text."""
    keys = [f"{k} = {json.dumps(v)}" for k, v in config.items() if not isinstance(v, (dict, list)) or
            (isinstance(v, list) and not any(isinstance(x, dict) for x in v))]
    tables: list[tuple[str, dict[str, Any]]] = []
    for key, value in config.items():
        if isinstance(value, dict):
            tables.append((f"[{key}]", value))
        elif isinstance(value, list) and any(isinstance(x, dict) for x in value):
            tables += [(f"[[{key}]]", item) for item in value]
    for head, table in tables:
        keys += ["", head] + [f"{k} = {json.dumps(v)}" for k, v in table.items()]
    return "\n".join(keys) + "\n"


@pytest.fixture(scope="module")
def report_page(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The report of test_report's tiny sweep, run from a sweep file with a long path and long lines."""
    folder = tmp_path_factory.mktemp("layout")
    sweep_file = folder / "design_review_december" / "repetition_memory_around_threshold_two_decoders.toml"
    sweep_file.parent.mkdir()
    sweep_file.write_text(SWEEP_COMMENTS + _toml(CONFIG), encoding="utf-8")
    frame = codebench.run_sweep(sweep_file, out=folder / "results", workers=1, progress=False)
    return write_report(folder / "results", frame, analyze(frame, bootstrap=40, seed=3))


def test_probe_finds_what_sticks_out_or_is_hidden(tmp_path: Path) -> None:
    """The probe itself, on a page made to fail: a table wider than its box, a pre box that scrolls."""
    page = tmp_path / "wide.html"
    cells = "".join(f"<td>column_{i}_with_a_long_name</td>" for i in range(30))
    page.write_text("<!DOCTYPE html><html><body><main style='width: 600px'><section id='a'>"
                    f"<table><tr>{cells}</tr></table></section><section id='b'><pre style='overflow-x: auto'>"
                    f"{'x' * 400}</pre></section></main></body></html>", encoding="utf-8")
    found = measure(page, tmp_path / "probe")["overflows"]
    assert any(line.startswith("table in section #a sticks out of section#a") for line in found), found
    assert any(line.startswith("pre in section #b hides") for line in found), found
    assert any(line.startswith("the page scrolls sideways") for line in found), found


def test_wide_elements_fit_their_boxes_at_1280_px(report_page: Path, tmp_path: Path) -> None:
    result = measure(report_page, tmp_path)
    page = report_page.read_text(encoding="utf-8")
    assert WIDTH - 40 < result["width"] <= WIDTH, "laid out in a window 1280 px wide (less its scrollbar)"
    for tag in ("table", "pre", "svg"):
        assert result["measured"].count(tag) == len(re.findall(rf"<{tag}\b", page)), f"every {tag} was measured"
    png = SCRIPT.render(report_page, tmp_path / "report_1280.png", WIDTH, 4000, timeout=TIMEOUT)
    head = png.read_bytes()[:24]
    assert head[:8] == b"\x89PNG\r\n\x1a\n" and struct.unpack(">I", head[16:20])[0] == WIDTH
    assert result["overflows"] == [], (
        f"at {WIDTH} px these run out of their box (screenshot: {png}):\n" + "\n".join(result["overflows"]))

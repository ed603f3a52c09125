"""Figures and the report of a real (tiny) sweep: files written, everything embedded, text escaped."""

from __future__ import annotations

import base64
import dataclasses
import importlib.util
import json
import re
from html.parser import HTMLParser
from importlib import metadata
from pathlib import Path
from types import ModuleType
from typing import Any

import matplotlib
import pandas as pd
import pytest

import codebench
import codebench.figures as figures_module
from codebench.analysis import AnalysisResult, analyze
from codebench.figures import distance_colour, write_figures
from codebench.report import write_report

ROOT = Path(__file__).resolve().parents[1]

# The fictional Larkspur Quantum Lab's smallest check: a repetition-code memory under circuit-level
# depolarizing noise around and below its threshold (near p = 0.05 for this noise model), two decoders.
CONFIG: dict[str, Any] = {
    "name": "larkspur_tiny",
    "seed": 8675309,
    "stopping": {"failure_target": 400, "shot_budget": 8000},
    "study": [{
        "label": "rep", "code": "repetition", "distances": [3, 5, 7], "rounds": "d",
        "noise": "circuit_depolarizing", "p": [0.01, 0.02, 0.03, 0.045, 0.06],
        "decoders": ["mwpm", "mwpm_correlated"],
    }],
}


class _Page(HTMLParser):
    """Counts what the report page embeds."""

    def __init__(self) -> None:
        super().__init__()
        self.svgs = 0
        self.png_uris: list[str] = []
        self.external: list[str] = []
        self.text: list[str] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        values = dict(attrs)
        if tag == "svg":
            self.svgs += 1
        for key in ("href", "src", "xlink:href"):
            value = values.get(key) or ""
            if value.startswith("data:image/png;base64,"):
                self.png_uris.append(value)
            elif value and not value.startswith(("#", "data:")):
                self.external.append(value)
        if tag in ("script", "link", "iframe", "object"):
            self.external.append(tag)

    def handle_data(self, data: str) -> None:
        self.text.append(data)


def _parse(path: Path) -> _Page:
    page = _Page()
    page.feed(path.read_text(encoding="utf-8"))
    page.close()
    return page


@pytest.fixture(scope="module")
def sweep(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, pd.DataFrame, AnalysisResult]:
    folder = tmp_path_factory.mktemp("larkspur")
    frame = codebench.run_sweep(CONFIG, out=folder, workers=1, progress=False)
    analysis = analyze(frame, bootstrap=40, seed=3)
    return folder, frame, analysis


@pytest.fixture(scope="module")
def report(sweep: tuple[Path, pd.DataFrame, AnalysisResult]) -> Path:
    folder, frame, analysis = sweep
    return write_report(folder, frame, analysis)


def test_figures_are_written_as_png_and_svg(sweep: tuple[Path, pd.DataFrame, AnalysisResult], tmp_path: Path) -> None:
    _, frame, analysis = sweep
    before = dict(matplotlib.rcParams)
    stale = tmp_path / "figures" / "per_round_vs_p__left_from_an_old_run.png"
    stale.parent.mkdir()
    stale.write_bytes(b"old")
    paths = write_figures(tmp_path, frame, analysis)
    assert dict(matplotlib.rcParams) == before, "figures must not change matplotlib's global settings"
    for module in Path(figures_module.__file__).parent.glob("*.py"):
        source = module.read_text(encoding="utf-8")
        assert "import matplotlib.pyplot" not in source and "from matplotlib import pyplot" not in source
    assert not stale.exists(), "a figure file this run did not write is removed"
    pngs = sorted(p.stem for p in paths if p.suffix == ".png")
    svgs = sorted(p.stem for p in paths if p.suffix == ".svg")
    assert pngs == svgs and pngs
    on_disk = sorted(p.name for p in (tmp_path / "figures").iterdir())
    assert on_disk == sorted(p.name for p in paths)
    for path in paths:
        assert path.stat().st_size > 1000
        if path.suffix == ".png":
            assert path.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
        else:
            assert "<svg" in path.read_text(encoding="utf-8")
    names = set(pngs)
    for family in ("repetition_Z_circuit_depolarizing_mwpm_rd", "repetition_Z_circuit_depolarizing_mwpm_correlated_rd"):
        assert f"per_round_vs_p__{family}" in names
    assert "decoders_vs_p__repetition_Z_circuit_depolarizing_rd" in names
    # One suppression figure per family with a Lambda fit (a few representative p; every fit is in the tables).
    fitted = {(r.family.code, r.family.basis, r.family.decoder) for r in analysis.lambdas
              if r.lam is not None and r.C is not None}
    suppression = sorted(n for n in names if n.startswith("lambda_vs_d__"))
    assert len(suppression) == len(fitted) and not any("__p" in n for n in suppression)


def test_figures_are_reproducible(sweep: tuple[Path, pd.DataFrame, AnalysisResult], tmp_path: Path) -> None:
    """Same inputs, same bytes: no dates and no random ids in the files."""
    _, frame, analysis = sweep
    part = frame[frame["decoder"] == "mwpm"]
    first = write_figures(tmp_path / "a", part, analysis)
    second = write_figures(tmp_path / "b", part, analysis)
    assert [p.name for p in first] == [p.name for p in second] and first
    for a, b in zip(first, second):
        assert a.read_bytes() == b.read_bytes(), a.name


def test_distance_colours_are_fixed_and_distinct() -> None:
    odd = [distance_colour(d) for d in range(3, 23, 2)]
    assert len(set(odd)) == len(odd)
    assert distance_colour(5) == distance_colour(5) and distance_colour(4) not in odd[:3]


def test_report_embeds_every_figure_and_says_what_was_run(
    sweep: tuple[Path, pd.DataFrame, AnalysisResult], report: Path
) -> None:
    folder, frame, _ = sweep
    assert report == folder / "report" / "index.html"
    page = _parse(report)
    figures = folder / "figures"
    svg_files = sorted(figures.glob("*.svg"))
    png_files = sorted(figures.glob("*.png"))
    assert svg_files and len(svg_files) == len(png_files)
    assert page.svgs == len(svg_files)
    embedded = {base64.b64decode(uri.split(",", 1)[1]) for uri in page.png_uris}
    assert len(page.png_uris) == len(png_files)
    assert all(path.read_bytes() in embedded for path in png_files)
    assert page.external == [], "the page loads nothing from outside itself"
    html_text = report.read_text(encoding="utf-8")
    assert "<?xml" not in html_text and "http://" not in html_text.replace("http://www.w3.org/", "")
    text = " ".join(page.text)
    assert str(CONFIG["seed"]) in text and CONFIG["name"] in text
    for package in ("stim", "pymatching", "numpy"):
        assert metadata.version(package) in text
    assert f"{int(frame['shots'].sum()):,}" in text
    for heading in ("What was run", "Figures", "Cautions", "Thresholds", "Pseudo-thresholds", "Projections",
                    "Scaling law", "Notes on the fits", "Results", "Finite-size drift", "Extrapolation"):
        assert heading in text


def test_summary_markdown_has_the_tables(sweep: tuple[Path, pd.DataFrame, AnalysisResult], report: Path) -> None:
    folder, frame, analysis = sweep
    summary = (folder / "report" / "summary.md").read_text(encoding="utf-8")
    assert summary.startswith("# codebench report: larkspur_tiny")
    assert "| study | code | d |" in summary
    assert len(re.findall(r"^\| rep \| repetition \|", summary, flags=re.M)) >= len(frame)
    for title in ("### Thresholds", "### Pseudo-thresholds", "### Error suppression", "### Scaling law",
                  "### Projections", "## Cautions", "## Notes on the fits"):
        assert title in summary
    if analysis.thresholds:
        assert "finite-size scaling" in summary or "| crossing |" in summary
    for png in (folder / "figures").glob("*.png"):
        assert f"](../figures/{png.name})" in summary
    assert f"**seed**: {CONFIG['seed']}" in summary


def test_cautions_list_points_with_few_failures(sweep: tuple[Path, pd.DataFrame, AnalysisResult],
                                                report: Path) -> None:
    _, frame, _ = sweep
    html_text = report.read_text(encoding="utf-8")
    few = frame[frame["failures"] < 10]
    if len(few):
        assert f"{len(few)} point(s) have fewer than 10 failures" in html_text
    else:
        assert "every point has at least 10 failures" in html_text
    assert "every point met its stopping rule" in html_text


def test_saturated_per_round_rates_are_cautioned() -> None:
    # With r rounds the per-round rate is (1 - (1 - 2P)^(1/r)) / 2 (see the README): at P = 0.484 and
    # r = 10,000 it is 1.7e-4 although each round fails far more often; the caution must name the point.
    from codebench.report.cautions import cautions
    from codebench.stats import per_round

    row = {"study": "s", "code": "rotated_surface", "distance": 3, "rounds": 10_000, "basis": "Z", "noise": "si1000",
           "p": 0.002, "decoder": "mwpm", "shots": 1000, "failures": 484, "failure_rate": 0.484,
           "per_round_rate": per_round(0.484, 10_000), "per_round_low": 1e-4, "per_round_high": 0.5}
    found = {c.title: c for c in cautions(pd.DataFrame([row, {**row, "failures": 10, "failure_rate": 0.01}]), {}, [])}
    saturated = found["Per-round rates near saturation"]
    assert not saturated.ok and "1 point(s) fail in more than 40%" in saturated.text
    assert per_round(0.484, 10_000) == pytest.approx(1.7e-4, rel=0.05)


def test_single_distance_gives_a_report_that_says_the_fit_is_missing(
    sweep: tuple[Path, pd.DataFrame, AnalysisResult], tmp_path: Path
) -> None:
    _, frame, _ = sweep
    single = frame[frame["distance"] == 3].reset_index(drop=True)
    index = write_report(tmp_path, frame=single)  # no store here, analysis computed by the report
    text = " ".join(_parse(index).text)
    assert "at least two distances" in text
    assert "no threshold estimate" in text and "no \u039b fit" in text
    # Only the decoders' paired differences (one distance is enough for those); no fit figure.
    figures = sorted(path.name for path in (tmp_path / "figures").iterdir())
    assert figures and all(name.startswith("decoder_difference__") for name in figures)
    assert _parse(index).svgs == len(figures) // 2
    assert "not recorded" in text  # no store: seed and sweep text unknown
    assert (tmp_path / "report" / "summary.md").exists()


def test_text_from_data_is_escaped(sweep: tuple[Path, pd.DataFrame, AnalysisResult], tmp_path: Path) -> None:
    _, frame, analysis = sweep
    labelled = frame[frame["decoder"] == "mwpm"].assign(study="<b>bold</b> & co")
    notes = dataclasses.replace(analysis, general_notes=("<script>alert(1)</script> note",))
    index = write_report(tmp_path, frame=labelled, analysis=notes)
    html_text = index.read_text(encoding="utf-8")
    assert "<b>bold</b>" not in html_text and "<script>" not in html_text
    assert "&lt;b&gt;bold&lt;/b&gt; &amp; co" in html_text
    assert "&lt;script&gt;alert(1)&lt;/script&gt; note" in html_text
    assert "<b>bold</b>" not in (tmp_path / "report" / "summary.md").read_text(encoding="utf-8")


def test_report_loads_folder_when_given_nothing(sweep: tuple[Path, pd.DataFrame, AnalysisResult],
                                               tmp_path: Path) -> None:
    folder, _, _ = sweep
    index = write_report(folder)
    text = " ".join(_parse(index).text)
    assert str(CONFIG["seed"]) in text
    meta_versions = json.loads(_store_meta(folder)["versions"])
    assert meta_versions["stim"] in text


def _store_meta(folder: Path) -> dict[str, str]:
    from codebench.results.store import Store

    with Store(folder / codebench.api.STORE_NAME, create=False) as store:
        return store.meta()


def _render_script() -> ModuleType:
    spec = importlib.util.spec_from_file_location("render_report", ROOT / "scripts" / "render_report.py")
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def test_render_script_flags_and_missing_chromium(tmp_path: Path, monkeypatch: pytest.MonkeyPatch,
                                                  capsys: pytest.CaptureFixture[str]) -> None:
    script = _render_script()
    page = tmp_path / "report" / "index.html"
    page.parent.mkdir()
    page.write_text("<!DOCTYPE html><title>x</title>", encoding="utf-8")
    command = script.chromium_command("/usr/bin/chromium", page, tmp_path / "a.png", tmp_path / "profile", 1400, 4000)
    for flag in ("--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                 "--disable-background-networking", "--disable-component-update", "--disable-sync",
                 f"--user-data-dir={tmp_path / 'profile'}", f"--screenshot={tmp_path / 'a.png'}",
                 "--window-size=1400,4000"):
        assert flag in command
    assert command[-1] == page.resolve().as_uri()
    monkeypatch.setattr(script, "find_chromium", lambda: None)
    assert script.main([str(tmp_path)]) == 2
    assert "apt-get install chromium chromium-driver" in capsys.readouterr().err
    assert script.main([str(tmp_path / "nowhere")]) == 2


def _marker_points(ax: Any) -> list[tuple[float, float]]:
    """Display coordinates of every drawn marker of ``ax``."""
    import numpy as np

    points: list[tuple[float, float]] = []
    for line in ax.lines:
        if not line.get_visible() or line.get_marker() in (None, "None", "", " "):
            continue
        xy = np.asarray(line.get_xydata(), dtype=float)
        if xy.size:
            shown = ax.transData.transform(xy)
            points += [(float(x), float(y)) for x, y in shown if np.isfinite(x) and np.isfinite(y)]
    return points


def test_no_legend_or_annotation_covers_another_or_a_marker(sweep: tuple[Path, pd.DataFrame, AnalysisResult]) -> None:
    """Rendered figures: the boxes of legends and annotations overlap neither each other nor any marker
    (common practice for a figure read in a design review)."""
    from matplotlib.legend import Legend

    from codebench.figures.write import plan_figures

    _, frame, analysis = sweep
    plans = plan_figures(frame, analysis)
    assert plans
    for plan in plans:
        fig = plan.render()
        fig.canvas.draw()
        renderer = fig.canvas.get_renderer()  # type: ignore[attr-defined]
        for ax in fig.axes:
            legends = list({id(c): c for c in ax.get_children() if isinstance(c, Legend)}.values())
            texts = [t for t in ax.texts if t.get_visible() and t.get_text().strip()]
            named = [(f"legend {i}", legend.get_window_extent(renderer)) for i, legend in enumerate(legends)]
            named += [(f"text {t.get_text()[:30]!r}", t.get_window_extent(renderer)) for t in texts]
            for i, (first, box) in enumerate(named):
                for second, other in named[i + 1:]:
                    assert not box.overlaps(other), f"{plan.stem}: {first} overlaps {second}"
            for name, box in named:
                covered = [p for p in _marker_points(ax) if box.x0 <= p[0] <= box.x1 and box.y0 <= p[1] <= box.y1]
                assert not covered, f"{plan.stem}: {name} covers {len(covered)} marker(s)"

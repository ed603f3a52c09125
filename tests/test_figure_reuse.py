"""Figure files are reused while current: `codebench report` after `codebench figures` draws nothing again,
more shots in the store make the figures stale, and a reused figure is the figure a fresh run draws."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import pytest

import codebench
import codebench.figures.write as figure_writer
from codebench.analysis import analyze
from codebench.cli import main
from codebench.figures import plain_analysis, render_figures, write_figures
from codebench.figures.manifest import MANIFEST_NAME


# A tiny repetition-code sweep; a failure target no point reaches, so the shot budget alone sets the counts.
def _config(shots: int) -> dict[str, Any]:
    return {"name": "reuse", "seed": 11, "stopping": {"failure_target": 10**9, "shot_budget": shots},
            "study": [{"code": "repetition", "distances": [3, 5], "rounds": "d", "noise": "circuit_depolarizing",
                       "p": [0.02, 0.05], "decoders": ["mwpm"]}]}


def _files(folder: Path) -> dict[str, tuple[int, bytes]]:
    return {path.name: (path.stat().st_mtime_ns, path.read_bytes()) for path in (folder / "figures").iterdir()}


@pytest.fixture
def draws(monkeypatch: pytest.MonkeyPatch) -> list[str]:
    """Stems of the figures drawn (each drawing saves its PNG and SVG once)."""
    drawn: list[str] = []
    real = figure_writer.save

    def counting(fig: Any, png: Path, svg: Path, salt: str) -> None:
        drawn.append(salt)
        real(fig, png, svg, salt)

    monkeypatch.setattr(figure_writer, "save", counting)
    return drawn


def test_report_reuses_figures_until_the_store_changes(tmp_path: Path, draws: list[str]) -> None:
    folder = tmp_path / "sweep"
    codebench.run_sweep(_config(1000), out=folder, workers=1, progress=False)
    assert main(["figures", str(folder), "--bootstrap", "20"]) == 0
    first = _files(folder)
    assert first and len(draws) == len(first) // 2, "one drawing per figure, saved as PNG and SVG"
    assert (folder / MANIFEST_NAME).exists() and MANIFEST_NAME not in first

    draws.clear()
    assert main(["report", str(folder), "--bootstrap", "20"]) == 0
    assert draws == [], "the report draws no figure that `codebench figures` left current"
    assert _files(folder) == first, "the files are untouched (same bytes, same modification times)"
    page = (folder / "report" / "index.html").read_text(encoding="utf-8")
    assert page.count("<svg") == len(first) // 2

    codebench.run_sweep(_config(3000), out=folder, workers=1, progress=False)  # resumes: more shots per point
    assert main(["report", str(folder), "--bootstrap", "20"]) == 0
    second = _files(folder)
    assert sorted(second) == sorted(first)
    assert len(draws) == len(first) // 2, "every figure shows changed counts, so every one is drawn again"
    assert all(second[name][0] != first[name][0] for name in first)


def test_reused_figures_equal_a_fresh_drawing_and_only_stale_ones_are_redrawn(
        tmp_path: Path, draws: list[str]) -> None:
    folder = tmp_path / "sweep"
    frame = codebench.run_sweep(_config(1000), out=folder, workers=1, progress=False)
    analysis = analyze(frame, bootstrap=20, seed=0)
    items = render_figures(folder, frame, analysis)
    assert all(item.drawn for item in items)
    again = render_figures(folder, frame, plain_analysis(analysis))  # the same fits as plain records
    assert not any(item.drawn for item in again)
    assert [(i.stem, i.title, i.caption) for i in again] == [(i.stem, i.title, i.caption) for i in items]
    fresh = write_figures(tmp_path / "fresh", frame, analysis)
    for path in fresh:
        assert (folder / "figures" / path.name).read_bytes() == path.read_bytes(), path.name

    # Other targets change only the Lambda figures (targets and projections are drawn there).
    draws.clear()
    retargeted = render_figures(folder, frame, analyze(frame, targets=(1e-4,), bootstrap=20, seed=0))
    redrawn = {item.kind for item in retargeted if item.drawn}
    assert redrawn == {"lambda_vs_d"} and len(draws) == sum(item.drawn for item in retargeted)

    # A missing or replaced file is drawn again, alone.
    victim = retargeted[0]
    victim.png.unlink()
    draws.clear()
    after = render_figures(folder, frame, analyze(frame, targets=(1e-4,), bootstrap=20, seed=0))
    assert [item.stem for item in after if item.drawn] == [victim.stem] == draws
    manifest = json.loads((folder / MANIFEST_NAME).read_text(encoding="utf-8"))
    assert sorted(manifest["figures"]) == sorted(item.stem for item in after)

"""Measured points in a results folder: stored, exported with ``source``, analysed beside simulated points.

The measured records are stim's samples of the model's own circuit (so measured and simulated agree
within their intervals, a check on the whole path: records -> stim's measurement-to-detection converter
-> decoder -> counts -> the same per-round conversion as simulated points). Older stores, without the
measured table or the ``source`` column, still load, as simulated.
"""

from __future__ import annotations

import sqlite3
from pathlib import Path

import pandas as pd
import pytest

from codebench.analysis import analyze
from codebench.api import load_results, run_sweep
from codebench.build import noisy_circuit
from codebench.cli import main
from codebench.config import parse_sweep
from codebench.lab.shots import write_records
from codebench.lab.synthetic import sample_records
from codebench.qasm import export_point

DEVICE = Path(__file__).parents[1] / "configs" / "devices" / "larkspur_current.toml"
SWEEP = {
    "name": "twin", "seed": 7, "stopping": {"failure_target": 400, "shot_budget": 6000},
    "study": [{"label": "model", "code": "rotated_surface", "distances": [3, 5], "rounds": 3, "basis": ["Z"],
               "noise": "device", "device": str(DEVICE), "decoders": ["mwpm"]}],
}


@pytest.fixture(scope="module")
def folder(tmp_path_factory: pytest.TempPathFactory) -> Path:
    out = tmp_path_factory.mktemp("twin")
    run_sweep(SWEEP, out=out, workers=1, progress=False)
    point = next(p for p in parse_sweep(SWEEP).points if p.distance == 3)
    exported = export_point(point)
    (out / "exp.json").write_text(exported.description_text())
    write_records(out / "shots.npy", sample_records(noisy_circuit(point), 6000, seed=9))
    assert main(["lab", "decode", str(out / "shots.npy"), "--description", str(out / "exp.json"), "--out",
                 str(out)]) == 0
    return out


def test_measured_rows_are_exported_with_their_source(folder: Path) -> None:
    frame = load_results(folder)
    assert list(frame["source"]) == ["simulated", "simulated", "measured", "measured"]
    measured = frame[frame["source"] == "measured"]
    assert list(measured["decoder"]) == ["mwpm", "mwpm (data weights)"]
    assert (measured["shots"] == 6000).all()
    header = (folder / "results.csv").read_text().splitlines()[0].split(",")
    assert "source" in header and header[-1] == "point_id"  # the point hash last, under our name


def test_measured_agrees_with_simulated_when_the_device_is_its_model(folder: Path) -> None:
    result = analyze(load_results(folder), bootstrap=10)
    assert len(result.measured) == 2
    for row in result.measured:
        assert row.simulated_per_round is not None and row.per_round_low is not None
        assert row.simulated_low is not None and row.simulated_high is not None and row.per_round_high is not None
        # Two independent 95% intervals of the same quantity overlap (they are drawn from the same model).
        assert row.per_round_low <= row.simulated_high and row.simulated_low <= row.per_round_high
    assert "measured" in result.to_json()
    assert all(f.family.source == "simulated" for f in result.families)  # one measured distance: no family


def test_analyze_figures_report_show_measured_beside_simulated(folder: Path,
                                                               capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["analyze", str(folder), "--bootstrap", "10"]) == 0
    assert "Measured beside simulated" in capsys.readouterr().out
    assert main(["figures", str(folder), "--bootstrap", "10"]) == 0
    assert any(path.name.startswith("measured_vs_d__") for path in (folder / "figures").iterdir())
    assert main(["report", str(folder), "--bootstrap", "10"]) == 0
    assert "Measured beside simulated" in (folder / "report" / "summary.md").read_text()


def test_store_without_measured_table_loads_as_simulated(folder: Path, tmp_path: Path) -> None:
    copy = tmp_path / "old"
    copy.mkdir()
    (copy / "results.sqlite").write_bytes((folder / "results.sqlite").read_bytes())
    with sqlite3.connect(copy / "results.sqlite") as db:
        db.execute("DROP TABLE measured")
    frame = load_results(copy)
    assert len(frame) == 2 and set(frame["source"]) == {"simulated"}


def test_measured_points_at_two_distances_form_their_own_family(folder: Path) -> None:
    """Lambda of the measured points alone, never mixed with the simulated ones (common practice: one fit per
    data source); the simulated family's records read exactly as before (no ``source`` key)."""
    frame = load_results(folder)
    measured = frame[frame["source"] == "measured"]
    twin = measured.assign(distance=5, point_id=measured["point_id"] + "5")
    result = analyze(pd.concat([frame, twin], ignore_index=True), bootstrap=10)
    sources = sorted((f.family.source, f.family.decoder) for f in result.families)
    assert sources == [("measured", "mwpm"), ("measured", "mwpm (data weights)"), ("simulated", "mwpm")]
    records = [*result.lambdas, *result.pseudo_thresholds, *result.lambda_pairs]
    assert any(r.family.source == "measured" for r in records) or any("(measured)" in n for n in result.notes)
    for estimate in result.lambdas:
        document = estimate.to_json()
        assert ("source" in document) == (estimate.family.source == "measured")

"""Typed results: analyze() and forecast() return frozen records whose to_json() is the JSON written before.

The golden files in tests/data were written by the implementation that returned plain dicts (commit
600d17b), from the same inputs: ``analysis_golden.json`` is ``json.dumps(analyze(...), indent=2)`` of
:func:`analysis_frame`; ``forecast_golden.json`` is the forecast of :data:`FORECAST_ARGS`, with the
wall-clock values (``wall_seconds``, ``decode_us_per_round``, ``keeps_up``) and the machine's path of the
device file replaced by placeholders. Everything else must match byte for byte, key order included.
If sampling changes on purpose (see DEVELOPERS.md, reproducibility contract), rewrite the forecast golden.
``analysis_golden.json`` was rewritten once on purpose: Lambda fits now take, at each p, the distances
over which the per-round rate falls, whatever the threshold estimate, and carry ``near_threshold``.
"""

from __future__ import annotations

import contextlib
import dataclasses
import io
import json
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest
from test_suppression import lambda_model, make_frame
from test_thresholds import fowler_frame, fss_frame

from codebench.analysis import (
    AnalysisResult,
    CrossingThreshold,
    FamilyAnalysis,
    FssThreshold,
    LambdaEstimate,
    Projection,
    PseudoThreshold,
    analyze,
    group_families,
    threshold_applies,
)
from codebench.analysis.render import analysis_table
from codebench.cli import main
from codebench.forecast import ForecastResult, forecast
from codebench.forecast.details import DirectDetails, StratifiedDetails
from codebench.forecast.rare_events import SpectrumVariant
from codebench.forecast.result import DistanceForecast, plain
from codebench.noise.standard import CodeCapacity

DATA = Path(__file__).resolve().parent / "data"
#: The improved example device as the golden was written from it: without the chip it gained later (a
#: coupling graph changes the device's content, hence the point keys and every count; the golden checks
#: the document, not the device).
EXAMPLE = Path(__file__).resolve().parents[1] / "configs" / "devices" / "larkspur_improved.toml"
ANALYSIS_OPTIONS: dict[str, Any] = {"targets": (1e-6, 0.7, 1e-9), "bootstrap": 40, "seed": 9}
FORECAST_ARGS = ["--code", "repetition", "--distances", "3,5", "--work", "3e7", "--workers", "2"]
TIMED = ("wall_seconds", "decode_us_per_round", "keeps_up")


def analysis_frame() -> pd.DataFrame:
    """Four families: rounds = d with pseudo-thresholds, a Lambda family with projections, code capacity over
    3 rounds (the noise acts once: thresholds apply), and 4 fixed rounds of circuit noise (they do not)."""
    return pd.concat([
        fowler_frame(0),
        make_frame([3, 5, 7], [0.001, 0.002], lambda_model(0.1, 2.0), rng=np.random.default_rng(5)),
        fss_frame(1).assign(noise="code_capacity", rounds=3),
        fss_frame(2).assign(rounds=4),
    ], ignore_index=True)


def _masked(doc: Any) -> Any:
    if isinstance(doc, dict):
        return {k: ("<t>" if k in TIMED else "<path>" if k == "device_file" else _masked(v)) for k, v in doc.items()}
    if isinstance(doc, list):
        return [_masked(v) for v in doc]
    return doc


# --------------------------------------------------------------------------- analysis


@pytest.fixture(scope="module")
def analysis() -> AnalysisResult:
    return analyze(analysis_frame(), **ANALYSIS_OPTIONS)


def test_analysis_to_json_equals_the_dict_implementation(analysis: AnalysisResult) -> None:
    text = json.dumps(analysis.to_json(), indent=2, allow_nan=False) + "\n"
    assert text == (DATA / "analysis_golden.json").read_text()


def test_analysis_typed_access(analysis: AnalysisResult) -> None:
    doc = analysis.to_json()
    assert [(f.family.code, f.family.noise, f.family.rounds) for f in analysis.families] == [
        ("rotated_surface", "si1000", "d"), ("surface", "code_capacity", "3"), ("surface", "depolarizing", "d"),
        ("surface", "depolarizing", "4")]
    # the sections are the families' records in family order, and equal the JSON record by record
    for section in ("thresholds", "pseudo_thresholds", "lambdas", "lambda_pairs", "scaling_laws", "projections"):
        records = getattr(analysis, section)
        assert records == tuple(r for f in analysis.families for r in getattr(f, section))
        assert [r.to_json() for r in records] == doc[section]
    assert list(analysis.notes) == doc["notes"]
    assert analysis.settings.targets == (1e-6, 0.7, 1e-9) and analysis.settings.confidence == 0.95

    rotated, capacity, surface_d, fixed = analysis.families
    assert isinstance(surface_d, FamilyAnalysis)
    assert surface_d.threshold_applies and capacity.threshold_applies and not fixed.threshold_applies
    assert fixed.thresholds == () and any("no threshold estimate" in n for n in fixed.notes)
    kinds = [type(r) for r in surface_d.thresholds]
    assert kinds == [CrossingThreshold, CrossingThreshold, FssThreshold]
    fss = surface_d.best_threshold
    assert isinstance(fss, FssThreshold) and fss.method == "finite_size_scaling"
    assert fss.low is not None and fss.high is not None and fss.low <= fss.threshold <= fss.high
    assert fss.window[0] < fss.threshold < fss.window[1] and fss.distances == (3, 5, 7)
    pseudo = surface_d.pseudo_thresholds
    assert [p.distance for p in pseudo] == [3, 5, 7] and all(isinstance(p, PseudoThreshold) for p in pseudo)
    lam = rotated.lambdas[0]
    assert isinstance(lam, LambdaEstimate) and lam.to_json()["lambda"] == lam.lam
    assert lam.log_cov is not None and len(lam.log_cov) == 2
    projection = rotated.projections[0]
    assert isinstance(projection, Projection) and projection.distance is not None
    assert projection.qubits == 2 * projection.distance ** 2 - 1  # rotated surface code (common practice)
    # every record starts with its family's keys, and records cannot be changed
    for record in analysis.thresholds + analysis.lambdas:
        assert list(record.to_json())[:5] == ["code", "basis", "noise", "decoder", "rounds"]
    with pytest.raises(dataclasses.FrozenInstanceError):
        setattr(fss, "threshold", 0.0)
    assert analysis.for_family(rotated.family) is rotated
    assert analysis_table(analysis).startswith("Thresholds")


def test_no_family_is_a_general_note() -> None:
    result = analyze(fss_frame(0).iloc[:0])
    assert result.families == () and result.to_json()["notes"] == list(result.general_notes)
    assert result.general_notes == ("no family of points with at least two distances: nothing to fit.",)


def test_threshold_applies_reads_the_noise_models_acts_once(monkeypatch: pytest.MonkeyPatch) -> None:
    frame = fss_frame(1).assign(rounds=3)
    (family,) = group_families(frame.assign(noise="code_capacity"))
    assert threshold_applies(family)
    (unknown,) = group_families(frame.assign(noise="not_a_model"))
    assert not threshold_applies(unknown)
    (circuit,) = group_families(frame.assign(noise="si1000"))
    assert not threshold_applies(circuit)
    monkeypatch.setattr(CodeCapacity, "acts_once", False)
    assert not threshold_applies(family)  # the attribute decides, not the name


def test_analyze_command_prints_to_json(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    from codebench.api import load_results, run_sweep

    config = {"name": "typed", "seed": 5, "stopping": {"failure_target": 10**9, "shot_budget": 2000},
              "study": [{"code": "rotated_surface", "distances": [3, 5], "rounds": 1, "basis": ["Z"],
                         "noise": "code_capacity", "p": [0.06, 0.1, 0.14], "decoders": ["mwpm"]}]}
    run_sweep(config, out=tmp_path, workers=1, progress=False)
    assert main(["analyze", str(tmp_path), "--format", "json", "--bootstrap", "30", "--seed", "2"]) == 0
    printed = capsys.readouterr().out
    expected = analyze(load_results(tmp_path), bootstrap=30, seed=2).to_json()
    assert printed == json.dumps(expected, indent=2, allow_nan=False) + "\n"


# --------------------------------------------------------------------------- forecast


@pytest.fixture(scope="module")
def device(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """:data:`EXAMPLE` without its ``[coupling]`` table, as a JSON device file."""
    import tomllib

    data = tomllib.loads(EXAMPLE.read_text())
    del data["coupling"]
    path = tmp_path_factory.mktemp("device") / "larkspur_improved.json"
    path.write_text(json.dumps(data))
    return path


@pytest.fixture(scope="module")
def forecast_run(tmp_path_factory: pytest.TempPathFactory, device: Path) -> tuple[str, Path]:
    """``codebench forecast --format json --out DIR``: its standard output, and DIR."""
    out = tmp_path_factory.mktemp("typed-forecast")
    buffer = io.StringIO()  # capsys is function-scoped
    with contextlib.redirect_stdout(buffer):
        assert main(["forecast", str(device), *FORECAST_ARGS, "--quiet", "--format", "json", "--out", str(out)]) == 0
    return buffer.getvalue(), out


def test_forecast_json_equals_the_dict_implementation(forecast_run: tuple[str, Path]) -> None:
    printed, out = forecast_run
    # the command's JSON and forecast.json are the same bytes ...
    assert (out / "forecast.json").read_text() == printed
    # ... and equal the dict implementation's, up to the wall-clock values
    masked = json.dumps(_masked(json.loads(printed)), indent=2, allow_nan=False) + "\n"
    assert masked == (DATA / "forecast_golden.json").read_text()


def test_forecast_typed_access(forecast_run: tuple[str, Path], device: Path) -> None:
    result = forecast(device, code="repetition", distances=(3, 5), work=3e7, workers=2)
    assert isinstance(result, ForecastResult)
    doc = result.to_json()
    assert _masked(doc) == _masked(json.loads(forecast_run[0]))  # the API and the command agree
    assert result.basis == "Z" and result.bases == ("Z",) and result.per_basis is None
    for row, row_doc in zip(result.distances, doc["distances"]):
        assert isinstance(row, DistanceForecast) and row.to_json() == row_doc
        for key in ("distance", "per_round_rate", "low", "high", "method", "shots", "failures", "qubits"):
            assert getattr(row, key) == row_doc[key], key
        assert isinstance(row.details, StratifiedDetails) and row.method_kind == "stratified"
        assert row.details.w_sampled is not None and row.details.spectrum
        assert sum(p.shots for p in row.details.spectrum) == row.shots
        if row.details.summary is not None:
            assert all(isinstance(v, SpectrumVariant) for v in row.details.summary.spectrum_variants)
    assert result.at(5).distance == 5
    assert result.lambda_fit is not None and (result.lam, result.lam_low, result.lam_high) == (
        doc["lambda"], doc["lambda_low"], doc["lambda_high"])
    assert [t.target for t in result.targets] == [1e-6, 1e-9, 1e-12]
    assert [r.distance for r in result.break_even.distances] == [3, 5]
    assert result.budget.work == 3e7 and not result.budget.hard_limit_reached
    assert list(result.notes) == doc["notes"] and list(result.cautions) == doc["cautions"]


def _row(**changes: Any) -> DistanceForecast:
    base = DistanceForecast(
        distance=3, rounds=3, per_round_rate=1e-3, low=5e-4, high=2e-3, method="direct", method_kind="direct",
        shots=1000, failures=9, flags=(), details=DirectDetails(), log_rate=None, log_rate_variance=None,
        reason="forced", decode_us_per_round=1.5, qubits=17, round_duration_us=1.0, per_second_rate=1e3,
        per_second_low=5e2, per_second_high=2e3, keeps_up=False)
    return dataclasses.replace(base, **changes)


def test_distance_row_keys_follow_how_the_row_was_made() -> None:
    """Sampled rows have both "reason" and "decode_us_per_round"; rows the hard time limit reached first have
    no decoder timing; either-basis rows have no reason and no method details."""
    keys = list(_row().to_json())
    assert keys[:11] == ["distance", "rounds", "per_round_rate", "low", "high", "method", "method_kind", "shots",
                         "failures", "flags", "scales"]
    assert keys[11:] == ["log_rate", "log_rate_variance", "reason", "decode_us_per_round", "qubits",
                         "round_duration_us", "per_second_rate", "per_second_low", "per_second_high", "keeps_up"]
    assert "decode_us_per_round" not in _row(pilot_only=True, decode_us_per_round=None).to_json()
    combined = _row(reason=None, details=None, method_kind="combined").to_json()
    assert "reason" not in combined and "scales" not in combined
    assert _row(per_round_rate=float("nan")).to_json()["per_round_rate"] is None


def test_plain_normalises_records() -> None:
    row = plain(_row(per_round_rate=np.float64(float("inf")), shots=np.int64(5), flags=["a"]))
    assert row.per_round_rate is None and type(row.shots) is int and row.flags == ("a",)

"""Measured records through ``codebench lab``: data made by stim from a circuit the model does not know.

The "device" is the fictional Larkspur Aster-17 (configs/devices/larkspur_current.toml) with three
departures from its calibration file: data qubit a4 ten times noisier (1/T1, 1/T2 and one-qubit gate
error x10), measure qubit m1's readout five times worse, and a correlated error E(0.03) X(m0) X(m7)
before the measurement of round 1 that the model lacks. stim samples the measurement records of that
circuit; the tool is given the calibration file's model. Checks:

- the tool names m1 first among qubits by detection fractions, and a4 and m1 as the first two qubits of
  its fault-source ranking; the pair it names first is one of the four the correlated error joins;
- decoding measured records gives the same failures, shot by shot, as pymatching decoding detection
  events computed directly from the description file (XOR of each detector's bits);
- on held-out shots, data weights are better than model weights where the model is wrong (McNemar's
  paired comparison, z > 3: McNemar, Psychometrika 12, 153 (1947)), and not worse where it is right;
- every malformed input is one line and exit status 2, and nothing is written.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pymatching
import pytest
import stim

from codebench.build import noisy_circuit
from codebench.cli import main
from codebench.lab.decoding import data_weighted, model_weighted
from codebench.lab.departures import Departures, analyse
from codebench.lab.experiment import experiment_of
from codebench.lab.shots import FORMATS, write_records
from codebench.lab.synthetic import Perturbation, perturbed_circuit, sample_records
from codebench.noise.device import DeviceNoise
from codebench.qasm import export_point
from codebench.records import Point

DEVICE = Path(__file__).parents[1] / "configs" / "devices" / "larkspur_current.toml"
CHANGE = Perturbation(noisier_qubit="a4", worse_readout="m1", correlated=("m0", "m7"), correlated_p=0.03)
SHOTS = 20_000


def model_point(rounds: int = 3) -> Point:
    options = DeviceNoise.options_from_source(DEVICE)
    return Point("rotated_surface", 3, rounds, "Z", "device", 1.0, "mwpm", tuple(sorted(options.items())))


@pytest.fixture(scope="module")
def perturbed() -> tuple[np.ndarray, Departures]:
    point = model_point()
    records = sample_records(perturbed_circuit(point, CHANGE), SHOTS, seed=3)
    experiment = experiment_of(point, None)
    dets, obs = experiment.events(records)
    return records, analyse(experiment, dets, obs)


def test_worse_measurement_named_first_by_detection_fractions(perturbed: tuple[np.ndarray, Departures]) -> None:
    _, result = perturbed
    assert result.by_fraction[0].qubit == "m1"
    assert result.worst_detectors[0].qubit == "m1"


def test_fault_sources_name_the_noisier_qubit_and_the_worse_measurement(
        perturbed: tuple[np.ndarray, Departures]) -> None:
    _, result = perturbed
    named: list[str] = []
    for source in result.sources:
        named.extend(q for q in source.qubits if q not in named)
    assert set(named[:2]) == {"a4", "m1"}
    a4 = next(s for s in result.sources if s.qubits == ("a4",) and "idle" in s.kind)
    assert 5 < a4.factor < 20  # made 10x worse (linearised fit: a guide, not a calibration)


def test_correlated_error_is_the_first_unexpected_pair(perturbed: tuple[np.ndarray, Departures]) -> None:
    _, result = perturbed
    description = result.experiment.description
    first = result.pairs[0]
    joined = {(description.detector_qubit(k), description.detector_round(k)) for k in (first.first, first.second)}
    assert joined <= {("m0", 1), ("m0", 2), ("m7", 1), ("m7", 2)}
    assert first.data == pytest.approx(0.03, abs=4 * first.error)


def mcnemar_z(worse: np.ndarray, better: np.ndarray) -> float:
    """(shots only ``worse`` fails - shots only ``better`` fails) / sqrt(their sum)."""
    only_worse = int(np.count_nonzero(worse & ~better))
    only_better = int(np.count_nonzero(better & ~worse))
    return (only_worse - only_better) / math.sqrt(max(1, only_worse + only_better))


def test_data_weights_better_where_the_model_is_wrong(perturbed: tuple[np.ndarray, Departures]) -> None:
    _, result = perturbed
    assert result.model_decoded is not None and result.data_decoded is not None
    assert mcnemar_z(result.model_decoded.failed, result.data_decoded.failed) > 3


def test_data_weights_not_worse_where_the_model_is_right() -> None:
    point = model_point()
    experiment = experiment_of(point, None)
    records = sample_records(noisy_circuit(point), SHOTS, seed=4)
    dets, obs = experiment.events(records)
    model, data = model_weighted(experiment, dets, obs), data_weighted(experiment, dets, obs)
    assert mcnemar_z(data.failed, model.failed) < 3


@pytest.mark.parametrize("fmt", FORMATS)
def test_decoding_records_equals_decoding_their_detection_events(
        tmp_path: Path, perturbed: tuple[np.ndarray, Departures], fmt: str) -> None:
    records, _ = perturbed
    records = records[:4000]
    exported = export_point(model_point())
    (tmp_path / "exp.json").write_text(exported.description_text())
    write_records(tmp_path / f"shots.{fmt}", records)
    out = tmp_path / "out"
    assert main(["lab", "decode", str(tmp_path / f"shots.{fmt}"), "--description", str(tmp_path / "exp.json"),
                 "--weights", "model", "--out", str(out)]) == 0
    # Directly: each detector's bits XORed, per the description file; pymatching on the model's graph.
    description = json.loads((tmp_path / "exp.json").read_text())
    dets = np.stack([np.bitwise_xor.reduce(records[:, d["bits"]], axis=1) for d in description["detectors"]], axis=1)
    obs = np.bitwise_xor.reduce(records[:, description["observables"][0]["bits"]], axis=1)
    dem = noisy_circuit(model_point()).detector_error_model(decompose_errors=True)
    predicted = pymatching.Matching.from_detector_error_model(dem).decode_batch(dets)
    expected = int(np.count_nonzero(predicted[:, 0] != obs))
    rows = [line.split(",") for line in (out / "results.csv").read_text().splitlines()]
    header, row = rows[0], rows[1]
    assert row[header.index("source")] == "measured"
    assert int(row[header.index("failures")]) == expected
    assert int(row[header.index("shots")]) == len(records)


def _malformed(tmp_path: Path, case: str) -> list[str]:
    exported = export_point(model_point())
    description = tmp_path / "exp.json"
    description.write_text(exported.description_text())
    bits = exported.description.measurements
    records = np.zeros((10, bits), dtype=bool)
    if case == "wrong number of bits":
        path = tmp_path / "shots.01"
        path.write_text("0" * bits + "\n" + "0" * (bits - 1) + "\n")
    elif case == "records of another experiment":
        path = write_records(tmp_path / "shots.npy", np.zeros((10, bits + 9), dtype=bool))
    elif case == "truncated b8":
        path = write_records(tmp_path / "shots.b8", records)
        path.write_bytes(path.read_bytes()[:-1])
    elif case == "description of another circuit":
        path = write_records(tmp_path / "shots.b8", records)
        other = export_point(model_point(rounds=2)).description.to_json()
        other["point"] = exported.description.point.params()  # claims this point, describes another circuit
        description.write_text(json.dumps(other))
    elif case == "description against the point":
        path = write_records(tmp_path / "shots.b8", records)
        description.write_text(export_point(model_point(rounds=2)).description_text())
        return ["--device", str(DEVICE), "--code", "rotated_surface", "--distance", "3", "--rounds", "3",
                str(path), "--description", str(description)]
    elif case == "too few shots":
        path = write_records(tmp_path / "shots.b8", records[:5])
    elif case == "random records of the right width":
        # Another experiment's records with the same bit count: the detectors fire at random (about 1/2).
        noise = np.random.default_rng(5).random((400, bits)) < 0.5
        path = write_records(tmp_path / "shots.b8", noise)
    elif case == "point options beside a description":
        path = write_records(tmp_path / "shots.b8", records)
        return [str(path), "--description", str(description), "--distance", "5"]
    elif case == "unknown decoder in the description":
        path = write_records(tmp_path / "shots.b8", records)
        changed = exported.description.to_json()
        changed["point"]["decoder"] = "nosuch"
        description.write_text(json.dumps(changed))
    elif case == "not JSON":
        path = write_records(tmp_path / "shots.b8", records)
        description.write_text("{")
    elif case == "text records read as npy":
        path = tmp_path / "shots.txt"
        path.write_text("0" * bits + "\n")
        return [str(path), "--description", str(description), "--format", "npy"]
    else:
        path = tmp_path / "shots.r8"
        path.write_bytes(b"\xff\xff")
    return [str(path), "--description", str(description)]


@pytest.mark.parametrize("verb", ["decode", "inspect"])
@pytest.mark.parametrize("case", ["wrong number of bits", "records of another experiment", "truncated b8",
                                  "description of another circuit", "description against the point", "not JSON",
                                  "bad r8", "too few shots", "random records of the right width",
                                  "point options beside a description", "unknown decoder in the description",
                                  "text records read as npy"])
def test_malformed_input_is_one_line_and_exit_2(tmp_path: Path, capsys: pytest.CaptureFixture[str], case: str,
                                               verb: str) -> None:
    arguments = _malformed(tmp_path, case)
    out = tmp_path / "out"
    assert main(["lab", verb, *arguments, "--out", str(out)]) == 2
    err = [line for line in capsys.readouterr().err.splitlines() if line.strip()]
    assert len(err) == 1, err
    assert "allow_pickle" not in err[0]  # NumPy's advice to load a pickle unsafely never reaches the user
    assert not out.exists()


def test_inspect_writes_tables_model_and_figures(tmp_path: Path, perturbed: tuple[np.ndarray, Departures],
                                                 capsys: pytest.CaptureFixture[str]) -> None:
    records, _ = perturbed
    (tmp_path / "exp.json").write_text(export_point(model_point()).description_text())
    write_records(tmp_path / "shots.b8", records[:4000])
    out = tmp_path / "inspect"
    assert main(["lab", "inspect", str(tmp_path / "shots.b8"), "--description", str(tmp_path / "exp.json"),
                 "--out", str(out)]) == 0
    names = {p.name for p in out.iterdir()}
    assert {"detectors.csv", "sources.csv", "edges.csv", "pairs.csv", "reweighted.dem", "summary.txt"} <= names
    assert {f"{stem}.{ext}" for stem in ("detection_fractions", "qubit_map", "pair_matrix") for ext in ("png", "svg")} \
        <= names
    reweighted = stim.DetectorErrorModel((out / "reweighted.dem").read_text())
    assert reweighted.num_detectors == 24 and reweighted.num_observables == 1
    assert "Fault sources" in capsys.readouterr().out


def test_qubit_map_is_drawn_on_the_chip_where_the_device_has_geometry() -> None:
    """On a device with a coupling graph the patch's qubits are device qubits with chip coordinates: the map
    puts them there (the chip's own layout, issue 10's geometry), not at the code's coordinates."""
    from codebench.config import parse_sweep
    from codebench.figures.lab import qubit_map
    from codebench.noise.calibration import load_device

    grid = Path(__file__).parents[1] / "configs" / "devices" / "larkspur_grid.toml"
    point = parse_sweep({"name": "chip", "seed": 1, "study": [
        {"code": "rotated_surface", "distances": [3], "rounds": 3, "noise": "device", "device": str(grid),
         "decoders": ["mwpm"]}]}, source="test").points[0]
    experiment = experiment_of(point, None)
    dets, obs = experiment.events(sample_records(noisy_circuit(point), 2000, seed=4))
    result = analyse(experiment, dets, obs)
    fig = qubit_map(result)
    ax = fig.axes[0]
    assert ax.get_xlabel() == "x (chip coordinate)"
    chip = load_device(grid).geometry.coords
    placed = {text.get_text(): text.xy for text in ax.texts if text.get_text() in chip}
    assert len(placed) == 17 and all(tuple(xy) == chip[name] for name, xy in placed.items())

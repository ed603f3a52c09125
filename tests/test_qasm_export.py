"""OpenQASM 3 export of a point's experiment, checked outside codebench.

- Every program is parsed by the reference parser of the OpenQASM 3 standard (the ``openqasm3``
  package with its ``parser`` extra; Cross et al., ACM Trans. Quantum Comput. 3, 12 (2022) define the
  language), and the statements it sees are counted against the circuit (measurements into bits,
  resets, native gates, one timing box per layer of the device's durations).
- Read back by our own reader, the program gives a circuit that stim says is the same: the same
  noiseless stim circuit, the same detector coordinates, and under the same noise model the same
  detector error model (stim's ``detector_error_model``, compared exactly).
"""

from __future__ import annotations

import json
from collections import Counter
from pathlib import Path

import pytest
import stim
from openqasm3 import ast, parser

from codebench.build import ideal_circuit, noise_model, noisy_circuit
from codebench.cli import main
from codebench.errors import DataError
from codebench.noise.device import DeviceNoise
from codebench.qasm import export_point, load_description
from codebench.qasm.description import description_from_json
from codebench.qasm.reader import read_program
from codebench.records import Point

DEVICES = Path(__file__).parents[1] / "configs" / "devices"


def device_point(code: str = "rotated_surface", basis: str = "Z", rounds: int = 3, distance: int = 3) -> Point:
    options = DeviceNoise.options_from_source(DEVICES / "larkspur_current.toml")
    return Point(code, distance, rounds, basis, "device", 1.0, "mwpm", tuple(sorted(options.items())))  # type: ignore[arg-type]


POINTS = {
    "surface-device-Z": device_point(),
    "surface-device-X": device_point(basis="X", rounds=2),
    "surface-cx-X": Point("rotated_surface", 3, 2, "X", "circuit_depolarizing", 1e-3, "mwpm"),
    "heavy_hex-si1000-X": Point("heavy_hex", 3, 2, "X", "si1000", 1e-3, "mwpm"),
    "repetition-cx-Z": Point("repetition", 5, 3, "Z", "circuit_depolarizing", 1e-3, "mwpm"),
}


def statements(program: ast.Program) -> list[ast.Statement]:
    """Top-level statements with the bodies of boxes spliced in."""
    out: list[ast.Statement] = []
    for statement in program.statements:
        out.extend(statement.body if isinstance(statement, ast.Box) else [statement])  # type: ignore[list-item]
    return out


@pytest.mark.parametrize("name", sorted(POINTS))
def test_reference_parser_accepts_the_program_and_counts_agree(name: str) -> None:
    point = POINTS[name]
    exported = export_point(point)
    tree = parser.parse(exported.program)
    ideal = ideal_circuit(point)
    found = statements(tree)
    measures = [s for s in found if isinstance(s, ast.QuantumMeasurementStatement)]
    assert len(measures) == ideal.num_measurements == exported.description.measurements
    assert [s.target.indices[0][0].value for s in measures] == list(range(ideal.num_measurements))  # type: ignore[union-attr,index]
    ops = Counter(op.gate for layer in ideal.layers for op in layer.ops for _ in op.targets)
    resets = sum(1 for s in found if isinstance(s, ast.QuantumReset))
    assert resets == ops["R"] + ops["RX"]
    gates = Counter(s.name.name for s in found if isinstance(s, ast.QuantumGate))
    two_qubit = ideal.gate_set  # the native entangling gate of the circuit's gate set
    assert gates[two_qubit] == (ops["CZ"] + ops["CX"]) // 2
    assert set(gates) <= {"h", two_qubit}
    barriers = [s for s in tree.statements if isinstance(s, ast.QuantumBarrier)]
    assert len(barriers) == len(ideal.layers) - 1
    boxes = [s for s in tree.statements if isinstance(s, ast.Box)]
    model = noise_model(point)
    if point.noise == "device":
        assert [b.duration.value for b in boxes] == [model.layer_duration_ns(layer) for layer in ideal.layers]  # type: ignore[union-attr]
    else:
        assert not boxes


@pytest.mark.parametrize("name", sorted(POINTS))
def test_program_reads_back_to_the_same_circuit(name: str) -> None:
    point = POINTS[name]
    exported = export_point(point)
    back = read_program(exported.program, exported.description)
    original = ideal_circuit(point)
    assert back.to_stim() == original.to_stim()
    assert back.to_stim().get_detector_coordinates() == original.to_stim().get_detector_coordinates()
    model = noise_model(point)
    assert model.decorate(back).detector_error_model() == noisy_circuit(point).detector_error_model()
    # Noiseless: every detector and observable of the read-back circuit is 0 (stim's sampler).
    dets, obs = back.to_stim().compile_detector_sampler(seed=1).sample(64, separate_observables=True)
    assert not dets.any() and not obs.any()


def test_device_qubit_names_and_description_round_trip(tmp_path: Path) -> None:
    point = POINTS["surface-device-Z"]
    exported = export_point(point)
    tree = parser.parse(exported.program)
    declared = [s.qubit.name for s in tree.statements if isinstance(s, ast.QubitDeclaration)]
    device = DeviceNoise(1.0, **dict(point.noise_options)).device
    assert declared == list(device.layout_map("rotated_surface", 3) or ())
    path = tmp_path / "exp.json"
    path.write_text(exported.description_text())
    again = load_description(path)
    assert again == exported.description
    # The description's detectors are stim's: the same records (as absolute bit indices) and coordinates.
    circuit = noisy_circuit(point)
    coords = circuit.get_detector_coordinates()
    assert [tuple(c) for _, c in again.detectors] == [tuple(coords[i]) for i in range(circuit.num_detectors)]


def _tampered(program: str, old: str, new: str) -> str:
    assert old in program
    return program.replace(old, new, 1)


@pytest.mark.parametrize("change", ["unknown gate", "wrong bit", "undeclared qubit", "missing layer",
                                    "other duration"])
def test_reader_refuses_what_it_does_not_write(change: str) -> None:
    exported = export_point(POINTS["surface-device-Z"])
    text = exported.program
    edits = {
        "unknown gate": ("h a0;", "sx a0;"),
        "wrong bit": ("rec[0] = measure", "rec[1] = measure"),
        "undeclared qubit": ("reset a0;", "reset zz;"),
        "missing layer": ("barrier;\n", ""),
        "other duration": ("box[600ns]", "box[700ns]"),
    }
    with pytest.raises(DataError) as info:
        read_program(_tampered(text, *edits[change]), exported.description)
    assert "\n" not in str(info.value)


def test_description_refuses_malformed_json() -> None:
    good = export_point(POINTS["repetition-cx-Z"]).description.to_json()
    for key, value in (("format", "other"), ("measurements", -1), ("detectors", [{"bits": [999], "coords": []}])):
        bad = json.loads(json.dumps(good))
        bad[key] = value
        with pytest.raises(DataError):
            description_from_json(bad, "d.json")


def test_cli_writes_program_and_description(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    out = tmp_path / "exp.qasm"
    status = main(["qasm", "--device", str(DEVICES / "larkspur_current.toml"), "--code", "rotated_surface",
                   "--distance", "3", "--out", str(out)])
    assert status == 0
    parser.parse(out.read_text())
    assert load_description(out.with_suffix(".json")).point == POINTS["surface-device-Z"]
    assert main(["qasm", "--code", "rotated_surface", "--distance", "4", "--noise", "si1000", "--p", "0.001",
                 "--out", str(tmp_path / "x.qasm")]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "--distance" in err[0]
    assert not (tmp_path / "x.qasm").exists()


def test_cli_exports_a_sweep_point_and_the_circuit_command_takes_a_device(
        tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    sweep = tmp_path / "sweep.toml"
    sweep.write_text(f'name = "x"\nseed = 1\n[[study]]\ncode = "rotated_surface"\ndistances = [3]\nrounds = 3\n'
                     f'basis = ["Z"]\nnoise = "device"\ndevice = "{DEVICES / "larkspur_current.toml"}"\n'
                     'decoders = ["mwpm"]\n')
    assert main(["qasm", str(sweep), "--point", "0", "--out", str(tmp_path / "p.qasm")]) == 0
    assert load_description(tmp_path / "p.json").point == POINTS["surface-device-Z"]
    capsys.readouterr()
    assert main(["circuit", "--device", str(DEVICES / "larkspur_current.toml"), "--code", "rotated_surface",
                 "--distance", "3", "--rounds", "3"]) == 0
    printed = stim.Circuit(capsys.readouterr().out)  # stim prints arguments rounded
    assert printed.approx_equals(noisy_circuit(POINTS["surface-device-Z"]), atol=1e-6)

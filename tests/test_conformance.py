"""Shared conformance checks that every registered plug-in must pass.

Decoders, noise models, code families and executors each sit behind a small
interface; these checks run on every registered implementation, so a new one
is tested the moment it is registered. The properties are common practice
for batch decoders and samplers (batch equals one-by-one, order independence,
pickling for shipping to workers, inputs untouched, seeded reproducibility).
"""

from __future__ import annotations

import pickle
from pathlib import Path

import numpy as np
import pytest
import stim

from codebench.circuits import build_memory
from codebench.codes import CODE_FAMILIES
from codebench.decoders import DECODERS
from codebench.engine.executors import InProcessExecutor, LocalExecutor
from codebench.engine.points import Point
from codebench.engine.worker import BatchTask, batch_seed
from codebench.noise import NOISE_MODELS
from codebench.noise.base import NoiseModel
from codebench.noise.calibration import load_device

REPO = Path(__file__).parents[1]
#: The device the `device` noise model is checked with (a fictional example shipped in configs/devices).
EXAMPLE_DEVICE = REPO / "configs" / "devices" / "larkspur_improved.toml"


def model_options(name: str) -> dict[str, str]:
    """Options a model needs to be built: the device noise model needs a device file."""
    return {"device": load_device(EXAMPLE_DEVICE).canonical_json()} if name == "device" else {}


def make_model(name: str, p: float) -> NoiseModel:
    """The registered noise model ``name`` at rate (or, for a device, scale) ``p``."""
    return NOISE_MODELS[name](p, **model_options(name))


def _small_distance(family_name: str) -> int:
    family = CODE_FAMILIES[family_name]
    return next(d for d in range(2, 12) if family.distance_problem(d) is None)


def _events(circuit: stim.Circuit, shots: int, seed: int) -> tuple[np.ndarray, np.ndarray]:
    sampler = circuit.compile_detector_sampler(seed=seed)
    det, obs = sampler.sample(shots, separate_observables=True, bit_packed=True)
    return det, obs


@pytest.fixture(scope="module")
def surface_circuit() -> stim.Circuit:
    return Point("rotated_surface", 3, 3, "Z", "circuit_depolarizing", 0.01, "mwpm").circuit()


@pytest.mark.parametrize("name", sorted(DECODERS))
class TestDecoderConformance:
    def _decoder(self, name: str, circuit: stim.Circuit):  # type: ignore[no-untyped-def]
        cls = DECODERS[name]
        decoder = cls()
        decoder.compile(circuit.detector_error_model(decompose_errors=cls.wants_decomposed))
        return decoder

    def test_batch_equals_one_by_one(self, name: str, surface_circuit: stim.Circuit) -> None:
        decoder = self._decoder(name, surface_circuit)
        det, _ = _events(surface_circuit, 200, seed=1)
        batch = decoder.decode_batch(det, bit_packed=True)
        singles = np.concatenate([decoder.decode_batch(det[i : i + 1], bit_packed=True) for i in range(len(det))])
        assert np.array_equal(batch, singles)

    def test_packed_and_unpacked_agree(self, name: str, surface_circuit: stim.Circuit) -> None:
        decoder = self._decoder(name, surface_circuit)
        det, _ = _events(surface_circuit, 200, seed=2)
        unpacked = np.unpackbits(det, axis=1, bitorder="little")[:, : surface_circuit.num_detectors].astype(bool)
        packed_pred = decoder.decode_batch(det, bit_packed=True)
        plain_pred = decoder.decode_batch(unpacked, bit_packed=False)
        repacked = np.packbits(plain_pred, axis=1, bitorder="little")
        assert np.array_equal(packed_pred, repacked)

    def test_shot_order_does_not_matter(self, name: str, surface_circuit: stim.Circuit) -> None:
        decoder = self._decoder(name, surface_circuit)
        det, _ = _events(surface_circuit, 300, seed=3)
        order = np.random.default_rng(0).permutation(len(det))
        assert np.array_equal(decoder.decode_batch(det)[order], decoder.decode_batch(det[order]))

    def test_input_not_mutated(self, name: str, surface_circuit: stim.Circuit) -> None:
        decoder = self._decoder(name, surface_circuit)
        det, _ = _events(surface_circuit, 100, seed=4)
        copy = det.copy()
        decoder.decode_batch(det)
        assert np.array_equal(det, copy)

    def test_pickle_round_trip_then_compile(self, name: str, surface_circuit: stim.Circuit) -> None:
        decoder = self._decoder(name, surface_circuit)
        clone = pickle.loads(pickle.dumps(decoder))
        assert clone.get_params() == decoder.get_params()
        clone.compile(surface_circuit.detector_error_model(decompose_errors=DECODERS[name].wants_decomposed))
        det, _ = _events(surface_circuit, 200, seed=5)
        assert np.array_equal(clone.decode_batch(det), decoder.decode_batch(det))

    def test_decodes_better_than_guessing(self, name: str, surface_circuit: stim.Circuit) -> None:
        # At p = 1% on d = 3 a working decoder fails in a few percent of shots; predicting
        # "no flip" fails far more often (common practice sanity bound).
        decoder = self._decoder(name, surface_circuit)
        det, obs = _events(surface_circuit, 4000, seed=6)
        failures = np.any(decoder.decode_batch(det) != obs, axis=1).mean()
        assert failures < 0.5 * obs.any(axis=1).mean()


@pytest.mark.parametrize("name", sorted(NOISE_MODELS))
class TestNoiseModelConformance:
    def test_params_identify_the_model(self, name: str) -> None:
        model = make_model(name, 0.001)
        params = model.get_params()
        assert params["noise"] == name and params["p"] == 0.001
        assert set(params["noise_options"]) == set(NOISE_MODELS[name].options) | set(model_options(name))
        rebuilt = NOISE_MODELS[name](params["p"], **params["noise_options"])
        assert rebuilt.get_params() == params

    def test_zero_noise_is_noiseless(self, name: str) -> None:
        layout = CODE_FAMILIES["rotated_surface"].layout(3, "Z")
        circuit = make_model(name, 0.0).memory_circuit(layout, 3, "Z")
        assert circuit.detector_error_model().num_errors == 0

    def test_largest_rate_gives_valid_channels(self, name: str) -> None:
        cls = NOISE_MODELS[name]
        layout = CODE_FAMILIES["rotated_surface"].layout(3, "X")
        # A device's scale multiplies its error rates (probabilities are capped at the channel maxima):
        # check a moderate scale and the largest allowed one.
        rates = (10.0, cls.p_max) if name == "device" else (cls.p_max,)
        for p in rates:
            circuit = make_model(name, p).memory_circuit(layout, 2, "X")  # stim rejects invalid probabilities
            assert circuit.num_detectors > 0

    def test_same_gate_set_as_declared(self, name: str) -> None:
        model = make_model(name, 0.001)
        layout = CODE_FAMILIES["rotated_surface"].layout(3, "X")
        gates = {inst.name for inst in model.memory_circuit(layout, 2, "X").flattened()}
        two_qubit = {"CX", "CZ"} & gates
        assert two_qubit == ({"CX"} if model.circuit_gate_set() == "cx" else {"CZ"})


@pytest.mark.parametrize("name", sorted(CODE_FAMILIES))
class TestCodeFamilyConformance:
    def test_layouts_validate_and_are_deterministic(self, name: str) -> None:
        family = CODE_FAMILIES[name]
        d = _small_distance(name)
        for basis in family.bases:
            first, second = family.layout(d, basis), family.layout(d, basis)
            first.validate()
            assert first == second
            assert family.qubit_count(d) == len(first.qubits)

    def test_logical_commutes_with_checks_of_other_type(self, name: str) -> None:
        # A Z logical must commute with every X check, and vice versa (stabilizer formalism,
        # Gottesman, PhD thesis, Caltech (1997)).
        family = CODE_FAMILIES[name]
        d = _small_distance(name)
        for basis in family.bases:
            layout = family.layout(d, basis)
            z_support, x_support = set(layout.logical_z), set(layout.logical_x)
            for check in layout.checks:
                other = z_support if check.basis == "X" else x_support
                assert len(other & set(check.support)) % 2 == 0
            assert len(z_support & x_support) % 2 == 1

    def test_ideal_circuit_deterministic_in_both_gate_sets(self, name: str) -> None:
        family = CODE_FAMILIES[name]
        d = _small_distance(name)
        for basis in family.bases:
            for gate_set in ("cx", "cz"):
                circuit = build_memory(family.layout(d, basis), 2, basis, gate_set).to_stim()  # type: ignore[arg-type]
                assert not circuit.compile_detector_sampler(seed=1).sample(50, append_observables=True).any()


def _tasks() -> list[BatchTask]:
    points = [
        Point("repetition", 3, 3, "Z", "circuit_depolarizing", 0.02, "mwpm"),
        Point("rotated_surface", 3, 3, "X", "si1000", 0.003, "mwpm_correlated"),
    ]
    return [
        BatchTask(p.key(9), p.params(), i, 1500, batch_seed(9, p.key(9), i, 1500))
        for p in points
        for i in range(3)
    ]


@pytest.mark.parametrize("make", [InProcessExecutor, lambda: LocalExecutor(2)], ids=["in_process", "local"])
def test_executor_returns_the_in_process_results(make) -> None:  # type: ignore[no-untyped-def]
    expected = {(t.point_key, t.batch_index): None for t in _tasks()}
    reference = InProcessExecutor()
    for task in _tasks():
        reference.submit(task)
    for _ in _tasks():
        for result in reference.completed(timeout=1):
            expected[(result.point_key, result.batch_index)] = result.failures  # type: ignore[assignment]
    executor = make()
    try:
        for task in _tasks():
            executor.submit(task)
        got: dict[tuple[str, int], int] = {}
        while len(got) < len(expected):
            for result in executor.completed(timeout=30):
                assert result.shots == 1500
                got[(result.point_key, result.batch_index)] = result.failures
    finally:
        executor.close()
    assert got == expected
    assert executor.in_flight() == 0

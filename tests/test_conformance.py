"""Shared conformance checks that every registered plug-in must pass.

Decoders, noise models, code families and executors each sit behind a small
interface; these checks run on every registered implementation, so a new one
is tested the moment it is registered. The properties are common practice
for batch decoders and samplers (batch equals one-by-one, order independence,
pickling for shipping to workers, inputs untouched, seeded reproducibility).
"""

from __future__ import annotations

from pathlib import Path

import pytest

from codebench.build import noisy_circuit
from codebench.codes import CODE_FAMILIES
from codebench.decoders import DECODERS
from codebench.engine.executors import Executor, InProcessExecutor, LocalExecutor
from codebench.engine.worker import batch_seed
from codebench.noise import NOISE_MODELS
from codebench.noise.base import NoiseModel
from codebench.noise.calibration import load_device
from codebench.records import BatchTask, Point
from codebench.testing import decoder_checks, run_decoder_check

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


@pytest.mark.parametrize("check", decoder_checks())
@pytest.mark.parametrize("name", sorted(DECODERS))
def test_decoder_conformance(name: str, check: str) -> None:
    # The importable suite (codebench.testing): batch equals one-by-one, shot order, pickling,
    # inputs untouched, seeded reproducibility through run_batch, better than guessing.
    run_decoder_check(check, name)


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
        # The family's own ideal circuit (what the engine decorates and samples; a family with its own
        # rounds, such as heavy_hex with flags, overrides it), not only build_memory of its layout.
        family = CODE_FAMILIES[name]
        d = _small_distance(name)
        for basis in family.bases:
            for gate_set in ("cx", "cz"):
                circuit = family.ideal_circuit(d, 2, basis, gate_set).to_stim()  # type: ignore[arg-type]
                assert not circuit.compile_detector_sampler(seed=1).sample(50, append_observables=True).any()
            sampled = noisy_circuit(Point(name, d, 2, basis, "circuit_depolarizing", 0.0, "mwpm"))
            assert sampled.num_detectors == family.ideal_circuit(d, 2, basis, "cx").to_stim().num_detectors
            assert not sampled.compile_detector_sampler(seed=1).sample(50, append_observables=True).any()


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


def _local_dask_cluster() -> Executor:
    from codebench.engine.dask_executor import start_dask_executor
    from codebench.records import ClusterSpec

    return start_dask_executor(ClusterSpec(local_workers=2))


@pytest.mark.parametrize("make", [InProcessExecutor, lambda: LocalExecutor(2), _local_dask_cluster],
                         ids=["in_process", "local", "dask"])
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

"""Every registered plug-in passes the importable conformance suite of its kind.

Decoders, noise models, code families and executors each sit behind a small
interface with a registry; the suites in :mod:`codebench.testing` run here on
every registered implementation, so a new one is tested the moment it is
registered. The properties are common practice for batch decoders and
samplers (batch equals one-by-one, order independence, pickling for shipping
to workers, inputs untouched, seeded reproducibility) plus the physics floor
(no detection events without noise, circuit distance d; stim's
``search_for_undetectable_logical_errors``, Gidney, Quantum 5, 497 (2021)).
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

import pytest

from codebench.codes import CODE_FAMILIES
from codebench.decoders import DECODERS
from codebench.engine.executor import Executor
from codebench.engine.executors import EXECUTORS
from codebench.noise import NOISE_MODELS
from codebench.noise.standard import CodeCapacity
from codebench.records import ClusterSpec
from codebench.testing import (
    code_family_checks,
    decoder_checks,
    executor_checks,
    noise_model_checks,
    run_code_family_check,
    run_decoder_check,
    run_executor_check,
    run_noise_model_check,
)

REPO = Path(__file__).parents[1]
#: The device the `device` noise model is checked with (a fictional example shipped in configs/devices).
EXAMPLE_DEVICE = REPO / "configs" / "devices" / "larkspur_improved.toml"


def model_options(name: str) -> dict[str, str]:
    """Options a model needs to be built: a model that reads a source file gets the example device's."""
    model = NOISE_MODELS[name]
    return model.options_from_source(EXAMPLE_DEVICE) if model.source_key is not None else {}


@pytest.mark.parametrize("check", decoder_checks())
@pytest.mark.parametrize("name", sorted(DECODERS))
def test_decoder_conformance(name: str, check: str) -> None:
    run_decoder_check(check, name)


@pytest.mark.parametrize("check", noise_model_checks())
@pytest.mark.parametrize("name", sorted(NOISE_MODELS))
def test_noise_model_conformance(name: str, check: str) -> None:
    run_noise_model_check(check, name, model_options(name))


@pytest.mark.parametrize("check", code_family_checks())
@pytest.mark.parametrize("name", sorted(CODE_FAMILIES))
def test_code_family_conformance(name: str, check: str) -> None:
    run_code_family_check(check, name)


def _dask_local_cluster() -> Executor:
    from codebench.engine.executors import get_executor

    return get_executor("dask").create({"cluster": ClusterSpec(local_workers=2)})


#: How the tests make each registered executor (the dask one starts a local cluster of 2 workers).
EXECUTOR_FACTORIES: dict[str, str | Callable[[], Executor]] = {"in_process": "in_process", "local": "local",
                                                                 "dask": _dask_local_cluster}


def test_every_registered_executor_is_checked() -> None:
    assert set(EXECUTOR_FACTORIES) == set(EXECUTORS)


@pytest.mark.parametrize("check", executor_checks())
@pytest.mark.parametrize("name", sorted(EXECUTORS))
def test_executor_conformance(name: str, check: str) -> None:
    run_executor_check(check, EXECUTOR_FACTORIES[name])


# ---------------------------------------------------------------------------
# the suites catch what they are meant to catch


class NoisyAtZero(CodeCapacity):
    """Adds a measurement flip even at rate 0."""

    name = "noisy_at_zero"

    def layer_noise(self, layer, ideal):  # type: ignore[no-untyped-def]
        before, after = super().layer_noise(layer, ideal)
        if any(op.gate.startswith("M") for op in layer.ops):
            before = [*before, ("X_ERROR", sorted(layer.qubits), [0.01])]
        return before, after


class LessNoiseAtHigherRate(CodeCapacity):
    """Its data flips fall as the rate grows."""

    name = "less_at_higher_rate"

    def layer_noise(self, layer, ideal):  # type: ignore[no-untyped-def]
        before, after = super().layer_noise(layer, ideal)
        return before, [(gate, targets, [self.p * max(0.0, 1 - 400 * self.p)]) for gate, targets, _ in after]


@pytest.mark.parametrize(("model", "check"), [(NoisyAtZero, "zero_noise_is_noiseless"),
                                              (LessNoiseAtHigherRate, "more_noise_more_errors")])
def test_noise_model_suite_catches_a_broken_model(model: type, check: str) -> None:
    with pytest.raises(AssertionError, match=check):
        run_noise_model_check(check, model)

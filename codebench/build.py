"""Point -> circuit: the one place a point becomes the circuit the engine samples.

Workers, the coordinator's description of a point, the report, the forecast
and the check suites all call :func:`noisy_circuit`, so what is checked is
exactly what is sampled. The code family builds the ideal layered circuit in
the gate set the noise model asks for; the noise model decorates it.
"""

from __future__ import annotations

import stim

from codebench.circuits import IdealCircuit
from codebench.codes import get_code_family
from codebench.codes.base import CodeFamily
from codebench.layout import Basis
from codebench.noise import get_noise_model
from codebench.noise.base import NoiseModel
from codebench.records import Point

__all__ = ["family_ideal_circuit", "ideal_circuit", "noise_model", "noisy_circuit", "point_label", "qubit_count",
           "size_estimate"]


def point_label(point: Point) -> str:
    """The point's one-line label, its rate named as its noise model names it (``p``, or ``scale``)."""
    return point.label(get_noise_model(point.noise).rate.short)


def noise_model(point: Point) -> NoiseModel:
    """The point's noise model, constructed from its rate and options."""
    return get_noise_model(point.noise)(point.p, **dict(point.noise_options))


def ideal_circuit(point: Point, model: NoiseModel | None = None) -> IdealCircuit:
    """The noiseless layered memory experiment of ``point``, in its noise model's gate set."""
    return family_ideal_circuit(get_code_family(point.code), model or noise_model(point), point.distance,
                                point.rounds, point.basis)


def noisy_circuit(point: Point) -> stim.Circuit:
    """The noisy memory-experiment circuit of ``point``: what the engine samples."""
    model = noise_model(point)
    return model.decorate(ideal_circuit(point, model))


def family_ideal_circuit(family: CodeFamily, model: NoiseModel, distance: int, rounds: int,
                         basis: Basis) -> IdealCircuit:
    """The ideal circuit of a code family in ``model``'s gate set (also for plug-ins not registered yet)."""
    return family.ideal_circuit(distance, rounds, basis, model.circuit_gate_set())


def qubit_count(point: Point) -> int:
    """Physical qubits the point's code patch uses (data, measure and flag qubits)."""
    return get_code_family(point.code).qubit_count(point.distance)


def size_estimate(family: CodeFamily, distance: int, rounds: int, basis: Basis) -> tuple[int, int]:
    """(qubits, detectors) of a memory experiment, from the layout alone (no circuit is built).

    One detector per check per round plus the final readout's: an upper bound for families whose
    first round compares fewer checks.
    """
    layout = family.layout(distance, basis)
    return len(layout.qubits), len(layout.checks) * (rounds + 1)

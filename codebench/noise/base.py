"""The noise-model interface and its registry.

A noise model knows nothing of code families: it sees the layers of an
:class:`~codebench.circuits.IdealCircuit` and says which noise channels go
before and after each one. Constructors only store parameters;
:meth:`NoiseModel.get_params` returns exactly what identifies the model in a
point key.
"""

from __future__ import annotations

from abc import ABC, abstractmethod
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any, ClassVar

import stim

from codebench.circuits import (
    GateSet,
    IdealCircuit,
    Layer,
    NoiseOp,
    render,
)
from codebench.options import OptionSpec, resolve_options


@dataclass(frozen=True)
class RateMeaning:
    """What a point's rate ``p`` means under a noise model, for sweep files, tables and figures."""

    #: The sweep-file key that lists the rates (``p``, or ``scale`` for a device's what-if factor).
    key: str
    #: Axis label of figures whose x axis is the rate, with units.
    axis_label: str
    #: Short name used beside a value: ``p = 0.001`` or ``scale 0.5``.
    short: str
    #: Rates used when the sweep file does not list any (``None``: the key is required).
    default: tuple[float, ...] | None = None

    def text(self, value: float) -> str:
        """``value`` with its name, e.g. ``p = 0.001`` or ``scale 0.5``."""
        return f"{self.short} = {value:g}" if self.short == "p" else f"{self.short} {value:g}"


#: The rate of the standard models: one physical error probability per operation.
PHYSICAL_RATE = RateMeaning("p", "physical error rate p (per operation)", "p")


class NoiseModel(ABC):
    """Turns an ideal layered circuit into a noisy stim circuit.

    A model declares everything other stages need to know about it, so that no
    stage branches on its name: what its rate means (:attr:`rate`), its typed
    options (:attr:`option_specs`), whether its circuits have a physical round
    duration (:attr:`has_round_duration`), and whether its noise acts once
    rather than in every round (:attr:`acts_once`).
    """

    name: ClassVar[str]
    gate_set: ClassVar[GateSet] = "cx"
    #: Largest allowed base rate ``p`` (every channel probability must stay valid).
    p_max: ClassVar[float] = 0.5
    #: What ``p`` means.
    rate: ClassVar[RateMeaning] = PHYSICAL_RATE
    #: Declared options: name -> spec. Set from the study's ``noise_options`` table, unless
    #: :attr:`source_key` names where the model reads them from.
    option_specs: ClassVar[dict[str, OptionSpec]] = {}
    #: A study key naming a file the model's options come from (``device``), or ``None``.
    source_key: ClassVar[str | None] = None
    #: Study keys that change what :meth:`options_from_source` reads from the file (``placement`` of a device).
    source_overrides: ClassVar[tuple[str, ...]] = ()
    #: Whether :meth:`round_duration_ns` gives the physical duration of a syndrome round.
    has_round_duration: ClassVar[bool] = False
    #: Whether the noise acts once (before perfect syndrome extraction) instead of in every round.
    acts_once: ClassVar[bool] = False

    def __init__(self, p: float, **options: str) -> None:
        self.p = float(p)
        self.chosen = resolve_options(self.option_specs, options, "noise_options", self.name)

    def get_params(self) -> dict[str, Any]:
        return {"noise": self.name, "p": self.p, "noise_options": dict(self.chosen)}

    @classmethod
    def options_from_source(cls, path: Path, **overrides: Any) -> dict[str, str]:
        """The options read from the file named by the study's :attr:`source_key` (with the study's
        :attr:`source_overrides` keys where given)."""
        raise NotImplementedError(f"noise model {cls.name!r} reads no file")

    @classmethod
    def display_options(cls, options: Mapping[str, str]) -> dict[str, str]:
        """Options as shown in tables, titles and file names (a long document becomes a short label)."""
        return dict(options)

    @abstractmethod
    def layer_noise(self, layer: Layer, ideal: IdealCircuit) -> tuple[list[NoiseOp], list[NoiseOp]]:
        """Channels to add before and after ``layer``."""

    def decorate(self, ideal: IdealCircuit) -> stim.Circuit:
        """The noisy stim circuit for ``ideal``."""
        return render(ideal, self.layer_noise)

    @classmethod
    def options_for(cls, options: tuple[tuple[str, str], ...], code: str,
                    distance: int) -> tuple[tuple[str, str], ...]:
        """The options of the points of one code and distance (a device: with the patch's placement fixed)."""
        return options

    def qubit_note(self, code: str, distance: int) -> str | None:
        """Where the code's qubits sit, for the start of a run (a device: its own qubits), or ``None``."""
        return None

    def circuit_gate_set(self) -> GateSet:
        """The gate set circuits are compiled to (a device may choose its own)."""
        return self.gate_set

    def round_duration_ns(self, ideal: IdealCircuit) -> float | None:
        """Physical duration of one syndrome round of ``ideal`` (``None``: the model has no clock)."""
        return None

    def layer_duration_ns(self, layer: Layer) -> float | None:
        """How long ``layer`` takes on the hardware (``None``: the model has no clock)."""
        return None

    def qubit_names(self, ideal: IdealCircuit) -> dict[int, str] | None:
        """Hardware names of the circuit's qubits (code qubit -> name), or ``None`` when the model has none.

        Exports (OpenQASM, the description file) and the lab analysis name qubits through this one hook;
        a device names them from its ``[[layouts]]`` entry for the code and distance.
        """
        return None


def idle_qubits(layer: Layer, ideal: IdealCircuit) -> list[int]:
    """Qubits of the circuit that ``layer`` does not act on."""
    busy = layer.qubits
    return [q for q in ideal.qubits if q not in busy]


def flip_for(gate: str) -> str:
    """The Pauli channel that flips the result of a reset or measurement ``gate``."""
    return "Z_ERROR" if gate.endswith("X") else "X_ERROR"


def targets_of(layer: Layer, gates: tuple[str, ...]) -> list[int]:
    return [q for op in layer.ops if op.gate in gates for q in op.targets]

"""Points of a sweep and their stable keys."""

from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass, field
from typing import Any

import stim

from codebench.codes import get_code_family
from codebench.codes.layout import Basis
from codebench.noise import get_noise_model


@dataclass(frozen=True)
class Point:
    """One (code, distance, rounds, basis, noise, p, decoder) combination.

    ``params()`` is the canonical description: it is what is hashed into the
    key, stored, and shipped to workers. ``study`` labels the row in tables
    but is not part of the key, so two studies sharing a point share its shots.
    """

    code: str
    distance: int
    rounds: int
    basis: Basis
    noise: str
    p: float
    decoder: str
    noise_options: tuple[tuple[str, str], ...] = ()
    decoder_options: tuple[tuple[str, Any], ...] = ()
    study: str = field(default="", compare=False)

    def params(self) -> dict[str, Any]:
        return {
            "code": self.code,
            "distance": self.distance,
            "rounds": self.rounds,
            "basis": self.basis,
            "noise": self.noise,
            "p": self.p,
            "noise_options": dict(self.noise_options),
            "decoder": self.decoder,
            "decoder_options": dict(self.decoder_options),
        }

    def key(self, seed: int) -> str:
        """Stable 16-hex-digit key of the point under sweep ``seed``."""
        canonical = json.dumps({"seed": seed, **self.params()}, sort_keys=True, separators=(",", ":"))
        return hashlib.sha256(canonical.encode()).hexdigest()[:16]

    @classmethod
    def from_params(cls, params: dict[str, Any], study: str = "") -> Point:
        return cls(
            code=params["code"],
            distance=int(params["distance"]),
            rounds=int(params["rounds"]),
            basis=params["basis"],
            noise=params["noise"],
            p=float(params["p"]),
            decoder=params["decoder"],
            noise_options=tuple(sorted(params.get("noise_options", {}).items())),
            decoder_options=tuple(sorted(params.get("decoder_options", {}).items())),
            study=study,
        )

    def label(self) -> str:
        return f"{self.code} d={self.distance} r={self.rounds} {self.basis} {self.noise} p={self.p:g} {self.decoder}"

    def circuit(self) -> stim.Circuit:
        """The noisy memory-experiment circuit of this point."""
        model = get_noise_model(self.noise)(self.p, **dict(self.noise_options))
        family = get_code_family(self.code)
        return model.decorate(family.ideal_circuit(self.distance, self.rounds, self.basis, model.circuit_gate_set()))

    def qubit_count(self) -> int:
        return get_code_family(self.code).qubit_count(self.distance)

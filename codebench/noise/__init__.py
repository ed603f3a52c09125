"""Noise models by name."""

from __future__ import annotations

from codebench.noise.base import NoiseModel
from codebench.noise.device import DeviceNoise
from codebench.noise.standard import (
    SI1000,
    CircuitDepolarizing,
    CodeCapacity,
    Phenomenological,
)

NOISE_MODELS: dict[str, type[NoiseModel]] = {}


def register(model: type[NoiseModel]) -> None:
    """Make ``model`` available under ``model.name``."""
    NOISE_MODELS[model.name] = model


def get_noise_model(name: str) -> type[NoiseModel]:
    """The registered noise model class called ``name``; ``KeyError`` if none."""
    return NOISE_MODELS[name]


for _model in (CodeCapacity, Phenomenological, CircuitDepolarizing, SI1000, DeviceNoise):
    register(_model)

__all__ = ["NoiseModel", "NOISE_MODELS", "get_noise_model", "register"]

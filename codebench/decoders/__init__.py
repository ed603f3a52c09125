"""Decoders by name."""

from __future__ import annotations

from codebench.decoders.base import Decoder
from codebench.decoders.matching import CorrelatedMatching, Matching

DECODERS: dict[str, type[Decoder]] = {}


def register(decoder: type[Decoder]) -> None:
    """Make ``decoder`` available under ``decoder.name``."""
    DECODERS[decoder.name] = decoder


def get_decoder(name: str) -> type[Decoder]:
    """The registered decoder class called ``name``; ``KeyError`` if none."""
    return DECODERS[name]


for _decoder in (Matching, CorrelatedMatching):
    register(_decoder)

__all__ = ["Decoder", "DECODERS", "get_decoder", "register"]

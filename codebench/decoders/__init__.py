"""Decoders by name, or by ``"package.module:ClassName"`` for a user's own."""

from __future__ import annotations

from codebench.decoders.base import Decoder, OptionSpec
from codebench.decoders.belief import BeliefLSD, BeliefOSD
from codebench.decoders.flagged import FlagMatching
from codebench.decoders.matching import CorrelatedMatching, Matching
from codebench.decoders.plugins import is_spec, load_decoder

DECODERS: dict[str, type[Decoder]] = {}


def register(decoder: type[Decoder]) -> None:
    """Make ``decoder`` available under ``decoder.name``."""
    DECODERS[decoder.name] = decoder


def get_decoder(name: str) -> type[Decoder]:
    """The decoder class for a registered ``name`` or a plug-in spec ``"package.module:ClassName"``.

    ``KeyError`` for an unknown name; :class:`~codebench.errors.DecoderError`
    for a spec that does not load (see :func:`~codebench.decoders.plugins.load_decoder`).
    """
    if is_spec(name):
        return load_decoder(name)
    return DECODERS[name]


for _decoder in (Matching, CorrelatedMatching, BeliefOSD, BeliefLSD, FlagMatching):
    register(_decoder)

__all__ = ["Decoder", "DECODERS", "OptionSpec", "get_decoder", "register"]

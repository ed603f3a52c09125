"""The public surface is pinned, so a change to it is deliberate (common practice)."""

from __future__ import annotations

import codebench
from codebench.codes import CODE_FAMILIES
from codebench.decoders import DECODERS
from codebench.noise import NOISE_MODELS


def test_public_names() -> None:
    assert sorted(codebench.__all__) == sorted([
        "CodebenchError", "ConfigError", "DecoderError", "DeviceFileError", "StoreError",
        "__version__", "analyze", "export_csv", "load_results", "run_sweep",
    ])


def test_registered_names_match_the_design() -> None:
    # Names fixed by the design notes: sweep files elsewhere rely on them.
    assert {"repetition", "rotated_surface"} <= set(CODE_FAMILIES)
    assert {"code_capacity", "phenomenological", "circuit_depolarizing", "si1000"} <= set(NOISE_MODELS)
    assert {"mwpm", "mwpm_correlated"} <= set(DECODERS)

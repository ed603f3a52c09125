"""codebench: can this processor hold a useful logical qubit?

Noisy memory experiments for repetition, rotated-surface and heavy-hexagon
codes under standard or device-derived noise, sampled with stim, decoded by
matching or belief propagation, stored resumably, and fitted for thresholds,
Lambda and projections. See README.md for the command line.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    import pandas as pd

    from codebench.analysis.result import AnalysisResult
    from codebench.api import export_csv, load_results, run_sweep

from codebench.errors import (
    CodebenchError,
    ConfigError,
    DecoderError,
    DeviceFileError,
    StoreError,
)

__version__ = "0.1.0"


def analyze(frame: pd.DataFrame, **options: Any) -> AnalysisResult:
    """Fit thresholds, pseudo-thresholds, Lambda, scaling law and projections; see :mod:`codebench.analysis`."""
    from codebench.analysis import analyze as _analyze

    return _analyze(frame, **options)


def __getattr__(name: str) -> Any:
    """``run_sweep``, ``load_results`` and ``export_csv`` load the engine (and pandas) on first use, so
    ``import codebench``, the command line's start and worker processes stay cheap."""
    if name in ("export_csv", "load_results", "run_sweep"):
        from codebench import api

        return getattr(api, name)
    raise AttributeError(f"module 'codebench' has no attribute {name!r}")


__all__ = [
    "CodebenchError",
    "ConfigError",
    "DecoderError",
    "DeviceFileError",
    "StoreError",
    "__version__",
    "analyze",
    "export_csv",
    "load_results",
    "run_sweep",
]

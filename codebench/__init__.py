"""codebench: can this processor hold a useful logical qubit?

Noisy memory experiments for repetition and rotated-surface codes, sampled
with stim, decoded by matching, stored resumably, and summarised with
binomial intervals. See README.md for the command line.
"""

from __future__ import annotations

from codebench.api import export_csv, load_results, run_sweep
from codebench.errors import CodebenchError, ConfigError, DecoderError, DeviceFileError, StoreError

__version__ = "0.1.0"

__all__ = [
    "CodebenchError",
    "ConfigError",
    "DecoderError",
    "DeviceFileError",
    "StoreError",
    "__version__",
    "export_csv",
    "load_results",
    "run_sweep",
]

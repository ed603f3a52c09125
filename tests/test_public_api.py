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


def test_lean_start_up() -> None:
    """The command line and `import codebench` load no heavy library: scipy.stats, ldpc, pandas and
    matplotlib come in only where a command uses them (issue requirement: a cheap `codebench --help`)."""
    import subprocess
    import sys

    probe = ("import sys, codebench, codebench.cli; "
             "print(','.join(m for m in ('scipy.stats', 'ldpc', 'pandas', 'matplotlib') if m in sys.modules))")
    done = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, timeout=120, check=True)
    assert done.stdout.strip() == ""


def test_version_line() -> None:
    """`codebench --version`: one line naming codebench and the installed sampling/decoding libraries."""
    import subprocess
    import sys
    from importlib.metadata import version

    done = subprocess.run([sys.executable, "-m", "codebench", "--version"], capture_output=True, text=True,
                          timeout=120, check=True)
    lines = done.stdout.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith(f"codebench {codebench.__version__} (")
    assert f"stim {version('stim')}" in lines[0] and f"pymatching {version('pymatching')}" in lines[0]

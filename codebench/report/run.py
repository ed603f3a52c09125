"""What was run: the store's record of the run, and the run's totals as text."""

from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import pandas as pd

from codebench.api import STORE_NAME, versions
from codebench.errors import CodebenchError
from codebench.results.store import Store

VERSION_KEYS = ("codebench", "stim", "pymatching", "ldpc", "numpy", "python")


@dataclass(frozen=True)
class RunInfo:
    """What the store says about the run that wrote it."""

    name: str | None
    seed: str | None
    sweep_text: str
    sweep_source: str | None
    versions: dict[str, str]
    versions_recorded: bool
    stopping: dict[str, Any]


def read_run_info(folder: Path) -> RunInfo:
    """The run's name, seed, sweep text, versions and stopping rule, from ``folder``'s store.

    Without a readable store, the versions are those of this session
    (``versions_recorded`` is then false) and the rest is unknown.
    """
    path = Path(folder) / STORE_NAME
    meta: dict[str, str] = {}
    if path.exists():
        try:
            with Store(path, create=False) as store:
                meta = store.meta()
        except CodebenchError:
            meta = {}
    recorded = _json_dict(meta.get("versions"))
    return RunInfo(
        name=meta.get("name"),
        seed=meta.get("seed"),
        sweep_text=meta.get("sweep_text", ""),
        sweep_source=meta.get("sweep_source"),
        versions={str(k): str(v) for k, v in (recorded or versions()).items()},
        versions_recorded=bool(recorded),
        stopping=_json_dict(meta.get("stopping")),
    )


def _json_dict(text: str | None) -> dict[str, Any]:
    if not text:
        return {}
    try:
        value = json.loads(text)
    except ValueError:
        return {}
    return value if isinstance(value, dict) else {}


def column_sum(frame: pd.DataFrame, column: str) -> float:
    """Sum of a numeric column (0 when missing)."""
    if column not in frame.columns or frame.empty:
        return 0.0
    total = pd.to_numeric(frame[column], errors="coerce").fillna(0).sum()
    return float(total)


def incomplete(frame: pd.DataFrame) -> pd.DataFrame:
    """Points that stopped before their stopping rule was met."""
    if "complete" not in frame.columns:
        return frame.iloc[0:0]
    return frame[~frame["complete"].fillna(False).astype(bool)]


def duration(seconds: float) -> str:
    """Seconds, with minutes or hours beside long times.

    >>> duration(42.0), duration(600.0)
    ('42.0 s', '600 s (10.0 min)')
    """
    if seconds < 120:
        return f"{seconds:.1f} s"
    if seconds < 7200:
        return f"{seconds:.0f} s ({seconds / 60:.1f} min)"
    return f"{seconds:.0f} s ({seconds / 3600:.2f} h)"


def stopping_text(rule: dict[str, Any]) -> str:
    """The stopping rule in words."""
    if not rule:
        return "not recorded"
    parts = []
    if rule.get("failure_target") is not None:
        parts.append(f"{int(rule['failure_target']):,} failures")
    if rule.get("shot_budget") is not None:
        parts.append(f"{int(rule['shot_budget']):,} shots")
    if rule.get("relative_precision") is not None:
        parts.append(f"relative precision {rule['relative_precision']}")
    return "per point, whichever comes first: " + ", ".join(parts) if parts else "none"


def interval_text(frame: pd.DataFrame) -> str:
    """Which binomial intervals the results table holds."""
    methods = sorted({str(v) for v in frame["interval"].dropna()}) if "interval" in frame.columns else []
    return "95% " + (", ".join(methods) if methods else "binomial") + " intervals"

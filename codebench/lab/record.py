"""Measured points in a results folder, beside simulated ones.

A measured point is stored in the folder's results store (table ``measured``: its point, study label,
weights, shots, failures) and the folder's ``results.csv`` is rewritten, so ``analyze``, ``figures``
and ``report`` read it like any other point, with ``source = measured``. Its key is a digest of the
point, the weights and the records' content: decoding the same records again replaces the row.
"""

from __future__ import annotations

import hashlib
import json
from pathlib import Path

import pandas as pd

from codebench.api import CSV_NAME, STORE_NAME
from codebench.lab.decoding import Decoded
from codebench.lab.experiment import Experiment
from codebench.results.export import results_frame, write_csv
from codebench.results.lock import RunLock
from codebench.results.store import MeasuredResult, Store


def records_digest(path: Path) -> str:
    """sha256 of the records file (16 hex digits)."""
    digest = hashlib.sha256()
    with path.open("rb") as handle:
        for block in iter(lambda: handle.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()[:16]


def measured_key(experiment: Experiment, weights: str, digest: str) -> str:
    canonical = json.dumps({"point": experiment.point.params(), "weights": weights, "records": digest},
                           sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(canonical.encode()).hexdigest()[:16]


def record_measured(folder: Path, experiment: Experiment, decoded: dict[str, Decoded], study: str,
                    records: Path) -> pd.DataFrame:
    """Store one row per weighting in ``folder``'s store and rewrite its results CSV; returns the table."""
    digest = records_digest(records)
    description = experiment.description
    folder.mkdir(parents=True, exist_ok=True)
    lock = RunLock(folder)
    lock.acquire()
    try:
        with Store(folder / STORE_NAME) as store:
            for weights, result in decoded.items():
                store.add_measured(MeasuredResult(
                    measured_key(experiment, weights, digest), experiment.point, study, weights,
                    len(result.failed), result.failures, len(description.qubits), len(description.detectors),
                    result.seconds, records.name))
            frame = results_frame(store)
        write_csv(frame, folder / CSV_NAME)
    finally:
        lock.release()
    return frame

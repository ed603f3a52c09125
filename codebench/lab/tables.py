"""The lab analysis as files and text: tables (CSV), the re-weighted model (stim DEM), a summary.

``codebench lab inspect`` writes into its folder: ``detectors.csv`` (per detector: qubit, round,
coordinates, shots, fired, measured fraction and 95% interval, model prediction, z), ``sources.csv``
(fault sources ranked by how much of the departure each alone explains), ``edges.csv`` (every edge of
the model's graph: model probability, value expected from the model, data estimate, standard error, z),
``pairs.csv`` (detector pairs that are no edge and correlate beyond the model), ``reweighted.dem``
(the graph with the data's probabilities, for any decoder that reads stim's format) and
``summary.txt`` (what is printed).
"""

from __future__ import annotations

import csv
from pathlib import Path
from typing import Any, Sequence

from codebench.files import write_atomically, write_text
from codebench.lab.departures import SHOWN, Departures
from codebench.lab.graph import reweighted_model
from codebench.stats import binomial_interval, per_round


def _csv(path: Path, header: Sequence[str], rows: list[Sequence[Any]]) -> Path:
    def write(handle: Any) -> None:
        writer = csv.writer(handle, lineterminator="\n")
        writer.writerow(header)
        writer.writerows([[f"{v:.6g}" if isinstance(v, float) else v for v in row] for row in rows])

    return write_atomically(path, write)


def write_tables(folder: Path, result: Departures) -> list[Path]:
    """Write every table, the re-weighted model and the summary into ``folder``."""
    folder.mkdir(parents=True, exist_ok=True)
    out = [
        _csv(folder / "detectors.csv",
             ["detector", "qubit", "round", "coords", "shots", "fired", "fraction", "fraction_low", "fraction_high",
              "model", "z"],
             [[r.index, r.qubit, r.round, " ".join(f"{c:g}" for c in r.coords), r.shots, r.fired, r.fraction, r.low,
               r.high, r.predicted, r.z] for r in result.detectors]),
        _csv(folder / "sources.csv", ["rank", "qubits", "kind", "factor", "z"],
             [[n + 1, "-".join(s.qubits), s.kind, s.factor, s.z] for n, s in enumerate(result.sources)]),
        _csv(folder / "edges.csv", ["first", "second", "model_probability", "model_expected", "data", "data_error", "z"],
             [[e.first, "boundary" if e.second is None else e.second, e.model, e.expected, e.data, e.error, e.z]
              for e in result.edges]),
        _csv(folder / "pairs.csv", ["first", "second", "model_expected", "data", "data_error", "z"],
             [[p.first, p.second, p.expected, p.data, p.error, p.z] for p in result.pairs]),
    ]
    out.append(write_text(folder / "reweighted.dem", str(reweighted_model(result.estimates)) + "\n"))
    out.append(write_text(folder / "summary.txt", summary(result) + "\n"))
    return out


def summary(result: Departures) -> str:
    """The ranked lists and the decoding comparison, as text."""
    lines = [f"{result.experiment.point.label()}: {result.shots:,} measured shots, "
             f"{len(result.detectors)} detectors, {len(result.edges)} graph edges", "",
             "Detectors departing most (measured vs model detection fraction; z in binomial standard errors):"]
    for r in result.worst_detectors[:SHOWN]:
        lines.append(f"  D{r.index:<5} {r.qubit:>8} round {r.round:<3} {r.fraction:.4f} "
                     f"[{r.low:.4f}, {r.high:.4f}] vs {r.predicted:.4f}  z = {r.z:+.1f}")
    lines += ["", "Qubits departing most (their detectors pooled over rounds):"]
    for q in result.by_fraction[:SHOWN]:
        lines.append(f"  {q.qubit:>8} ({q.role}) excess {q.excess:+.4f} per detector over {q.items} detectors, "
                     f"z = {q.z:+.1f}")
    lines += ["", "Rounds departing most (their detectors pooled over qubits):"]
    for q in result.by_round[:SHOWN]:
        lines.append(f"  {q.qubit:>8} excess {q.excess:+.4f} per detector over {q.items} detectors, z = {q.z:+.1f}")
    lines += ["", "Fault sources, each the best explanation of the edges' departure that those above leave "
              "(factor = how much worse than the model):"]
    for s in result.sources[:SHOWN]:
        lines.append(f"  {s.label:<34} factor {s.factor:6.2f}  z = {s.z:+.1f}")
    if result.pairs:
        lines += ["", "Detector pairs correlated beyond the model (no edge of its graph):"]
        for p in result.pairs[:SHOWN]:
            lines.append(f"  D{p.first}-D{p.second}: p_ij {p.data:.4f} +- {p.error:.4f} vs model {p.expected:.4f}, "
                         f"z = {p.z:+.1f}")
    if result.model_decoded is not None and result.data_decoded is not None:
        rounds = result.experiment.point.rounds
        lines += ["", "Every shot decoded with the model's weights, and with weights learned from the other half of "
                  "the shots:"]
        for name, decoded in (("model weights", result.model_decoded), ("data weights", result.data_decoded)):
            low, high = binomial_interval(decoded.failures, result.shots)
            rate = decoded.failures / result.shots
            lines.append(f"  {name:<14} {decoded.failures:>7,} failures: {rate:.4g} [{low:.4g}, {high:.4g}] per "
                         f"experiment, {per_round(rate, rounds):.4g} per round")
    return "\n".join(lines)

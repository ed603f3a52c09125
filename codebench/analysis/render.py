"""The analysis as text tables for the terminal."""

from __future__ import annotations

from typing import Any, Sequence


def _fmt(value: Any) -> str:
    if value is None:
        return "-"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        return f"{value:.4g}"
    if isinstance(value, list):
        return ",".join(_fmt(v) for v in value)
    return str(value)


def _table(title: str, records: Sequence[dict[str, Any]], columns: Sequence[tuple[str, str]]) -> str:
    lines = [title, "=" * len(title)]
    if not records:
        return "\n".join(lines + ["(none)"])
    rows = [[header for header, _ in columns]]
    rows += [[_fmt(r.get(key)) for _, key in columns] for r in records]
    widths = [max(len(row[i]) for row in rows) for i in range(len(columns))]
    for i, row in enumerate(rows):
        lines.append("  ".join(cell.ljust(w) for cell, w in zip(row, widths)).rstrip())
        if i == 0:
            lines.append("  ".join("-" * w for w in widths))
    return "\n".join(lines)


_FAMILY = [("code", "code"), ("basis", "basis"), ("noise", "noise"), ("decoder", "decoder"), ("rounds", "rounds")]


def analysis_table(result: dict[str, Any]) -> str:
    """All sections of an :func:`~codebench.analysis.analyze` result, one table each."""
    projections = [{**r, "distance_range": [r.get("distance_low"), r.get("distance_high")]}
                   for r in result["projections"]]
    sections = [
        _table("Thresholds (quantity: failure probability of the whole memory experiment)", result["thresholds"],
               _FAMILY + [("method", "method"), ("distances", "distances"), ("threshold", "threshold"),
                          ("95% low", "low"), ("95% high", "high"), ("nu", "nu"), ("window", "window"),
                          ("GOF p", "gof_p_value")]),
        _table("Pseudo-thresholds (p at which the per-round logical error equals p)", result["pseudo_thresholds"],
               _FAMILY + [("d", "distance"), ("pseudo-threshold", "pseudo_threshold"), ("95% low", "low"),
                          ("95% high", "high")]),
        _table("Lambda (eps_d = C / Lambda^((d+1)/2), per-round rates)", result["lambdas"],
               _FAMILY + [("p", "p"), ("distances", "distances"), ("Lambda", "lambda"), ("95% low", "low"),
                          ("95% high", "high")]),
        _table("Lambda between consecutive distances", result["lambda_pairs"],
               _FAMILY + [("p", "p"), ("distances", "distances"), ("Lambda", "lambda"), ("95% low", "low"),
                          ("95% high", "high")]),
        _table("Scaling law (eps = A (p / p_th)^((d+1)/2))", result["scaling_laws"],
               _FAMILY + [("A", "A"), ("A low", "A_low"), ("A high", "A_high"), ("p_th", "p_th"),
                          ("p_th low", "p_th_low"), ("p_th high", "p_th_high")]),
        _table("Projections (from the Lambda fit; extrapolated beyond the fitted distances where marked)",
               projections,
               _FAMILY + [("p", "p"), ("target/round", "target"), ("d", "distance"), ("qubits", "qubits"),
                          ("d range", "distance_range"), ("extrapolated", "extrapolation"),
                          ("fitted d", "fitted_distances")]),
    ]
    notes = result.get("notes", [])
    if notes:
        sections.append("Notes\n=====\n" + "\n".join(f"- {n}" for n in notes))
    return "\n\n".join(sections)

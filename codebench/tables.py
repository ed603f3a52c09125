"""Plain-text tables for the terminal."""

from __future__ import annotations

import pandas as pd


def _rate(value: object) -> str:
    number = float(value)  # type: ignore[arg-type]
    return "-" if number != number else f"{number:.3e}"


def summary_table(frame: pd.DataFrame) -> str:
    """Results as an aligned text table: one line per point, rates with 95% intervals."""
    if frame.empty:
        return "(no points)"
    header = ["study", "code", "d", "rounds", "basis", "noise", "p", "decoder", "shots", "failures",
              "failure rate [95% CI]", "per round [95% CI]"]
    lines = [header]
    for row in frame.itertuples(index=False):
        lines.append([
            str(row.study), str(row.code), str(row.distance), str(row.rounds), str(row.basis),
            str(row.noise), f"{row.p:g}", str(row.decoder), f"{row.shots:,}", f"{row.failures:,}",
            f"{_rate(row.failure_rate)} [{_rate(row.failure_rate_low)}, {_rate(row.failure_rate_high)}]",
            f"{_rate(row.per_round_rate)} [{_rate(row.per_round_low)}, {_rate(row.per_round_high)}]",
        ])
    widths = [max(len(line[i]) for line in lines) for i in range(len(header))]
    text = ["  ".join(cell.rjust(w) if i >= 8 else cell.ljust(w) for i, (cell, w) in enumerate(zip(line, widths)))
            for line in lines]
    text.insert(1, "  ".join("-" * w for w in widths))
    return "\n".join(t.rstrip() for t in text)

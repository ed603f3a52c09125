"""The report's table of decoders compared on the same shots (``decoder_comparisons`` of the analysis)."""

from __future__ import annotations

from typing import Any

from codebench.report.blocks import Table, e, g, integer, with_interval


def comparison_table(records: list[dict[str, Any]]) -> Table:
    """First minus second decoder, paired interval beside the unpaired one, exact McNemar p."""
    table = Table(
        "decoder-comparisons", "Decoders on the same shots",
        "Decoders of one physical point decoded identical shots, so their failure probabilities (whole "
        "experiment) are compared shot by shot: the difference first minus second with its paired 95% interval "
        "(Newcombe, Statistics in Medicine 17, 2635 (1998), hybrid score for paired data), the interval the "
        "same counts would give without the pairing, how many times narrower the pairing makes it, the shots "
        "only one decoder failed, and the exact McNemar test of equal failure rates (McNemar, Psychometrika 12, "
        "153 (1947)).",
        ["study", "code", "d", "noise", "p", "first", "second", "shots", "only first / only second",
         "difference [paired 95%]", "without pairing", "narrower", "McNemar p"],
        numeric={2, 4, 7, 9, 10, 11, 12}, empty="none")
    for r in records:
        table.rows.append([
            str(r.get("study", "")), str(r.get("code", "")), integer(r.get("distance")), str(r.get("noise", "")),
            g(r.get("p")), str(r.get("first", "")), str(r.get("second", "")), integer(r.get("shots")),
            f"{integer(r.get('first_only'))} / {integer(r.get('second_only'))}",
            with_interval(r.get("difference"), r.get("low"), r.get("high"), e),
            f"[{e(r.get('unpaired_low'))}, {e(r.get('unpaired_high'))}]",
            f"{g(r.get('narrowing'), 3)}x" if r.get("narrowing") is not None else "-",
            g(r.get("mcnemar_p"), 3)])
    return table

"""Fits a design review asks for: thresholds, pseudo-thresholds, Lambda, scaling law, projections.

:func:`analyze` runs every fit on every family of a results table
(:mod:`codebench.analysis.families`) and returns plain JSON-ready records.
Where data are too few for a fit, it adds a note saying what is missing
instead of a number.
"""

from __future__ import annotations

from typing import Any, Sequence

import numpy as np
import pandas as pd

from codebench.analysis.families import Family, group_families
from codebench.analysis.projections import project
from codebench.analysis.suppression import lambda_fits, scaling_law_fit
from codebench.analysis.thresholds import (
    best_threshold,
    crossing_thresholds,
    fss_threshold,
    pseudo_thresholds,
)

DEFAULT_TARGETS = (1e-6, 1e-9, 1e-12)


def threshold_applies(family: Family) -> bool:
    """Whether whole-experiment failure curves of this family can cross at a threshold.

    Rounds must grow with d (``"d"``, ``"2d"``, ...), or the noise must act once
    (code capacity), or there is a single round.
    """
    return family.rounds_rule.endswith("d") or family.noise == "code_capacity" or family.rounds_rule == "1"


def analyze(
    frame: pd.DataFrame,
    *,
    targets: Sequence[float] = DEFAULT_TARGETS,
    bootstrap: int = 1000,
    seed: int = 0,
) -> dict[str, Any]:
    """Run every fit on every family of ``frame`` (a results table).

    Returns a dict with the lists ``thresholds``, ``pseudo_thresholds``,
    ``lambdas``, ``lambda_pairs``, ``scaling_laws``, ``projections`` and
    ``notes`` (why a fit is missing), plus ``settings``.
    """
    rng = np.random.default_rng(seed)
    out: dict[str, Any] = {key: [] for key in (
        "thresholds", "pseudo_thresholds", "lambdas", "lambda_pairs", "scaling_laws", "projections", "notes")}
    out["settings"] = {"targets": list(targets), "bootstrap": bootstrap, "seed": seed, "confidence": 0.95}
    families = group_families(frame)
    if not families:
        out["notes"].append("no family of points with at least two distances: nothing to fit.")
    for family in families:
        threshold_records: list[dict[str, Any]] = []
        if threshold_applies(family):
            for fit in (crossing_thresholds, fss_threshold):
                records, notes = fit(family, bootstrap=bootstrap, rng=rng)
                threshold_records += records
                out["notes"] += notes
        else:
            out["notes"].append(
                f"{family.describe()}: no threshold estimate (fixed number of rounds > 1; "
                "thresholds need rounds growing with d)."
            )
        out["thresholds"] += threshold_records
        records, notes = pseudo_thresholds(family, bootstrap=bootstrap, rng=rng)
        out["pseudo_thresholds"] += records
        out["notes"] += notes
        chosen = best_threshold(threshold_records)
        threshold = None if chosen is None else float(chosen["threshold"])
        fits, pairs, notes = lambda_fits(family, threshold)
        out["lambdas"] += fits
        out["lambda_pairs"] += pairs
        out["notes"] += notes
        laws, notes = scaling_law_fit(family, threshold)
        out["scaling_laws"] += laws
        out["notes"] += notes
        projections, notes = project(family, fits, targets)
        out["projections"] += projections
        out["notes"] += notes
    return out


__all__ = ["DEFAULT_TARGETS", "Family", "analyze", "group_families", "threshold_applies"]

"""Our marks and the suppression figure: capped intervals, hollow markers below 10 failures, the 95% band of a
Lambda fit (widening where the fit is extrapolated), a few representative rates per family."""

from __future__ import annotations

from typing import Any, cast

import matplotlib
import numpy as np
from matplotlib.collections import PolyCollection

from codebench.figures import suppression
from codebench.figures.canvas import new_figure
from codebench.figures.marks import (
    count_entries,
    interval_points,
    lambda_band,
    lambda_curve,
)
from codebench.figures.style import FEW_FAILURES, STYLE

# ln C and ln Lambda fitted over d = 3..7: their covariance (variances 0.04 and 0.01, correlated).
LOG_COV = ((0.04, 0.018), (0.018, 0.01))


def test_lambda_band_holds_the_fit_and_widens_beyond_the_fitted_distances() -> None:
    d = np.array([3.0, 5.0, 7.0, 15.0, 25.0])
    band = lambda_band(2e-2, 3.0, LOG_COV, d)
    assert band is not None
    low, high = band
    line = lambda_curve(2e-2, 3.0, d)
    assert np.all(low < line) and np.all(line < high)
    width = np.log(high / low)
    assert width[-1] > width[-2] > width[2], "the band opens up where the fit is extrapolated"
    assert lambda_band(2e-2, 3.0, None, d) is None and lambda_band(2e-2, 3.0, [[float("nan")] * 2] * 2, d) is None


def test_points_are_hollow_below_few_failures_and_triangles_at_none() -> None:
    fig, ax = new_figure()
    ax.set_yscale("log")
    failures = np.array([0, FEW_FAILURES - 1, 10 * FEW_FAILURES])
    rate = np.array([0.0, 1e-3, 1e-2])
    interval_points(ax, [1, 2, 3], rate, rate / 2, np.array([2e-4, 2e-3, 1.2e-2]), failures, "#123456", floor=1e-5)
    points = [line for line in ax.lines if line.get_marker() in ("o", "v")]
    hollow = [line for line in points if line.get_marker() == "o" and line.get_markerfacecolor() == "white"]
    filled = [line for line in points if line.get_marker() == "o" and line.get_markerfacecolor() != "white"]
    triangles = [line for line in points if line.get_marker() == "v"]
    assert [np.asarray(line.get_xdata()).size for line in (*hollow, *filled, *triangles)] == [1, 1, 1]
    assert np.asarray(hollow[0].get_xdata())[0] == 2.0 and np.asarray(triangles[0].get_ydata())[0] == 2e-4
    assert any(line.get_marker() == "_" for line in ax.lines), "intervals have caps"
    labels = [text for _, text in count_entries([failures])]
    assert labels == [f"open: fewer than {FEW_FAILURES} failures", "0 failures: 95% upper end"]
    assert count_entries([np.array([50, 60])]) == []


def _record(p: float, distances: list[int], near: bool = False) -> dict[str, Any]:
    return {"p": p, "lambda": 2.0, "C": 0.1, "distances": distances, "near_threshold": near}


def test_representative_rates_are_few_and_well_supported() -> None:
    records = [_record(0.001, [3, 5]), _record(0.002, [3, 5, 7]), _record(0.003, [3, 5, 7]),
               _record(0.004, [3, 5, 7]), _record(0.005, [3, 5, 7]), _record(0.03, [3, 5, 7], near=True),
               _record(0.006, [3, 5, 7]), {"p": 0.007, "lambda": None, "C": 0.1}]
    chosen = [r["p"] for r in suppression.representative(records)]
    assert chosen == [0.002, 0.004, 0.006]
    assert [r["p"] for r in suppression.representative(records[:2])] == [0.002]
    only_near = [_record(0.03, [3, 5], near=True), _record(0.04, [3, 5], near=True)]
    assert [r["p"] for r in suppression.representative(only_near)] == [0.03, 0.04]


def test_suppression_figure_draws_a_band_per_rate() -> None:
    def series(label: str, lam: float) -> suppression.RateSeries:
        d = np.array([3, 5, 7])
        rate = 1e-2 / lam ** ((d + 1) / 2)
        return suppression.RateSeries(label, d, rate, rate / 1.5, rate * 1.5, np.array([400.0, 60.0, 5.0]), lam, 1e-2,
                                      lam / 1.2, lam * 1.2, LOG_COV, (3, 5, 7), ((15, 1e-6),))

    inputs = suppression.LambdaInputs((series("p = 0.001", 4.0), series("p = 0.002", 2.5)), (1e-6,), 5,
                                      "Suppression with distance", "repetition \u00b7 Z basis")
    with matplotlib.rc_context(cast(Any, STYLE)):
        fig = suppression.draw(inputs)
    ax = fig.axes[0]
    assert len([c for c in ax.collections if isinstance(c, PolyCollection)]) == 2, "one 95% band per fit"
    assert any(line.get_markerfacecolor() == "white" and line.get_marker() in ("o", "s") for line in ax.lines)

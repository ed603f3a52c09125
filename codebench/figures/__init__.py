"""Figures of a sweep folder: PNG (150 dpi) and SVG files in ``DIR/figures``.

Four kinds, drawn from the results table and the :func:`~codebench.analysis.analyze`
records:

- ``per_round_vs_p__<family>`` (:mod:`.per_round`): logical error per round
  against the rate, one curve per distance with its 95% band, where the
  per-round curves cross and, where p is a physical error probability, the
  line logical = physical and the pseudo-thresholds on it;
- ``failure_vs_p__<family>`` (:mod:`.per_round`): the whole experiment's
  failure probability, with the threshold estimate (finite-size scaling if
  there is one, else a crossing) and its interval: only here;
- ``lambda_vs_d__<family>`` (:mod:`.suppression`): logical error per round
  against distance at up to three representative rates, each fit
  eps_d = C / Lambda^((d+1)/2) with its 95% band, extended to the distance
  the smallest target needs, and the targets (every rate's fit is in the
  report's tables);
- ``decoders_vs_p__<group>`` (:mod:`.decoders`): decoders side by side where a
  group of points (code, basis, noise, rounds) was decoded several ways.

Every distance has one colour in every figure (:func:`distance_colour`; the
suppression figure, whose x axis is the distance, colours its rates instead).
Points are marked alike everywhere (:mod:`.marks`): capped 95% interval bars,
hollow below 10 failures, an open triangle for none. Each
figure is first planned (:class:`~.canvas.FigurePlan`: names and the inputs
it is drawn from), then drawn only if the files of an earlier run are not
current (:mod:`.manifest`), laid out once (:mod:`.layout`) and drawn once for
both files (:func:`.canvas.save`).
Labels come from the noise model's declared rate meaning (:mod:`.labels`).
Nothing touches pyplot's global state. A figure whose data are missing is
skipped, never drawn empty.
"""

from __future__ import annotations

from codebench.figures.canvas import FigureFile, FigurePlan
from codebench.figures.data import chosen_threshold, plain_analysis
from codebench.figures.style import (
    DPI,
    FIGSIZE,
    INK,
    MUTED,
    STYLE,
    TARGET_INK,
    THRESHOLD_INK,
    THRESHOLD_SHADE,
    distance_colour,
)
from codebench.figures.write import (
    FIGURES_DIR,
    PREFIXES,
    plan_figures,
    render_figures,
    write_figures,
)

__all__ = [
    "DPI", "FIGSIZE", "FIGURES_DIR", "INK", "MUTED", "PREFIXES", "STYLE", "TARGET_INK", "THRESHOLD_INK",
    "THRESHOLD_SHADE", "FigureFile", "FigurePlan", "chosen_threshold", "distance_colour", "plain_analysis",
    "plan_figures", "render_figures", "write_figures",
]

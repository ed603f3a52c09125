"""Figures of measured shots against their model (``codebench lab inspect``).

- ``detection_fractions``: per detector, the measured detection fraction with its 95% interval and
  the model's prediction, detectors in order (round by round), rounds shaded alternately.
- ``pair_matrix``: the two-point estimate p_ij of every pair of detectors (colour, log scale), with the
  model's graph edges outlined: correlations off the outlines are ones the model lacks.
- ``qubit_map``: the qubits at their coordinates (the code's, until a placement gives chip positions),
  coloured by the excess detection fraction of their detectors (measure qubits) and ringed by the
  fitted factor of their worst fault source (all qubits).
"""

from __future__ import annotations

from pathlib import Path
from typing import Any, cast

import matplotlib
import numpy as np
from matplotlib.colors import LogNorm, TwoSlopeNorm
from matplotlib.figure import Figure
from matplotlib.lines import Line2D

from codebench.figures.canvas import FigureFile, new_figure, save, titles
from codebench.figures.style import INK, INTERVAL, STYLE
from codebench.lab.departures import Departures
from codebench.lab.graph import BOUNDARY

MEASURED, MODEL = "#d9622b", "#127a7a"


def _subline(result: Departures) -> str:
    point = result.experiment.point
    return (f"{point.code} d={point.distance}, {point.rounds} rounds, {point.basis} basis; "
            f"{result.shots:,} measured shots")


def detection_fractions(result: Departures) -> Figure:
    fig, ax = new_figure()
    rows = result.detectors
    x = np.arange(len(rows))
    fraction = np.array([r.fraction for r in rows])
    low = fraction - np.array([r.low for r in rows])
    high = np.array([r.high for r in rows]) - fraction
    rounds = [r.round for r in rows]
    for n, rnd in enumerate(sorted(set(rounds))):
        members = [k for k, r in enumerate(rounds) if r == rnd]
        if n % 2:
            ax.axvspan(min(members) - 0.5, max(members) + 0.5, color="#eceae2", zorder=0, lw=0)
    ax.errorbar(x, fraction, yerr=[low, high], fmt="o", ms=3.5, color=MEASURED, label="measured (95% interval)",
                **INTERVAL)
    ax.plot(x, [r.predicted for r in rows], "_", ms=9, mew=2, color=MODEL, label="model prediction")
    ax.set_xlabel("detector (in order; shaded bands alternate rounds)")
    ax.set_ylabel("detection-event fraction (per shot)")
    ax.set_ylim(bottom=0)
    ax.legend(loc="upper left")
    titles(ax, "Detection events: measured against the model", _subline(result))
    return fig


def pair_matrix(result: Departures) -> Figure:
    matrix = result.matrix
    assert matrix is not None
    fig, ax = new_figure()
    shown = np.where(np.isfinite(matrix) & (matrix > 0), matrix, np.nan)
    positive = shown[np.isfinite(shown)]
    low = max(float(np.min(positive)) if positive.size else 1e-4, 1e-4)
    high = max(float(np.max(positive)) if positive.size else 1e-1, low * 10)
    image = ax.imshow(shown, norm=LogNorm(vmin=low, vmax=high), cmap="viridis", interpolation="nearest")
    edges = [(i, j) for i, j in result.estimates.graph.edges if j != BOUNDARY]
    if edges:
        first, second = np.array(edges).T
        ax.scatter(np.concatenate([second, first]), np.concatenate([first, second]), s=14, facecolors="none",
                   edgecolors="white", linewidths=0.6, label="edge of the model's graph")
        ax.legend(loc="upper right", fontsize=9)
    ax.grid(False)
    fig.colorbar(image, ax=ax, label="two-point estimate p_ij (probability)")
    ax.set_xlabel("detector j")
    ax.set_ylabel("detector i")
    titles(ax, "Pairwise correlations of detection events", _subline(result))
    return fig


def qubit_map(result: Departures) -> Figure:
    fig, ax = new_figure()
    description = result.experiment.description
    excess = {row.qubit: row.excess for row in result.by_fraction}
    worst: dict[str, float] = {}
    for source in result.sources:
        for qubit in source.qubits:
            worst.setdefault(qubit, source.z)
    chip = _chip_coordinates(result)
    where = {q.name: chip.get(q.name, q.coords) for q in description.qubits}
    on_chip = bool(chip) and all(q.name in chip for q in description.qubits)
    xs = [where[q.name][0] for q in description.qubits]
    ys = [where[q.name][1] for q in description.qubits]
    values = [excess.get(q.name, np.nan) for q in description.qubits]
    finite = [abs(v) for v in values if np.isfinite(v)] or [1e-3]
    scale = max(finite) or 1e-3
    cmap = matplotlib.colormaps["RdBu_r"].with_extremes(bad="#d8d8d8")
    shades = ax.scatter(xs, ys, c=values, cmap=cmap, plotnonfinite=True, norm=TwoSlopeNorm(0.0, -scale, scale), s=420,
                        edgecolors=INK, linewidths=0.8, zorder=2)
    sizes = [max(0.0, worst.get(q.name, 0.0)) for q in description.qubits]
    top = max(sizes) or 1.0
    ax.scatter(xs, ys, s=[420 + 900 * s / top for s in sizes], facecolors="none", edgecolors=MEASURED,
               linewidths=1.4, zorder=1)
    for q, value in zip(description.qubits, values):
        dark = bool(np.isfinite(value)) and abs(value) > 0.6 * scale
        ax.annotate(q.name, where[q.name], ha="center", va="center", fontsize=8,
                    color="white" if dark else INK, zorder=3)
    fig.colorbar(shades, ax=ax, label="excess detection fraction (measured - model)")
    frame = "chip coordinate" if on_chip else "code coordinate"
    ax.set_xlabel(f"x ({frame})")
    ax.set_ylabel(f"y ({frame})")
    ax.set_aspect("equal")
    ax.margins(0.15)
    ax.grid(False)
    keys = [Line2D([], [], ls="", marker="o", ms=11, mfc="#d8d8d8", mec=INK, label="no detector of its own"),
            Line2D([], [], ls="", marker="o", ms=15, mfc="none", mec=MEASURED, mew=1.4,
                   label="ring: its worst fault source (larger: departs more)")]
    ax.legend(handles=keys, loc="upper center", bbox_to_anchor=(0.5, -0.14), ncol=1, fontsize=9, frameon=False)
    titles(ax, "Where the device departs from its model", _subline(result))
    return fig


def _chip_coordinates(result: Departures) -> dict[str, tuple[float, float]]:
    """Device qubit -> its place on the chip, where the point's device file gives the chip's geometry."""
    options = dict(result.experiment.point.noise_options)
    if "device" not in options:
        return {}
    from codebench.noise.calibration import device_from_json

    return dict(device_from_json(options["device"]).geometry.coords)


def write_lab_figures(folder: Path, result: Departures) -> list[FigureFile]:
    """Draw the figures into ``folder`` (PNG and SVG each)."""
    folder.mkdir(parents=True, exist_ok=True)
    kinds: list[tuple[str, str, Any]] = [
        ("detection_fractions", "Detection-event fraction per detector, measured and predicted", detection_fractions),
        ("qubit_map", "Qubits coloured by their departure from the model", qubit_map),
    ]
    if result.matrix is not None:
        kinds.append(("pair_matrix", "Two-point estimates p_ij of every detector pair", pair_matrix))
    out = []
    for stem, caption, draw in kinds:
        png, svg = folder / f"{stem}.png", folder / f"{stem}.svg"
        with matplotlib.rc_context(cast(Any, STYLE)):
            fig = draw(result)
            save(fig, png, svg, stem)
        out.append(FigureFile(stem, "lab", png, svg, caption, caption))
    return out

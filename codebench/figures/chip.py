"""The chip figure of ``codebench placements``: where the logical qubit sits on the device.

Qubits are drawn at their coordinates from the device file (a generated lattice's, or ``x``/``y`` of
``[[qubits]]``; qubits without coordinates go on a circle), coloured by a chosen per-qubit number
with a labelled colour bar. The patch's qubits have a dark ring, its couplers a thick dark line;
unusable qubits are grey with a cross, unusable couplers dashed red, inter-chip links dotted.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any, Sequence, cast

import matplotlib
from matplotlib.colors import LogNorm, Normalize
from matplotlib.lines import Line2D
from matplotlib.ticker import ScalarFormatter

from codebench.figures.canvas import new_figure, save
from codebench.figures.style import INK, MUTED, STYLE, TARGET_INK
from codebench.noise.calibration import Device

__all__ = ["write_chip_figure"]

DEAD_FILL = "#c9c9c9"
DEAD_COUPLER = "#c73737"


def _coords(device: Device) -> dict[str, tuple[float, float]]:
    coords = dict(device.geometry.coords)
    missing = [q for q in device.geometry.nodes if q not in coords]
    for i, q in enumerate(missing):
        angle = 2 * math.pi * i / max(1, len(missing))
        coords[q] = (math.cos(angle) * len(missing) / 4, math.sin(angle) * len(missing) / 4)
    return coords


def write_chip_figure(device: Device, used: Sequence[str], used_pairs: Sequence[tuple[str, str]], colour_key: str,
                      colour_label: str, headline: str, subline: str, stem: Path) -> tuple[Path, Path]:
    """Draw the chip with the patch; returns the (PNG, SVG) paths ``stem``.png / ``stem``.svg."""
    geometry = device.geometry
    coords = _coords(device)
    used_set = set(used)
    used_edges = {frozenset(p) for p in used_pairs}
    with matplotlib.rc_context(cast(Any, STYLE)):
        fig, ax = new_figure()
        for edge in sorted(geometry.edges, key=sorted):
            a, b = sorted(edge)
            (xa, ya), (xb, yb) = coords[a], coords[b]
            off = edge in geometry.dead_pairs or a in geometry.dead_qubits or b in geometry.dead_qubits
            if edge in used_edges:
                style: dict[str, Any] = {"color": INK, "linewidth": 2.6, "zorder": 2}
            elif edge in geometry.dead_pairs:
                style = {"color": DEAD_COUPLER, "linewidth": 1.4, "linestyle": (0, (3, 2)), "zorder": 1}
            else:
                style = {"color": MUTED if not off else DEAD_FILL, "linewidth": 0.9, "alpha": 0.6, "zorder": 1}
            if edge in geometry.links and edge not in geometry.dead_pairs:
                style.update(linestyle=(0, (1, 1.5)), color=TARGET_INK if edge not in used_edges else INK)
            ax.plot([xa, xb], [ya, yb], solid_capstyle="round", **style)
        alive = [q for q in geometry.nodes if q not in geometry.dead_qubits]
        values = [float(getattr(device.qubit(q), colour_key)) for q in alive]
        positive = [v for v in values if v > 0]
        spread = max(positive) / min(positive) if positive and len(positive) == len(values) else 1.0
        low, high = min(values), max(values)
        if high <= low:  # one value everywhere: a bar around it
            low, high = (low * 0.5, low * 1.5) if low > 0 else (low - 1.0, low + 1.0)
        norm: Normalize = LogNorm(min(positive), max(positive)) if spread > 20 else Normalize(low, high)
        cmap = "viridis_r" if colour_key.endswith("_us") else "viridis"  # dark = better either way
        size = max(18.0, min(240.0, 5200.0 / max(1, len(geometry.nodes))))
        points = ax.scatter([coords[q][0] for q in alive], [coords[q][1] for q in alive], c=values, cmap=cmap,
                            norm=norm, s=size, linewidths=[2.2 if q in used_set else 0.5 for q in alive],
                            edgecolors=[INK if q in used_set else MUTED for q in alive], zorder=3)
        dead = sorted(geometry.dead_qubits)
        if dead:
            ax.scatter([coords[q][0] for q in dead], [coords[q][1] for q in dead], s=size, c=DEAD_FILL,
                       edgecolors=MUTED, linewidths=0.5, zorder=3)
            ax.scatter([coords[q][0] for q in dead], [coords[q][1] for q in dead], s=size * 0.5, marker="x",
                       c=INK, linewidths=1.2, zorder=4)
        bar = fig.colorbar(points, ax=ax, shrink=0.85, pad=0.02)
        bar.set_label(colour_label)
        bar.formatter = ScalarFormatter(useOffset=False)
        bar.update_ticks()
        ax.set_aspect("equal", adjustable="datalim")
        ax.invert_yaxis()
        ax.set_xlabel("x on the chip (qubit pitch)")
        ax.set_ylabel("y on the chip (qubit pitch)")
        ax.grid(False)
        handles = [
            Line2D([], [], linestyle="none", marker="o", markersize=8, markerfacecolor="white",
                   markeredgecolor=INK, markeredgewidth=2.2, label="qubit of the patch"),
            Line2D([], [], linestyle="none", marker="o", markersize=7, markerfacecolor="white",
                   markeredgecolor=MUTED, markeredgewidth=0.5, label="usable qubit, not used"),
            Line2D([], [], color=INK, linewidth=2.6, label="coupler the patch uses"),
        ]
        if dead:
            handles.append(Line2D([], [], linestyle="none", marker="X", markersize=8, markerfacecolor=DEAD_FILL,
                                  markeredgecolor=INK, label="unusable qubit"))
        if geometry.dead_pairs:
            handles.append(Line2D([], [], color=DEAD_COUPLER, linestyle=(0, (3, 2)), label="unusable coupler"))
        if geometry.links:
            handles.append(Line2D([], [], color=TARGET_INK, linestyle=(0, (1, 1.5)), label="link between chips"))
        ax.legend(handles=handles, loc="upper left", bbox_to_anchor=(0.0, -0.12), ncol=3, fontsize=8,
                  frameon=False)
        # Above the whole figure, not the axes: a headline wider than the (square) chip would make the
        # layout narrow the chip to fit the text beside it.
        fig.suptitle(f"{headline}\n{subline}", x=0.02, ha="left", fontsize=13, color=INK)
        png, svg = stem.with_suffix(".png"), stem.with_suffix(".svg")
        save(fig, png, svg, salt=stem.name)
    return png, svg

"""The look of every figure: colours, line styles, the matplotlib style, sizes and number formats."""

from __future__ import annotations

import math
from typing import Any

DPI = 150
FIGSIZE = (7.0, 5.0)

INK = "#1f2430"
MUTED = "#5d6472"
THRESHOLD_INK = "#2c3e50"
THRESHOLD_SHADE = "#9aa8b8"
TARGET_INK = "#8a5a00"
GUIDE_INK = "#7a7f8a"
PANEL = "#fbfaf6"

#: Odd distances 3, 5, 7, ... in turn; hand-picked to stay apart on a projector and in grey print.
_ODD_COLOURS = (
    "#127a7a",  # 3  deep teal
    "#d9622b",  # 5  burnt orange
    "#4a4aa8",  # 7  indigo
    "#b38b00",  # 9  mustard
    "#b03a76",  # 11 plum
    "#4f8a2b",  # 13 moss
    "#7b4f2c",  # 15 walnut
    "#2f7fc1",  # 17 cornflower
    "#c73737",  # 19 brick
    "#6b6f78",  # 21 slate
)
#: Even distances 2, 4, 6, ... (repetition code), lighter relatives of the odd ones.
_EVEN_COLOURS = (
    "#3aa6a0",  # 2
    "#ee9a4d",  # 4
    "#7d7dd6",  # 6
    "#d9b53c",  # 8
    "#d874a8",  # 10
    "#86b95a",  # 12
    "#a8825e",  # 14
    "#70aee0",  # 16
    "#e07a7a",  # 18
    "#9a9ea6",  # 20
)
#: Below this many failures a point is drawn hollow (its interval spans a factor of a few); the report's
#: results table marks the same points.
FEW_FAILURES = 10
#: Rates compared on one figure (the suppression figure's representative p), lowest first: colour, marker.
RATE_STYLES: tuple[tuple[str, str], ...] = (("#1d4e89", "o"), ("#c2571a", "s"), ("#3f7f3a", "^"),
                                            ("#8e3b8a", "D"))
#: Our interval mark: a vertical line with short caps (no shaded band around measured points).
INTERVAL: dict[str, Any] = {"elinewidth": 1.1, "capsize": 3.0, "capthick": 1.1}
#: Opacity of the 95% band around a fitted line.
FIT_BAND_ALPHA = 0.16
#: (line style, marker) per decoder, in the order decoders appear.
DECODER_STYLES: tuple[tuple[Any, str], ...] = (
    ("-", "o"), ("--", "s"), (":", "^"), ("-.", "D"), ((0, (5, 1, 1, 1)), "v"))

#: Our figure style, applied inside :func:`matplotlib.rc_context` only.
STYLE: dict[str, Any] = {
    "font.size": 12,
    "axes.titlesize": 13,
    "axes.titleweight": "bold",
    "axes.titlelocation": "left",
    "axes.titlepad": 10,
    "axes.titlecolor": INK,
    "axes.labelsize": 12.5,
    "axes.labelcolor": INK,
    "axes.edgecolor": "#6a7180",
    "axes.linewidth": 0.9,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "axes.facecolor": PANEL,
    "axes.grid": True,
    "axes.grid.which": "major",
    "axes.axisbelow": True,
    "grid.color": "#e3e1da",
    "grid.linewidth": 0.8,
    "grid.linestyle": "-",
    "xtick.labelsize": 11,
    "ytick.labelsize": 11,
    "xtick.color": "#3a404c",
    "ytick.color": "#3a404c",
    "xtick.direction": "out",
    "ytick.direction": "out",
    "legend.fontsize": 11,
    "legend.frameon": True,
    "legend.framealpha": 0.94,
    "legend.edgecolor": "#d8d6cf",
    "legend.fancybox": False,
    "legend.borderpad": 0.6,
    "legend.handlelength": 2.2,
    "lines.linewidth": 1.9,
    "lines.markersize": 6.5,
    "figure.facecolor": "white",
    "savefig.facecolor": "white",
    "svg.fonttype": "path",
}


def distance_colour(distance: int) -> str:
    """The colour of distance ``distance`` in every figure (a fixed mapping).

    >>> distance_colour(3), distance_colour(2)
    ('#127a7a', '#3aa6a0')
    """
    d = int(distance)
    if d % 2:
        return _ODD_COLOURS[max(0, (d - 3) // 2) % len(_ODD_COLOURS)]
    return _EVEN_COLOURS[max(0, (d - 2) // 2) % len(_EVEN_COLOURS)]


def rate_style(index: int) -> tuple[str, str]:
    """(colour, marker) of the ``index``-th rate of the suppression figure."""
    return RATE_STYLES[index % len(RATE_STYLES)]


def decoder_style(index: int) -> tuple[Any, str]:
    """(line style, marker) of the ``index``-th decoder of a comparison."""
    return DECODER_STYLES[index % len(DECODER_STYLES)]


def finite(value: Any) -> float | None:
    """``value`` as a finite float, else ``None``."""
    try:
        number = float(value)
    except (TypeError, ValueError):
        return None
    return number if math.isfinite(number) else None


def num(value: float | None) -> str:
    """Three significant digits, ``n/a`` for a missing or infinite value.

    >>> num(0.012345), num(None)
    ('0.0123', 'n/a')
    """
    if value is None or not math.isfinite(float(value)):
        return "n/a"
    return f"{float(value):.3g}"


_SUPERSCRIPT = str.maketrans("-0123456789", "\u207b\u2070\u00b9\u00b2\u00b3\u2074\u2075\u2076\u2077\u2078\u2079")


def power_of_ten(exponent: int) -> str:
    """``10`` with a superscript exponent, as plain text (no mathtext to parse: figures draw much faster).

    >>> power_of_ten(-9)
    '10\u207b\u2079'
    """
    return "10" + str(exponent).translate(_SUPERSCRIPT)


def sci(value: float) -> str:
    """``1e-09`` -> ``10⁻⁹``; other values keep three significant digits.

    >>> sci(1e-9), sci(2.5e-7)
    ('10\u207b\u2079', '2.5e-07')
    """
    exponent = math.log10(value) if value > 0 else float("nan")
    if math.isfinite(exponent) and abs(exponent - round(exponent)) < 1e-9:
        return power_of_ten(int(round(exponent)))
    return f"{value:.3g}"


def log_tick_label(value: float, _position: object = None) -> str:
    """Tick label of a log axis: ``10⁻³`` at decades, ``2×10⁻³`` / ``5×10⁻³`` between them, else none.

    >>> log_tick_label(1e-3), log_tick_label(5e-3), log_tick_label(3e-3)
    ('10\u207b\u00b3', '5\u00d710\u207b\u00b3', '')
    """
    if not value > 0:
        return ""
    exponent = math.floor(math.log10(value) + 1e-9)
    mantissa = value / 10.0**exponent
    if abs(mantissa - 1.0) < 1e-6:
        return power_of_ten(exponent)
    if any(abs(mantissa - m) < 1e-6 for m in (2.0, 5.0)):
        return f"{round(mantissa)}\u00d7{power_of_ten(exponent)}"
    return ""

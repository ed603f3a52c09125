"""A forecast (:func:`codebench.forecast.forecast`) as a terminal table, JSON, CSV and a figure.

Files written by :func:`write_outputs` into the ``--out`` folder:

- ``forecast.json``: the forecast's JSON (:meth:`~codebench.forecast.result.ForecastResult.to_json`);
- ``forecast.csv``: one row per distance;
- ``forecast.png`` (150 dpi) and ``forecast.svg``: left, the per-round
  logical error against the distance with 95% intervals (circles: direct,
  diamonds: stratified, open diamonds: stratified and extrapolated in w, open
  squares: raised-noise power law), the Lambda fit extended to the distances
  the targets need, the targets, and the break-even lines of the best and
  median idle qubit; right (only when a distance was not sampled directly),
  the failure spectrum f(w) of the stratified distances with the w that
  dominate P_L shaded, or else the raised-noise points with each power law
  continued down to the device's own noise (s = 1).

Figures are :class:`matplotlib.figure.Figure` objects on the Agg canvas
(no pyplot, no global state).
"""

from __future__ import annotations

import csv
import json
import math
from pathlib import Path
from typing import IO, Any, Sequence, cast

import matplotlib
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.ticker import MaxNLocator

from codebench.figures.canvas import log_axis, save, titles
from codebench.figures.marks import lambda_band
from codebench.figures.style import (
    DPI,
    FEW_FAILURES,
    FIT_BAND_ALPHA,
    INK,
    INTERVAL,
    MUTED,
    STYLE,
    TARGET_INK,
    distance_colour,
)
from codebench.files import make_folder, write_atomically, write_text
from codebench.forecast.details import ExtrapolatedDetails, StratifiedDetails
from codebench.forecast.result import DistanceForecast, ForecastResult
from codebench.results.export import speed_verdict

__all__ = ["CSV_COLUMNS", "forecast_table", "forecast_figure", "write_outputs"]

CSV_COLUMNS = [
    "distance", "qubits", "rounds", "per_round_rate", "low", "high", "method", "method_kind", "extrapolated_in_w",
    "w_sampled", "mean_faults", "flags",
    "per_second_rate", "per_second_low", "per_second_high", "round_duration_us", "shots", "failures",
    "scales", "exponent", "exponent_se", "break_even_verdict", "beats_best_idle", "beats_median_idle",
    "decode_us_per_round", "keeps_up",
]
#: The points, the fit, and the idle-qubit lines: the project's ink, accent and guide colours.
_COLOURS = (INK, "#d9622b", "#127a7a", TARGET_INK, "#4a4aa8", "#b03a76", "#4f8a2b", MUTED)


def _e(value: float | None, digits: int = 3) -> str:
    if value is None:
        return "-"
    return f"{float(value):.{digits}e}"


def _g(value: float | None, digits: int = 3) -> str:
    if value is None:
        return "-"
    return f"{float(value):.{digits}g}"


def _columns(rows: Sequence[Sequence[str]], right: Sequence[bool]) -> list[str]:
    widths = [max(len(r[i]) for r in rows) for i in range(len(rows[0]))]
    lines = []
    for n, row in enumerate(rows):
        cells = [c.rjust(w) if right[i] else c.ljust(w) for i, (c, w) in enumerate(zip(row, widths))]
        lines.append("  " + "  ".join(cells).rstrip())
        if n == 0:
            lines.append("  " + "  ".join("-" * w for w in widths))
    return lines


def forecast_table(result: ForecastResult) -> str:
    """The forecast as text for the terminal."""
    improve = result.improve
    what_if = (" with " + ", ".join(f"{k} x{v:g}" for k, v in improve.items())) if improve else ""
    lines = [
        f"Forecast for {result.device}{what_if}",
        f"{result.code} memory in the {result.basis} basis, rounds = d, decoder {result.decoder}"
        + (" (per-round rates: the logical qubit fails when either basis fails)" if len(result.bases) > 1 else ""),
        "A model-based projection from the device file: see the cautions at the end.",
        *[f"d = {d} on device qubits {', '.join(q)}" for d, q in result.placements.items()],
        "",
        "Per distance (per-round logical error with 95% interval)",
    ]
    rows = [["d", "qubits", "per round", "95% interval", "per second", "method"]]
    for r in result.distances:
        interval = f"[{_e(r.low)}, {_e(r.high)}]"
        rate = _e(r.per_round_rate) if r.per_round_rate is not None else f"< {_e(r.high)}"
        per_s = f"{_g(r.per_second_rate)}/s" if r.per_second_rate is not None else "-"
        method = r.method
        details = r.details
        if r.method_kind == "direct":
            method += f" ({r.failures:,} failures in {r.shots:,} shots)"
        elif r.method_kind == "stratified" and isinstance(details, StratifiedDetails) and details.w_sampled:
            method += (f" ({r.failures:,} failures in {r.shots:,} shots with w = "
                       f"{details.w_sampled[0]}..{details.w_sampled[1]} faults; mean faults {details.mean_faults:.3g})")
        elif isinstance(details, ExtrapolatedDetails) and details.fit is not None:
            method += f", exponent {details.fit.exponent:.2f} +- {1.96 * details.fit.exponent_se:.2f}"
        if r.flags:
            method += " [flagged: see notes]"
        rows.append([str(r.distance), f"{r.qubits:,}", rate, interval, per_s, method])
    lines += _columns(rows, [True, True, True, False, True, False])
    lines.append("")
    if result.per_basis:
        lines.append("Per basis (per-round logical error with 95% interval)")
        bases = list(result.per_basis)
        table = [["d"] + [f"{b} basis" for b in bases]]
        for i, r in enumerate(result.distances):
            cells = [str(r.distance)]
            for b in bases:
                one = result.per_basis[b][i]
                cells.append(f"{_e(one.per_round_rate)} [{_e(one.low)}, {_e(one.high)}] {one.method_kind}")
            table.append(cells)
        lines += _columns(table, [True] + [False] * len(bases))
        lines.append("")
    fit = result.lambda_fit
    if fit is not None:
        lines.append(f"Lambda = {fit.lam:.3f} [{fit.lam_low:.3f}, {fit.lam_high:.3f}] "
                     f"(95%; eps_d = C / Lambda^((d+1)/2) over d = {', '.join(map(str, fit.distances))}, "
                     f"C = {fit.C:.3g}, chi2/dof = {fit.chi2:.2f}/{fit.dof})")
        for pair in result.lambda_pairs:
            d1, d2 = pair.distances
            lines.append(f"  eps_{d1} / eps_{d2}: Lambda = {pair.lam:.3f} [{pair.low:.3f}, {pair.high:.3f}]")
    else:
        lines.append("Lambda: no fit (fewer than two distances with an estimate)")
    lines.append("")
    lines.append("Distance and physical qubits needed per target (per-round logical error)")
    rows = [["target", "d", "qubits", "d range (95%)", "qubits range", "note"]]
    for t in result.targets:
        if t.distance is None or t.qubits is None:
            why = "not projected: constant Lambda not supported (see notes)" if t.not_projected else \
                "not reached by growing d"
            rows.append([f"{t.target:.0e}", "-", "-", "-", "-", why])
            continue
        d_range = f"{t.distance_low or '-'}-{t.distance_high or 'unbounded'}"
        q_low = f"{t.qubits_low:,}" if t.qubits_low is not None else "-"
        q_high = f"{t.qubits_high:,}" if t.qubits_high is not None else "unbounded"
        q_range = f"{q_low}-{q_high}"
        note = "extrapolated beyond the forecast distances" if t.extrapolation else ""
        rows.append([f"{t.target:.0e}", str(t.distance), f"{t.qubits:,}", d_range, q_range, note])
    lines += _columns(rows, [False, True, True, False, False, False])
    lines.append("")
    lines.append(f"Round duration: {result.round_duration_us:.3f} us "
                 f"({1e6 / result.round_duration_us:,.0f} rounds per second); per-second rates above are "
                 "eps / round duration.")
    speeds = [(r, r.decode_us_per_round) for r in result.distances if r.decode_us_per_round is not None]
    if speeds:
        parts = [f"d = {r.distance}: {us:.3g} us, {speed_verdict(us, r.round_duration_us)}" for r, us in speeds]
        lines.append(f"Decoder {result.decoder} per round on one worker: " + "; ".join(parts) + ".")
    be = result.break_even
    lines.append("")
    lines.append("Break-even: logical error per round against one idle physical qubit over one round "
                 "(Tomita & Svore, PRA 90, 062320 (2014), Eqs. 9-10)")
    if be.best_qubit == "defaults":
        lines.append(f"  idle qubit with the default T1 {be.best_qubit_t1_us:g} us, T2 {be.best_qubit_t2_us:g} us "
                     f"(the file lists no qubits): {_e(be.idle_error_best)}")
    else:
        lines.append(f"  best idle qubit {be.best_qubit} (T1 {be.best_qubit_t1_us:g} us, T2 "
                     f"{be.best_qubit_t2_us:g} us): {_e(be.idle_error_best)}; median over "
                     f"{be.qubits_considered} qubits: {_e(be.idle_error_median)}")
    for row in be.distances:
        sure = ""
        if row.verdict.startswith("beats the best") and row.beats_best_at_95:
            sure = " (also at the interval's upper end)"
        elif row.verdict.startswith("beats the median") and row.beats_median_at_95:
            sure = " (also at the interval's upper end)"
        lines.append(f"  d = {row.distance}: {_e(row.per_round_rate)} per round: {row.verdict}{sure}")
    budget = result.budget
    lines.append("")
    lines.append(f"Budget: {budget.work:.3g} detector-shots planned, {budget.work_spent:.3g} spent, "
                 f"in {budget.wall_seconds:.1f} s wall"
                 + ("; the hard time limit cut short " + ", ".join(budget.cut_short) if budget.cut_short else ""))
    if result.notes:
        lines.append("")
        lines.append("Notes:")
        lines += [f"  - {note}" for note in result.notes]
    lines.append("")
    lines.append("Cautions:")
    lines += [f"  - {c}" for c in result.cautions]
    return "\n".join(lines)


def _csv_rows(result: ForecastResult) -> list[dict[str, object]]:
    """One row per distance: the row's JSON values under :data:`CSV_COLUMNS`, lists joined, with break-even."""
    out = []
    for r in result.distances:
        doc = r.to_json()
        be = result.break_even.row(r.distance)
        row = {key: doc.get(key) for key in CSV_COLUMNS}
        row["scales"] = " ".join(f"{s:g}" for s in doc.get("scales", []))
        row["w_sampled"] = "-".join(str(w) for w in doc.get("w_sampled") or [])
        row["flags"] = "; ".join(r.flags)
        row["break_even_verdict"] = None if be is None else be.verdict
        row["beats_best_idle"] = None if be is None else be.beats_best
        row["beats_median_idle"] = None if be is None else be.beats_median
        out.append({k: ("" if v is None else v) for k, v in row.items()})
    return out


def _band(rate: float | None, low: float | None, high: float | None) -> tuple[float, float, float] | None:
    """(rate, low, high) when all three are known."""
    if rate is None or low is None or high is None:
        return None
    return rate, low, high


def _extrapolated_in_w(row: DistanceForecast) -> bool:
    return isinstance(row.details, StratifiedDetails) and bool(row.details.extrapolated_in_w)


def forecast_figure(result: ForecastResult) -> Figure:
    """The two-panel forecast figure (see the module docstring)."""
    rows = result.distances
    side = [r for r in rows if r.method_kind in ("extrapolated", "stratified")]
    fig = Figure(figsize=(11.0 if side else 6.4, 4.6), dpi=DPI, layout="constrained")
    FigureCanvasAgg(fig)
    if side:
        left, right = fig.subplots(1, 2, gridspec_kw={"width_ratios": [1.25, 1.0]})
    else:
        left, right = fig.subplots(1, 1), None
    fit = result.lambda_fit
    be = result.break_even
    d_fit_max = max(r.distance for r in rows)
    reachable = [t.distance for t in result.targets if t.distance is not None]
    d_max = max([d_fit_max] + reachable)
    d_min = min(r.distance for r in rows)

    styles = (("direct", False, "o", None, "direct sampling"),
              ("combined", False, "o", None, "either basis fails"),
              ("stratified", False, "D", None, "stratified by fault count"),
              ("stratified", True, "D", "white", "stratified, extrapolated in w"),
              ("extrapolated", False, "s", "white", "extrapolated from raised noise"))
    for kind, in_w, marker, face, label in styles:
        for few in (False, True):  # our marks: hollow below FEW_FAILURES failures, as in every figure
            sel = [(r.distance, band) for r in rows if r.method_kind == kind and _extrapolated_in_w(r) == in_w
                   and (r.failures < FEW_FAILURES) == few and (band := _band(r.per_round_rate, r.low, r.high))]
            if not sel:
                continue
            x = [d for d, _ in sel]
            y = [v for _, (v, _, _) in sel]
            err = [[v - lo for _, (v, lo, _) in sel], [hi - v for _, (v, _, hi) in sel]]
            left.errorbar(x, y, yerr=err, fmt=marker, color=_COLOURS[0], mfc="white" if few else face or _COLOURS[0],
                          ms=7, label=f"{label}, < {FEW_FAILURES} failures" if few else label, zorder=3, **INTERVAL)
    flagged = [(r.distance, r.per_round_rate) for r in rows if r.flags and r.per_round_rate is not None]
    if flagged:
        left.plot([d for d, _ in flagged], [v for _, v in flagged], "o", ms=15, mfc="none",
                  mec=_COLOURS[1], mew=1.2, zorder=4, label="flagged: see the notes / JSON flags")
    bounds = [(r.distance, r.high) for r in rows if r.per_round_rate is None and r.high is not None]
    if bounds:
        left.plot([d for d, _ in bounds], [h for _, h in bounds], "v", color=_COLOURS[0],
                  ms=7, label="upper bound (no failures)")
    if fit is not None:
        c, lam = fit.C, fit.lam
        ds_line = [d_min + 0.25 * i for i in range(int((d_max - d_min) / 0.25) + 1)]
        inside = [d for d in ds_line if d <= d_fit_max]
        outside = [d for d in ds_line if d >= d_fit_max]

        def line(d: float) -> float:
            return float(c / lam ** ((d + 1) / 2))

        fit_band = lambda_band(c, lam, fit.log_cov, ds_line)  # the 95% band every Lambda fit carries
        if fit_band is not None:
            left.fill_between(ds_line, fit_band[0], fit_band[1], color=_COLOURS[1], alpha=FIT_BAND_ALPHA, linewidth=0,
                              label="fit, 95% band")

        left.plot(inside, [line(d) for d in inside], "-", color=_COLOURS[1],
                  label=f"fit: Lambda = {lam:.3g} [{fit.lam_low:.3g}, {fit.lam_high:.3g}]")
        if len(outside) > 1:
            left.plot(outside, [line(d) for d in outside], "--", color=_COLOURS[1], label="fit, extrapolated")
    for t in result.targets:
        left.axhline(t.target, color="0.55", lw=0.8, ls=":")
        text = f"target {t.target:.0e}" + (f": d = {t.distance}, {t.qubits:,} qubits"
                                           if t.distance is not None else
                                           ": not projected (constant Lambda not supported)"
                                           if t.not_projected else ": not reached")
        left.annotate(text, (d_min, t.target), xytext=(2, 2), textcoords="offset points", fontsize=7,
                      color="0.35")
        if t.distance is not None and fit is not None:
            left.plot([t.distance], [t.target], "x", color=_COLOURS[1], ms=6)
    left.axhline(be.idle_error_best, color=_COLOURS[2], lw=1.2, ls="-.",
                 label=f"idle qubit, best ({be.best_qubit}): {be.idle_error_best:.2g}")
    if be.qubits_considered > 1:
        left.axhline(be.idle_error_median, color=_COLOURS[3], lw=1.2, ls="-.",
                     label=f"idle qubit, median: {be.idle_error_median:.2g}")
    log_axis(left, "y")
    shown = sorted({r.distance for r in rows} | set(reachable))
    if len(shown) <= 10:  # the distances that mean something: sampled or needed for a target
        left.set_xticks(shown)
    else:
        left.xaxis.set_major_locator(MaxNLocator(integer=True))
    left.set_xlabel("code distance d")
    left.set_ylabel("logical error per round")
    titles(left, f"Forecast: {result.device}",
           f"{result.code} \u00b7 {result.basis} basis \u00b7 {result.decoder} \u00b7 round "
           f"{result.round_duration_us:.3g} \u00b5s")
    left.grid(True, which="major", alpha=0.3)
    left.legend(fontsize=7, loc="best")  # the least-covered corner: markers stay visible

    if right is not None:
        _side_panel(right, side)
    return fig


def _side_panel(ax: Any, rows: Sequence[DistanceForecast]) -> None:
    """The failure spectrum f(w) of stratified distances, or the raised-noise points of extrapolated ones."""
    from codebench.stats import wilson_interval

    stratified = [(r.distance, r.details) for r in rows
                  if r.method_kind == "stratified" and isinstance(r.details, StratifiedDetails)]
    if stratified:
        for distance, details in stratified:
            colour = distance_colour(distance)
            pts = [p for p in details.spectrum if p.failures > 0]
            if not pts:
                continue
            f = [p.failures / p.shots for p in pts]
            bands = [wilson_interval(p.failures, p.shots) for p in pts]
            ax.errorbar([p.w for p in pts], f, yerr=[[v - b[0] for v, b in zip(f, bands)],
                                                     [b[1] - v for v, b in zip(f, bands)]],
                        fmt="D", ms=4, color=colour, capsize=2, label=f"d = {distance}")
            if details.w_dominant:
                a, b = details.w_dominant
                ax.axvspan(a - 0.5, b + 0.5, color=colour, alpha=0.08)
        ax.set_xlabel("faults per shot w (shaded: the w that dominate)")
        ax.set_ylabel("failure probability given w faults, f(w)")
        log_axis(ax, "y")
        ax.set_title("failure spectrum (95% Wilson intervals)", fontsize=9)
    else:
        for r in rows:
            colour = distance_colour(r.distance)
            raised = r.details if isinstance(r.details, ExtrapolatedDetails) else None
            points = raised.points if raised is not None else ()
            good = [(p.scale, band) for p in points
                    if p.failures > 0 and (band := _band(p.per_round_rate, p.low, p.high)) is not None]
            if good:
                ax.errorbar([s for s, _ in good], [v for _, (v, _, _) in good],
                            yerr=[[v - lo for _, (v, lo, _) in good], [hi - v for _, (v, _, hi) in good]],
                            fmt=".", color=colour, capsize=2, label=f"d = {r.distance}, raised noise")
            at_one = _band(r.per_round_rate, r.low, r.high)
            exponent = None if raised is None else raised.exponent
            if at_one is not None and exponent is not None:
                rate, low, high = at_one
                top = max(p.scale for p in points)
                xs = [math.exp(math.log(top) * k / 40) for k in range(41)]
                ax.plot(xs, [rate * x ** exponent for x in xs], "--", color=colour, lw=1)
                ax.errorbar([1.0], [rate], yerr=[[rate - low], [high - rate]],
                            fmt="s", mfc="white", color=colour, capsize=3,
                            label=f"d = {r.distance}, at s = 1 (exponent {exponent:.2f})")
        log_axis(ax, "x")
        log_axis(ax, "y")
        ax.set_xlabel("noise scale s (1 = the device)")
        ax.set_ylabel("logical error per round")
        ax.set_title("per-round error against the noise scale s", fontsize=9)
    ax.grid(True, which="major", alpha=0.3)
    if ax.get_legend_handles_labels()[0]:
        ax.legend(fontsize=7, loc="lower right")


def write_outputs(result: ForecastResult, folder: str | Path) -> list[Path]:
    """Write forecast.json, forecast.csv, forecast.png and forecast.svg into ``folder``."""
    out = make_folder(folder)
    paths = [out / "forecast.json", out / "forecast.csv", out / "forecast.png", out / "forecast.svg"]
    write_text(paths[0], json.dumps(result.to_json(), indent=2, allow_nan=False) + "\n")
    rows = _csv_rows(result)

    def table(handle: IO[Any]) -> None:
        writer = csv.DictWriter(handle, fieldnames=CSV_COLUMNS)
        writer.writeheader()
        writer.writerows(rows)

    write_atomically(paths[1], table)
    # The project's look, as in `codebench figures`; one draw for both files.
    with matplotlib.rc_context(cast(Any, STYLE)):
        save(forecast_figure(result), paths[2], paths[3], "forecast")
    return paths

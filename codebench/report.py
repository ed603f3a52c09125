"""The report of a sweep folder: ``DIR/report/index.html`` and ``DIR/report/summary.md``.

The HTML page is self-contained: styles are inline, every figure is embedded
(the SVG inline, the PNG as a ``data:`` URI behind a download link), and it
loads nothing from anywhere. It says what was run (sweep file, seed, library
versions, machine, shots and CPU time), shows the results table, the fits of
:func:`~codebench.analysis.analyze` with their intervals, the notes on fits
that could not be made, the figures (:mod:`codebench.figures`) and a list of
cautions. ``summary.md`` holds the same tables as Markdown, with links to the
figure files.

Every piece of text that comes from data (study labels, the sweep file,
notes) is escaped before it goes into the page.
"""

from __future__ import annotations

import base64
import datetime as _dt
import html
import json
import math
import os
import re
import tempfile
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable

import pandas as pd

from codebench.api import STORE_NAME, load_results, versions
from codebench.errors import CodebenchError
from codebench.figures import FigureFile, chosen_threshold, render_figures
from codebench.results.export import speed_verdict
from codebench.results.store import Store

__all__ = ["REPORT_DIR", "RunInfo", "read_run_info", "write_report"]

REPORT_DIR = "report"
#: Points with fewer failures than this are listed under the cautions.
FEW_FAILURES = 10
#: Distances up to this are "small" for the finite-size caution on crossings.
SMALL_DISTANCE = 5
_VERSION_KEYS = ("codebench", "stim", "pymatching", "ldpc", "numpy", "python")


# what was run --------------------------------------------------------------


@dataclass(frozen=True)
class RunInfo:
    """What the store says about the run that wrote it."""

    name: str | None
    seed: str | None
    sweep_text: str
    sweep_source: str | None
    versions: dict[str, str]
    versions_recorded: bool
    stopping: dict[str, Any]


def read_run_info(folder: Path) -> RunInfo:
    """The run's name, seed, sweep text, versions and stopping rule, from ``folder``'s store.

    Without a readable store, the versions are those of this session
    (``versions_recorded`` is then false) and the rest is unknown.
    """
    path = Path(folder) / STORE_NAME
    meta: dict[str, str] = {}
    if path.exists():
        try:
            with Store(path, create=False) as store:
                meta = store.meta()
        except CodebenchError:
            meta = {}
    recorded = _json_dict(meta.get("versions"))
    return RunInfo(
        name=meta.get("name"),
        seed=meta.get("seed"),
        sweep_text=meta.get("sweep_text", ""),
        sweep_source=meta.get("sweep_source"),
        versions={str(k): str(v) for k, v in (recorded or versions()).items()},
        versions_recorded=bool(recorded),
        stopping=_json_dict(meta.get("stopping")),
    )


def _json_dict(text: str | None) -> dict[str, Any]:
    if not text:
        return {}
    try:
        value = json.loads(text)
    except ValueError:
        return {}
    return value if isinstance(value, dict) else {}


# entry point ---------------------------------------------------------------


def write_report(folder: Path, frame: pd.DataFrame | None = None, analysis: dict[str, Any] | None = None) -> Path:
    """Write ``folder/"report"/index.html`` and ``summary.md``; return the HTML path.

    ``frame`` defaults to :func:`~codebench.api.load_results` of ``folder`` and
    ``analysis`` to :func:`~codebench.analysis.analyze` of ``frame``. The
    figures are (re)written into ``folder/"figures"`` first.
    """
    folder = Path(folder)
    if frame is None:
        frame = load_results(folder)
    problems: list[str] = []
    if analysis is None:
        analysis, problem = _analyze(frame)
        if problem:
            problems.append(problem)
    figures = render_figures(folder, frame, analysis)
    report = _Report(folder, frame, analysis, read_run_info(folder), figures, problems)
    out_dir = folder / REPORT_DIR
    out_dir.mkdir(parents=True, exist_ok=True)
    index = out_dir / "index.html"
    _write_text(index, _html_page(report))
    _write_text(out_dir / "summary.md", _markdown(report))
    return index


def _analyze(frame: pd.DataFrame) -> tuple[dict[str, Any], str | None]:
    """Run the fits; a failure becomes a caution instead of stopping the report."""
    try:
        from codebench.analysis import analyze

        return analyze(frame), None
    except Exception as exc:  # noqa: BLE001 - the report must still be written
        empty: dict[str, Any] = {key: [] for key in (
            "thresholds", "pseudo_thresholds", "lambdas", "lambda_pairs", "scaling_laws", "projections", "notes")}
        empty["settings"] = {}
        return empty, f"the analysis failed ({type(exc).__name__}: {exc}); no fits are shown."


def _write_text(path: Path, text: str) -> None:
    """Write ``text`` atomically (a reader never sees half a page)."""
    fd, tmp = tempfile.mkstemp(prefix=f".{path.stem}-", suffix=path.suffix, dir=path.parent)
    with os.fdopen(fd, "w", encoding="utf-8", newline="\n") as handle:
        handle.write(text)
    os.chmod(tmp, 0o644)  # a page to share, not a private temporary file
    os.replace(tmp, path)


# the content, independent of the output format -----------------------------


@dataclass(frozen=True)
class Badge:
    """A short flag shown as a coloured tag (bold in Markdown)."""

    text: str
    kind: str


Cell = str | Badge


@dataclass
class Table:
    """A table as both renderers see it."""

    key: str
    title: str
    intro: str
    headers: list[str]
    rows: list[list[Cell]] = field(default_factory=list)
    numeric: set[int] = field(default_factory=set)
    row_classes: list[str] = field(default_factory=list)
    empty: str = "none"


@dataclass(frozen=True)
class Caution:
    """One caution: a title, its text (lines), an optional table; ``ok`` when nothing needs attention."""

    title: str
    text: str
    table: Table | None = None
    ok: bool = False


@dataclass
class _Report:
    folder: Path
    frame: pd.DataFrame
    analysis: dict[str, Any]
    run: RunInfo
    figures: list[FigureFile]
    problems: list[str]

    @property
    def title(self) -> str:
        return self.run.name or self.folder.name or "sweep"

    def speed(self) -> Table:
        """The decoder-speed table (round durations read from the store for device noise)."""
        return _speed_table(self.frame, round_durations_us(self.folder, self.frame))

    def facts(self) -> list[tuple[str, str]]:
        """Key numbers of the run, in display order."""
        frame = self.frame
        shots = _column_sum(frame, "shots")
        seconds = _column_sum(frame, "seconds")
        incomplete = _incomplete(frame)
        return [
            ("points", f"{len(frame):,}"),
            ("incomplete points", f"{len(incomplete):,}"),
            ("total shots", f"{int(shots):,}"),
            ("total failures", f"{int(_column_sum(frame, 'failures')):,}"),
            ("total CPU time", _duration(seconds)),
            ("seed", self.run.seed if self.run.seed is not None else "not recorded"),
        ]

    def run_rows(self) -> list[tuple[str, str]]:
        run, frame = self.run, self.frame
        rows = [
            ("sweep name", run.name or "not recorded"),
            ("seed", run.seed if run.seed is not None else "not recorded"),
            ("sweep file", run.sweep_source or "not recorded"),
            ("stopping rule", _stopping_text(run.stopping)),
            ("intervals", _interval_text(frame)),
            ("points", f"{len(frame):,} ({len(_incomplete(frame)):,} incomplete)"),
            ("total shots", f"{int(_column_sum(frame, 'shots')):,}"),
            ("total CPU time", f"{_duration(_column_sum(frame, 'seconds'))} (sum of the points' worker seconds; "
                               f"decoding {_duration(_column_sum(frame, 'decode_seconds'))})"),
            ("machine", run.versions.get("machine", "unknown")),
        ]
        suffix = "" if run.versions_recorded else " (this session; the store holds no record)"
        for key in _VERSION_KEYS:
            rows.append((key, run.versions.get(key, "unknown") + suffix))
        return rows


def _interval_text(frame: pd.DataFrame) -> str:
    methods = sorted({str(v) for v in frame["interval"].dropna()}) if "interval" in frame.columns else []
    return "95% " + (", ".join(methods) if methods else "binomial") + " intervals"


def _column_sum(frame: pd.DataFrame, column: str) -> float:
    if column not in frame.columns or frame.empty:
        return 0.0
    total = pd.to_numeric(frame[column], errors="coerce").fillna(0).sum()
    return float(total)


def _incomplete(frame: pd.DataFrame) -> pd.DataFrame:
    if "complete" not in frame.columns:
        return frame.iloc[0:0]
    return frame[~frame["complete"].fillna(False).astype(bool)]


def _duration(seconds: float) -> str:
    if seconds < 120:
        return f"{seconds:.1f} s"
    if seconds < 7200:
        return f"{seconds:.0f} s ({seconds / 60:.1f} min)"
    return f"{seconds:.0f} s ({seconds / 3600:.2f} h)"


def _stopping_text(rule: dict[str, Any]) -> str:
    if not rule:
        return "not recorded"
    parts = []
    if rule.get("failure_target") is not None:
        parts.append(f"{int(rule['failure_target']):,} failures")
    if rule.get("shot_budget") is not None:
        parts.append(f"{int(rule['shot_budget']):,} shots")
    if rule.get("relative_precision") is not None:
        parts.append(f"relative precision {rule['relative_precision']}")
    return "per point, whichever comes first: " + ", ".join(parts) if parts else "none"


# number formats ------------------------------------------------------------


def _finite(value: Any) -> float | None:
    if value is None or isinstance(value, bool):
        return None
    try:
        number = float(value)
    except (TypeError, ValueError):
        return None
    return number if math.isfinite(number) else None


def _g(value: Any, digits: int = 4) -> str:
    number = _finite(value)
    return "\u2013" if number is None else f"{number:.{digits}g}"


def _e(value: Any) -> str:
    number = _finite(value)
    return "\u2013" if number is None else f"{number:.3e}"


def _int(value: Any) -> str:
    number = _finite(value)
    return "\u2013" if number is None else f"{int(round(number)):,}"


def _with_interval(value: Any, low: Any, high: Any, fmt: Callable[[Any], str] = _g) -> str:
    if _finite(value) is None:
        return "\u2013"
    if _finite(low) is None and _finite(high) is None:
        return fmt(value)
    return f"{fmt(value)} [{fmt(low)}, {fmt(high)}]"


def _list(values: Any) -> str:
    if not values:
        return "\u2013"
    if isinstance(values, (list, tuple)):
        return ", ".join(_g(v) if isinstance(v, float) else str(v) for v in values)
    return str(values)


def _family_text(record: dict[str, Any]) -> str:
    return (f"{record.get('code')} {record.get('basis')} {record.get('noise')} {record.get('decoder')} "
            f"r={record.get('rounds')}")


# tables --------------------------------------------------------------------


def _results_table(frame: pd.DataFrame) -> Table:
    table = Table("results", "Results", "One row per point. Rates are failures / shots over the whole memory "
                  "experiment and per round, each with its 95% interval.",
                  ["study", "code", "d", "rounds", "basis", "noise", "p", "decoder", "shots", "failures",
                   "failure rate [95%]", "per round [95%]", "qubits", "CPU s", "status"],
                  numeric={2, 3, 6, 8, 9, 10, 11, 12, 13}, empty="no points")
    for item in _row_dicts(frame):
        failures = _finite(item.get("failures")) or 0.0
        shots = _finite(item.get("shots")) or 0.0
        complete = bool(item.get("complete", True))
        status: Cell = "done"
        css = ""
        if not complete:
            status, css = Badge("incomplete", "bad"), "incomplete"
        elif shots == 0:
            status, css = Badge("no shots", "bad"), "incomplete"
        elif failures < FEW_FAILURES:
            status, css = Badge(f"< {FEW_FAILURES} failures", "warn"), "few"
        table.rows.append([
            str(item.get("study", "")), str(item.get("code", "")), _int(item.get("distance")),
            _int(item.get("rounds")), str(item.get("basis", "")), str(item.get("noise", "")),
            _g(item.get("p")), str(item.get("decoder", "")), _int(shots), _int(failures),
            _with_interval(item.get("failure_rate"), item.get("failure_rate_low"), item.get("failure_rate_high"), _e),
            _with_interval(item.get("per_round_rate"), item.get("per_round_low"), item.get("per_round_high"), _e),
            _int(item.get("qubits")), _g(item.get("seconds"), 3), status,
        ])
        table.row_classes.append(css)
    return table


def _row_dicts(frame: pd.DataFrame) -> list[dict[str, Any]]:
    return [{str(k): v for k, v in row.items()} for row in frame.to_dict(orient="records")]


def _fit_tables(analysis: dict[str, Any]) -> list[Table]:
    records: Callable[[str], list[dict[str, Any]]] = lambda key: [
        r for r in analysis.get(key) or [] if isinstance(r, dict)]
    tables = []

    thresholds = Table(
        "thresholds", "Thresholds",
        "Where the curves of different distances cross. Crossing: of two distances' curves; finite-size scaling "
        "(FSS): one fit of all distances near the crossing, with the exponent nu.",
        ["family", "method", "quantity", "distances", "threshold [95%]", "nu [95%]", "window", "GOF p"],
        numeric={4, 5, 7}, empty="no threshold estimate (see the notes)")
    for r in records("thresholds"):
        method = str(r.get("method", ""))
        thresholds.rows.append([
            _family_text(r), "finite-size scaling" if method == "finite_size_scaling" else method,
            _quantity(r.get("quantity")), _list(r.get("distances")),
            _with_interval(r.get("threshold"), r.get("low"), r.get("high")),
            _with_interval(r.get("nu"), r.get("nu_low"), r.get("nu_high")) if r.get("nu") is not None else "\u2013",
            _list(r.get("window")), _g(r.get("gof_p_value"), 3)])
    tables.append(thresholds)

    pseudo = Table(
        "pseudo", "Pseudo-thresholds", "Per distance, the p below which the encoded qubit beats a bare one.",
        ["family", "d", "pseudo-threshold [95%]", "definition"], numeric={1, 2},
        empty="no pseudo-threshold inside the sampled range (see the notes)")
    for r in records("pseudo_thresholds"):
        pseudo.rows.append([_family_text(r), _int(r.get("distance")),
                            _with_interval(r.get("pseudo_threshold"), r.get("low"), r.get("high")),
                            str(r.get("definition") or "\u2013")])
    tables.append(pseudo)

    lambdas = Table(
        "lambda", "Error suppression \u039b",
        "Fit of eps_d = C / \u039b^((d+1)/2) to the per-round rates at each p: \u039b is the factor gained "
        "per step of 2 in distance.",
        ["family", "p", "distances", "\u039b [95%]", "C"], numeric={1, 3, 4}, empty="no \u039b fit (see the notes)")
    for r in records("lambdas"):
        lambdas.rows.append([_family_text(r), _g(r.get("p")), _list(r.get("distances")),
                             _with_interval(r.get("lambda"), r.get("low"), r.get("high")), _g(r.get("C"))])
    tables.append(lambdas)

    pairs = Table(
        "lambda-pairs", "\u039b between consecutive distances",
        "The same factor from each pair of distances alone; a trend with d means the fit above is an average.",
        ["family", "p", "distances", "\u039b [95%]"], numeric={1, 3}, empty="none")
    for r in records("lambda_pairs"):
        pairs.rows.append([_family_text(r), _g(r.get("p")), _list(r.get("distances")),
                           _with_interval(r.get("lambda"), r.get("low"), r.get("high"))])
    tables.append(pairs)

    laws = Table(
        "scaling", "Scaling law",
        "Fit of eps = A (p / p_th)^((d+1)/2) over the points below threshold.",
        ["family", "A [95%]", "p_th [95%]", "distances", "points", "chi2 / dof"], numeric={1, 2, 4, 5},
        empty="no scaling-law fit (see the notes)")
    for r in records("scaling_laws"):
        dof = _finite(r.get("dof"))
        chi2 = _finite(r.get("chi2"))
        laws.rows.append([_family_text(r), _with_interval(r.get("A"), r.get("A_low"), r.get("A_high")),
                          _with_interval(r.get("p_th"), r.get("p_th_low"), r.get("p_th_high")),
                          _list(r.get("distances")), _int(r.get("points")),
                          f"{chi2:.3g} / {int(dof)}" if chi2 is not None and dof else "\u2013"])
    tables.append(laws)

    projections = Table(
        "projections", "Projections",
        "Smallest distance (and qubit count) whose fitted per-round error reaches each target, from the "
        "\u039b fit at that p. Rows marked extrapolated lie beyond the distances that were sampled.",
        ["family", "p", "target / round", "d [range]", "qubits [range]", "fitted d", "extrapolation"],
        numeric={1, 2, 3, 4}, empty="no projection (needs a \u039b fit)")
    for r in records("projections"):
        if _finite(r.get("distance")) is None:
            d_text, q_text = "not reached", "\u2013"
        else:
            d_text = _with_interval(r.get("distance"), r.get("distance_low"), r.get("distance_high"), _int)
            q_text = _with_interval(r.get("qubits"), r.get("qubits_low"), r.get("qubits_high"), _int)
        flag: Cell = (Badge("extrapolated", "warn") if r.get("extrapolation")
                      else "\u2013" if _finite(r.get("distance")) is None else "within sampled d")
        projections.rows.append([_family_text(r), _g(r.get("p")), _g(r.get("target")), d_text, q_text,
                                 _list(r.get("fitted_distances")), flag])
        projections.row_classes.append("extrapolated" if r.get("extrapolation") else "")
    tables.append(projections)
    return tables


def _quantity(value: Any) -> str:
    names = {"failure_rate": "failure probability (whole experiment)", "per_round_rate": "per-round error"}
    return names.get(str(value), str(value)) if value is not None else "\u2013"


# decoder speed -------------------------------------------------------------


def round_durations_us(folder: Path, frame: pd.DataFrame) -> dict[str, float]:
    """Duration of one syndrome round, in microseconds, of every device-noise point (by key) in ``folder``'s store.

    From :meth:`codebench.noise.device.DeviceNoise.round_duration_ns` of the point's own circuit; points of
    other noise models have no duration and are left out.
    """
    path = Path(folder) / STORE_NAME
    if frame.empty or "noise" not in frame.columns or not (frame["noise"] == "device").any() or not path.exists():
        return {}
    from codebench.codes import get_code_family
    from codebench.noise.device import DeviceNoise

    wanted = set(frame.loc[frame["noise"] == "device", "key"].astype(str)) if "key" in frame.columns else set()
    out: dict[str, float] = {}
    try:
        with Store(path, create=False) as store:
            members = store.members()
    except CodebenchError:
        return {}
    for member, _ in members:
        point = member.point
        if member.key not in wanted or point.noise != DeviceNoise.name:
            continue
        try:
            model = DeviceNoise(point.p, **dict(point.noise_options))
            ideal = get_code_family(point.code).ideal_circuit(point.distance, point.rounds, point.basis,
                                                              model.circuit_gate_set())
            out[member.key] = model.round_duration_ns(ideal) / 1000.0
        except (CodebenchError, KeyError, ValueError):
            continue
    return out


def _speed_table(frame: pd.DataFrame, durations: dict[str, float]) -> Table:
    table = Table(
        "decoder-speed", "Decoder speed",
        "Decoding wall time per shot per round on one worker (decode_seconds / shots / rounds), per decoder "
        "and distance: the mean over the points' shots and the slowest point. With device noise it is "
        "compared with the device's round duration: the decoder keeps up when it decodes a round in at most "
        "the time the round takes (one core, no pipelining across workers; a real-time decoder must also "
        "keep its latency bounded).",
        ["decoder", "code", "noise", "d", "p", "shots", "\u00b5s / round", "slowest point", "round (\u00b5s)",
         "verdict"],
        numeric={3, 5, 6, 7, 8}, empty="no decode timings")
    if frame.empty or "decode_seconds" not in frame.columns:
        return table
    groups: dict[tuple[Any, ...], list[dict[str, Any]]] = {}
    for item in _row_dicts(frame):
        shots = _finite(item.get("shots")) or 0.0
        if shots <= 0:
            continue
        device = str(item.get("noise")) == "device"
        round_us = durations.get(str(item.get("key"))) if device else None
        # Device points are compared one scale at a time; other points pool over p.
        key = (str(item.get("decoder", "")), str(item.get("code", "")), str(item.get("noise", "")),
               int(item.get("distance") or 0), str(item.get("noise_options", "")) if device else "",
               float(item.get("p") or 0.0) if device else None, round_us)
        groups.setdefault(key, []).append(item)
    for key in sorted(groups, key=lambda k: (k[0], k[1], k[2], k[4], k[3], k[5] or 0.0)):
        decoder, code, noise, distance, _, _, round_us = key
        items = groups[key]
        seconds = sum(_finite(i.get("decode_seconds")) or 0.0 for i in items)
        shot_rounds = sum((_finite(i.get("shots")) or 0.0) * (_finite(i.get("rounds")) or 0.0) for i in items)
        mean = seconds / shot_rounds * 1e6 if shot_rounds else None
        slowest = max((_finite(i.get("decode_us_per_round")) for i in items), key=lambda v: v or 0.0,
                      default=None)
        rates = sorted({float(i["p"]) for i in items if _finite(i.get("p")) is not None})
        p_text = _g(rates[0]) if len(rates) == 1 else f"{_g(rates[0])}\u2013{_g(rates[-1])}" if rates else "\u2013"
        verdict: Cell = "\u2013"
        if round_us is not None and mean is not None and round_us > 0:
            text = speed_verdict(mean, round_us)
            verdict = Badge(text, "ok" if text == "keeps up" else "bad")
        table.rows.append([decoder, code, noise, str(distance), p_text,
                           _int(sum(_finite(i.get("shots")) or 0.0 for i in items)), _g(mean, 3), _g(slowest, 3),
                           _g(round_us, 4) if round_us is not None else "\u2013", verdict])
    return table


# cautions ------------------------------------------------------------------


def _cautions(report: _Report) -> list[Caution]:
    frame, analysis = report.frame, report.analysis
    out = [Caution("Analysis", problem) for problem in report.problems]
    out.append(_drift_caution(analysis))
    out.append(_extrapolation_caution(analysis))
    out.append(_few_failures_caution(frame))
    incomplete = _incomplete(frame)
    if len(incomplete):
        table = _points_table("incomplete-points", incomplete)
        out.append(Caution("Incomplete points", f"{len(incomplete)} point(s) stopped before their stopping rule "
                           "was met (an interrupted run). Their counts are valid but smaller than planned; run "
                           "the same sweep again on this folder to resume them.", table))
    else:
        out.append(Caution("Incomplete points", "None: every point met its stopping rule.", ok=True))
    return out


def _drift_caution(analysis: dict[str, Any]) -> Caution:
    thresholds = [r for r in analysis.get("thresholds") or [] if isinstance(r, dict)
                  and _finite(r.get("threshold")) is not None]
    if not thresholds:
        return Caution("Finite-size drift of crossings", "No threshold was estimated, so none can drift; the "
                       "notes say why.", ok=True)
    lines = []
    families: dict[str, list[dict[str, Any]]] = {}
    for r in thresholds:
        families.setdefault(_family_text(r), []).append(r)
    for name, records in families.items():
        crossings = sorted((r for r in records if r.get("method") == "crossing"),
                           key=lambda r: min(int(d) for d in r.get("distances") or [0]))
        chosen = chosen_threshold(records)
        parts = [f"d = {'/'.join(str(d) for d in r.get('distances') or [])}: {_g(r['threshold'], 3)}"
                 for r in crossings]
        fss = [r for r in records if r.get("method") == "finite_size_scaling"]
        if fss:
            parts.append(f"FSS: {_g(fss[0]['threshold'], 3)}")
        small = any(min(int(d) for d in r.get("distances") or [0]) <= SMALL_DISTANCE for r in crossings)
        line = f"{name}: " + "; ".join(parts)
        if small:
            line += f" (crossings involving d \u2264 {SMALL_DISTANCE} carry the most finite-size bias)"
        if chosen is not None:
            line += f"; shown in the figures: {_g(chosen['threshold'], 3)}."
        lines.append(line)
    text = ("Curves of small distances do not cross at the asymptotic threshold: the crossing point moves as the "
            "distances grow, by more than its statistical interval when the counts are large. Prefer the "
            "finite-size-scaling estimate or the crossing of the largest distances, and read a gap between "
            "them as a systematic uncertainty.")
    return Caution("Finite-size drift of crossings", text + "\n" + "\n".join(lines))


def _extrapolation_caution(analysis: dict[str, Any]) -> Caution:
    projections = [r for r in analysis.get("projections") or [] if isinstance(r, dict)]
    flagged = [r for r in projections if r.get("extrapolation")]
    if not projections:
        return Caution("Extrapolation beyond the sampled distances", "No projection was made.", ok=True)
    if not flagged:
        return Caution("Extrapolation beyond the sampled distances",
                       "Every projected distance lies within the sampled range.", ok=True)
    table = Table("extrapolated", "", "", ["family", "values of p", "largest fitted d", "projected d",
                                           "projections"], numeric={2, 3, 4})
    by_family: dict[str, list[dict[str, Any]]] = {}
    for r in flagged:
        by_family.setdefault(_family_text(r), []).append(r)
    for name, rows in by_family.items():
        fitted = [int(d) for r in rows for d in r.get("fitted_distances") or []]
        needed = [int(float(r["distance"])) for r in rows if _finite(r.get("distance")) is not None]
        rates = sorted({float(r["p"]) for r in rows if _finite(r.get("p")) is not None})
        table.rows.append([name, ", ".join(_g(p) for p in rates), str(max(fitted)) if fitted else "\u2013",
                           f"{min(needed)} to {max(needed)}" if needed else "\u2013", str(len(rows))])
    text = (f"{len(flagged)} of {len(projections)} projections need distances beyond those sampled. They assume "
            "that \u039b stays what the small distances show and that no new error mechanism (leakage, "
            "correlated or rare large errors) appears at lower rates; measure at least one larger distance "
            "before relying on them.")
    return Caution("Extrapolation beyond the sampled distances", text, table)


def _few_failures_caution(frame: pd.DataFrame) -> Caution:
    if frame.empty or "failures" not in frame.columns:
        return Caution(f"Points with fewer than {FEW_FAILURES} failures", "No points.", ok=True)
    few = frame[pd.to_numeric(frame["failures"], errors="coerce").fillna(0) < FEW_FAILURES]
    if few.empty:
        return Caution(f"Points with fewer than {FEW_FAILURES} failures",
                       f"None: every point has at least {FEW_FAILURES} failures.", ok=True)
    text = (f"{len(few)} point(s) have fewer than {FEW_FAILURES} failures. Their 95% intervals span a factor of "
            "several (at 0 failures only an upper end is known), and the fits weigh them little or leave them "
            "out (0 failures). Raise the shot budget for these points if they matter.")
    return Caution(f"Points with fewer than {FEW_FAILURES} failures", text, _points_table("few-failures", few))


def _points_table(key: str, rows: pd.DataFrame) -> Table:
    table = Table(key, "", "", ["study", "code", "d", "rounds", "basis", "noise", "p", "decoder", "shots",
                                "failures", "per round [95%]"], numeric={2, 3, 6, 8, 9, 10})
    for item in _row_dicts(rows):
        table.rows.append([
            str(item.get("study", "")), str(item.get("code", "")), _int(item.get("distance")),
            _int(item.get("rounds")), str(item.get("basis", "")), str(item.get("noise", "")), _g(item.get("p")),
            str(item.get("decoder", "")), _int(item.get("shots")), _int(item.get("failures")),
            _with_interval(item.get("per_round_rate"), item.get("per_round_low"), item.get("per_round_high"), _e)])
    return table


# HTML ----------------------------------------------------------------------


_CSS = """
:root { --ink: #1f2430; --muted: #5d6472; --line: #e3e1da; --paper: #fbfaf6; --accent: #127a7a;
        --warn: #a76200; --warn-bg: #fff5e2; --bad: #a83232; --bad-bg: #fdeceb; --head: #17303f; }
* { box-sizing: border-box; }
body { margin: 0; background: #efede7; color: var(--ink); font: 15px/1.5 system-ui, sans-serif; }
header { background: var(--head); color: #fff; padding: 26px 0 22px; }
.wrap { max-width: 1260px; margin: 0 auto; padding: 0 32px; }
header .kicker { text-transform: uppercase; letter-spacing: .12em; font-size: 12px; color: #9fd3cf; }
header h1 { margin: 4px 0 6px; font-size: 30px; font-weight: 700; }
header p { margin: 0; color: #c9d4db; }
nav { margin-top: 14px; display: flex; flex-wrap: wrap; gap: 6px; }
nav a { color: #fff; text-decoration: none; font-size: 13px; padding: 3px 10px; border: 1px solid #3e5a6a;
        border-radius: 12px; }
nav a:hover { background: #24485b; }
main { padding-bottom: 48px; }
section { background: #fff; border: 1px solid var(--line); border-radius: 8px; padding: 18px 24px 20px;
          margin: 18px 0; }
h2 { margin: 0 0 12px; font-size: 21px; padding-left: 11px; border-left: 5px solid var(--accent); }
h3 { margin: 20px 0 6px; font-size: 16px; }
p.intro { margin: 2px 0 10px; color: var(--muted); font-size: 14px; }
.cards { display: grid; grid-template-columns: repeat(auto-fit, minmax(170px, 1fr)); gap: 12px; margin: 18px 0; }
.card { background: #fff; border: 1px solid var(--line); border-radius: 8px; padding: 12px 16px;
        border-top: 4px solid var(--accent); }
.card .label { color: var(--muted); font-size: 12px; text-transform: uppercase; letter-spacing: .06em; }
.card .value { font-size: 22px; font-weight: 700; font-variant-numeric: tabular-nums; overflow-wrap: anywhere; }
.card.alert { border-top-color: var(--bad); }
.scroll { overflow-x: auto; }
table { border-collapse: collapse; width: 100%; font-size: 13.5px; font-variant-numeric: tabular-nums; }
th { text-align: left; background: #f1efe8; color: #3a404c; font-weight: 600; white-space: nowrap; }
th, td { padding: 5px 9px; border-bottom: 1px solid var(--line); vertical-align: top; }
td.num { text-align: right; white-space: nowrap; }
tbody tr:nth-child(even) td { background: #faf9f6; }
tr.few td { background: var(--warn-bg) !important; }
tr.incomplete td { background: var(--bad-bg) !important; }
tr.extrapolated td { background: #fffaf0 !important; }
td.empty { color: var(--muted); font-style: italic; }
table.facts th { width: 190px; background: none; color: var(--muted); font-weight: 500; }
.badge { display: inline-block; padding: 0 8px; border-radius: 10px; font-size: 12px; font-weight: 600;
         white-space: nowrap; }
.badge.warn { background: #fbe2b5; color: #6d4100; }
.badge.bad { background: #f6c9c5; color: #7a1f1f; }
.badge.ok { background: #d3ece9; color: #0d5656; }
pre { background: #1f2430; color: #ebe8df; padding: 14px 16px; border-radius: 6px; overflow-x: auto;
      font: 13px/1.45 ui-monospace, monospace; }
ul.notes { margin: 0; padding-left: 20px; }
ul.notes li { margin: 3px 0; }
.figures { display: grid; grid-template-columns: repeat(auto-fill, minmax(560px, 1fr)); gap: 16px; }
figure { margin: 0; border: 1px solid var(--line); border-radius: 8px; padding: 10px 12px; background: #fff; }
figure svg { display: block; width: 100%; height: auto; }
figcaption { font-size: 13px; color: var(--muted); margin-top: 4px; }
figcaption a { color: var(--accent); font-weight: 600; text-decoration: none; margin-left: 6px; }
figcaption .file { color: #8a909b; font-size: 12px; overflow-wrap: anywhere; }
.split { display: grid; grid-template-columns: minmax(0, 1fr) minmax(0, 1fr); gap: 24px; }
.split pre { margin: 0; max-height: 560px; overflow: auto; }
h3.first { margin-top: 0; }
@media (max-width: 900px) { .split { grid-template-columns: 1fr; } }
.caution { border-left: 5px solid var(--warn); background: var(--warn-bg); border-radius: 4px;
           padding: 10px 14px; margin: 12px 0; }
.caution h3 { margin: 0 0 4px; color: #6d4100; }
.caution p { margin: 4px 0; }
.caution table { background: #fff; margin-top: 8px; }
.caution.ok { border-left-color: var(--accent); background: #eef7f6; }
.caution.ok h3 { color: #0d5656; }
footer { color: var(--muted); font-size: 12px; padding: 8px 0 24px; }
"""


def _esc(text: Any) -> str:
    return html.escape(str(text), quote=True)


def _html_cell(cell: Cell) -> str:
    if isinstance(cell, Badge):
        return f'<span class="badge {_esc(cell.kind)}">{_esc(cell.text)}</span>'
    return _esc(cell)


def _html_table(table: Table, css: str = "") -> str:
    head = "".join(f"<th>{_esc(h)}</th>" for h in table.headers)
    body = []
    for i, row in enumerate(table.rows):
        row_css = table.row_classes[i] if i < len(table.rows) and i < len(table.row_classes) else ""
        cells = "".join(
            f'<td class="num">{_html_cell(c)}</td>' if j in table.numeric else f"<td>{_html_cell(c)}</td>"
            for j, c in enumerate(row))
        body.append(f'<tr class="{_esc(row_css)}">{cells}</tr>' if row_css else f"<tr>{cells}</tr>")
    if not body:
        body.append(f'<tr><td class="empty" colspan="{len(table.headers)}">{_esc(table.empty)}</td></tr>')
    klass = f' class="{_esc(css)}"' if css else ""
    return (f'<div class="scroll"><table{klass}><thead><tr>{head}</tr></thead>'
            f'<tbody>{"".join(body)}</tbody></table></div>')


_SVG_OPEN = re.compile(r"<svg\b[^>]*>", re.S)
_METADATA = re.compile(r"\s*<metadata>.*?</metadata>", re.S)


def _inline_svg(path: Path, label: str) -> str:
    """The SVG file as an inline element: no XML prolog, scaled by CSS, labelled for screen readers."""
    text = path.read_text(encoding="utf-8")
    match = _SVG_OPEN.search(text)
    if match is None:
        return ""
    opening = re.sub(r'\s(width|height)="[^"]*"', "", match.group(0))
    opening = opening[:-1].rstrip("/") + f' role="img" aria-label="{_esc(label)}">'
    return opening + _METADATA.sub("", text[match.end():]).strip()


def _png_link(path: Path) -> str:
    data = base64.b64encode(path.read_bytes()).decode("ascii")
    return f'<a download="{_esc(path.name)}" href="data:image/png;base64,{data}">PNG</a>'


_FIGURE_KINDS = (
    ("per_round_vs_p", "Logical error per round against p",
     "One curve per distance; the threshold estimate and the line where the logical error equals the "
     "physical one."),
    ("decoders_vs_p", "Decoders compared", "Colour: distance; line style and marker: decoder."),
    ("lambda_vs_d", "Suppression with distance",
     "At each p with a \u039b fit: the points, the fit, the targets and the distance each needs."),
)


def _html_figures(report: _Report) -> str:
    if not report.figures:
        return ('<p class="intro">No figures: a figure needs a family of points with at least two distances '
                "(see the notes).</p>")
    parts = []
    known = {kind for kind, _, _ in _FIGURE_KINDS}
    kinds = list(_FIGURE_KINDS) + [(k, k, "") for k in sorted({f.kind for f in report.figures} - known)]
    for kind, title, intro in kinds:
        items = []
        for fig in (f for f in report.figures if f.kind == kind):
            items.append(
                f'<figure id="fig-{_esc(fig.stem)}">{_inline_svg(fig.svg, fig.caption)}'
                f"<figcaption>{_esc(fig.caption)} {_png_link(fig.png)}"
                f' <span class="file">{_esc(fig.stem)}.png / .svg</span></figcaption></figure>')
        if items:
            parts.append(f'<h3>{_esc(title)}</h3><p class="intro">{_esc(intro)}</p>'
                         f'<div class="figures">{"".join(items)}</div>')
    return "".join(parts)


def _html_caution(caution: Caution) -> str:
    ok = caution.ok
    paragraphs = "".join(f"<p>{_esc(line)}</p>" for line in caution.text.split("\n") if line)
    table = _html_table(caution.table) if caution.table is not None else ""
    return (f'<div class="caution{" ok" if ok else ""}"><h3>{_esc(caution.title)}</h3>{paragraphs}{table}</div>')


def _html_page(report: _Report) -> str:
    run = report.run
    facts = "".join(
        f'<div class="card{" alert" if label == "incomplete points" and value != "0" else ""}">'
        f'<div class="label">{_esc(label)}</div><div class="value">{_esc(value)}</div></div>'
        for label, value in report.facts())
    run_rows = "".join(f"<tr><th>{_esc(k)}</th><td>{_esc(v)}</td></tr>" for k, v in report.run_rows())
    sweep_text = (f"<pre>{_esc(run.sweep_text)}</pre>" if run.sweep_text.strip()
                  else '<p class="intro">No sweep file text was recorded (the sweep was given as a mapping).</p>')
    fits = "".join(
        f'<h3 id="{_esc(t.key)}">{_esc(t.title)}</h3><p class="intro">{_esc(t.intro)}</p>{_html_table(t)}'
        for t in _fit_tables(report.analysis))
    notes = [str(n) for n in report.analysis.get("notes") or []]
    notes_html = ('<ul class="notes">' + "".join(f"<li>{_esc(n)}</li>" for n in notes) + "</ul>" if notes
                  else '<p class="intro">No notes: every fit that applies was made.</p>')
    cautions = "".join(_html_caution(c) for c in _cautions(report))
    results = _results_table(report.frame)
    speed = report.speed()
    settings = report.analysis.get("settings") or {}
    settings_text = ""
    if settings:
        settings_text = (f"Targets {_list(settings.get('targets'))} per round; {settings.get('bootstrap')} "
                         f"bootstrap resamples (seed {settings.get('seed')}); "
                         f"confidence {settings.get('confidence')}.")
    sections = [
        ("run", "What was run", f'<div class="split"><div><table class="facts">{run_rows}</table></div>'
                                f'<div><h3 class="first">Sweep file</h3>{sweep_text}</div></div>'),
        ("figures", "Figures", _html_figures(report)),
        ("cautions", "Cautions", cautions),
        ("fits", "Fits", f'<p class="intro">{_esc(settings_text)}</p>{fits}'),
        ("notes", "Notes on the fits", notes_html),
        ("speed", speed.title, f'<p class="intro">{_esc(speed.intro)}</p>{_html_table(speed)}'),
        ("results", "Results", f'<p class="intro">{_esc(results.intro)}</p>{_html_table(results)}'),
    ]
    nav = "".join(f'<a href="#{key}">{_esc(title)}</a>' for key, title, _ in sections)
    body = "".join(f'<section id="{key}"><h2>{_esc(title)}</h2>{content}</section>'
                   for key, title, content in sections)
    stamp = _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    subtitle = f"Sweep folder {report.folder.name} \u00b7 seed {run.seed or 'not recorded'} \u00b7 written {stamp}"
    return (
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
        "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n"
        f"<title>codebench report: {_esc(report.title)}</title>\n<style>{_CSS}</style>\n</head>\n<body>\n"
        f'<header><div class="wrap"><div class="kicker">codebench report</div>'
        f"<h1>{_esc(report.title)}</h1><p>{_esc(subtitle)}</p><nav>{nav}</nav></div></header>\n"
        f'<main class="wrap"><div class="cards">{facts}</div>{body}</main>\n'
        f'<footer class="wrap">Written by codebench {_esc(versions().get("codebench", "unknown"))}. '
        "Intervals are 95%. Figures are embedded; the same files are in the figures folder next to this "
        "report.</footer>\n</body>\n</html>\n")


# Markdown ------------------------------------------------------------------


def _md_cell(cell: Cell) -> str:
    text = f"**{cell.text}**" if isinstance(cell, Badge) else str(cell)
    text = text.replace("\\", "\\\\").replace("|", "\\|").replace("\n", " ")
    return text.replace("<", "&lt;").replace(">", "&gt;")


def _md_table(table: Table) -> str:
    if not table.rows:
        return f"_{table.empty}_"
    align = ["---:" if i in table.numeric else "---" for i in range(len(table.headers))]
    lines = ["| " + " | ".join(_md_cell(h) for h in table.headers) + " |", "|" + "|".join(align) + "|"]
    lines += ["| " + " | ".join(_md_cell(c) for c in row) + " |" for row in table.rows]
    return "\n".join(lines)


def _fence(text: str) -> str:
    fence = "~~~" if "```" in text else "```"
    return f"{fence}toml\n{text.rstrip()}\n{fence}"


def _markdown(report: _Report) -> str:
    run = report.run
    out = [f"# codebench report: {report.title}", "", "## What was run", ""]
    out += [f"- **{key}**: {value}" for key, value in report.run_rows()]
    out += ["", "### Sweep file", ""]
    out.append(_fence(run.sweep_text) if run.sweep_text.strip() else "_No sweep file text was recorded._")
    results = _results_table(report.frame)
    out += ["", "## Results", "", results.intro, "", _md_table(results), "", "## Fits", ""]
    for table in _fit_tables(report.analysis):
        out += [f"### {table.title}", "", table.intro, "", _md_table(table), ""]
    out += ["## Notes on the fits", ""]
    notes = [str(n) for n in report.analysis.get("notes") or []]
    out += [f"- {n}" for n in notes] if notes else ["_No notes._"]
    speed = report.speed()
    out += ["", f"## {speed.title}", "", speed.intro, "", _md_table(speed)]
    out += ["", "## Figures", ""]
    if report.figures:
        for fig in report.figures:
            out += [f"![{fig.title}](../figures/{fig.png.name})", "",
                    f"{fig.caption} (`{fig.png.name}`, `{fig.svg.name}`)", ""]
    else:
        out += ["_No figures (a figure needs a family of points with at least two distances)._", ""]
    out += ["## Cautions", ""]
    for caution in _cautions(report):
        out += [f"### {caution.title}", ""]
        out += [line for line in caution.text.split("\n") if line]
        if caution.table is not None:
            out += ["", _md_table(caution.table)]
        out.append("")
    return "\n".join(out).rstrip() + "\n"


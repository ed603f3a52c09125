"""The analysis as text tables for the terminal."""

from __future__ import annotations

from typing import Callable, Protocol, Sequence, TypeVar

from codebench.analysis.comparisons import DecoderComparison
from codebench.analysis.families import DEFAULT_SOURCE, FamilyId
from codebench.analysis.measured import MeasuredComparison
from codebench.analysis.records import (
    FssThreshold,
    LambdaEstimate,
    LambdaPair,
    Projection,
    PseudoThreshold,
    ScalingLaw,
    ThresholdEstimate,
)
from codebench.analysis.result import AnalysisResult

Cell = str | int | float | bool | tuple[object, ...] | None
R = TypeVar("R")
Column = tuple[str, Callable[[R], Cell]]


def _fmt(value: object) -> str:
    if value is None:
        return "-"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        return f"{value:.4g}"
    if isinstance(value, (list, tuple)):
        return ",".join(_fmt(v) for v in value)
    return str(value)


def _table(title: str, records: Sequence[R], columns: Sequence[Column[R]]) -> str:
    lines = [title, "=" * len(title)]
    if not records:
        return "\n".join(lines + ["(none)"])
    rows = [[header for header, _ in columns]]
    rows += [[_fmt(cell(r)) for _, cell in columns] for r in records]
    widths = [max(len(row[i]) for row in rows) for i in range(len(columns))]
    for i, row in enumerate(rows):
        lines.append("  ".join(cell.ljust(w) for cell, w in zip(row, widths)).rstrip())
        if i == 0:
            lines.append("  ".join("-" * w for w in widths))
    return "\n".join(lines)


class _Record(Protocol):
    @property
    def family(self) -> FamilyId: ...


F = TypeVar("F", bound=_Record)


def _family(extra: Sequence[Column[F]]) -> list[Column[F]]:
    """The family's columns, then ``extra``."""
    columns: list[Column[F]] = [
        ("code", lambda r: r.family.code), ("basis", lambda r: r.family.basis), ("noise", lambda r: r.family.noise),
        ("decoder", _decoder), ("rounds", lambda r: r.family.rounds),
    ]
    return columns + list(extra)


def _decoder(r: F) -> str:
    """The family's decoder, marked ``[measured]`` for a family of measured points."""
    family = r.family
    return family.decoder if family.source == DEFAULT_SOURCE else f"{family.decoder} [{family.source}]"


def _nu(r: ThresholdEstimate) -> float | None:
    return r.nu if isinstance(r, FssThreshold) else None


def _window(r: ThresholdEstimate) -> tuple[float, float] | None:
    return r.window if isinstance(r, FssThreshold) else None


def _gof(r: ThresholdEstimate) -> float | None:
    return r.gof_p_value if isinstance(r, FssThreshold) else None


def _comparison_columns() -> list[Column[DecoderComparison]]:
    return [
        ("study", lambda r: r.study), ("code", lambda r: r.code), ("d", lambda r: r.distance),
        ("basis", lambda r: r.basis), ("noise", lambda r: r.noise), ("p", lambda r: r.p),
        ("first", lambda r: r.first), ("second", lambda r: r.second), ("shots", lambda r: r.shots),
        ("failures 1st", lambda r: r.first_failures), ("failures 2nd", lambda r: r.second_failures),
        ("both", lambda r: r.both),
        ("only 1st", lambda r: r.first_only), ("only 2nd", lambda r: r.second_only),
        ("difference", lambda r: r.difference), ("95% low", lambda r: r.low), ("95% high", lambda r: r.high),
        ("unpaired low", lambda r: r.unpaired_low), ("unpaired high", lambda r: r.unpaired_high),
        ("narrower by", lambda r: r.narrowing), ("McNemar p", lambda r: r.mcnemar_p)]


def analysis_table(result: AnalysisResult) -> str:
    """All sections of an :func:`~codebench.analysis.analyze` result, one table each."""
    thresholds: list[Column[ThresholdEstimate]] = _family([
        ("method", lambda r: r.method), ("distances", lambda r: r.distances), ("threshold", lambda r: r.threshold),
        ("95% low", lambda r: r.low), ("95% high", lambda r: r.high), ("nu", _nu), ("window", _window),
        ("GOF p", _gof)])
    pseudo: list[Column[PseudoThreshold]] = _family([
        ("d", lambda r: r.distance), ("pseudo-threshold", lambda r: r.pseudo_threshold), ("95% low", lambda r: r.low),
        ("95% high", lambda r: r.high)])
    lambdas: list[Column[LambdaEstimate]] = _family([
        ("p", lambda r: r.p), ("distances", lambda r: r.distances), ("Lambda", lambda r: r.lam),
        ("95% low", lambda r: r.low), ("95% high", lambda r: r.high),
        ("near threshold", lambda r: "yes" if r.near_threshold else "")])
    pairs: list[Column[LambdaPair]] = _family([
        ("p", lambda r: r.p), ("distances", lambda r: r.distances), ("Lambda", lambda r: r.lam),
        ("95% low", lambda r: r.low), ("95% high", lambda r: r.high)])
    laws: list[Column[ScalingLaw]] = _family([
        ("A", lambda r: r.A), ("A low", lambda r: r.A_low), ("A high", lambda r: r.A_high), ("p_th", lambda r: r.p_th),
        ("p_th low", lambda r: r.p_th_low), ("p_th high", lambda r: r.p_th_high)])
    projections: list[Column[Projection]] = _family([
        ("p", lambda r: r.p), ("target/round", lambda r: r.target), ("d", lambda r: r.distance),
        ("qubits", lambda r: r.qubits), ("d range", lambda r: (r.distance_low, r.distance_high)),
        ("extrapolated", lambda r: r.extrapolation), ("fitted d", lambda r: r.fitted_distances)])
    sections = [
        _table("Thresholds (quantity: failure probability of the whole memory experiment)", result.thresholds,
               thresholds),
        _table("Pseudo-thresholds (p at which the per-round logical error equals p)", result.pseudo_thresholds,
               pseudo),
        _table("Lambda (eps_d = C / Lambda^((d+1)/2), per-round rates)", result.lambdas, lambdas),
        _table("Lambda between consecutive distances", result.lambda_pairs, pairs),
        _table("Scaling law (eps = A (p / p_th)^((d+1)/2))", result.scaling_laws, laws),
        _table("Projections (from the Lambda fit; extrapolated beyond the fitted distances where marked)",
               result.projections, projections),
    ]
    if result.measured:
        measured: list[Column[MeasuredComparison]] = [
            ("study", lambda r: r.study), ("code", lambda r: r.code), ("d", lambda r: r.distance),
            ("rounds", lambda r: r.rounds), ("basis", lambda r: r.basis), ("noise", lambda r: r.noise),
            ("p", lambda r: r.p), ("decoder", lambda r: r.decoder), ("shots", lambda r: r.shots),
            ("measured/round", lambda r: r.per_round), ("95% low", lambda r: r.per_round_low),
            ("95% high", lambda r: r.per_round_high), ("simulated/round", lambda r: r.simulated_per_round),
            ("95% low", lambda r: r.simulated_low), ("95% high", lambda r: r.simulated_high),
            ("measured/simulated", lambda r: r.ratio)]
        sections.append(_table("Measured beside simulated (per-round logical error; source = measured)",
                               result.measured, measured))
    if result.decoder_comparisons:
        sections.append(_table(
            "Decoders on the same shots (failure probability of the whole experiment, first minus second; "
            "paired 95% interval, Newcombe 1998, beside the interval without pairing)",
            result.decoder_comparisons, _comparison_columns()))
    if result.notes:
        sections.append("Notes\n=====\n" + "\n".join(f"- {n}" for n in result.notes))
    return "\n\n".join(sections)

"""Device forecasts (codebench.forecast) against outside references.

References used below:

* Tomita & Svore, PRA 90, 062320 (2014), Eqs. 9-10: the Pauli-twirled
  amplitude and phase damping channel over an idle of t, px = py =
  (1 - e^(-t/T1)) / 4, pz = (1 - e^(-t/T2)) / 2 - (1 - e^(-t/T1)) / 4.
* Acharya et al., Nature 638, 920 (2025), Eq. 1: eps_d = C / Lambda^((d+1)/2);
  with two distances d and d + 2, Lambda = eps_d / eps_(d+2).
* Wilson, JASA 22, 209 (1927): the score interval of a binomial proportion.
* Acharya et al., Nature 614, 676 (2023): the per-round rate
  eps = (1 - (1 - 2 P)^(1/r)) / 2 of a failure probability P over r rounds.
* Common practice: the rotated surface code of distance d uses d^2 data and
  d^2 - 1 measure qubits; a CZ-compiled syndrome round is a reset layer, five
  one-qubit (Hadamard) layers around four two-qubit layers, and a measurement
  layer; a what-if that halves every two-qubit gate error lowers the logical
  error; a device below threshold has Lambda > 1.
* Statistical agreement: two independent estimates agree when their 95%
  intervals overlap and their log difference is within 1.96 combined
  standard errors (common practice).
"""

from __future__ import annotations

import json
import math
import time
from dataclasses import replace
from pathlib import Path
from types import SimpleNamespace
from typing import Any

import pytest

from codebench.cli import main
from codebench.errors import ConfigError, DeviceFileError, RunFault
from codebench.forecast import (
    CAUTIONS,
    forecast,
    idle_error,
    improve_device,
    parse_improve,
)
from codebench.forecast.details import ExtrapolatedDetails, StratifiedDetails
from codebench.forecast.plan import WORK_PER_SECOND
from codebench.forecast.result import DistanceForecast, ForecastResult, LambdaSummary
from codebench.noise.calibration import load_device

ROOT = Path(__file__).resolve().parents[1]
DEVICES = ROOT / "configs" / "devices"
CURRENT = DEVICES / "larkspur_current.toml"
IMPROVED = DEVICES / "larkspur_improved.toml"
GOAL = DEVICES / "larkspur_goal.toml"
Z95 = 1.959963984540054


def wilson(k: int, n: int) -> tuple[float, float]:
    """Wilson, JASA 22, 209 (1927), written out here independently of codebench.stats."""
    z = Z95
    phat = k / n
    denom = 1 + z * z / n
    centre = (phat + z * z / (2 * n)) / denom
    half = z * math.sqrt(phat * (1 - phat) / n + z * z / (4 * n * n)) / denom
    return centre - half, centre + half


def per_round(total: float, rounds: int) -> float:
    """Acharya et al., Nature 614, 676 (2023): per-round rate from the failure probability."""
    return (1 - (1 - 2 * total) ** (1 / rounds)) / 2


def tomita_svore_idle(t_us: float, t1_us: float, t2_us: float) -> float:
    """Tomita & Svore, PRA 90, 062320 (2014), Eqs. 9-10: px + py + pz."""
    px = (1 - math.exp(-t_us / t1_us)) / 4
    pz = (1 - math.exp(-t_us / t2_us)) / 2 - (1 - math.exp(-t_us / t1_us)) / 4
    return 2 * px + pz


@pytest.fixture(scope="module")
def improved(tmp_path_factory: pytest.TempPathFactory) -> tuple[ForecastResult, Path]:
    out = tmp_path_factory.mktemp("forecast-improved")
    return forecast(IMPROVED, distances=(3, 5), work=2e9, workers=2, out=out), out


# --- the result: keys, types, files --------------------------------------------------------------


def test_json_keys_and_types(improved: tuple[ForecastResult, Path]) -> None:
    """The keys the issue lists, with their types; plain JSON without NaN (common practice)."""
    result = improved[0].to_json()
    json.dumps(result, allow_nan=False)
    for key, kind in (("device", str), ("code", str), ("basis", str), ("decoder", str),
                      ("round_duration_us", float), ("distances", list), ("lambda", float),
                      ("lambda_low", float), ("lambda_high", float), ("targets", list), ("break_even", dict)):
        assert isinstance(result[key], kind), key
    assert result["device"] == "Larkspur Aster-2 (improved)"
    assert (result["code"], result["basis"], result["decoder"]) == ("rotated_surface", "Z", "mwpm")
    for row in result["distances"]:
        assert isinstance(row["distance"], int) and isinstance(row["qubits"], int)
        for key in ("per_round_rate", "low", "high"):
            assert isinstance(row[key], float), key
        assert isinstance(row["method"], str) and row["method_kind"] in ("direct", "extrapolated", "stratified")
        assert row["low"] <= row["per_round_rate"] <= row["high"]
    assert [r["distance"] for r in result["distances"]] == [3, 5]
    for target in result["targets"]:
        assert set(target) >= {"target", "distance", "qubits"}
        assert isinstance(target["distance"], int) and isinstance(target["qubits"], int)
    assert result["lambda_low"] <= result["lambda"] <= result["lambda_high"]
    assert result["cautions"] == list(CAUTIONS)


def test_files_written(improved: tuple[ForecastResult, Path]) -> None:
    """--out writes the JSON (the same dict), a CSV with one row per distance, and the figure."""
    result, out = improved
    assert json.loads((out / "forecast.json").read_text()) == result.to_json()
    lines = (out / "forecast.csv").read_text().strip().splitlines()
    assert len(lines) == 1 + len(result.distances) and lines[0].startswith("distance,qubits,")
    assert (out / "forecast.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert b"<svg" in (out / "forecast.svg").read_bytes()[:2000]
    assert (out / "store" / "results.sqlite").is_file()


def test_qubits_and_round_duration(improved: tuple[ForecastResult, Path]) -> None:
    """2 d^2 - 1 qubits; a round of the improved device is 200 + 5 * 20 + 4 * 35 + 400 = 840 ns (common practice)."""
    result, _ = improved
    assert [r.qubits for r in result.distances] == [17, 49]
    assert result.round_duration_us == pytest.approx(0.840, abs=1e-12)
    for row in result.distances:
        assert row.per_second_rate == pytest.approx(row.per_round_rate / 0.840e-6, rel=1e-12)


def test_current_device_round_duration() -> None:
    """The current device: reset 250 + 5 x 25 + 4 x 40 + measure 600 = 1135 ns (common practice)."""
    from codebench.build import family_ideal_circuit
    from codebench.codes import get_code_family
    from codebench.noise.device import DeviceNoise

    model = DeviceNoise(1.0, device=load_device(CURRENT).canonical_json())
    ideal = family_ideal_circuit(get_code_family("rotated_surface"), model, 5, 5, "Z")
    assert model.round_duration_ns(ideal) == pytest.approx(1135.0)


def test_direct_interval_is_wilson(improved: tuple[ForecastResult, Path]) -> None:
    """A direct estimate is k / n over d rounds with the Wilson interval mapped per round (Wilson 1927)."""
    result, _ = improved
    for row in result.distances:
        assert row.method == "direct"
        k, n, r = row.failures, row.shots, row.distance
        low, high = wilson(k, n)
        assert row.per_round_rate == pytest.approx(per_round(k / n, r), rel=1e-9)
        assert row.low == pytest.approx(per_round(low, r), rel=1e-9)
        assert row.high == pytest.approx(per_round(high, r), rel=1e-9)


def test_lambda_of_two_distances(improved: tuple[ForecastResult, Path]) -> None:
    """Two distances: the fit is exact, Lambda = eps_3 / eps_5 (Acharya et al. 2025, Eq. 1); > 1 below threshold."""
    result, _ = improved
    eps3, eps5 = (r.per_round_rate for r in result.distances)
    assert result.lam == pytest.approx(eps3 / eps5, rel=1e-9)
    assert result.lam_low > 1.0


def test_targets_follow_the_lambda_model(improved: tuple[ForecastResult, Path]) -> None:
    """Smallest odd d >= 3 with C / Lambda^((d+1)/2) <= target (Acharya et al. 2025, Eq. 1), 2 d^2 - 1 qubits."""
    result, _ = improved
    c, lam = result.lambda_fit.C, result.lam
    for target in result.targets:
        d = next(d for d in range(3, 1002, 2) if c / lam ** ((d + 1) / 2) <= target.target)
        assert target.distance == d
        assert target.qubits == 2 * d * d - 1
        assert target.extrapolation is (d > 5)


def test_break_even_matches_the_idle_formula(improved: tuple[ForecastResult, Path]) -> None:
    """p_idle over one round from T1, T2 (Tomita & Svore 2014, Eqs. 9-10); verdicts follow from it."""
    result, _ = improved
    be = result.break_even
    expected = tomita_svore_idle(0.840, 200.0, 180.0)  # the improved device lists no qubits: its defaults
    assert be.idle_error_best == pytest.approx(expected, rel=1e-12)
    assert be.idle_error_median == pytest.approx(expected, rel=1e-12)
    for row, entry in zip(result.distances, be.distances):
        eps = row.per_round_rate
        assert entry.beats_best is (eps < expected)
        want = "beats the best idle qubit" if eps < expected else "does not"
        assert entry.verdict == want


def test_break_even_best_and_median_over_listed_qubits() -> None:
    """Over the current device's 17 listed qubits: the best and the median idle error (Tomita & Svore 2014)."""
    device = load_device(CURRENT)
    round_us = 1.135
    values = sorted(tomita_svore_idle(round_us, q.t1_us, q.t2_us) for q in device.qubits.values())
    assert len(values) == 17
    assert min(values) == pytest.approx(idle_error(round_us, 140.0, 150.0), rel=1e-12)  # qubit m6
    from codebench.forecast.breakeven import break_even as _break_even

    be = _break_even(device, round_us, [SimpleNamespace(distance=3, per_round_rate=7e-3, high=8e-3)])
    assert be.best_qubit == "m6"
    assert be.idle_error_best == pytest.approx(values[0], rel=1e-12)
    assert be.idle_error_median == pytest.approx(values[8], rel=1e-12)
    assert values[0] < 7e-3 < values[8]
    assert be.distances[0].verdict == "beats the median idle qubit"


# --- direct against extrapolated ----------------------------------------------------------------


def _agree(a: DistanceForecast, b: DistanceForecast) -> None:
    assert a.low <= b.high and b.low <= a.high, (a, b)
    se_a = (math.log(a.high) - math.log(a.low)) / (2 * Z95)
    se_b = (math.log(b.high) - math.log(b.low)) / (2 * Z95)
    z = abs(math.log(a.per_round_rate) - math.log(b.per_round_rate)) / math.hypot(se_a, se_b)
    assert z <= Z95, (a.per_round_rate, b.per_round_rate, z)


@pytest.mark.parametrize("device, budget", [(IMPROVED, 8.0), (GOAL, 12.0)], ids=["improved", "goal"])
def test_direct_and_extrapolated_agree_at_d3(device: Path, budget: float) -> None:
    """d = 3, where both are feasible: sampled at s = 1 and extrapolated from s = 2..5.7 agree (common practice)."""
    direct = forecast(device, distances=(3, 5), method={3: "direct"}, work=budget * WORK_PER_SECOND, workers=2)
    extrapolated = forecast(device, distances=(3, 5), method={3: "extrapolated"}, work=budget * WORK_PER_SECOND,
                            workers=2)
    a, b = direct.distances[0], extrapolated.distances[0]
    assert a.method == "direct" and b.method.startswith("extrapolated (power law over scales 2-5.65685")
    assert isinstance(b.details, ExtrapolatedDetails)
    assert b.details.scales == (2.0, 2.828427, 4.0, 5.656854)
    _agree(a, b)
    # The fitted exponent is near the number of faults of a minimum-weight logical error, (d + 1) / 2 = 2.
    assert b.details.exponent is not None and abs(b.details.exponent - 2.0) < 0.35


@pytest.mark.slow
def test_direct_and_extrapolated_agree_at_d5_goal() -> None:
    """d = 5 on the goal device: direct needs minutes, extrapolated seconds; they agree (common practice)."""
    direct = forecast(GOAL, distances=(3, 5), method={3: "direct", 5: "direct"}, work=300 * WORK_PER_SECOND,
                      workers=2)
    extrapolated = forecast(GOAL, distances=(3, 5), method={5: "extrapolated"}, work=30 * WORK_PER_SECOND, workers=2)
    a, b = direct.distances[1], extrapolated.distances[1]
    assert a.failures >= 100
    _agree(a, b)


# --- what-ifs ------------------------------------------------------------------------------------


def test_improve_device_scales_every_entry() -> None:
    """Defaults, per-qubit, per-pair and conditional readout values all scale; 1/T scales for T1/T2."""
    base = load_device(CURRENT)
    better = improve_device(base, {"gate_2q_error": 0.5, "t1_us": 0.5, "readout_error": 0.5})
    assert better.gate_2q_error == pytest.approx(3.5e-3)
    assert set(better.pairs) == set(base.pairs)
    for pair, value in base.pairs.items():
        assert better.pairs[pair] == pytest.approx(value / 2)
    for qid, cal in base.qubits.items():
        assert better.qubits[qid].t1_us == pytest.approx(2 * cal.t1_us)
        assert better.qubits[qid].t2_us == pytest.approx(cal.t2_us)
        assert better.qubits[qid].readout_error == pytest.approx(cal.readout_error / 2)
    assert better.defaults.t1_us == pytest.approx(200.0)
    assert parse_improve("gate_2q_error=0.5") == ("gate_2q_error", 0.5)
    for bad in ("gate_2q_error", "t3_us=0.5", "gate_2q_error=0", "gate_2q_error=-1", "gate_2q_error=x"):
        with pytest.raises(ConfigError):
            parse_improve(bad)
    with pytest.raises(DeviceFileError):
        improve_device(base, {"readout_error": 40.0})


def _cli_json(args: list[str], capsys: pytest.CaptureFixture[str]) -> dict[str, Any]:
    assert main(args) == 0
    out: dict[str, Any] = json.loads(capsys.readouterr().out)
    return out


def test_improve_lowers_the_logical_error(capsys: pytest.CaptureFixture[str]) -> None:
    """Halving every two-qubit gate error lowers the per-round rate beyond both intervals (common practice)."""
    common = ["forecast", str(CURRENT), "--distances", "3,5", "--work", "1.5e9", "--workers", "2",
              "--quiet", "--format", "json"]
    base = _cli_json(common, capsys)
    better = _cli_json(common + ["--improve", "gate_2q_error=0.5"], capsys)
    assert better["improve"] == {"gate_2q_error": 0.5}
    for a, b in zip(base["distances"], better["distances"]):
        assert b["high"] < a["low"], (a, b)
    assert better["lambda"] > base["lambda"]


# --- budget --------------------------------------------------------------------------------------


def test_short_budget_still_answers_every_distance() -> None:
    """A short budget on the goal device still gives every distance a number and a method.

    (Wall time against the budget is measured by scripts/bench_forecast.py, not asserted here:
    tests never assert on wall-clock time.)
    """
    result = forecast(GOAL, distances=(3, 5, 7), budget_seconds=6.0, workers=2)
    assert [r.distance for r in result.distances] == [3, 5, 7]
    assert all(r.method for r in result.distances)
    json.dumps(result.to_json(), allow_nan=False)


@pytest.mark.slow
def test_bench_goal_current_device() -> None:
    """scripts/bench_forecast.py's precision goal: Lambda within +-15% on the current device (its time is benched there)."""
    result = forecast(CURRENT, distances=(3, 5, 7), work=60 * WORK_PER_SECOND, workers=2)
    lam = result.lam
    assert max(result.lam_high - lam, lam - result.lam_low) / lam <= 0.15


# --- command-line errors -------------------------------------------------------------------------


@pytest.mark.parametrize("extra", [
    ["--distances", "3,4"],
    ["--distances", "3"],
    ["--distances", "a,b"],
    ["--code", "toric"],
    ["--decoder", "belief"],
    ["--basis", "Y"],
    ["--improve", "gate_2q_error"],
    ["--improve", "t3_us=0.5"],
    ["--improve", "gate_2q_error=0"],
    ["--improve", "gate_2q_error=-2"],
    ["--improve", "readout_error=40"],
    ["--budget-seconds", "0"],
    ["--budget-seconds", "-3"],
    ["--budget-seconds", "soon"],
    ["--target", "0.7"],
    ["--workers", "0"],
    ["--method", "guess"],
    ["--work", "0"],
    ["--work", "lots"],
    ["--work", "1e30"],
    ["--budget-seconds", "1e9"],
    ["--basis", "Z,Z"],
])
def test_cli_bad_input_exits_2_with_one_line(extra: list[str], capsys: pytest.CaptureFixture[str]) -> None:
    """Bad input: exit status 2 and one line on standard error (the project's CLI rule)."""
    assert main(["forecast", str(CURRENT), *extra]) == 2
    captured = capsys.readouterr()
    assert captured.out == ""
    lines = captured.err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("codebench: "), captured.err


def test_cli_bad_device_files(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """A missing file, a file that is not TOML, T2 > 2 T1, and --out naming a file: exit 2, one line."""
    broken = tmp_path / "broken.toml"
    broken.write_text("name = [\n")
    bad = tmp_path / "bad.toml"
    bad.write_text(CURRENT.read_text().replace("t2_us = 85.0", "t2_us = 250.0", 1))
    not_a_folder = tmp_path / "file.txt"
    not_a_folder.write_text("x")
    for args in (["forecast", str(tmp_path / "missing.toml")], ["forecast", str(broken)], ["forecast", str(bad)],
                 ["forecast", str(CURRENT), "--out", str(not_a_folder)]):
        assert main(args) == 2
        lines = capsys.readouterr().err.strip().splitlines()
        assert len(lines) == 1 and lines[0].startswith("codebench: "), lines


# --- determinism, defaults, bases ----------------------------------------------------------------


def _numbers(result: ForecastResult) -> list[Any]:
    """Every planned or estimated number (not the timings) of a forecast."""
    keys = ("distance", "per_round_rate", "low", "high", "method", "shots", "failures", "w_sampled", "spectrum")
    return [[row.to_json().get(k) for k in keys] for row in result.distances] + [result.lam, result.targets]


def _busy(seconds: float) -> None:
    end = time.monotonic() + seconds
    while time.monotonic() < end:
        pass


def test_same_numbers_on_a_busy_machine_and_any_worker_count() -> None:
    """The plan reads counts and counted work only: a CPU-bound process beside it, or 1 worker instead of 2,
    changes no number (the issue's determinism requirement; seeds fixed, so exact equality)."""
    import multiprocessing

    args = dict(distances=(3, 5), work=6e8, seed=3)
    quiet = forecast(GOAL, workers=2, **args)  # type: ignore[arg-type]
    hog = multiprocessing.get_context("spawn").Process(target=_busy, args=(120.0,))
    hog.start()
    try:
        busy = forecast(GOAL, workers=2, **args)  # type: ignore[arg-type]
    finally:
        hog.terminate()
        hog.join()
    single = forecast(GOAL, workers=1, **args)  # type: ignore[arg-type]
    assert _numbers(quiet) == _numbers(busy) == _numbers(single)
    assert any(r.method_kind == "stratified" for r in quiet.distances)


def test_heavy_hex_defaults_to_flag_matching() -> None:
    """heavy_hex needs its flags decoded: its default decoder is flag_matching, and on the improved device the
    forecast is below threshold (Lambda > 1), as the flag-qubit heavy-hexagon code should be at 1e-3 two-qubit
    error (Chamberland et al., PRX 10, 011022 (2020), from memory: threshold near 0.45% for circuit noise)."""
    result = forecast(IMPROVED, code="heavy_hex", distances=(3, 5), work=1.5e9, workers=2)
    assert result.decoder == "flag_matching"
    assert result.lam is not None and result.lam > 1
    assert forecast(IMPROVED, code="rotated_surface", distances=(3, 5), work=1e8, workers=1).decoder == "mwpm"


def test_both_bases_and_the_logical_qubit() -> None:
    """--basis both: each basis forecast; the logical qubit fails when either does, 1 - (1 - eZ)(1 - eX)
    (independent bases, common practice)."""
    result = forecast(IMPROVED, distances=(3, 5), basis="both", work=1e9, workers=2)
    assert result.bases == ("Z", "X") and result.basis == "Z,X" and result.per_basis is not None
    for i, row in enumerate(result.distances):
        z = result.per_basis["Z"][i].per_round_rate
        x = result.per_basis["X"][i].per_round_rate
        assert z is not None and x is not None and row.method_kind == "combined"
        assert row.per_round_rate == pytest.approx(1 - (1 - z) * (1 - x), rel=1e-12)
        assert row.low <= row.per_round_rate <= row.high


def test_no_target_distance_when_lambda_is_not_constant() -> None:
    """Near threshold (Lambda interval reaching 1) the targets get no distance and say why (issue requirement)."""
    from codebench.forecast.estimators import targets

    fit = LambdaSummary(lam=1.05, lam_low=0.9, lam_high=1.2, C=0.05, log_cov=((0.01, 0.0), (0.0, 0.01)),
                        distances=(3, 5, 7), chi2=0.1, dof=1, inflation=1.0, consistency_p=0.5)
    rows = targets("rotated_surface", fit, [1e-9], 7)
    assert rows[0].distance is None and "reaches 1" in str(rows[0].not_projected)
    fit = replace(fit, lam=3.0, lam_low=2.5, lam_high=3.5, consistency_p=1e-4, chi2=15.0)
    rows = targets("rotated_surface", fit, [1e-9], 7)
    assert rows[0].distance is None and "disagree" in str(rows[0].not_projected)


def test_improve_noise_reuses_the_f_of_w_table(tmp_path: Path) -> None:
    """Scaling every error together keeps the odds proportional: the what-if reuses the stored exactly-w
    batches (the conditional law given w depends on the odds only up to a common factor; see
    codebench.engine.fault_sampling). A single-parameter what-if changes the mix and draws a new table."""
    base = forecast(GOAL, distances=(5, 7), work=4e8, workers=2, out=tmp_path, method="stratified")
    scaled = forecast(GOAL, distances=(5, 7), work=4e8, workers=2, out=tmp_path, method="stratified",
                      improve={"noise": 0.8})
    for a, b in zip(base.distances, scaled.distances):
        assert isinstance(b.details, StratifiedDetails)
        assert b.details.table_reused_from == "Larkspur Aster-X (goal)"
        assert b.shots >= a.shots
        assert b.per_round_rate < a.per_round_rate
    other = forecast(GOAL, distances=(5, 7), work=4e8, workers=2, out=tmp_path, method="stratified",
                     improve={"gate_2q_error": 0.5})
    assert all(isinstance(r.details, StratifiedDetails) and r.details.table_reused_from is None
               for r in other.distances)


def test_hard_time_limit_is_reported(monkeypatch: pytest.MonkeyPatch) -> None:
    """Past the hard limit sampling stops, and the forecast names what was cut short (no silent method change)."""
    from codebench.forecast.sampling import Sampler

    pilot = Sampler.run

    def run_then_expire(self: Sampler, *args: Any, **kwargs: Any) -> Any:
        out = pilot(self, *args, **kwargs)
        self.budget.deadline = 0.0  # the hard limit falls right after the pilot
        return out

    monkeypatch.setattr(Sampler, "run", run_then_expire)
    result = forecast(IMPROVED, distances=(3, 5), budget_seconds=5.0, workers=2)
    assert result.budget.hard_limit_reached
    assert all(any("cut short" in f for f in r.flags) for r in result.distances)
    assert all(r.shots > 0 for r in result.distances)  # the pilot's counts are kept
    assert any("hard time limit" in n for n in result.notes)


def test_a_forecast_that_sampled_nothing_says_so(monkeypatch: pytest.MonkeyPatch) -> None:
    import codebench.forecast.plan as plan

    monkeypatch.setattr(plan, "HARD_LIMIT", 0.0)
    with pytest.raises(RunFault, match="before any distance was sampled.*--budget-seconds"):
        forecast(IMPROVED, distances=(3, 5), budget_seconds=5.0, workers=2)


def test_near_threshold_targets_are_not_projected_far() -> None:
    """Lambda = 1.23 [1.18, 1.28] from d <= 7 (the current example device) does not support d = 167 for 1e-9:
    near threshold Lambda drifts with d (common practice); close targets are still projected."""
    from codebench.forecast.estimators import targets

    fit = LambdaSummary(lam=1.228, lam_low=1.18, lam_high=1.279, C=0.0263, log_cov=((0.01, 0.004), (0.004, 0.0004)),
                        distances=(3, 5, 7), chi2=0.95, dof=1, inflation=1.0, consistency_p=0.33)
    far, near = targets("rotated_surface", fit, [1e-9, 1.5e-2], 7)
    assert far.distance is None and "near threshold" in str(far.not_projected)
    assert near.distance is not None and near.distance <= 14 and near.not_projected is None


def _fits_a_review_window(page: Path, work: Path) -> None:
    """The forecast page's tables and figures fit at 1280 px (see tests/test_report_layout.py), where Chromium is."""
    import test_report_layout as layout

    if layout.SCRIPT.find_chromium() is None:
        return
    result = layout.measure(page, work)
    assert result["overflows"] == [], "\n".join(result["overflows"])


def test_report_of_a_forecast_folder_and_of_a_sweep_folder_holding_one(
        improved: tuple[ForecastResult, Path], tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """`codebench report` on a forecast's --out folder writes its own page (tables, figure, cautions,
    break-even); a sweep folder holding forecast folders gets their sections on its page."""
    import shutil

    from codebench.api import run_sweep
    from codebench.cli import main

    result, out = improved
    assert main(["report", str(out)]) == 0
    page = (out / "report" / "index.html").read_text(encoding="utf-8")
    for text in ("Logical error per round by distance", "Distance and qubits for each target",
                 "Break-even against an idle qubit", "Forecast cautions and notes", "<svg"):
        assert text in page
    assert f"{result.distances[0].per_round_rate:.3e}" in page
    assert "Break-even" in (out / "report" / "summary.md").read_text(encoding="utf-8")
    _fits_a_review_window(out / "report" / "index.html", tmp_path / "layout")
    sweep = tmp_path / "sweep"
    run_sweep({"name": "with-forecast", "seed": 2, "stopping": {"shot_budget": 2000},
               "study": [{"code": "repetition", "distances": [3, 5], "rounds": "d", "noise": "si1000",
                          "p": [0.01], "decoders": ["mwpm"]}]}, out=sweep, workers=1, progress=False)
    shutil.copytree(out, sweep / "forecast-improved", ignore=shutil.ignore_patterns("store", "report"))
    assert main(["report", str(sweep), "--bootstrap", "20"]) == 0
    combined = (sweep / "report" / "index.html").read_text(encoding="utf-8")
    assert 'id="forecast-1"' in combined and "Break-even against an idle qubit" in combined
    capsys.readouterr()

"""Belief-propagation decoders, plug-in decoders, decoder options and decode timing.

Outside references, each named beside its check:
- exact code-capacity failure probabilities of minimum-weight decoding (an
  enumeration of all 2^9 errors of the d = 3 rotated surface code, done here;
  the binomial tail for the repetition code, Nielsen & Chuang ch. 10);
- BP+OSD as a near-minimum-weight decoder for quantum codes (Roffe, White,
  Burton, Campbell, Phys. Rev. Research 2, 043423 (2020); Panteleev &
  Kalachev, Quantum 5, 585 (2021)); BP+LSD runs OSD on clusters (Hillmann et
  al., arXiv:2406.18655 (2024), from memory);
- distance 3 corrects every single fault (common practice).
Monte Carlo checks use fixed seeds and 99.9% intervals.
"""

from __future__ import annotations

import math
import pickle
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import plugin_decoder
import pytest
import stim
from scipy.stats import binomtest
from test_code_capacity_exact import exact_bounds

from codebench.api import run_sweep
from codebench.build import noisy_circuit
from codebench.config import load_sweep
from codebench.decoders import DECODERS, get_decoder
from codebench.decoders.base import Decoder, OptionSpec
from codebench.decoders.belief import BeliefLSD, BeliefOSD, check_matrices
from codebench.decoders.plugins import load_decoder
from codebench.errors import ConfigError, DecoderError
from codebench.records import Point
from codebench.report import speed_table, write_report
from codebench.results.export import decode_us_per_round, speed_verdict
from codebench.testing import check_decoder, decoder_checks, run_decoder_check

ALPHA = 0.001  # two-sided: 99.9% intervals
NEVER = 10**9  # failure_target large enough that the shot budget decides
REPO = Path(__file__).parents[1]
BELIEF = ["bposd", "bplsd"]
#: The plug-in as a sweep file names it (the module is importable as tests put it on sys.path).
PLUGIN = f"{plugin_decoder.__name__}:SingleFaultLookup"


def sweep(tmp_path: Path, name: str, studies: list[dict[str, Any]], shots: int, seed: int,
          workers: int = 1) -> pd.DataFrame:
    config = {"name": name, "seed": seed, "stopping": {"failure_target": NEVER, "shot_budget": shots},
              "study": studies}
    frame = run_sweep(config, out=tmp_path / name, workers=workers, progress=False)
    assert (frame["shots"] == shots).all()
    return frame


# ---------------------------------------------------------------------------
# Exact references.
# Rotated surface code d = 3, code capacity: all 2^9 flip patterns, minimum-weight
# decoding per syndrome (the definition of a minimum-weight decoder, Dennis, Kitaev,
# Landahl, Preskill, J. Math. Phys. 43, 4452 (2002), Sec. IV). The same enumeration as
# tests/test_code_capacity_exact.py, which shows there are no ties between logical
# classes at d = 3, so the minimum-weight failure probability is one number.


def surface_d3_exact(basis: str, p: float) -> float:
    best, worst = exact_bounds(basis, p)
    assert best == worst  # no tie between logical classes at d = 3
    return best


def repetition_exact(d: int, p: float) -> float:
    # Majority vote = minimum weight for odd d (Nielsen & Chuang, "Quantum Computation and
    # Quantum Information", Cambridge (2000), ch. 10).
    return sum(math.comb(d, k) * p**k * (1 - p) ** (d - k) for k in range((d + 1) // 2, d + 1))


def test_enumeration_matches_hand_values() -> None:
    # Leading order: distance 3, so P_fail / p^2 tends to the number of failing weight-2
    # errors (at most C(9,2) = 36); at p = 1/2 every decoder is right half the time.
    assert 1.0 < surface_d3_exact("Z", 1e-4) / 1e-8 < 36.0
    assert surface_d3_exact("X", 0.5) == pytest.approx(0.5, abs=1e-12)


@pytest.mark.parametrize("decoder", BELIEF)
@pytest.mark.parametrize("basis", ["Z", "X"])
def test_belief_decoders_reproduce_the_d3_surface_enumeration(tmp_path: Path, decoder: str, basis: str) -> None:
    # BP+OSD / BP+LSD on 9 bits and 4 checks find the minimum-weight correction (Roffe et al.
    # 2020; Hillmann et al. 2024, from memory), so the Monte Carlo rate must match the exact
    # minimum-weight value within the 99.9% Clopper-Pearson interval.
    rates = [0.05, 0.1]
    study = {"code": "rotated_surface", "distances": [3], "rounds": 1, "basis": basis,
             "noise": "code_capacity", "p": rates, "decoders": [decoder]}
    frame = sweep(tmp_path, f"rs3{basis}{decoder}", [study], shots=100_000, seed=4242)
    for p in rates:
        r = frame[np.isclose(frame["p"], p)].iloc[0]
        k, n = int(r["failures"]), int(r["shots"])
        exact = surface_d3_exact(basis, p)
        ci = binomtest(k, n).proportion_ci(confidence_level=1 - ALPHA, method="exact")
        assert ci.low <= exact <= ci.high, (decoder, basis, p, k, n, exact)


@pytest.mark.parametrize("decoder", BELIEF)
def test_belief_decoders_on_the_repetition_code(tmp_path: Path, decoder: str) -> None:
    # Code capacity: the binomial tail (majority vote; Nielsen & Chuang ch. 10), 99.9% interval.
    studies = [{"code": "repetition", "distances": [5], "rounds": 1, "noise": "code_capacity", "p": [0.1],
                "decoders": [decoder], "label": "capacity"},
               {"code": "repetition", "distances": [5], "rounds": 5, "noise": "circuit_depolarizing",
                "p": [0.01], "decoders": [decoder, "mwpm"], "label": "circuit"}]
    frame = sweep(tmp_path, f"rep{decoder}", studies, shots=40_000, seed=99)
    capacity = frame[frame["study"] == "capacity"].iloc[0]
    assert binomtest(int(capacity["failures"]), int(capacity["shots"]), repetition_exact(5, 0.1)).pvalue >= ALPHA
    # Circuit level: far better than predicting "no flip" (common practice sanity bound).
    point = Point("repetition", 5, 5, "Z", "circuit_depolarizing", 0.01, decoder)
    _, obs = noisy_circuit(point).compile_detector_sampler(seed=1).sample(40_000, separate_observables=True)
    circuit = frame[(frame["study"] == "circuit") & (frame["decoder"] == decoder)].iloc[0]
    assert circuit["failure_rate"] < 0.2 * obs.any(axis=1).mean()


@pytest.mark.parametrize("decoder", BELIEF)
def test_belief_decoders_at_circuit_level(decoder: str) -> None:
    # Rotated surface d = 3, circuit noise: better than guessing by far, and not worse than
    # matching by more than the counting noise allows (BP+OSD uses the hyperedges that the
    # matching graph drops; Roffe et al. 2020): common practice, loose bound.
    circuit = noisy_circuit(Point("rotated_surface", 3, 3, "Z", "circuit_depolarizing", 0.005, decoder))
    det, obs = circuit.compile_detector_sampler(seed=17).sample(20_000, separate_observables=True, bit_packed=True)
    rates = {}
    for name in (decoder, "mwpm"):
        cls = DECODERS[name]
        dec = cls()
        dec.compile(circuit.detector_error_model(decompose_errors=cls.wants_decomposed))
        rates[name] = float(np.any(dec.decode_batch(det) != obs, axis=1).mean())
    assert rates[decoder] < 0.3 * float(obs.any(axis=1).mean())
    assert rates[decoder] < 1.25 * rates["mwpm"], rates


@pytest.mark.parametrize("decoder", BELIEF)
@pytest.mark.parametrize("code,noise", [("rotated_surface", "circuit_depolarizing"), ("rotated_surface", "si1000"),
                                        ("repetition", "phenomenological")])
def test_single_faults_are_corrected(decoder: str, code: str, noise: str) -> None:
    # Circuit distance 3 (checked in tests/test_circuit_physics.py): no two single faults with
    # the same detectors flip different observables, and at p = 0.3% a single fault is more
    # likely than any pair with its syndrome, so a decoder that finds the most likely error
    # corrects each one (common practice). OSD with the default order does; LSD grows clusters
    # from BP's soft output one column at a time and may settle on a less likely error inside a
    # cluster, so for bplsd this is a loose sanity bound (95% of the single faults).
    d = 3
    circuit = noisy_circuit(Point(code, d, d, "Z", noise, 0.003, decoder))
    dem = circuit.detector_error_model(decompose_errors=False)
    matrices = check_matrices(dem)
    dec = DECODERS[decoder]()
    dec.compile(dem)
    syndromes = matrices.check.toarray().T.astype(bool)
    predicted = dec.decode_batch(syndromes, bit_packed=False)
    wrong = np.any(predicted != matrices.observables.toarray().T.astype(bool), axis=1)
    if decoder == "bposd":
        assert not wrong.any(), np.flatnonzero(wrong)
    else:
        assert wrong.mean() <= 0.05, np.flatnonzero(wrong)


# ---------------------------------------------------------------------------
# The check matrix: algebraic invariants against stim's own model.


def test_check_matrices_reproduce_every_error_of_the_model() -> None:
    circuit = noisy_circuit(Point("rotated_surface", 3, 2, "X", "si1000", 0.004, "bposd"))
    dem = circuit.detector_error_model(decompose_errors=False)
    m = check_matrices(dem)
    check, obs = m.check.toarray(), m.observables.toarray()
    assert m.check.dtype == np.uint8 and m.check.format == "csc"
    assert check.shape == (dem.num_detectors, len(m.priors)) and obs.shape == (dem.num_observables, len(m.priors))
    # Columns are distinct (identical ones merged) and every error of the model is one of them
    # with a prior at least its own probability.
    columns = {(tuple(np.flatnonzero(check[:, j])), tuple(np.flatnonzero(obs[:, j]))): m.priors[j]
               for j in range(len(m.priors))}
    assert len(columns) == len(m.priors)
    for inst in dem.flattened():
        if inst.type != "error":
            continue
        dets = tuple(sorted(t.val for t in inst.targets_copy() if t.is_relative_detector_id()))
        ls = tuple(sorted(t.val for t in inst.targets_copy() if t.is_logical_observable_id()))
        if dets:
            assert columns[(dets, ls)] >= inst.args_copy()[0] - 1e-15
    assert np.all((m.priors > 0) & (m.priors < 0.5))


def test_identical_mechanisms_combine_as_independent_flips() -> None:
    # Two independent flips of the same symptom: odd number of them happens with
    # p1 (1 - p2) + p2 (1 - p1) (common practice).
    dem = stim.DetectorErrorModel("error(0.1) D0 L0\nerror(0.2) D0 L0\nerror(0.3) D0\nerror(0.4) D1 ^ D0 D1\n")
    m = check_matrices(dem)
    got = {(tuple(np.flatnonzero(m.check.toarray()[:, j])), tuple(np.flatnonzero(m.observables.toarray()[:, j]))):
           m.priors[j] for j in range(len(m.priors))}
    # "D1 ^ D0 D1" (a decomposed error) has the symptom D0: it merges with error(0.3) D0.
    assert got == pytest.approx({((0,), (0,)): 0.1 * 0.8 + 0.2 * 0.9, ((0,), ()): 0.3 * 0.6 + 0.4 * 0.7})


def test_belief_decoders_handle_empty_and_noiseless_models() -> None:
    for cls in (BeliefOSD, BeliefLSD):
        dec = cls()
        dec.compile(stim.DetectorErrorModel("detector D0\ndetector D1\nlogical_observable L0"))
        out = dec.decode_batch(np.array([[3], [0]], dtype=np.uint8))
        assert out.shape == (2, 1) and not out.any()
        assert dec.decode_batch(np.zeros((0, 1), dtype=np.uint8)).shape == (0, 1)
        with pytest.raises(ValueError, match=r"shape \(shots, 1\)"):
            dec.decode_batch(np.zeros((2, 3), dtype=np.uint8))
        with pytest.raises(RuntimeError, match="compile"):
            cls().decode_batch(np.zeros((1, 1), dtype=np.uint8))


# ---------------------------------------------------------------------------
# Options: declared, validated, defaulted, passed on to ldpc.


def test_default_options_are_documented_values() -> None:
    assert BeliefOSD().options == {"bp_method": "minimum_sum", "max_iter": 30, "ms_scaling_factor": 0.625,
                                   "schedule": "parallel", "osd_method": "osd_cs", "osd_order": 7}
    assert BeliefLSD().options == {"bp_method": "minimum_sum", "max_iter": 30, "ms_scaling_factor": 0.625,
                                   "schedule": "parallel", "lsd_method": "lsd_cs", "lsd_order": 7,
                                   "bits_per_step": 1}


def test_options_reach_ldpc() -> None:
    dem = noisy_circuit(Point("repetition", 3, 2, "Z", "circuit_depolarizing", 0.01, "bposd")).detector_error_model()
    osd = BeliefOSD(osd_method="osd_e", osd_order=3, max_iter=12, bp_method="product_sum", ms_scaling_factor=0.5,
                    schedule="serial")
    osd.compile(dem)
    inner = osd._decoder
    assert (inner.osd_method, inner.osd_order, inner.max_iter, inner.bp_method, inner.schedule) == (
        "OSD_E", 3, 12, "product_sum", "serial")
    assert inner.ms_scaling_factor == pytest.approx(0.5)
    lsd = BeliefLSD(lsd_method="lsd_e", lsd_order=4, max_iter=9)
    lsd.compile(dem)
    assert (lsd._decoder.lsd_method, lsd._decoder.lsd_order, lsd._decoder.max_iter) == ("LSD_E", 4, 9)
    zero = BeliefOSD(osd_method="osd0")
    assert zero.options["osd_order"] == 0


@pytest.mark.parametrize("options,kind,message", [
    ({"osd_order": -1}, ValueError, "bposd.osd_order must be an integer >= 0 for bposd; got -1."),
    ({"osd_order": "7"}, TypeError, "bposd.osd_order must be an integer >= 0 for bposd; got '7'."),
    ({"osd_order": True}, TypeError, "got True"),
    ({"max_iter": 0}, ValueError, "bposd.max_iter must be an integer >= 1 for bposd; got 0."),
    ({"ms_scaling_factor": 1.5}, ValueError, "bposd.ms_scaling_factor must be a number in [0, 1] for bposd; got 1.5."),
    ({"ms_scaling_factor": float("nan")}, ValueError, "ms_scaling_factor must be a number in [0, 1]"),
    ({"bp_method": "ms"}, ValueError,
     "bposd.bp_method must be one of 'minimum_sum', 'product_sum' for bposd; got 'ms'."),
    ({"osd_method": "OSD_CS"}, ValueError, "one of 'osd_cs', 'osd_e', 'osd0' for bposd; got 'OSD_CS'."),
    ({"osd_method": "osd0", "osd_order": 2}, ValueError,
     "osd_order must be 0 with osd_method = 'osd0' for bposd; got 2."),
    ({"osd_method": "osd_e", "osd_order": 17}, ValueError, "an integer in [0, 16] with osd_method = 'osd_e'"),
    ({"osd_ordr": 3}, ValueError, "bposd.osd_ordr is not a known option of bposd; allowed options: bp_method,"),
])
def test_constructor_rejects_bad_options(options: dict[str, Any], kind: type[Exception], message: str) -> None:
    with pytest.raises(kind) as info:
        BeliefOSD(**options)
    assert message in str(info.value)


def sweep_text(decoders: str, extra: str = "") -> str:
    return f"""
name = "opts"
seed = 5

[[study]]
code = "rotated_surface"
distances = [3]
rounds = 1
noise = "code_capacity"
p = [0.05]
decoders = {decoders}
{extra}
"""


@pytest.mark.parametrize("decoders,extra,parts", [
    ('["bposd"]', "[study.decoder_options.bposd]\nosd_order = -1",
     ["opts.toml: study[0].decoder_options.bposd.osd_order must be an integer >= 0 for bposd; got -1."]),
    ('["bplsd"]', "[study.decoder_options.bplsd]\nlsd_method = \"osd_cs\"",
     ["study[0].decoder_options.bplsd.lsd_method must be one of 'lsd_cs', 'lsd_e', 'lsd0' for bplsd; got 'osd_cs'."]),
    ('["bposd"]', "[study.decoder_options.bposd]\nmax_iter = 2.5",
     ["study[0].decoder_options.bposd.max_iter must be an integer >= 1 for bposd; got 2.5."]),
    ('["bposd"]', "[study.decoder_options.bposd]\norder = 3",
     ["study[0].decoder_options.bposd.order is not a known key; allowed keys: bp_method, max_iter,"]),
    ('["bposd"]', "[study.decoder_options.bplsd]\nlsd_order = 3",
     ["study[0].decoder_options.bplsd names a decoder this study does not use; study[0].decoders is ['bposd']."]),
    ('["mwpm"]', "[study.decoder_options.mwpm]\nweights = 1",
     ["study[0].decoder_options.mwpm.weights is not a known key; allowed keys: (none)."]),
    ('["bposd"]', "decoder_options = 3", ["study[0].decoder_options must be a table"]),
    ('["nowhere.at_all:Decoder"]', "",
     ["study[0].decoders[0] must be a registered decoder name or 'package.module:ClassName'",
      "got 'nowhere.at_all:Decoder': module 'nowhere.at_all' cannot be imported"]),
    ('["codebench.decoders.belief:Missing"]', "",
     ["study[0].decoders[0]", "module 'codebench.decoders.belief' has no attribute 'Missing'"]),
    ('["codebench.decoders.belief:check_matrices"]', "",
     ["study[0].decoders[0]", "is a function, not a subclass of codebench.decoders.base.Decoder"]),
    ('["codebench.decoders.base:Decoder"]', "", ["study[0].decoders[0]", "has no class attribute 'name'"]),
    ('["mwpm", "bp_osd"]', "", ["study[0].decoders[1] must be one of 'mwpm', 'mwpm_correlated', 'bposd', 'bplsd'"]),
])
def test_sweep_file_option_errors(tmp_path: Path, decoders: str, extra: str, parts: list[str]) -> None:
    path = tmp_path / "opts.toml"
    path.write_text(sweep_text(decoders, extra))
    with pytest.raises(ConfigError) as info:
        load_sweep(path)
    message = str(info.value)
    assert "\n" not in message
    for part in parts:
        assert part in message, message


def test_options_from_the_sweep_file_enter_the_point_and_its_key(tmp_path: Path) -> None:
    path = tmp_path / "opts.toml"
    path.write_text(sweep_text('["bposd", "bplsd", "mwpm"]',
                               "[study.decoder_options.bposd]\nosd_order = 2\nms_scaling_factor = 1\n"))
    points = {pt.decoder: pt for pt in load_sweep(path).points}
    assert dict(points["bposd"].decoder_options) == {**BeliefOSD().options, "osd_order": 2, "ms_scaling_factor": 1.0}
    assert dict(points["bplsd"].decoder_options) == BeliefLSD().options  # defaults, written out
    assert points["mwpm"].decoder_options == ()  # no options: keys of existing sweeps are unchanged
    default = Point(**{**points["bposd"].__dict__, "decoder_options": tuple(sorted(BeliefOSD().options.items()))})
    assert default.key(5) != points["bposd"].key(5)


# ---------------------------------------------------------------------------
# Plug-in decoders.


def test_load_decoder_by_spec() -> None:
    assert load_decoder(PLUGIN) is plugin_decoder.SingleFaultLookup
    assert get_decoder(PLUGIN) is plugin_decoder.SingleFaultLookup
    assert get_decoder("bposd") is BeliefOSD
    with pytest.raises(KeyError):
        get_decoder("no_such_decoder")
    for spec, text in [("codebench", "not of the form"), (f"{plugin_decoder.__name__}:Nothing", "no attribute"),
                       ("os.path:join", "is a function")]:
        with pytest.raises(DecoderError, match=text):
            load_decoder(spec)


@pytest.mark.parametrize("workers", [1, 2])
def test_plugin_decoder_through_run_sweep(tmp_path: Path, workers: int) -> None:
    # Worker processes import the plug-in from its spec, like the coordinator.
    study = {"code": "rotated_surface", "distances": [3], "rounds": 1, "noise": "code_capacity", "p": [0.05],
             "decoders": [PLUGIN, "mwpm"], "decoder_options": {PLUGIN: {"min_probability": 0.01}}}
    frame = sweep(tmp_path, f"plugin{workers}", [study], shots=40_000, seed=3, workers=workers)
    row = frame[frame["decoder"] == PLUGIN].iloc[0]
    assert row["decoder_options"] == "min_probability=0.01"
    # At code capacity on d = 3 a single-fault lookup corrects every weight-1 error, as minimum-weight
    # decoding does, but predicts no flip for heavier syndromes: at least as many failures as the exact
    # minimum-weight value (99.9% interval), and far fewer than guessing.
    ci = binomtest(int(row["failures"]), int(row["shots"])).proportion_ci(confidence_level=1 - ALPHA)
    assert ci.high >= surface_d3_exact("Z", 0.05)
    assert row["failure_rate"] < 0.1


def test_plugin_counts_do_not_depend_on_workers(tmp_path: Path) -> None:
    study = {"code": "repetition", "distances": [3], "rounds": 3, "noise": "circuit_depolarizing", "p": [0.02],
             "decoders": [PLUGIN]}
    one = sweep(tmp_path, "w1", [study], shots=30_000, seed=8, workers=1)
    two = sweep(tmp_path, "w2", [study], shots=30_000, seed=8, workers=2)
    assert one["failures"].tolist() == two["failures"].tolist()


def test_conformance_suite_passes_the_plugin() -> None:
    # A single-fault lookup is no match for circuit noise at p = 1% (the default circuit), but at
    # code capacity on d = 3 it corrects every weight-1 error.
    capacity = noisy_circuit(Point("rotated_surface", 3, 1, "Z", "code_capacity", 0.05, PLUGIN))
    check_decoder(plugin_decoder.SingleFaultLookup, capacity)
    check_decoder(PLUGIN, options={"min_probability": 0.001}, skip=("decodes_better_than_guessing",))
    with pytest.raises(AssertionError, match="fails decodes_better_than_guessing"):
        run_decoder_check("decodes_better_than_guessing", PLUGIN)


@pytest.mark.parametrize("cls,failing", [
    (plugin_decoder.MutatesInput, "inputs_not_mutated"),
    (plugin_decoder.OrderDependent, "shot_order_does_not_matter"),
    (plugin_decoder.OrderDependent, "batch_equals_one_by_one"),
    (plugin_decoder.Unpicklable, "pickle_round_trip"),
    (plugin_decoder.Unseeded, "seeded_reproducibility"),
])
def test_conformance_suite_catches_broken_decoders(cls: type[Decoder], failing: str) -> None:
    with pytest.raises(AssertionError, match=f"decoder '{cls.name}' fails {failing}: "):
        run_decoder_check(failing, cls)


def test_conformance_suite_needs_a_class_workers_can_find() -> None:
    class Local(plugin_decoder.SingleFaultLookup):
        name = "local"

    run_decoder_check("batch_equals_one_by_one", Local)
    with pytest.raises(AssertionError, match="a worker cannot find the class"):
        run_decoder_check("seeded_reproducibility", Local)
    assert set(decoder_checks()) >= {"batch_equals_one_by_one", "shot_order_does_not_matter", "pickle_round_trip",
                                     "inputs_not_mutated", "seeded_reproducibility"}


def test_pickled_belief_decoder_recompiles_in_a_worker() -> None:
    circuit = noisy_circuit(Point("rotated_surface", 3, 2, "Z", "si1000", 0.002, "bplsd"))
    dec = BeliefLSD(lsd_order=2)
    dec.compile(circuit.detector_error_model(decompose_errors=False))
    clone = pickle.loads(pickle.dumps(dec))
    assert clone.options == dec.options and clone._decoder is None


def test_option_spec_messages() -> None:
    spec = OptionSpec("float", 0.5, low=0.0, high=1.0, low_open=True)
    assert spec.allowed() == "a number in (0, 1]"
    with pytest.raises(ValueError, match=r"x must be a number in \(0, 1\]; got 0.0."):
        spec.check(0.0, "x")
    assert OptionSpec("choice", "a", choices=("a", "b")).allowed() == "one of 'a', 'b'"


# ---------------------------------------------------------------------------
# Decode timing.


def test_decode_us_per_round_column(tmp_path: Path) -> None:
    study = {"code": "rotated_surface", "distances": [3], "rounds": [2, 4], "noise": "circuit_depolarizing",
             "p": [0.004], "decoders": ["mwpm", "bposd"]}
    frame = sweep(tmp_path, "timing", [study], shots=3000, seed=1)
    assert "decode_us_per_round" in frame.columns
    assert (frame["decode_us_per_round"] > 0).all()
    expected = frame["decode_seconds"] / frame["shots"] / frame["rounds"] * 1e6
    assert np.allclose(frame["decode_us_per_round"], expected, rtol=1e-12)
    csv = pd.read_csv(tmp_path / "timing" / "results.csv")
    assert (csv["decode_us_per_round"] > 0).all()
    assert decode_us_per_round(2.0, 1000, 5) == pytest.approx(400.0)
    assert math.isnan(decode_us_per_round(0.0, 0, 5))


def test_speed_table_verdicts() -> None:
    frame = pd.DataFrame([
        {"decoder": "mwpm", "code": "rotated_surface", "noise": "device", "distance": 3, "p": 1.0, "rounds": 3,
         "shots": 1000, "decode_seconds": 0.0015, "decode_us_per_round": 0.5, "noise_options": "", "point_id": "a"},
        {"decoder": "bposd", "code": "rotated_surface", "noise": "device", "distance": 3, "p": 1.0, "rounds": 3,
         "shots": 1000, "decode_seconds": 0.03, "decode_us_per_round": 10.0, "noise_options": "", "point_id": "b"},
        {"decoder": "mwpm", "code": "repetition", "noise": "si1000", "distance": 5, "p": 0.001, "rounds": 5,
         "shots": 100, "decode_seconds": 0.001, "decode_us_per_round": 2.0, "noise_options": "", "point_id": "c"},
    ])
    table = speed_table(frame, {"a": 1.0, "b": 1.25})
    verdicts = {row[0]: row[-1] for row in table.rows}
    assert getattr(verdicts["bposd"], "text") == "falls behind by 8x"
    by_code = {(row[0], row[1]): row for row in table.rows}
    assert getattr(by_code[("mwpm", "rotated_surface")][-1], "text") == "keeps up"
    assert by_code[("mwpm", "repetition")][-1] == "\u2013"  # no device: no round duration
    assert speed_verdict(1.0, 1.0) == "keeps up"


def test_report_compares_decoding_with_the_device_round(tmp_path: Path) -> None:
    device = REPO / "configs" / "devices" / "larkspur_improved.toml"
    config = {"name": "speed", "seed": 2, "stopping": {"failure_target": NEVER, "shot_budget": 2000},
              "study": [{"code": "rotated_surface", "distances": [3], "rounds": "d", "noise": "device",
                         "device": str(device), "decoders": ["mwpm", "bposd"]}]}
    frame = run_sweep(config, out=tmp_path / "speed", workers=1, progress=False)
    write_report(tmp_path / "speed", frame)
    summary = (tmp_path / "speed" / "report" / "summary.md").read_text()
    section = summary.split("## Decoder speed", 1)[1].split("\n## ", 1)[0]
    rows = [line for line in section.splitlines() if line.startswith("| bposd") or line.startswith("| mwpm")]
    assert len(rows) == 2
    for line in rows:
        assert "keeps up" in line or "falls behind by" in line
    assert "Decoder speed" in (tmp_path / "speed" / "report" / "index.html").read_text()


def test_forecast_reports_decoder_speed() -> None:
    from codebench.forecast import forecast
    from codebench.forecast.render import CSV_COLUMNS, forecast_table

    result = forecast(REPO / "configs" / "devices" / "larkspur_current.toml", distances=(3, 5), work=9e8,
                      workers=1)
    for row in result.distances:
        assert row.decode_us_per_round is not None and row.decode_us_per_round > 0
        assert row.keeps_up is (row.decode_us_per_round <= row.round_duration_us)
    assert {"decode_us_per_round", "keeps_up"} <= set(CSV_COLUMNS)
    assert "Decoder mwpm per round on one worker: d = 3:" in forecast_table(result)

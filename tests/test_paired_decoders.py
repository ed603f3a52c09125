"""Decoders compared on the same shots: shared random streams, one sampling per batch, paired statistics.

Checks against outside references: the unpaired interval against statsmodels' Newcombe interval for
independent proportions; the exact McNemar p-value against the binomial sum written out by hand
(McNemar, Psychometrika 12, 153 (1947)); the paired interval's coverage by exact enumeration of all
2x2 tables (Newcombe, Statistics in Medicine 17, 2635 (1998) reports coverage close to nominal for
this method, method 10; the bounds below are ours: from memory, its mean coverage is near 0.95).
"""

from __future__ import annotations

import math
import sqlite3
from contextlib import closing
from itertools import product
from pathlib import Path
from typing import Any

import numpy as np
import pytest

from codebench.analysis import analyze
from codebench.api import load_results, run_sweep
from codebench.engine.local import InProcessExecutor, LocalExecutor
from codebench.engine.worker import batch_seed, run_batch
from codebench.records import BatchTask, Point, unpack_failed
from codebench.results.store import Store
from codebench.stats import exact_mcnemar_p, paired_difference_interval, wilson_interval

SEED = 31


def sweep(decoders: list[str], **stopping: Any) -> dict[str, Any]:
    return {"name": "paired", "seed": SEED,
            "stopping": {"failure_target": 60, "shot_budget": 12_000} | stopping,
            "study": [{"label": "cmp", "code": "rotated_surface", "distances": [3, 5], "rounds": "d",
                       "noise": "si1000", "p": [0.004, 0.006], "decoders": decoders}]}


def counts(frame: Any) -> dict[tuple[int, float, str], tuple[int, int]]:
    return {(int(r.distance), float(r.p), str(r.decoder)): (int(r.shots), int(r.failures))
            for r in frame.itertuples()}


def test_decoders_of_one_point_share_the_random_stream_and_mwpm_keeps_its_own() -> None:
    mwpm = Point("rotated_surface", 3, 3, "Z", "si1000", 0.004, "mwpm")
    other = Point("rotated_surface", 3, 3, "Z", "si1000", 0.004, "bposd", decoder_options=(("max_iter", 10),))
    elsewhere = Point("rotated_surface", 3, 3, "Z", "si1000", 0.005, "bposd")
    assert mwpm.sample_key(SEED) == mwpm.key(SEED)  # counts of mwpm points are what they always were
    assert other.sample_key(SEED) == mwpm.key(SEED)
    assert elsewhere.sample_key(SEED) != mwpm.key(SEED)


def test_a_batch_decoded_with_partners_gives_each_decoder_what_it_gives_alone() -> None:
    points = [Point("rotated_surface", 3, 3, "Z", "si1000", 0.006, decoder) for decoder in
              ("mwpm", "mwpm_correlated", "bposd")]
    seed = batch_seed(SEED, points[0].sample_key(SEED), 0, 3000)
    tasks = [BatchTask(p.key(SEED), p.params(), 0, 3000, seed) for p in points]
    together = run_batch(BatchTask(tasks[0].point_key, tasks[0].params, 0, 3000, seed, partners=tuple(tasks[1:])))
    results = [together, *together.partners]
    assert [r.point_key for r in results] == [t.point_key for t in tasks]
    for task, result in zip(tasks, results):
        alone = run_batch(task)
        assert (result.failures, result.seed) == (alone.failures, alone.seed)
        assert result.failed is not None and alone.failed is not None
        assert np.array_equal(unpack_failed(result.failed, 3000), unpack_failed(alone.failed, 3000))
        assert int(unpack_failed(result.failed, 3000).sum()) == result.failures
    # The decoders differ shot by shot, yet mostly fail on the same shots (common practice: most
    # failures come from fault sets any reasonable decoder gets wrong).
    fails = [unpack_failed(r.failed, 3000) for r in results if r.failed is not None]
    both = int((fails[0] & fails[1]).sum())
    assert both > 0.5 * min(int(fails[0].sum()), int(fails[1].sum()))


def test_each_decoders_counts_are_those_it_gets_alone_and_do_not_depend_on_workers(tmp_path: Path) -> None:
    together = run_sweep(sweep(["mwpm", "mwpm_correlated"]), out=tmp_path / "both", executor=InProcessExecutor(),
                         progress=False)
    alone = {**counts(run_sweep(sweep(["mwpm"]), out=tmp_path / "a", executor=InProcessExecutor(), progress=False)),
             **counts(run_sweep(sweep(["mwpm_correlated"]), out=tmp_path / "b", executor=InProcessExecutor(),
                                progress=False))}
    assert counts(together) == alone
    with LocalExecutor(2) as pool:
        parallel = run_sweep(sweep(["mwpm", "mwpm_correlated"]), out=tmp_path / "pool", executor=pool, progress=False)
    assert counts(parallel) == counts(together)
    assert parallel.attrs["decoder_pairs"] == together.attrs["decoder_pairs"]


def test_paired_counts_match_the_rows_and_narrow_the_interval(tmp_path: Path) -> None:
    frame = run_sweep(sweep(["mwpm", "mwpm_correlated"]), out=tmp_path, executor=InProcessExecutor(), progress=False)
    rows = counts(frame)
    comparisons = analyze(frame, bootstrap=20).decoder_comparisons
    assert len(comparisons) == 4  # two distances x two rates, one pair of decoders each
    for c in comparisons:
        first_shots, first_failures = rows[(c.distance, c.p, c.first)]
        second_shots, second_failures = rows[(c.distance, c.p, c.second)]
        assert c.shots == min(first_shots, second_shots)
        assert c.first_failures <= first_failures and c.second_failures <= second_failures
        if first_shots == second_shots:
            assert (c.first_failures, c.second_failures) == (first_failures, second_failures)
        assert c.low <= c.difference <= c.high
        assert c.narrowing is not None and c.narrowing > 1.2  # the decoders agree on most shots
    assert "decoder_comparisons" in analyze(frame, bootstrap=20).to_json()


def test_an_interrupted_comparison_resumes_to_the_same_paired_counts(tmp_path: Path) -> None:
    whole = run_sweep(sweep(["mwpm", "mwpm_correlated"]), out=tmp_path / "whole", executor=InProcessExecutor(),
                      progress=False)
    seen = []
    run_sweep(sweep(["mwpm", "mwpm_correlated"]), out=tmp_path / "cut", executor=InProcessExecutor(),
              progress=False, stop_when=lambda: seen.append(1) or len(seen) > 3)
    resumed = run_sweep(sweep(["mwpm", "mwpm_correlated"]), out=tmp_path / "cut", executor=InProcessExecutor(),
                        progress=False)
    assert counts(resumed) == counts(whole)
    assert resumed.attrs["decoder_pairs"] == whole.attrs["decoder_pairs"]


def test_a_store_written_before_failure_bits_is_upgraded_and_its_batches_stay_unpaired(tmp_path: Path) -> None:
    run_sweep(sweep(["mwpm", "mwpm_correlated"], shot_budget=3000), out=tmp_path, executor=InProcessExecutor(),
              progress=False)
    path = tmp_path / "results.sqlite"
    before = counts(load_results(tmp_path))
    # Rewrite the batches table as schema 1 had it (no seed, no failure bits).
    with closing(sqlite3.connect(path)) as db:
        db.executescript(
            "CREATE TABLE old AS SELECT key, batch_index, shots, failures, seconds, decode_seconds FROM batches;"
            "DROP TABLE batches; ALTER TABLE old RENAME TO batches; PRAGMA user_version=1;")
    read_only = load_results(tmp_path)
    assert counts(read_only) == before
    assert all(r["shots"] == 0 for r in read_only.attrs["decoder_pairs"])
    with Store(path) as store:  # opened for writing: upgraded in place
        columns = {row[1] for row in store._db.execute("PRAGMA table_info(batches)")}
    assert {"seed", "failed"} <= columns
    assert counts(run_sweep(sweep(["mwpm", "mwpm_correlated"], shot_budget=3000), out=tmp_path,
                            executor=InProcessExecutor(), progress=False)) == before


def test_without_pairing_the_interval_is_newcombes_for_independent_proportions() -> None:
    statsmodels = pytest.importorskip("statsmodels.stats.proportion")
    for both, first_only, second_only, neither in [(3, 10, 2, 985), (40, 7, 19, 934), (0, 0, 5, 95)]:
        n = both + first_only + second_only + neither
        _, low, high = paired_difference_interval(both, first_only, second_only, neither, correlated=False)
        ref_low, ref_high = statsmodels.confint_proportions_2indep(both + first_only, n, both + second_only, n,
                                                                   method="newcomb", compare="diff")
        assert (low, high) == pytest.approx((ref_low, ref_high), abs=1e-12)


def test_exact_mcnemar_p_is_the_two_sided_binomial_sum() -> None:
    # b = 10 discordant one way, c = 2 the other: p = 2 * sum_{k<=2} C(12, k) / 2^12 = 158 / 4096.
    assert exact_mcnemar_p(10, 2) == pytest.approx(2 * (1 + 12 + 66) / 4096, rel=1e-12)
    assert exact_mcnemar_p(2, 10) == pytest.approx(exact_mcnemar_p(10, 2))
    assert exact_mcnemar_p(0, 0) == 1.0


def test_the_paired_interval_reduces_to_wilson_ends_and_covers_by_exact_enumeration() -> None:
    # With the second decoder never failing, the difference is the first rate: Newcombe's limits are
    # the first rate's Wilson limits minus the second's zero-count Wilson upper end (and plus 0).
    _, low, high = paired_difference_interval(0, 7, 0, 43)
    w_low, w_high = wilson_interval(7, 50)
    assert high == pytest.approx(w_high - 0.0)
    assert low == pytest.approx(7 / 50 - math.hypot(7 / 50 - w_low, wilson_interval(0, 50)[1]))
    # Exact coverage over every 2x2 table of n = 30 shots for a few cell probabilities.
    n = 30
    # Rare failures (the last set) make every score interval conservative: there only the lower bound.
    for cells, most in [((0.05, 0.10, 0.05, 0.80), 0.99), ((0.10, 0.05, 0.15, 0.70), 0.99),
                        ((0.02, 0.03, 0.01, 0.94), 1.0)]:
        truth = cells[1] - cells[2]
        covered = 0.0
        log_fact = [math.lgamma(k + 1) for k in range(n + 1)]
        for a, b, c in product(range(n + 1), repeat=3):
            d = n - a - b - c
            if d < 0:
                continue
            log_prob = log_fact[n] - log_fact[a] - log_fact[b] - log_fact[c] - log_fact[d] + sum(
                k * math.log(q) for k, q in zip((a, b, c, d), cells))
            _, low, high = paired_difference_interval(a, b, c, d)
            if low <= truth <= high:
                covered += math.exp(log_prob)
        assert 0.92 <= covered <= most, (cells, covered)


def test_one_decoder_with_two_settings_is_compared_under_the_option_that_differs(tmp_path: Path) -> None:
    study = {"label": "osd", "code": "rotated_surface", "distances": [3], "rounds": 3, "noise": "si1000",
             "p": [0.006], "decoders": ["bposd"], "decoder_options": {"bposd": {"osd_order": 0}}}
    config = {"name": "osd", "seed": SEED, "stopping": {"failure_target": 40, "shot_budget": 3000},
              "study": [study, {**study, "label": "osd2", "decoder_options": {"bposd": {"osd_order": 4}}}]}
    frame = run_sweep(config, out=tmp_path, executor=InProcessExecutor(), progress=False)
    (comparison,) = analyze(frame, bootstrap=20).decoder_comparisons
    assert (comparison.first, comparison.second) == ("bposd (osd_order=0)", "bposd (osd_order=4)")
    assert comparison.study == "osd + osd2" and comparison.shots > 0

"""Decoders compared shot by shot: the paired counts of two decoders of one physical point.

Every decoder of a physical point (same code, distance, rounds, basis, noise and rate) draws its
batches from one random stream (:meth:`~codebench.records.Point.sample_key`), so batch i of each
holds identical shots, and each stored batch says which of its shots failed. Two decoders are
compared over the batches both count (the shorter of their two counted prefixes: each decoder stops
by its own rule), batch by batch where the seeds agree: the shots both failed, only the first
failed, only the second failed. Batches stored before batches kept their failure bits (or drawn
from another stream) are left out of the pairing and the shots paired say so.
"""

from __future__ import annotations

import json
from collections.abc import Iterable, Sequence
from dataclasses import asdict, dataclass
from itertools import combinations

import numpy as np

from codebench.records import BatchResult, BatchSchedule, Stopping, unpack_failed
from codebench.results.store import Store, StoredPoint
from codebench.results.tally import tally, usable_batches


@dataclass(frozen=True)
class PairedCounts:
    """Two decoders of one physical point over the shots both decoded.

    ``study``: the study of both rows, or ``"first + second"`` when the rows belong to two studies.

    ``first_only``: shots only the first decoder failed; ``second_only``: only the second;
    ``both``: shots both failed. ``first_failures - second_failures = first_only - second_only``.
    """

    study: str
    code: str
    distance: int
    rounds: int
    basis: str
    noise: str
    p: float
    first: str
    second: str
    shots: int
    both: int
    first_only: int
    second_only: int
    #: The decoders' names as the results table has them (``first``/``second`` may add options).
    first_decoder: str = ""
    second_decoder: str = ""

    @property
    def first_failures(self) -> int:
        return self.both + self.first_only

    @property
    def second_failures(self) -> int:
        return self.both + self.second_only

    def to_json(self) -> dict[str, object]:
        return asdict(self)


def _physical(member: StoredPoint) -> str:
    """The point without its decoder: what decoders of one comparison share."""
    params = member.point.params()
    params.pop("decoder")
    params.pop("decoder_options")
    return json.dumps(params, sort_keys=True)


def _labels(first: StoredPoint, second: StoredPoint) -> tuple[str, str]:
    """The two decoders as a reader tells them apart: their names, and where the names are equal the
    options in which they differ (all options, defaults included, would bury the difference)."""
    a, b = first.point, second.point
    if a.decoder != b.decoder:
        return a.decoder, b.decoder
    options_a, options_b = dict(a.decoder_options), dict(b.decoder_options)
    differing = sorted(k for k in set(options_a) | set(options_b) if options_a.get(k) != options_b.get(k))

    def label(name: str, options: dict[str, object]) -> str:
        chosen = ", ".join(f"{k}={options.get(k, '-')}" for k in differing)
        return f"{name} ({chosen})"
    return label(a.decoder, options_a), label(b.decoder, options_b)


def comparable_groups(members: Sequence[tuple[StoredPoint, str]]) -> list[list[StoredPoint]]:
    """Points that differ only in their decoder, in grid order (groups of two or more).

    Across studies too: a point two studies share is listed once, under the first, so a study that
    adds a decoder to points of an earlier study compares with the earlier study's rows.
    """
    groups: dict[str, list[StoredPoint]] = {}
    for member, _ in members:
        groups.setdefault(_physical(member), []).append(member)
    return [group for group in groups.values() if len(group) > 1]


def _studies(first: str, second: str) -> str:
    return first if first == second else f"{first} + {second}"


def paired_counts(store: Store, members: Sequence[tuple[StoredPoint, str]]) -> list[PairedCounts]:
    """The paired counts of every two decoders of one physical point (first in grid order first)."""
    stopping = store.stopping()
    study_of = {member.key: study for member, study in members}
    out: list[PairedCounts] = []
    for group in comparable_groups(members):
        counted = {member.key: _counted_batches(member, store.batches(member.key), stopping) for member in group}
        for first, second in combinations(group, 2):
            point = first.point
            shots, both, first_only, second_only = _pair(counted[first.key], counted[second.key])
            study = _studies(study_of[first.key], study_of[second.key])
            out.append(PairedCounts(study, point.code, point.distance, point.rounds, point.basis, point.noise,
                                    point.p, *_labels(first, second), shots, both, first_only, second_only,
                                    first.point.decoder, second.point.decoder))
    return out


def _counted_batches(member: StoredPoint, batches: Iterable[BatchResult], stopping: Stopping) -> list[BatchResult]:
    """The batches the point's count is made of, in batch order."""
    sizes = BatchSchedule(stopping.shot_budget, member.batch_cap)
    usable = usable_batches(sizes, batches)
    return [usable[i] for i in range(tally(sizes, usable, stopping).batches)]


def _pair(first: list[BatchResult], second: list[BatchResult]) -> tuple[int, int, int, int]:
    """Shots, both failed, first only, second only over the batches both count with equal seeds."""
    shots = both = first_only = second_only = 0
    for a, b in zip(first, second):
        if a.seed is None or a.seed != b.seed or a.shots != b.shots or a.failed is None or b.failed is None:
            continue
        fail_a, fail_b = unpack_failed(a.failed, a.shots), unpack_failed(b.failed, b.shots)
        shots += a.shots
        both += int(np.count_nonzero(fail_a & fail_b))
        first_only += int(np.count_nonzero(fail_a & ~fail_b))
        second_only += int(np.count_nonzero(~fail_a & fail_b))
    return shots, both, first_only, second_only

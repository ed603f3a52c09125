"""Sweep files: read, validate and expand them into points.

A sweep file is TOML::

    name = "demo"
    seed = 1234

    [stopping]
    failure_target = 200
    shot_budget = 1_000_000

    [[study]]
    code = "rotated_surface"
    distances = [3, 5]
    rounds = "d"
    noise = "si1000"
    p = { geomspace = [0.001, 0.004, 3] }
    decoders = ["mwpm", "bposd"]

    [study.decoder_options.bposd]
    osd_order = 10

Every rejected value raises :class:`~codebench.errors.ConfigError` with a
one-line message: the source, the key path (``study[1].distances[2]``), then
the shared template of :func:`~codebench.errors.not_allowed`. Only the first
problem found is reported.
"""

from __future__ import annotations

import os
import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from codebench.config.checks import (
    NAME_PATTERN,
    Problem,
    check_keys,
    is_int,
    is_number,
    one_line,
    positive_int,
    require,
)
from codebench.config.study import MAX_POINTS, parse_rounds, parse_study
from codebench.engine.cluster import parse_cluster
from codebench.errors import ConfigError, not_allowed
from codebench.records import DEFAULT_BATCH_BYTES, ClusterSpec, Point, Stopping

__all__ = ["Sweep", "load_sweep", "parse_rounds", "parse_sweep"]

#: Smallest ``engine.batch_bytes``.
MIN_BATCH_BYTES = 1024
_SEED_LIMIT = 2**63

_TOP_KEYS = ("name", "seed", "stopping", "engine", "cluster", "study")
_STOPPING_KEYS = ("failure_target", "shot_budget", "relative_precision")
_ENGINE_KEYS = ("batch_bytes",)
#: Longest sweep name (it names a folder; file systems refuse names over 255 bytes).
MAX_NAME_LENGTH = 100
_NAME_ALLOWED = (f"a string of at most {MAX_NAME_LENGTH} characters matching [A-Za-z0-9][A-Za-z0-9_.-]* "
                 "(it names the output folder)")
_SEED_ALLOWED = "an integer in [0, 2**63 - 1]"


@dataclass(frozen=True)
class Sweep:
    """A validated sweep: its settings and its expanded grid of points.

    Parameters
    ----------
    name : str
        Names the output folder.
    seed : int
        Every random stream of the sweep derives from it.
    stopping : Stopping
        Per-point stopping rule.
    points : list of Point
        The grid in order: study by study, then distance, rounds, basis, p,
        decoder. A point already produced by an earlier study is not repeated
        (the ``study`` label is not part of point equality).
    source_text : str
        Text of the sweep file, or ``''`` when built from a dict.
    source : str
        Path of the sweep file, or ``"<dict>"``.
    batch_bytes : int
        Upper bound on the bytes of detection events one batch may hold.
    cluster : ClusterSpec or None
        Where batches run when the ``[cluster]`` section is given (a Dask
        scheduler, a local Dask cluster or a batch system); ``None`` runs on
        local processes. It never changes the counts.
    """

    name: str
    seed: int
    stopping: Stopping
    points: list[Point]
    source_text: str
    source: str
    batch_bytes: int = DEFAULT_BATCH_BYTES
    cluster: ClusterSpec | None = None

    @property
    def output_dir_default(self) -> Path:
        """Where results go when no output folder is given: ``results/<name>``."""
        return Path("results") / self.name


def load_sweep(path: str | os.PathLike[str]) -> Sweep:
    """Read, validate and expand the sweep file at ``path``.

    Parameters
    ----------
    path : str or os.PathLike
        A TOML sweep file.

    Returns
    -------
    Sweep
        With ``source`` set to ``str(path)`` and ``source_text`` to the text.

    Raises
    ------
    ConfigError
        If the file is missing, unreadable, not TOML, or holds a value that
        is not allowed.
    """
    source = str(path)
    file = Path(path)
    if not file.exists():
        raise ConfigError(f"sweep file {source!r} does not exist.")
    if file.is_dir():
        raise ConfigError(f"sweep file {source!r} is a directory, not a file.")
    try:
        with open(file, "rb") as handle:
            raw = handle.read()
    except OSError as exc:
        raise ConfigError(f"sweep file {source!r} cannot be read: {one_line(str(exc))}") from None
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise ConfigError(f"{source}: not valid TOML: not UTF-8 text ({one_line(str(exc))})") from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"{source}: not valid TOML: {one_line(str(exc))}") from None
    return parse_sweep(data, source=source, text=text)


def parse_sweep(data: dict[str, Any], source: str = "<dict>", text: str = "") -> Sweep:
    """Validate an already-parsed sweep table and expand it into points.

    Parameters
    ----------
    data : dict
        The sweep, as ``tomllib`` would return it.
    source : str
        Put in front of every error message and stored in ``Sweep.source``.
    text : str
        The file's text, stored in ``Sweep.source_text``.

    Returns
    -------
    Sweep

    Raises
    ------
    ConfigError
        For the first value found that is not allowed.

    Examples
    --------
    >>> sweep = parse_sweep({
    ...     "name": "tiny", "seed": 7,
    ...     "study": [{"code": "repetition", "distances": [3, 5], "rounds": "2d",
    ...                "noise": "circuit_depolarizing", "p": [0.01], "decoders": ["mwpm"]}],
    ... })
    >>> [(pt.distance, pt.rounds) for pt in sweep.points]
    [(3, 6), (5, 10)]
    >>> sweep.stopping.shot_budget
    1000000
    """
    try:
        return _parse(data, source, text)
    except Problem as problem:
        raise ConfigError(f"{source}: {problem}") from None


def _parse(data: object, source: str, text: str) -> Sweep:
    # Device files named in a sweep file are found relative to it.
    base_dir = Path(source).parent if not source.startswith("<") else Path.cwd()
    if not isinstance(data, dict):
        raise Problem(not_allowed("the sweep", data, "a table"))
    check_keys(data, "", _TOP_KEYS)
    name = require(data, "name", "a string naming the output folder")
    if not isinstance(name, str) or NAME_PATTERN.fullmatch(name) is None or len(name) > MAX_NAME_LENGTH:
        raise Problem(not_allowed("name", name, _NAME_ALLOWED))
    seed = require(data, "seed", _SEED_ALLOWED)
    if not is_int(seed) or not 0 <= seed < _SEED_LIMIT:
        raise Problem(not_allowed("seed", seed, _SEED_ALLOWED))
    stopping = _parse_stopping(data.get("stopping", {}))
    batch_bytes = _parse_engine(data.get("engine", {}))
    cluster = _parse_cluster(data["cluster"]) if "cluster" in data else None
    studies = require(data, "study", "one or more [[study]] tables")
    if not isinstance(studies, list) or not studies:
        raise Problem(not_allowed("study", studies, "a non-empty array of tables ([[study]])"))
    points: list[Point] = []
    seen: set[Point] = set()
    labels: set[str] = set()
    for index, study in enumerate(studies):
        label, study_points = parse_study(study, index, base_dir)
        if label in labels:
            raise Problem(not_allowed(f"study[{index}].label", label, "a label no earlier study uses"))
        labels.add(label)
        for point in study_points:
            if point not in seen:
                seen.add(point)
                points.append(point)
        if len(points) > MAX_POINTS:
            raise Problem(f"the studies up to study[{index}] expand to {len(points):,} points; at most "
                          f"{MAX_POINTS:,} points per sweep.")
    return Sweep(
        name=name,
        seed=int(seed),
        stopping=stopping,
        points=points,
        source_text=text,
        source=source,
        batch_bytes=batch_bytes,
        cluster=cluster,
    )


def _parse_stopping(table: object) -> Stopping:
    if not isinstance(table, dict):
        raise Problem(not_allowed("stopping", table, "a table ([stopping])"))
    check_keys(table, "stopping", _STOPPING_KEYS)
    failure_target = positive_int(
        table.get("failure_target", 200), "stopping.failure_target", "an integer >= 1"
    )
    shot_budget = positive_int(
        table.get("shot_budget", 1_000_000), "stopping.shot_budget", "an integer >= 1"
    )
    precision: float | None = None
    if "relative_precision" in table:
        value = table["relative_precision"]
        if not is_number(value) or not 0 < value < 1:
            raise Problem(not_allowed("stopping.relative_precision", value, "a number in (0, 1)"))
        precision = float(value)
    return Stopping(failure_target=failure_target, shot_budget=shot_budget, relative_precision=precision)


def _parse_engine(table: object) -> int:
    if not isinstance(table, dict):
        raise Problem(not_allowed("engine", table, "a table ([engine])"))
    check_keys(table, "engine", _ENGINE_KEYS)
    value = table.get("batch_bytes", DEFAULT_BATCH_BYTES)
    if not is_int(value) or value < MIN_BATCH_BYTES:
        raise Problem(not_allowed("engine.batch_bytes", value, f"an integer >= {MIN_BATCH_BYTES}"))
    return int(value)


def _parse_cluster(table: object) -> ClusterSpec:
    try:
        return parse_cluster(table)
    except ConfigError as exc:  # its message has no source in front yet
        raise Problem(str(exc)) from None

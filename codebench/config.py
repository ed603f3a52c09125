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

import json
import os
import re
import tomllib
from collections.abc import Iterable
from dataclasses import dataclass
from pathlib import Path
from typing import Any, TypeGuard

import numpy as np

from codebench.codes import CODE_FAMILIES
from codebench.codes.base import CodeFamily
from codebench.decoders import DECODERS, get_decoder
from codebench.decoders.base import Decoder
from codebench.decoders.plugins import is_spec
from codebench.engine.cluster import parse_cluster
from codebench.errors import ConfigError, DecoderError, not_allowed
from codebench.layout import Basis
from codebench.noise import NOISE_MODELS
from codebench.noise.base import NoiseModel
from codebench.options import resolve_options
from codebench.records import DEFAULT_BATCH_BYTES, ClusterSpec, Point, Stopping

__all__ = ["Sweep", "load_sweep", "parse_rounds", "parse_sweep"]

#: Pattern a sweep name must match in full (it names an output folder).
NAME_PATTERN = re.compile(r"[A-Za-z0-9][A-Za-z0-9_.-]*")
#: A multiple of the distance: "d", "2d", "3d", ...
_ROUNDS_PATTERN = re.compile(r"([1-9][0-9]*)?d")
#: Significant digits kept for geomspace-expanded rates, so point keys are stable.
P_DIGITS = 12
#: Smallest ``engine.batch_bytes``.
MIN_BATCH_BYTES = 1024
_SEED_LIMIT = 2**63

_TOP_KEYS = ("name", "seed", "stopping", "engine", "cluster", "study")
_STOPPING_KEYS = ("failure_target", "shot_budget", "relative_precision")
_ENGINE_KEYS = ("batch_bytes",)
#: Study keys of every study; the noise models' own keys (rates, options) are added from the registry.
_STUDY_KEYS = ("code", "distances", "rounds", "basis", "noise", "decoders", "decoder_options", "label")
_ROUNDS_ALLOWED = (
    "a positive integer, a non-empty list of positive integers, "
    "or a multiple of d such as 'd' or '2d'"
)
_P_ALLOWED = "a non-empty list of numbers or a table { geomspace = [low, high, count] }"
_GEOMSPACE_ALLOWED = "a list [low, high, count] with 0 < low <= high and an integer count >= 1"
_NAME_ALLOWED = "a string matching [A-Za-z0-9][A-Za-z0-9_.-]* (it names the output folder)"
_SEED_ALLOWED = "an integer in [0, 2**63 - 1]"


class _Problem(ConfigError):
    """A rejected value, before the source is put in front of the message."""


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
        raise ConfigError(f"sweep file {source!r} cannot be read: {_one_line(str(exc))}") from None
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise ConfigError(f"{source}: not valid TOML: not UTF-8 text ({_one_line(str(exc))})") from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"{source}: not valid TOML: {_one_line(str(exc))}") from None
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
    except _Problem as problem:
        raise ConfigError(f"{source}: {problem}") from None


def parse_rounds(spec: object, distance: int, path: str) -> list[int]:
    """Resolve a ``rounds`` value for one distance.

    Parameters
    ----------
    spec : object
        A positive integer, a non-empty list of them, or a multiple of the
        distance written ``"d"``, ``"2d"``, ``"3d"``, ...
    distance : int
        The code distance ``"kd"`` is multiplied out with.
    path : str
        Key path used in the error message, such as ``study[0].rounds``.

    Returns
    -------
    list of int
        The rounds, in the order given.

    Raises
    ------
    ConfigError
        If ``spec`` is not one of the allowed forms (the message has no
        source in front; :func:`parse_sweep` adds it).

    Examples
    --------
    >>> parse_rounds("3d", 5, "rounds")
    [15]
    >>> parse_rounds([1, 4], 5, "rounds")
    [1, 4]
    """
    if isinstance(spec, str):
        match = _ROUNDS_PATTERN.fullmatch(spec)
        if match is None:
            raise _Problem(not_allowed(path, spec, _ROUNDS_ALLOWED))
        factor = int(match.group(1)) if match.group(1) else 1
        return [factor * distance]
    if _is_int(spec):
        return [_positive_int(spec, path, "a positive integer")]
    if isinstance(spec, list) and spec:
        return [_positive_int(r, f"{path}[{i}]", "a positive integer") for i, r in enumerate(spec)]
    raise _Problem(not_allowed(path, spec, _ROUNDS_ALLOWED))


# ---------------------------------------------------------------------------
# internals: every helper raises _Problem with a message that has no source.


def _parse(data: object, source: str, text: str) -> Sweep:
    # Device files named in a sweep file are found relative to it.
    base_dir = Path(source).parent if not source.startswith("<") else Path.cwd()
    if not isinstance(data, dict):
        raise _Problem(not_allowed("the sweep", data, "a table"))
    _check_keys(data, "", _TOP_KEYS)
    name = _require(data, "name", "a string naming the output folder")
    if not isinstance(name, str) or NAME_PATTERN.fullmatch(name) is None:
        raise _Problem(not_allowed("name", name, _NAME_ALLOWED))
    seed = _require(data, "seed", _SEED_ALLOWED)
    if not _is_int(seed) or not 0 <= seed < _SEED_LIMIT:
        raise _Problem(not_allowed("seed", seed, _SEED_ALLOWED))
    stopping = _parse_stopping(data.get("stopping", {}))
    batch_bytes = _parse_engine(data.get("engine", {}))
    cluster = _parse_cluster(data["cluster"]) if "cluster" in data else None
    studies = _require(data, "study", "one or more [[study]] tables")
    if not isinstance(studies, list) or not studies:
        raise _Problem(not_allowed("study", studies, "a non-empty array of tables ([[study]])"))
    points: list[Point] = []
    seen: set[Point] = set()
    labels: set[str] = set()
    for index, study in enumerate(studies):
        label, study_points = _parse_study(study, index, base_dir)
        if label in labels:
            raise _Problem(not_allowed(f"study[{index}].label", label, "a label no earlier study uses"))
        labels.add(label)
        for point in study_points:
            if point not in seen:
                seen.add(point)
                points.append(point)
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
        raise _Problem(not_allowed("stopping", table, "a table ([stopping])"))
    _check_keys(table, "stopping", _STOPPING_KEYS)
    failure_target = _positive_int(
        table.get("failure_target", 200), "stopping.failure_target", "an integer >= 1"
    )
    shot_budget = _positive_int(
        table.get("shot_budget", 1_000_000), "stopping.shot_budget", "an integer >= 1"
    )
    precision: float | None = None
    if "relative_precision" in table:
        value = table["relative_precision"]
        if not _is_number(value) or not 0 < value < 1:
            raise _Problem(not_allowed("stopping.relative_precision", value, "a number in (0, 1)"))
        precision = float(value)
    return Stopping(failure_target=failure_target, shot_budget=shot_budget, relative_precision=precision)


def _parse_engine(table: object) -> int:
    if not isinstance(table, dict):
        raise _Problem(not_allowed("engine", table, "a table ([engine])"))
    _check_keys(table, "engine", _ENGINE_KEYS)
    value = table.get("batch_bytes", DEFAULT_BATCH_BYTES)
    if not _is_int(value) or value < MIN_BATCH_BYTES:
        raise _Problem(not_allowed("engine.batch_bytes", value, f"an integer >= {MIN_BATCH_BYTES}"))
    return int(value)


def _parse_cluster(table: object) -> ClusterSpec:
    try:
        return parse_cluster(table)
    except ConfigError as exc:  # its message has no source in front yet
        raise _Problem(str(exc)) from None


def _parse_study(study: object, index: int, base_dir: Path) -> tuple[str, list[Point]]:
    at = f"study[{index}]"
    if not isinstance(study, dict):
        raise _Problem(not_allowed(at, study, "a table ([[study]])"))
    _check_keys(study, at, _STUDY_KEYS + tuple(sorted(_noise_keys())))

    code_allowed = _one_of(CODE_FAMILIES)
    code = _require(study, "code", code_allowed, at)
    if not isinstance(code, str) or code not in CODE_FAMILIES:
        raise _Problem(not_allowed(f"{at}.code", code, code_allowed))
    family = CODE_FAMILIES[code]

    distances = _parse_distances(_require(study, "distances", "a non-empty list of integers", at), family, at)
    rounds_spec = _require(study, "rounds", _ROUNDS_ALLOWED, at)
    rounds = {d: parse_rounds(rounds_spec, d, f"{at}.rounds") for d in distances}
    bases = _parse_bases(study.get("basis", ["Z"]), family, at)

    noise_allowed = _one_of(NOISE_MODELS)
    noise = _require(study, "noise", noise_allowed, at)
    if not isinstance(noise, str) or noise not in NOISE_MODELS:
        raise _Problem(not_allowed(f"{at}.noise", noise, noise_allowed))
    model = NOISE_MODELS[noise]

    rates, options = _parse_noise(study, model, at, base_dir)
    decoders = _parse_decoders(
        _require(study, "decoders", f"a non-empty list of names from {_names(DECODERS)}", at), at
    )
    decoder_options = _parse_decoder_options(study.get("decoder_options", {}), decoders, at)
    label = study.get("label", str(index))
    if not isinstance(label, str) or not label:
        raise _Problem(not_allowed(f"{at}.label", label, "a non-empty string"))

    points = [
        Point(
            code=code,
            distance=d,
            rounds=r,
            basis=b,
            noise=noise,
            p=p,
            decoder=decoder,
            noise_options=options,
            decoder_options=decoder_options[decoder],
            study=label,
        )
        for d in distances
        for r in rounds[d]
        for b in bases
        for p in rates
        for decoder in decoders
    ]
    return label, points


def _parse_distances(value: object, family: CodeFamily, at: str) -> list[int]:
    path = f"{at}.distances"
    if not isinstance(value, list) or not value:
        raise _Problem(not_allowed(path, value, "a non-empty list of integers"))
    distances: list[int] = []
    for i, d in enumerate(value):
        if not _is_int(d):
            raise _Problem(not_allowed(f"{path}[{i}]", d, "an integer"))
        problem = family.distance_problem(int(d))
        if problem is not None:
            raise _Problem(not_allowed(f"{path}[{i}]", d, f"{problem} for {family.name}"))
        distances.append(int(d))
    return distances


def _parse_bases(value: object, family: CodeFamily, at: str) -> list[Basis]:
    path = f"{at}.basis"
    allowed = _one_of(family.bases)
    if isinstance(value, str):
        if value not in family.bases:
            raise _Problem(not_allowed(path, value, f"{allowed} or a list of them"))
        return [value]
    if not isinstance(value, list) or not value:
        raise _Problem(not_allowed(path, value, f"{allowed} or a non-empty list of them"))
    bases: list[Basis] = []
    for i, b in enumerate(value):
        if not isinstance(b, str) or b not in family.bases:
            raise _Problem(not_allowed(f"{path}[{i}]", b, allowed))
        bases.append(b)
    return bases


def _source_file(value: object, path: str, kind: str, base_dir: Path) -> Path:
    if not isinstance(value, str) or not value:
        raise _Problem(not_allowed(path, value, f"the path of a {kind} file (TOML or JSON)"))
    file = Path(value) if Path(value).is_absolute() else base_dir / value
    if file.is_dir():
        raise _Problem(not_allowed(path, value, f"a {kind} file (TOML or JSON); {file} is a folder"))
    if not file.is_file():
        raise _Problem(not_allowed(path, value, f"an existing {kind} file ({file} does not exist)"))
    return file


def _parse_p(value: object, model: type[NoiseModel], at: str, key: str = "p") -> list[float]:
    path = f"{at}.{key}"
    in_range = f"a number in [0, {model.p_max:g}] for {model.name}"
    if isinstance(value, dict):
        _check_keys(value, path, ("geomspace",))
        spec = _require(value, "geomspace", _GEOMSPACE_ALLOWED, path)
        rates = _geomspace(spec, f"{path}.geomspace", model)
        for rate in rates:
            if not 0 <= rate <= model.p_max:
                raise _Problem(not_allowed(f"{path}.geomspace", spec, in_range))
        return rates
    if not isinstance(value, list) or not value:
        raise _Problem(not_allowed(path, value, _P_ALLOWED))
    rates = []
    for i, p in enumerate(value):
        if not _is_number(p) or not 0 <= p <= model.p_max:
            raise _Problem(not_allowed(f"{path}[{i}]", p, in_range))
        rates.append(float(p))
    return rates


def _geomspace(spec: object, path: str, model: type[NoiseModel]) -> list[float]:
    if not isinstance(spec, list) or len(spec) != 3:
        raise _Problem(not_allowed(path, spec, _GEOMSPACE_ALLOWED))
    low, high, count = spec
    if not _is_number(low) or not low > 0:
        raise _Problem(not_allowed(f"{path}[0]", low, "a number > 0 (the lowest p)"))
    if not _is_number(high) or not low <= high <= model.p_max:
        raise _Problem(
            not_allowed(f"{path}[1]", high, f"a number in [{low:g}, {model.p_max:g}] (low <= high <= p_max)")
        )
    if not _is_int(count) or count < 1:
        raise _Problem(not_allowed(f"{path}[2]", count, "an integer >= 1 (how many rates)"))
    values = np.geomspace(float(low), float(high), int(count))
    return [float(f"{v:.{P_DIGITS}g}") for v in values]


_DECODERS_ALLOWED = "a registered decoder name or 'package.module:ClassName' naming a Decoder subclass"


def _parse_decoders(value: object, at: str) -> dict[str, type[Decoder]]:
    """The study's decoders (registered names or plug-in specs), in order, with their classes."""
    path = f"{at}.decoders"
    allowed = _one_of(DECODERS)
    if not isinstance(value, list) or not value:
        raise _Problem(not_allowed(path, value, f"a non-empty list of names from {_names(DECODERS)} "
                                                "or 'package.module:ClassName' specs"))
    decoders: dict[str, type[Decoder]] = {}
    for i, name in enumerate(value):
        if isinstance(name, str) and is_spec(name):
            try:
                decoders[name] = get_decoder(name)
            except DecoderError as exc:
                raise _Problem(f"{path}[{i}] must be {_DECODERS_ALLOWED}; got {name!r}: {exc}.") from None
            continue
        if not isinstance(name, str) or name not in DECODERS:
            raise _Problem(not_allowed(f"{path}[{i}]", name, f"{allowed} (or a plug-in 'package.module:ClassName')"))
        decoders[name] = DECODERS[name]
    return decoders


def _parse_decoder_options(
    value: object, decoders: dict[str, type[Decoder]], at: str
) -> dict[str, tuple[tuple[str, Any], ...]]:
    """Every option of every decoder of the study, checked, defaults filled in (they enter the point key)."""
    path = f"{at}.decoder_options"
    if not isinstance(value, dict):
        raise _Problem(not_allowed(path, value, "a table of decoder name = { option = value }"))
    for name in value:
        if name not in decoders:
            listed = ", ".join(repr(d) for d in decoders)
            raise _Problem(f"{path}.{name} names a decoder this study does not use; {at}.decoders is [{listed}].")
    chosen: dict[str, tuple[tuple[str, Any], ...]] = {}
    for name, cls in decoders.items():
        given = value.get(name, {})
        where = f"{path}.{name}" if NAME_PATTERN.fullmatch(name) and "." not in name else f"{path}.{json.dumps(name)}"
        if not isinstance(given, dict):
            raise _Problem(not_allowed(where, given, f"a table of option = value for {cls.name}"))
        _check_keys(given, where, tuple(cls.option_specs))
        try:
            resolved = cls.resolve_options(given, at=where)
        except (TypeError, ValueError) as exc:
            raise _Problem(str(exc)) from None
        chosen[name] = tuple(sorted(resolved.items()))
    return chosen


def _noise_keys() -> set[str]:
    return {key for model in NOISE_MODELS.values() for key in _model_keys(model)}


def _model_keys(model: type[NoiseModel]) -> set[str]:
    """The study keys a noise model reads: its rate key and its options' source."""
    return {model.rate.key, "noise_options" if model.source_key is None else model.source_key}


def _parse_noise(study: dict[str, Any], model: type[NoiseModel], at: str,
                 base_dir: Path) -> tuple[list[float], tuple[tuple[str, str], ...]]:
    """The study's rates and noise options, read where ``model`` declares them.

    The rates come from the model's rate key (``p``, or ``scale`` for a factor
    on a device's error rates); the options from the file named by its source
    key (``device``) or else from the ``noise_options`` table, checked against
    the model's declared option specs.
    """
    own = _model_keys(model)
    for key in sorted(_noise_keys() - own):
        if key in study:
            users = [repr(m.name) for m in NOISE_MODELS.values() if key in _model_keys(m)]
            raise _Problem(f"{at}.{key} is not used with noise = {model.name!r} (only with noise = "
                           f"{', '.join(users)}); it takes {', '.join(sorted(own))}: "
                           f"{model.rate.key} = [...] for its rates.")
    if model.rate.default is None:
        rates = _parse_p(_require(study, model.rate.key, _P_ALLOWED, at), model, at, key=model.rate.key)
    else:
        rates = _parse_p(study.get(model.rate.key, list(model.rate.default)), model, at, key=model.rate.key)
    if model.source_key is not None:
        kind = model.source_key
        file = _source_file(_require(study, kind, f"the path of a {kind} file", at), f"{at}.{kind}", kind, base_dir)
        return rates, tuple(sorted(model.options_from_source(file).items()))
    table = study.get("noise_options", {})
    path = f"{at}.noise_options"
    if not isinstance(table, dict):
        raise _Problem(not_allowed(path, table, "a table of option = value"))
    _check_keys(table, path, tuple(model.option_specs))
    try:
        chosen = resolve_options(model.option_specs, table, path, model.name)
    except (KeyError, TypeError, ValueError) as exc:
        raise _Problem(str(exc.args[0])) from None
    return rates, tuple(sorted((k, str(v)) for k, v in chosen.items()))


def _check_keys(table: dict[Any, Any], at: str, allowed: tuple[str, ...]) -> None:
    for key in table:
        if key not in allowed:
            path = f"{at}.{key}" if at else str(key)
            listed = ", ".join(allowed) if allowed else "(none)"
            raise _Problem(f"{path} is not a known key; allowed keys: {listed}.")


def _require(table: dict[str, Any], key: str, what: str, at: str = "") -> Any:
    if key not in table:
        path = f"{at}.{key}" if at else key
        raise _Problem(f"{path} is required ({what}).")
    return table[key]


def _positive_int(value: object, path: str, allowed: str) -> int:
    if not _is_int(value) or value < 1:
        raise _Problem(not_allowed(path, value, allowed))
    return int(value)


def _is_int(value: object) -> TypeGuard[int]:
    """An integer, but not a bool (numpy integers count, for dict input)."""
    return isinstance(value, (int, np.integer)) and not isinstance(value, bool)


def _is_number(value: object) -> TypeGuard[float]:
    """An integer or a float, but not a bool."""
    return isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(value, bool)


def _names(names: Iterable[str]) -> str:
    return ", ".join(repr(n) for n in names)


def _one_of(names: Iterable[str]) -> str:
    return "one of " + _names(names)


def _one_line(text: str) -> str:
    return " ".join(text.split())

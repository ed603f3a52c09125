"""One ``[[study]]`` table: code, distances, rounds, bases, noise model and its rates, decoders.

Noise keys are read where the noise model declares them (its rate key and
its options' source), so a new model needs no change here.
"""

from __future__ import annotations

import json
import re
from pathlib import Path
from typing import Any

import numpy as np

from codebench.build import size_estimate
from codebench.codes import CODE_FAMILIES
from codebench.codes.base import CodeFamily
from codebench.config.checks import (
    NAME_PATTERN,
    Problem,
    check_keys,
    is_int,
    is_number,
    one_of,
    positive_int,
    quoted,
    require,
)
from codebench.decoders import DECODERS, get_decoder
from codebench.decoders.base import Decoder
from codebench.decoders.plugins import is_spec
from codebench.errors import DecoderError, not_allowed
from codebench.layout import Basis
from codebench.noise import NOISE_MODELS
from codebench.noise.base import NoiseModel
from codebench.options import resolve_options
from codebench.records import Point

__all__ = ["parse_rounds", "parse_study"]

#: A multiple of the distance: "d", "2d", "3d", ...
_ROUNDS_PATTERN = re.compile(r"([1-9][0-9]*)?d")
#: Significant digits kept for geomspace-expanded rates, so point keys are stable.
P_DIGITS = 12
#: Largest code distance a study may ask for (a patch of tens of thousands of qubits; the detector
#: bound below is what usually binds).
MAX_DISTANCE = 201
#: Most syndrome rounds of one point.
MAX_ROUNDS = 10_000
#: Most rates one study's geomspace may expand to (the sweep's grid has its own bound).
MAX_RATES = 10_000
#: Most points of a sweep (each is described, built and stored; a larger grid is a mistyped count).
MAX_POINTS = 20_000
#: Most detectors one point's circuit may have: its detector error model and decoder take about
#: 1 kB per detector (measured: 3.7 MB of model text at 3,360 detectors), so this is a few GB.
MAX_DETECTORS = 2_000_000
#: Study keys of every study; the noise models' own keys (rates, options) are added from the registry.
_STUDY_KEYS = ("code", "distances", "rounds", "basis", "noise", "decoders", "decoder_options", "label")
_ROUNDS_ALLOWED = (
    "a positive integer, a non-empty list of positive integers, "
    "or a multiple of d such as 'd' or '2d'"
)
_P_ALLOWED = "a non-empty list of numbers or a table { geomspace = [low, high, count] }"
_GEOMSPACE_ALLOWED = "a list [low, high, count] with 0 < low <= high and an integer count >= 1"


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
            raise Problem(not_allowed(path, spec, _ROUNDS_ALLOWED))
        factor = int(match.group(1)) if match.group(1) else 1
        if factor * distance > MAX_ROUNDS:
            raise Problem(not_allowed(path, spec, f"{_ROUNDS_ALLOWED}, at most {MAX_ROUNDS:,} rounds"))
        return [factor * distance]
    if is_int(spec):
        return [_rounds_value(spec, path)]
    if isinstance(spec, list) and spec:
        return [_rounds_value(r, f"{path}[{i}]") for i, r in enumerate(spec)]
    raise Problem(not_allowed(path, spec, _ROUNDS_ALLOWED))


def _rounds_value(value: object, path: str) -> int:
    rounds = positive_int(value, path, f"a positive integer (at most {MAX_ROUNDS:,})")
    if rounds > MAX_ROUNDS:
        raise Problem(not_allowed(path, value, f"a positive integer (at most {MAX_ROUNDS:,})"))
    return rounds


# ---------------------------------------------------------------------------
# internals: every helper raises Problem with a message that has no source.


def parse_study(study: object, index: int, base_dir: Path) -> tuple[str, list[Point]]:
    at = f"study[{index}]"
    if not isinstance(study, dict):
        raise Problem(not_allowed(at, study, "a table ([[study]])"))
    check_keys(study, at, _STUDY_KEYS + tuple(sorted(_noise_keys())))

    code_allowed = one_of(CODE_FAMILIES)
    code = require(study, "code", code_allowed, at)
    if not isinstance(code, str) or code not in CODE_FAMILIES:
        raise Problem(not_allowed(f"{at}.code", code, code_allowed))
    family = CODE_FAMILIES[code]

    distances = _parse_distances(require(study, "distances", "a non-empty list of integers", at), family, at)
    rounds_spec = require(study, "rounds", _ROUNDS_ALLOWED, at)
    rounds = {d: parse_rounds(rounds_spec, d, f"{at}.rounds") for d in distances}
    bases = _parse_bases(study.get("basis", ["Z"]), family, at)

    noise_allowed = one_of(NOISE_MODELS)
    noise = require(study, "noise", noise_allowed, at)
    if not isinstance(noise, str) or noise not in NOISE_MODELS:
        raise Problem(not_allowed(f"{at}.noise", noise, noise_allowed))
    model = NOISE_MODELS[noise]

    rates, options = _parse_noise(study, model, at, base_dir)
    decoders = _parse_decoders(
        require(study, "decoders", f"a non-empty list of names from {quoted(DECODERS)}", at), at
    )
    decoder_options = _parse_decoder_options(study.get("decoder_options", {}), decoders, at)
    label = study.get("label", str(index))
    if not isinstance(label, str) or not label:
        raise Problem(not_allowed(f"{at}.label", label, "a non-empty string"))
    grid = sum(len(r) for r in rounds.values()) * len(bases) * len(rates) * len(decoders)
    if grid > MAX_POINTS:
        raise Problem(f"{at} expands to {grid:,} points ({len(distances)} distances x rounds x {len(bases)} bases x "
                      f"{len(rates)} rates x {len(decoders)} decoders); at most {MAX_POINTS:,} points per sweep.")
    for d, r in sorted({(d, r) for d in distances for r in rounds[d]}):
        _check_size(family, d, r, bases, at)

    placed = {d: model.options_for(options, code, d) for d in distances}
    points = [
        Point(
            code=code,
            distance=d,
            rounds=r,
            basis=b,
            noise=noise,
            p=p,
            decoder=decoder,
            noise_options=placed[d],
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
        raise Problem(not_allowed(path, value, "a non-empty list of integers"))
    distances: list[int] = []
    for i, d in enumerate(value):
        if not is_int(d):
            raise Problem(not_allowed(f"{path}[{i}]", d, "an integer"))
        problem = family.distance_problem(int(d))
        if problem is not None:
            raise Problem(not_allowed(f"{path}[{i}]", d, f"{problem} for {family.name}"))
        if d > MAX_DISTANCE:
            raise Problem(not_allowed(f"{path}[{i}]", d, f"a distance of at most {MAX_DISTANCE}"))
        distances.append(int(d))
    return distances


def _check_size(family: CodeFamily, distance: int, rounds: int, bases: list[Basis], at: str) -> None:
    """Refuse, before anything is built, a point whose circuit would be too big to compile.

    Detectors are counted from the layout (one per check per round, plus the final data readout's),
    which costs a fraction of building the circuit.
    """
    qubits, detectors = size_estimate(family, distance, rounds, bases[0])
    if detectors > MAX_DETECTORS:
        raise Problem(
            f"{at}: {family.name} at d = {distance} with {rounds} rounds would have about {detectors:,} detectors "
            f"on {qubits:,} qubits (about {detectors / 1e6:.0f} GB to analyse and decode); at most "
            f"{MAX_DETECTORS:,} detectors per point: lower the distance or the rounds."
        )


def _parse_bases(value: object, family: CodeFamily, at: str) -> list[Basis]:
    path = f"{at}.basis"
    allowed = one_of(family.bases)
    if isinstance(value, str):
        if value not in family.bases:
            raise Problem(not_allowed(path, value, f"{allowed} or a list of them"))
        return [value]
    if not isinstance(value, list) or not value:
        raise Problem(not_allowed(path, value, f"{allowed} or a non-empty list of them"))
    bases: list[Basis] = []
    for i, b in enumerate(value):
        if not isinstance(b, str) or b not in family.bases:
            raise Problem(not_allowed(f"{path}[{i}]", b, allowed))
        bases.append(b)
    return bases


def _source_file(value: object, path: str, kind: str, base_dir: Path) -> Path:
    if not isinstance(value, str) or not value:
        raise Problem(not_allowed(path, value, f"the path of a {kind} file (TOML or JSON)"))
    file = Path(value) if Path(value).is_absolute() else base_dir / value
    if file.is_dir():
        raise Problem(not_allowed(path, value, f"a {kind} file (TOML or JSON); {file} is a folder"))
    if not file.is_file():
        raise Problem(not_allowed(path, value, f"an existing {kind} file ({file} does not exist)"))
    return file


def _parse_p(value: object, model: type[NoiseModel], at: str, key: str = "p") -> list[float]:
    path = f"{at}.{key}"
    in_range = f"a number in [0, {model.p_max:g}] for {model.name}"
    if isinstance(value, dict):
        check_keys(value, path, ("geomspace",))
        spec = require(value, "geomspace", _GEOMSPACE_ALLOWED, path)
        rates = _geomspace(spec, f"{path}.geomspace", model)
        for rate in rates:
            if not 0 <= rate <= model.p_max:
                raise Problem(not_allowed(f"{path}.geomspace", spec, in_range))
        return rates
    if not isinstance(value, list) or not value:
        raise Problem(not_allowed(path, value, _P_ALLOWED))
    rates = []
    for i, p in enumerate(value):
        if not is_number(p) or not 0 <= p <= model.p_max:
            raise Problem(not_allowed(f"{path}[{i}]", p, in_range))
        rates.append(float(p))
    return rates


def _geomspace(spec: object, path: str, model: type[NoiseModel]) -> list[float]:
    if not isinstance(spec, list) or len(spec) != 3:
        raise Problem(not_allowed(path, spec, _GEOMSPACE_ALLOWED))
    low, high, count = spec
    if not is_number(low) or not low > 0:
        raise Problem(not_allowed(f"{path}[0]", low, "a number > 0 (the lowest p)"))
    if not is_number(high) or not low <= high <= model.p_max:
        raise Problem(
            not_allowed(f"{path}[1]", high, f"a number in [{low:g}, {model.p_max:g}] (low <= high <= p_max)")
        )
    if not is_int(count) or not 1 <= count <= MAX_RATES:
        raise Problem(not_allowed(f"{path}[2]", count, f"an integer in [1, {MAX_RATES:,}] (how many rates)"))
    values = np.geomspace(float(low), float(high), int(count))
    return [float(f"{v:.{P_DIGITS}g}") for v in values]


_DECODERS_ALLOWED = "a registered decoder name or 'package.module:ClassName' naming a Decoder subclass"


def _parse_decoders(value: object, at: str) -> dict[str, type[Decoder]]:
    """The study's decoders (registered names or plug-in specs), in order, with their classes."""
    path = f"{at}.decoders"
    allowed = one_of(DECODERS)
    if not isinstance(value, list) or not value:
        raise Problem(not_allowed(path, value, f"a non-empty list of names from {quoted(DECODERS)} "
                                                "or 'package.module:ClassName' specs"))
    decoders: dict[str, type[Decoder]] = {}
    for i, name in enumerate(value):
        if isinstance(name, str) and is_spec(name):
            try:
                decoders[name] = get_decoder(name)
            except DecoderError as exc:
                raise Problem(f"{path}[{i}] must be {_DECODERS_ALLOWED}; got {name!r}: {exc}.") from None
            continue
        if not isinstance(name, str) or name not in DECODERS:
            raise Problem(not_allowed(f"{path}[{i}]", name, f"{allowed} (or a plug-in 'package.module:ClassName')"))
        decoders[name] = DECODERS[name]
    return decoders


def _parse_decoder_options(
    value: object, decoders: dict[str, type[Decoder]], at: str
) -> dict[str, tuple[tuple[str, Any], ...]]:
    """Every option of every decoder of the study, checked, defaults filled in (they enter the point key)."""
    path = f"{at}.decoder_options"
    if not isinstance(value, dict):
        raise Problem(not_allowed(path, value, "a table of decoder name = { option = value }"))
    for name in value:
        if name not in decoders:
            listed = ", ".join(repr(d) for d in decoders)
            raise Problem(f"{path}.{name} names a decoder this study does not use; {at}.decoders is [{listed}].")
    chosen: dict[str, tuple[tuple[str, Any], ...]] = {}
    for name, cls in decoders.items():
        given = value.get(name, {})
        where = f"{path}.{name}" if NAME_PATTERN.fullmatch(name) and "." not in name else f"{path}.{json.dumps(name)}"
        if not isinstance(given, dict):
            raise Problem(not_allowed(where, given, f"a table of option = value for {cls.name}"))
        check_keys(given, where, tuple(cls.option_specs))
        try:
            resolved = cls.resolve_options(given, at=where)
        except (TypeError, ValueError) as exc:
            raise Problem(str(exc)) from None
        chosen[name] = tuple(sorted(resolved.items()))
    return chosen


def _noise_keys() -> set[str]:
    return {key for model in NOISE_MODELS.values() for key in _model_keys(model)}


def _model_keys(model: type[NoiseModel]) -> set[str]:
    """The study keys a noise model reads: its rate key and its options' source."""
    return {model.rate.key, "noise_options" if model.source_key is None else model.source_key,
            *model.source_overrides}


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
            raise Problem(f"{at}.{key} is not used with noise = {model.name!r} (only with noise = "
                           f"{', '.join(users)}); it takes {', '.join(sorted(own))}: "
                           f"{model.rate.key} = [...] for its rates.")
    if model.rate.default is None:
        rates = _parse_p(require(study, model.rate.key, _P_ALLOWED, at), model, at, key=model.rate.key)
    else:
        rates = _parse_p(study.get(model.rate.key, list(model.rate.default)), model, at, key=model.rate.key)
    if model.source_key is not None:
        kind = model.source_key
        file = _source_file(require(study, kind, f"the path of a {kind} file", at), f"{at}.{kind}", kind, base_dir)
        overrides = {key: study[key] for key in model.source_overrides if key in study}
        return rates, tuple(sorted(model.options_from_source(file, **overrides).items()))
    table = study.get("noise_options", {})
    path = f"{at}.noise_options"
    if not isinstance(table, dict):
        raise Problem(not_allowed(path, table, "a table of option = value"))
    check_keys(table, path, tuple(model.option_specs))
    try:
        chosen = resolve_options(model.option_specs, table, path, model.name)
    except (KeyError, TypeError, ValueError) as exc:
        raise Problem(str(exc.args[0])) from None
    return rates, tuple(sorted((k, str(v)) for k, v in chosen.items()))

"""Words on and around a figure: family titles and file-name slugs, axis labels, rate names.

Nothing here knows a noise model by name. What a rate means comes from the
model's :attr:`~codebench.noise.base.NoiseModel.rate`, which options are worth
naming from its :attr:`~codebench.noise.base.NoiseModel.option_specs`, and the
option holding the document the model was read from (its
:attr:`~codebench.noise.base.NoiseModel.source_key`) is shown by the label its
:meth:`~codebench.noise.base.NoiseModel.display_options` gave it (``"name [digest]"``).
An unknown model name gets the standard physical rate and shows every option.
"""

from __future__ import annotations

import re

from codebench.analysis.families import DEFAULT_SOURCE, Family
from codebench.noise import NOISE_MODELS
from codebench.noise.base import PHYSICAL_RATE, NoiseModel, RateMeaning
from codebench.options import parse_options_text

SEPARATOR = " \u00b7 "
#: Characters of the family line that fit above the axes of a 7-inch figure.
SUBLINE_CHARS = 66

_DOCUMENT_LABEL = re.compile(r"^(?P<name>.*?)\s*\[(?P<digest>[0-9a-f]+)\]$")


def _model(noise: str) -> type[NoiseModel] | None:
    return NOISE_MODELS.get(noise)


def rate_meaning(noise: str) -> RateMeaning:
    """What ``p`` means for noise model ``noise`` (the physical rate for an unknown model)."""
    model = _model(noise)
    return model.rate if model is not None else PHYSICAL_RATE


def compares_with_physical(rate: RateMeaning) -> bool:
    """Whether ``p`` is a physical error probability, so "logical = physical" and pseudo-thresholds mean something."""
    return rate.key == PHYSICAL_RATE.key


def rate_noun(rate: RateMeaning, article: bool = False) -> str:
    """The rate named in running text: its symbol (``p``), or the axis label's words (``the device scale factor``).

    >>> rate_noun(PHYSICAL_RATE, article=True)
    'p'
    >>> rate_noun(RateMeaning("scale", "device scale factor (multiplies every error rate)", "scale"), True)
    'the device scale factor'
    """
    if len(rate.short) == 1:  # a symbol stands for itself
        return rate.short
    words = rate.axis_label.split(" (", 1)[0]
    return f"the {words}" if article else words


def non_default_options(noise: str, noise_options: str) -> dict[str, str]:
    """The noise options that differ from the model's defaults (all of them if the model is unknown)."""
    options = parse_options_text(noise_options)
    model = _model(noise)
    defaults = {key: str(spec.default) for key, spec in model.option_specs.items()} if model is not None else {}
    return {str(k): str(v) for k, v in sorted(options.items()) if defaults.get(str(k)) != str(v)}


def _source_document(noise: str, options: dict[str, str]) -> tuple[str, str] | None:
    """(name, digest) of the document the model's options were read from, popped from ``options``."""
    model = _model(noise)
    key = model.source_key if model is not None else None
    if key is None or key not in options:
        return None
    label = options.pop(key)
    match = _DOCUMENT_LABEL.match(label)
    return (match.group("name"), match.group("digest")) if match else (label, "")


def safe(text: str) -> str:
    """``text`` reduced to characters every file system accepts.

    >>> safe("a b/c [1]")
    'a-b-c-1'
    """
    return re.sub(r"[^A-Za-z0-9_.+-]+", "-", text).strip("-")


def family_slug(family: Family, with_decoder: bool = True) -> str:
    """The family part of a figure's file name."""
    parts = [family.code, family.basis, family.noise]
    options = non_default_options(family.noise, family.noise_options)
    document = _source_document(family.noise, options)
    if document is not None:
        name, digest = document
        parts.append(safe(name)[:32].strip("-") + (f"-{digest[:8]}" if digest else ""))
    parts += [f"{key}-{value}" for key, value in options.items()]
    if with_decoder:
        parts.append(family.decoder)
    parts.append(f"r{family.rounds_rule}")
    if family.source != DEFAULT_SOURCE:
        parts.append(family.source)
    return safe("_".join(parts))


def family_title(family: Family, with_decoder: bool = True) -> str:
    """The family in words, parts joined by a middle dot."""
    noise = family.noise
    options = non_default_options(family.noise, family.noise_options)
    document = _source_document(family.noise, options)
    if document is not None:
        noise = f"{noise} {document[0]}"
    if options:
        noise += " (" + ", ".join(f"{key}={value}" for key, value in options.items()) + ")"
    parts = [family.code, f"{family.basis} basis", noise]
    if with_decoder:
        parts.append(family.decoder)
    parts.append(f"rounds {family.rounds_rule}")
    if family.source != DEFAULT_SOURCE:
        parts.append(family.source)
    return SEPARATOR.join(parts)


def wrap_family(text: str) -> str:
    """Break a long family line into two lines, at the separator nearest the middle."""
    if len(text) <= SUBLINE_CHARS:
        return text
    parts = text.split(SEPARATOR)
    best, split = None, 1
    for i in range(1, len(parts)):
        first = SEPARATOR.join(parts[:i])
        score = max(len(first), len(text) - len(first))
        if best is None or score < best:
            best, split = score, i
    return SEPARATOR.join(parts[:split]) + "\n" + SEPARATOR.join(parts[split:])

"""Decoders from outside codebench: ``"package.module:ClassName"``.

A sweep file may name, in ``decoders``, a class of the user's own next to the
registered names::

    decoders = ["mwpm", "mylab.decoders:UnionFind"]

The class must subclass :class:`codebench.decoders.base.Decoder` and set a
``name``. The point keeps the spec string as its decoder, so workers (local
processes or a cluster) import the class the same way; the module must be
importable there too (installed, or on ``PYTHONPATH``).
"""

from __future__ import annotations

import importlib
import re

from codebench.decoders.base import Decoder
from codebench.errors import DecoderError

__all__ = ["SPEC_PATTERN", "is_spec", "load_decoder"]

#: ``package.module:ClassName``: dotted module path, a colon, a class name.
SPEC_PATTERN = re.compile(r"[A-Za-z_][A-Za-z0-9_]*(\.[A-Za-z_][A-Za-z0-9_]*)*:[A-Za-z_][A-Za-z0-9_]*")


def is_spec(text: str) -> bool:
    """Whether ``text`` is meant as a plug-in spec (it has a colon) rather than a registered name."""
    return ":" in text


def load_decoder(spec: str) -> type[Decoder]:
    """The decoder class named by ``spec`` = ``"package.module:ClassName"``.

    Raises
    ------
    DecoderError
        With one line saying why: the spec is malformed, the module cannot be
        imported, it has no such attribute, or the attribute is not a
        :class:`Decoder` subclass with a ``name``.

    Examples
    --------
    >>> load_decoder("codebench.decoders.matching:Matching").name
    'mwpm'
    >>> load_decoder("codebench.decoders.matching:Nothing")
    Traceback (most recent call last):
    ...
    codebench.errors.DecoderError: module 'codebench.decoders.matching' has no attribute 'Nothing'
    """
    if not isinstance(spec, str) or SPEC_PATTERN.fullmatch(spec) is None:
        raise DecoderError(f"{spec!r} is not of the form 'package.module:ClassName'")
    module_name, _, attribute = spec.partition(":")
    try:
        module = importlib.import_module(module_name)
    except ImportError as exc:
        raise DecoderError(f"module {module_name!r} cannot be imported ({' '.join(str(exc).split())})") from None
    except Exception as exc:  # noqa: BLE001 - a user's module may fail in any way while importing
        raise DecoderError(f"module {module_name!r} failed while importing ({type(exc).__name__}: "
                           f"{' '.join(str(exc).split())})") from None
    if not hasattr(module, attribute):
        raise DecoderError(f"module {module_name!r} has no attribute {attribute!r}")
    cls = getattr(module, attribute)
    if not isinstance(cls, type) or not issubclass(cls, Decoder):
        what = f"the class {cls.__name__}" if isinstance(cls, type) else f"a {type(cls).__name__}"
        raise DecoderError(f"{spec} is {what}, not a subclass of codebench.decoders.base.Decoder")
    if not isinstance(getattr(cls, "name", None), str) or not cls.name:
        raise DecoderError(f"{spec} has no class attribute 'name' (a non-empty string)")
    if getattr(cls, "__abstractmethods__", None):
        missing = ", ".join(sorted(cls.__abstractmethods__))
        raise DecoderError(f"{spec} does not implement {missing}")
    return cls

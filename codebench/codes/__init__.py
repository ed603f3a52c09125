"""Code families by name."""

from __future__ import annotations

from codebench.codes.base import CodeFamily
from codebench.codes.heavy_hex import HeavyHex
from codebench.codes.repetition import Repetition
from codebench.codes.rotated_surface import RotatedSurface
from codebench.layout import Basis, Check, Layout, Role

CODE_FAMILIES: dict[str, CodeFamily] = {}


def register(family: CodeFamily) -> None:
    """Make ``family`` available under ``family.name``."""
    CODE_FAMILIES[family.name] = family


def get_code_family(name: str) -> CodeFamily:
    """The registered family called ``name``; ``KeyError`` if there is none."""
    return CODE_FAMILIES[name]


register(Repetition())
register(RotatedSurface())
register(HeavyHex())

__all__ = ["Basis", "Check", "CodeFamily", "Layout", "Role", "CODE_FAMILIES", "get_code_family", "register"]

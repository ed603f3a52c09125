"""Which figure files are current: a manifest of what each was drawn from.

``DIR/.figures.json`` records, per figure stem, a digest of the figure's
inputs (everything its ``draw`` reads, :class:`~codebench.figures.canvas.FigurePlan`)
and the sizes of its two files, under a ``drawn_by`` stamp: the codebench and
matplotlib versions and a digest of this package's source. A figure is
current when the stamp, its digest and both file sizes match; otherwise it is
drawn again. The manifest sits beside ``figures/``, not in it, so that folder
holds only figures.
"""

from __future__ import annotations

import dataclasses
import functools
import hashlib
import json
from importlib import metadata
from pathlib import Path
from typing import Any

import matplotlib
import numpy as np

from codebench.figures.canvas import FigurePlan
from codebench.files import write_text

MANIFEST_NAME = ".figures.json"
_FORMAT = 1


def _plain(value: Any) -> Any:
    """``value`` as JSON: arrays with their dtype and shape, dataclasses field by field (floats exact)."""
    if isinstance(value, np.ndarray):
        return {"dtype": str(value.dtype), "shape": list(value.shape), "values": value.tolist()}
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return {f.name: _plain(getattr(value, f.name)) for f in dataclasses.fields(value)}
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if isinstance(value, np.generic):
        return value.item()
    if value is None or isinstance(value, (bool, int, float, str)):
        return value
    return repr(value)


def plan_digest(plan: FigurePlan[Any]) -> str:
    """Digest of what ``plan`` draws: its kind, names and inputs."""
    content = {"kind": plan.kind, "stem": plan.stem, "title": plan.title, "caption": plan.caption,
               "inputs": _plain(plan.inputs)}
    text = json.dumps(content, sort_keys=True, separators=(",", ":"), allow_nan=True)
    return hashlib.sha256(text.encode()).hexdigest()


@functools.cache
def drawn_by() -> dict[str, str]:
    """What else decides a figure's pixels: versions, and this package's source (edits redraw everything)."""
    source = hashlib.sha256()
    for path in sorted(Path(__file__).parent.glob("*.py")):
        source.update(path.name.encode() + b"\0" + path.read_bytes())
    try:
        version = metadata.version("codebench")
    except metadata.PackageNotFoundError:
        version = "unknown"
    return {"codebench": version, "matplotlib": matplotlib.__version__, "source": source.hexdigest()[:16]}


class Manifest:
    """The manifest of one folder: loaded, consulted, updated, saved."""

    def __init__(self, folder: Path) -> None:
        self.path = Path(folder) / MANIFEST_NAME
        self.entries: dict[str, dict[str, Any]] = {}
        self._saved: dict[str, Any] | None = None
        try:
            loaded = json.loads(self.path.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            return
        if isinstance(loaded, dict):
            self._saved = loaded
            if loaded.get("format") == _FORMAT and loaded.get("drawn_by") == drawn_by():
                figures = loaded.get("figures")
                if isinstance(figures, dict):
                    self.entries = {str(k): v for k, v in figures.items() if isinstance(v, dict)}

    def current(self, stem: str, digest: str, png: Path, svg: Path) -> bool:
        """Whether ``png`` and ``svg`` were drawn from inputs with ``digest`` and are still as written."""
        entry = self.entries.get(stem)
        if entry is None or entry.get("inputs") != digest:
            return False
        return _size(png) == entry.get("png_bytes") and _size(svg) == entry.get("svg_bytes")

    def keep_only(self, stems: set[str]) -> None:
        self.entries = {stem: entry for stem, entry in self.entries.items() if stem in stems}

    def record(self, stem: str, kind: str, digest: str, png: Path, svg: Path) -> None:
        self.entries[stem] = {"kind": kind, "inputs": digest, "png_bytes": _size(png), "svg_bytes": _size(svg)}

    def save(self) -> None:
        """Write the manifest atomically, unless it is unchanged."""
        content = {"format": _FORMAT, "drawn_by": drawn_by(),
                   "figures": {stem: self.entries[stem] for stem in sorted(self.entries)}}
        if content == self._saved:
            return
        write_text(self.path, json.dumps(content, indent=1))
        self._saved = content


def _size(path: Path) -> int | None:
    try:
        return path.stat().st_size
    except OSError:
        return None

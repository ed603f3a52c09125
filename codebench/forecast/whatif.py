"""Device what-ifs: ``--improve NAME=FACTOR`` edits of a device's numbers."""

from __future__ import annotations

import copy
import math
from typing import Any, Mapping, Sequence

from codebench.errors import ConfigError, not_allowed
from codebench.noise.calibration import Device, parse_device

__all__ = ["IMPROVABLE", "check_improve", "improve_device", "parse_improve", "place_device"]

#: Parameters ``improve`` may scale. For t1_us / t2_us the factor applies to 1/T; ``noise`` scales all of them
#: together (the sweep file's ``scale``), which keeps the mechanisms proportional so f(w) tables are reused.
#: ``link_error`` scales the two-qubit error of the couplers marked ``link = true`` only; ``zz_khz`` every
#: residual ZZ rate.
IMPROVABLE = ("t1_us", "t2_us", "gate_1q_error", "gate_2q_error", "readout_error", "reset_error", "link_error",
              "zz_khz", "noise")
SCALED_TOGETHER = ("t1_us", "t2_us", "gate_1q_error", "gate_2q_error", "readout_error", "reset_error")


def parse_improve(text: str) -> tuple[str, float]:
    """``"gate_2q_error=0.5"`` -> ``("gate_2q_error", 0.5)``; raises :class:`ConfigError`.

    >>> parse_improve("t1_us=0.5")
    ('t1_us', 0.5)
    """
    allowed = f"NAME=FACTOR with NAME one of {', '.join(IMPROVABLE)} and FACTOR a positive number"
    name, sep, value = text.partition("=")
    name = name.strip()
    try:
        factor = float(value)
    except ValueError:
        factor = math.nan
    if not sep or name not in IMPROVABLE or not math.isfinite(factor) or factor <= 0:
        raise ConfigError(not_allowed("--improve", text, allowed))
    return name, factor


def check_improve(improve: Mapping[str, float]) -> dict[str, float]:
    out: dict[str, float] = {}
    for name, factor in improve.items():
        text = f"{name}={factor}"
        if name not in IMPROVABLE or isinstance(factor, bool) or not isinstance(factor, (int, float)) \
                or not math.isfinite(factor) or factor <= 0:
            raise ConfigError(not_allowed("--improve", text, f"NAME=FACTOR with NAME one of "
                                          f"{', '.join(IMPROVABLE)} and FACTOR a positive number"))
        out[name] = float(factor)
    return out


def improve_device(device: Device, improve: Mapping[str, float], source: str = "<device>") -> Device:
    """The device with each named parameter multiplied by its factor, re-validated.

    ``t1_us`` / ``t2_us``: the factor multiplies 1/T (0.5 doubles T). The
    error parameters are multiplied directly. Each applies to the defaults,
    to every per-qubit value and (``gate_2q_error``) every per-pair value;
    ``readout_error`` also scales the conditional readout errors; ``noise``
    scales every one of them together (like a sweep's ``scale``). The
    modified data are parsed again with
    :func:`~codebench.noise.calibration.parse_device`, so a factor that makes
    a value invalid (a probability above 0.5, T2 > 2 T1) raises
    :class:`~codebench.errors.DeviceFileError`.

    >>> from codebench.noise.calibration import parse_device
    >>> base = parse_device({"name": "x", "defaults": {"t1_us": 100.0, "t2_us": 80.0, "gate_1q_error": 1e-4,
    ...     "gate_2q_error": 4e-3, "readout_error": 1e-2, "reset_error": 1e-3},
    ...     "durations": {"gate_1q_ns": 20, "gate_2q_ns": 40, "measure_ns": 500, "reset_ns": 200}})
    >>> better = improve_device(base, {"gate_2q_error": 0.5, "t1_us": 0.5})
    >>> better.gate_2q_error, better.defaults.t1_us
    (0.002, 200.0)
    """
    factors = check_improve(improve)
    if not factors:
        return device
    data = copy.deepcopy(device.data)

    def scale(table: Any, key: str, factor: float, inverse: bool) -> None:
        if isinstance(table, dict) and isinstance(table.get(key), (int, float)) and not isinstance(table[key], bool):
            table[key] = table[key] / factor if inverse else table[key] * factor

    tables = [data.get("defaults")] + list(data.get("qubits", []) or [])
    pairs = list(data.get("pairs", []) or [])
    _refuse_what_ifs_that_change_nothing(factors, data, pairs)
    expanded: list[tuple[str, float]] = []
    for name, factor in factors.items():
        expanded += [(each, factor) for each in SCALED_TOGETHER] if name == "noise" else [(name, factor)]
    for name, factor in expanded:
        inverse = name in ("t1_us", "t2_us")
        keys = [name] + (["readout_error_0to1", "readout_error_1to0"] if name == "readout_error" else [])
        for table in tables:
            for key in keys:
                scale(table, key, factor, inverse)
        if name == "gate_2q_error":
            for pair in pairs:
                scale(pair, "gate_2q_error", factor, False)
        if name == "zz_khz":
            for pair in pairs:
                scale(pair, "zz_khz", factor, False)
        if name == "link_error":
            default = data.get("defaults", {}).get("gate_2q_error")
            for pair in pairs:
                if isinstance(pair, dict) and pair.get("link") is True:
                    pair.setdefault("gate_2q_error", default)
                    scale(pair, "gate_2q_error", factor, False)
    spec = ",".join(f"{k}={v:g}" for k, v in factors.items())
    return parse_device(data, f"{source} with --improve {spec}")


def _refuse_what_ifs_that_change_nothing(factors: Mapping[str, float], data: dict[str, Any],
                                         pairs: list[Any]) -> None:
    """``link_error`` on a device without links, or ``zz_khz`` where no coupler has ZZ, would silently give
    the device as it is: one line instead (the user meant another device, or another parameter)."""
    if "link_error" in factors and not any(isinstance(p, dict) and p.get("link") is True for p in pairs):
        raise ConfigError(not_allowed("--improve", f"link_error={factors['link_error']:g}",
                                      "a parameter the device has: it marks no coupler link = true"))
    rates = [data.get("defaults", {}).get("zz_khz")] + [p.get("zz_khz") for p in pairs if isinstance(p, dict)]
    if "zz_khz" in factors and not any(isinstance(r, (int, float)) and r > 0 for r in rates):
        raise ConfigError(not_allowed("--improve", f"zz_khz={factors['zz_khz']:g}",
                                      "a parameter the device has: no coupler has a residual ZZ rate above 0"))


def place_device(device: Device, placement: str | Sequence[str] | None, source: str = "<device>") -> Device:
    """The device with its ``placement`` replaced (best / worst / median or device qubit ids), re-validated."""
    if placement is None:
        return device
    data = copy.deepcopy(device.data)
    data["placement"] = placement if isinstance(placement, str) else list(placement)
    return parse_device(data, f"{source} with placement {placement if isinstance(placement, str) else 'list'}")

"""Measured records in: one row per shot, one column per measurement bit of the experiment.

Formats (stim's documented result formats, and NumPy): ``01`` (a text line of ``0``/``1`` per shot),
``b8`` (each shot bit-packed, little-endian, ceil(bits / 8) bytes), ``r8`` (each shot as run lengths of
zeros before each one, with a final one past its end) and ``npy`` (a 2-D array of 0/1, shots x bits,
any integer or bool dtype). The format is the file's suffix unless given. Bit i of a row is measurement
i of the experiment, in the order of the description file's ``bits`` (and of the OpenQASM program's
``rec`` register). Anything that does not fit is one :class:`~codebench.errors.DataError` line naming
the file.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import stim

from codebench.errors import DataError, not_allowed

FORMATS = ("01", "b8", "r8", "npy")


def format_of(path: str | Path, given: str | None = None) -> str:
    """The records' format: ``given``, else the file's suffix."""
    fmt = given if given is not None else Path(path).suffix.lstrip(".")
    if fmt not in FORMATS:
        what = "--format" if given is not None else f"the suffix of '{path}' (or --format)"
        raise DataError(not_allowed(what, fmt, " | ".join(FORMATS)))
    return fmt


def read_records(path: str | Path, bits: int, fmt: str | None = None) -> np.ndarray:
    """The measured records of ``path`` as a bool array (shots, bits)."""
    file = Path(path)
    kind = format_of(file, fmt)
    if not file.is_file():
        raise DataError(f"no records file at '{file}'.")
    reader = {"01": _read_01, "b8": _read_b8, "r8": _read_r8, "npy": _read_npy}[kind]
    records = reader(file, bits)
    if len(records) == 0:
        raise DataError(f"{file}: holds no shots.")
    return records


def _read_01(file: Path, bits: int) -> np.ndarray:
    try:
        lines = file.read_bytes().decode("ascii").splitlines()
    except UnicodeDecodeError:
        raise DataError(f"{file}: not a 01 text file (a line of 0 and 1 per shot).") from None
    allowed = frozenset("01")
    for number, line in enumerate(lines, start=1):
        if len(line) != bits or not set(line) <= allowed:
            found = f"{len(line)} characters" if set(line) <= allowed else "characters other than 0 and 1"
            raise DataError(f"{file}, line {number}: {found}; each shot must be {bits} bits (0 or 1), one per "
                            "measurement of the experiment.")
    return _stim_read(file, "01", bits)


def _read_b8(file: Path, bits: int) -> np.ndarray:
    width = (bits + 7) // 8
    size = file.stat().st_size
    if size % width:
        raise DataError(f"{file}: {size} bytes is not a whole number of shots of {width} bytes ({bits} bits each); "
                        "the file is truncated or holds another experiment's records.")
    packed = np.fromfile(file, dtype=np.uint8).reshape(-1, width)
    if bits % 8 and np.any(packed[:, -1] >> (bits % 8)):
        raise DataError(f"{file}: bits past the {bits} of a shot are set; the file holds records of another "
                        "experiment (more measurements per shot).")
    return np.unpackbits(packed, axis=1, count=bits, bitorder="little").astype(bool)


def _read_r8(file: Path, bits: int) -> np.ndarray:
    return _stim_read(file, "r8", bits)


def _stim_read(file: Path, fmt: str, bits: int) -> np.ndarray:
    try:
        data = stim.read_shot_data_file(path=str(file), format=fmt, num_measurements=bits)
    except (ValueError, RuntimeError) as exc:
        reason = " ".join(str(exc).split())[:200]
        raise DataError(f"{file}: not {bits}-bit shots in the {fmt} format ({reason}).") from None
    return np.asarray(data, dtype=bool)


#: The first bytes of every .npy file (NumPy's format, version 1 and later).
NPY_MAGIC = b"\x93NUMPY"


def _read_npy(file: Path, bits: int) -> np.ndarray:
    with file.open("rb") as handle:
        start = handle.read(len(NPY_MAGIC))
    if start != NPY_MAGIC:
        # np.load would take it for a pickle and advise loading it unsafely: say what it is not instead.
        raise DataError(f"{file}: not a NumPy .npy array (it does not start with the .npy header); give "
                        "--format 01, b8 or r8 for the other record formats.")
    try:
        data = np.load(file, allow_pickle=False)
    except (ValueError, OSError, EOFError) as exc:
        raise DataError(f"{file}: not a NumPy .npy array ({' '.join(str(exc).split())[:200]}).") from None
    if not isinstance(data, np.ndarray) or data.ndim != 2 or data.shape[1] != bits:
        shape = getattr(data, "shape", None)
        raise DataError(f"{file}: " + not_allowed("the array's shape", shape, f"(shots, {bits}): one row per shot, "
                                                  "one column per measurement bit"))
    if data.dtype != bool and (data.dtype.kind not in "iu" or np.any((data != 0) & (data != 1))):
        raise DataError(f"{file}: the array must hold 0 and 1 (bool or integer); got dtype {data.dtype} or other "
                        "values.")
    return data.astype(bool)


def write_records(path: str | Path, records: np.ndarray, fmt: str | None = None) -> Path:
    """Write bool records (shots, bits) in a format (for examples and tests; stim writes the stim formats)."""
    file = Path(path)
    kind = format_of(file, fmt)
    if kind == "npy":
        np.save(file, records.astype(np.uint8))
    else:
        stim.write_shot_data_file(data=records.astype(bool), path=str(file), format=kind,
                                  num_measurements=records.shape[1])
    return file

"""Exact, plain-text save and load of states and results (JSON).

Every limb is written as a C99 hexadecimal float string (``float.hex``), so a reloaded value has the
same bits; a decimal rendering of each value is written beside it for people to read (it is not
read back). The file records the format version, the loschmidt version and the precision.

Layout of a saved System (``"format": "loschmidt.system"``)::

    {"format": "loschmidt.system", "format_version": 1, "loschmidt": "0.1.0",
     "precision": "dd", "n": 3,
     "masses": [["0x1.8p+1", "0x0.0p+0"], ...],            # (N, k) limbs
     "positions": [[["0x1.0p+0", "0x0.0p+0"], ...], ...],  # (N, 3, k) limbs
     "velocities": ..., "time": ["0x0.0p+0", "0x0.0p+0"], "radii": null,
     "decimal": {"masses": ["3.0000...e+0", ...], "positions": ..., "velocities": ..., "time": ...}}

A saved Result (``"format": "loschmidt.result"``) holds the final ``system`` in that layout, the
settings (method, precision, tol), the status and counters, and the trajectory's limbs if any.
"""

from __future__ import annotations

import json
import os
import tempfile
from typing import Any

import numpy as np

from . import precision as _p

__all__ = ["FORMAT_VERSION", "limbs_to_json", "limbs_from_json", "write_json", "read_json"]

FORMAT_VERSION = 1


def limbs_to_json(a: np.ndarray) -> Any:
    """Nested lists of hex-float strings, exact."""
    arr = np.asarray(a, dtype=np.float64)
    if arr.ndim == 0:
        return float(arr).hex()
    return [limbs_to_json(x) for x in arr]


def limbs_from_json(obj: Any, name: str) -> np.ndarray:
    """The inverse of ``limbs_to_json``; ``ValueError`` naming ``name`` on malformed input."""

    def conv(x: Any) -> Any:
        if isinstance(x, list):
            return [conv(y) for y in x]
        if isinstance(x, str):
            try:
                return float.fromhex(x)
            except ValueError:
                raise ValueError(f"{name}: {x!r} is not a hexadecimal float") from None
        raise ValueError(f"{name}: expected hexadecimal float strings, got {type(x).__name__}")

    try:
        arr = np.array(conv(obj), dtype=np.float64)
    except ValueError as exc:
        if name in str(exc):
            raise
        raise ValueError(f"{name}: not a rectangular array") from None
    if not np.all(np.isfinite(arr)):
        raise ValueError(f"{name}: values must be finite")
    return arr


def decimal_strings(limbs: np.ndarray) -> Any:
    s = _p.to_string(limbs)
    return s.tolist() if isinstance(s, np.ndarray) else s


def write_json(path: Any, payload: dict) -> None:
    """Write atomically: a temporary file in the same directory, then a rename."""
    path = os.fspath(path)
    directory = os.path.dirname(os.path.abspath(path))
    fd, tmp = tempfile.mkstemp(prefix=".tmp-", suffix=".json", dir=directory)
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            json.dump(payload, fh, indent=1)
            fh.write("\n")
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise


def read_json(path: Any, expected_format: str) -> dict:
    path = os.fspath(path)
    with open(path, encoding="utf-8") as fh:
        try:
            data = json.load(fh)
        except json.JSONDecodeError as exc:
            raise ValueError(f"path: {path} is not a loschmidt JSON file ({exc})") from None
    if not isinstance(data, dict) or data.get("format") != expected_format:
        raise ValueError(f"path: {path} does not hold a {expected_format!r} record")
    if data.get("format_version", 0) > FORMAT_VERSION:
        raise ValueError(f"path: format version {data.get('format_version')} is newer than this loschmidt reads")
    return data

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

#: Version of the JSON layout written by ``System.save`` and ``Result.save``; files of a newer
#: version are refused.
FORMAT_VERSION = 1


def limbs_to_json(a: np.ndarray) -> Any:
    """Limbs as nested lists of hexadecimal float strings (exact).

    Parameters
    ----------
    a : array-like
        float64 values of any shape.

    Returns
    -------
    str or list
        ``float.hex`` strings, nested as the array.

    Examples
    --------
    >>> from loschmidt.serialize import limbs_from_json, limbs_to_json
    >>> limbs_to_json([0.1, 0.0])
    ['0x1.999999999999ap-4', '0x0.0p+0']
    >>> limbs_from_json(limbs_to_json([0.1, 0.0]), "x")
    array([0.1, 0. ])
    """
    arr = np.asarray(a, dtype=np.float64)
    if arr.ndim == 0:
        return float(arr).hex()
    return [limbs_to_json(x) for x in arr]


def limbs_from_json(obj: Any, name: str, finite: bool = True) -> np.ndarray:
    """The inverse of ``limbs_to_json``.

    Parameters
    ----------
    obj : str or nested lists of str
        Hexadecimal float strings.
    name : str
        The field name used in error messages.

    Returns
    -------
    numpy.ndarray
        float64 values, bit for bit.

    Raises
    ------
    ValueError
        On malformed, ragged or non-finite input.
    """

    def conv(x: Any) -> Any:
        if isinstance(x, list):
            return [conv(y) for y in x]
        if isinstance(x, str):
            try:
                return float.fromhex(x)
            except (ValueError, OverflowError):
                text = repr(x) if len(x) <= 40 else repr(x[:37]) + "..."
                raise ValueError(f"{name}: {text} is not a hexadecimal float of the double range") from None
        raise ValueError(f"{name}: expected hexadecimal float strings, got {type(x).__name__}")

    try:
        arr = np.array(conv(obj), dtype=np.float64)
    except ValueError as exc:
        if name in str(exc):
            raise
        raise ValueError(f"{name}: not a rectangular array") from None
    if finite and not np.all(np.isfinite(arr)):
        raise ValueError(f"{name}: values must be finite")
    return arr


def decimal_strings(limbs: np.ndarray) -> Any:
    """Decimal renderings of a limb array for people to read (``precision.to_string``), as lists."""
    a = np.asarray(limbs, dtype=np.float64)
    if not np.all(np.isfinite(a)):  # the state of a failed run: its infinities and NaN as they are
        rows = a.reshape(-1, a.shape[-1])
        out = [str(_p.to_string(r)) if np.all(np.isfinite(r)) else repr(float(r[0])) for r in rows]
        return out[0] if a.ndim == 1 else np.array(out, dtype=object).reshape(a.shape[:-1]).tolist()
    s = _p.to_string(a)
    return s.tolist() if isinstance(s, np.ndarray) else s


def write_json(path: Any, payload: dict) -> None:
    """Write a JSON record atomically: a temporary file in the same directory, then a rename.

    Parameters
    ----------
    path : str or os.PathLike
        The file.
    payload : dict
        The record (``System.to_dict``, ``Result.to_dict``).
    """
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
    """Read a JSON record written by ``write_json`` and check its format.

    Parameters
    ----------
    path : str or os.PathLike
        The file.
    expected_format : str
        ``"loschmidt.system"`` or ``"loschmidt.result"``.

    Returns
    -------
    dict
        The record.

    Raises
    ------
    ValueError
        When the file is no JSON, holds another format, or a newer format version.
    """
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

"""The on-disk store of a sweep: a Parquet dataset with one file per finished chunk, and a manifest.

Layout of a store directory::

    manifest.json            the sweep definition and its hash (written before any work)
    chunks/chunk-000000.parquet, chunk-000001.parquet, ...

``chunks/`` is a plain Parquet dataset (``pyarrow.parquet.read_table(store / "chunks")`` reads it).
A chunk file is written under a temporary name beginning with ``.`` in the same directory (which
dataset readers skip), flushed to disk and renamed into place, so a file with a chunk's name is
always complete: a killed run leaves at most a temporary file, removed by the next run. The chunk's
index, first member, row count, content hash and the definition hash travel in the file's metadata,
and a rerun skips exactly the chunks whose file exists, so no row is ever written twice or lost.

Full-precision values are stored exactly, as fixed-size lists of float64 limbs (the per-row shape,
limb axis last, is in the field metadata; ``limbs`` rebuilds the array).
"""

from __future__ import annotations

import hashlib
import json
import os
import re
import uuid
from pathlib import Path
from typing import Any, Iterable, Mapping

import numpy as np

__all__ = ["SweepStore", "columns_to_arrow", "limbs", "read_store", "definition_hash"]

MANIFEST = "manifest.json"
CHUNK_DIR = "chunks"
_CHUNK_RE = re.compile(r"^chunk-(\d{6,})\.parquet$")
_TEMP_RE = re.compile(r"^\.chunk-\d+\.parquet\.(\d+)\.[0-9a-f]+\.tmp$")
_SHAPE_KEY = b"loschmidt.shape"
_CHUNK_KEY = b"loschmidt.chunk"


def _pa():
    import pyarrow as pa
    import pyarrow.parquet as pq

    return pa, pq


def canonical_json(value: Any) -> str:
    """The JSON text hashed for a definition: sorted keys, no spaces, no NaN."""
    return json.dumps(value, sort_keys=True, separators=(",", ":"), allow_nan=False)


def definition_hash(definition: Mapping[str, Any]) -> str:
    """SHA-256 of the canonical JSON of a sweep definition.

    Parameters
    ----------
    definition : mapping
        JSON-friendly sweep definition (``Sweep.definition``).

    Returns
    -------
    str
        64 hexadecimal digits; the same for definitions equal as JSON, whatever the key order.

    Examples
    --------
    >>> from loschmidt.store import definition_hash
    >>> definition_hash({"a": 1, "b": [2, 3]}) == definition_hash({"b": [2, 3], "a": 1})
    True
    """
    return hashlib.sha256(canonical_json(definition).encode()).hexdigest()


# ---------------------------------------------------------------------------------------------------
# columns <-> Arrow


def columns_to_arrow(columns: Mapping[str, np.ndarray], metadata: Mapping[bytes, bytes] | None = None):
    """A ``pyarrow.Table`` from columns of M rows each.

    Parameters
    ----------
    columns : mapping of str to array-like
        (M, ...) arrays: 1-D numeric or string arrays become plain columns, arrays with more axes
        fixed-size lists of their flattened rows (the per-row shape kept in the field metadata).
    metadata : mapping of bytes to bytes, optional
        Schema metadata.

    Returns
    -------
    pyarrow.Table

    Examples
    --------
    >>> import numpy as np
    >>> from loschmidt.store import columns_to_arrow, limbs
    >>> t = columns_to_arrow({"member": np.arange(2), "x": np.arange(12.0).reshape(2, 3, 2)})
    >>> t.num_rows, t.column_names
    (2, ['member', 'x'])
    >>> limbs(t, "x").shape
    (2, 3, 2)
    """
    pa, _pq = _pa()
    fields, arrays = [], []
    rows = None
    for name, value in columns.items():
        a = np.asarray(value)
        if rows is None:
            rows = a.shape[0]
        if a.ndim == 0 or a.shape[0] != rows:
            raise ValueError(f"column {name!r}: expected {rows} rows, got shape {a.shape}")
        if a.ndim == 1:
            if a.dtype == object or a.dtype.kind == "U":
                arr = pa.array([str(s) for s in a], type=pa.string())
            else:
                arr = pa.array(a)
            fields.append(pa.field(name, arr.type))
        else:
            width = int(np.prod(a.shape[1:]))
            flat = np.ascontiguousarray(a).reshape(-1)
            arr = pa.FixedSizeListArray.from_arrays(pa.array(flat), width)
            fields.append(pa.field(name, arr.type, metadata={_SHAPE_KEY: json.dumps(list(a.shape[1:])).encode()}))
        arrays.append(arr)
    return pa.Table.from_arrays(arrays, schema=pa.schema(fields, metadata=dict(metadata or {})))


def limbs(table: Any, name: str) -> np.ndarray:
    """A full-precision column of a store's table as an array.

    Parameters
    ----------
    table : pyarrow.Table
        Rows of a store (``Sweep.results(format="arrow")``, ``read_store(..., format="arrow")``).
    name : str
        A limb column (``"returned_positions"``, ``"forward_t"`` ...).

    Returns
    -------
    numpy.ndarray
        float64 of shape (rows, ..., k), the per-row shape read from the field metadata.
    """
    pa, _pq = _pa()
    if not isinstance(table, pa.Table):
        raise TypeError("table: expected a pyarrow.Table (Sweep.results(format='arrow'))")
    if name not in table.column_names:
        raise ValueError(f"name: no column {name!r}")
    field = table.schema.field(name)
    meta = field.metadata or {}
    if _SHAPE_KEY not in meta:
        raise ValueError(f"name: column {name!r} is not a full-precision (limb) column")
    shape = tuple(json.loads(meta[_SHAPE_KEY]))
    col = table.column(name).combine_chunks()
    values = col.flatten().to_numpy(zero_copy_only=False)
    return values.reshape((len(table),) + shape)


# ---------------------------------------------------------------------------------------------------
# the store


def _pid_alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


class SweepStore:
    """A store directory (see the module docstring); ``Sweep`` drives it.

    Parameters
    ----------
    path : str or os.PathLike
        The directory (created by ``open`` when needed).
    """

    def __init__(self, path: Any) -> None:
        if path is None:
            raise ValueError("store: a directory path is required")
        if not isinstance(path, (str, os.PathLike)):
            raise TypeError(f"store: expected a path, got {type(path).__name__}")
        self.path = Path(path)
        self.chunk_dir = self.path / CHUNK_DIR

    # -- manifest -------------------------------------------------------------------------------------
    def read_manifest(self) -> dict | None:
        """The manifest of the store.

        Returns
        -------
        dict or None
            ``{"definition": ..., "definition_hash": ...}``, or None when there is no manifest yet.
        """
        p = self.path / MANIFEST
        if not p.exists():
            return None
        try:
            return json.loads(p.read_text())
        except (OSError, ValueError) as exc:
            raise ValueError(f"store: {p} is not a readable sweep manifest ({exc})") from None

    def open(self, definition: Mapping[str, Any]) -> str:
        """Check that the store can hold this definition (creating it if needed) before any work.

        A new store gets its manifest now; an existing one must have been made by the same
        definition.

        Parameters
        ----------
        definition : mapping
            JSON-friendly sweep definition.

        Returns
        -------
        str
            The definition hash.

        Raises
        ------
        ValueError
            For an unwritable path, a foreign directory or a different definition.
        """
        digest = definition_hash(definition)
        if self.path.exists() and not self.path.is_dir():
            raise ValueError(f"store: {self.path} exists and is not a directory")
        manifest = self.read_manifest() if self.path.is_dir() else None
        if manifest is None:
            if self.path.is_dir() and self._foreign():
                raise ValueError(f"store: {self.path} is not empty and holds no {MANIFEST}; refusing to write there")
        else:
            if manifest.get("definition_hash") != digest:
                raise ValueError(self._mismatch(manifest.get("definition", {}), definition))
        try:
            self.chunk_dir.mkdir(parents=True, exist_ok=True)
            probe = self.chunk_dir / f".probe.{os.getpid()}.{uuid.uuid4().hex}.tmp"
            probe.write_bytes(b"")
            probe.unlink()
            if manifest is None:
                self._write_atomic(self.path / MANIFEST, json.dumps(
                    {"definition": definition, "definition_hash": digest}, indent=2, sort_keys=True).encode())
        except OSError as exc:
            raise ValueError(f"store: cannot write to {self.path} ({exc.strerror or exc})") from None
        return digest

    def _foreign(self) -> bool:
        """True when the directory holds something other than what an interrupted start leaves
        (temporary dot files, an empty chunks/ directory)."""
        for p in self.path.iterdir():
            if p.name.startswith("."):
                continue
            if p.name == CHUNK_DIR and p.is_dir() and all(q.name.startswith(".") for q in p.iterdir()):
                continue
            return True
        return False

    @staticmethod
    def _mismatch(old: Mapping[str, Any], new: Mapping[str, Any]) -> str:
        diffs = []

        def walk(a: Any, b: Any, prefix: str) -> None:
            if isinstance(a, Mapping) and isinstance(b, Mapping):
                for key in sorted(set(a) | set(b)):
                    walk(a.get(key), b.get(key), f"{prefix}.{key}" if prefix else key)
            elif a != b:
                diffs.append(f"{prefix}: stored {a!r}, now {b!r}")

        walk(dict(old), dict(new), "")
        detail = "; ".join(diffs[:6]) or "definition hash differs"
        return f"store: made by a different sweep definition ({detail}); use another store path"

    # -- chunks ---------------------------------------------------------------------------------------
    def chunk_path(self, index: int) -> Path:
        """The file of chunk ``index`` (``chunks/chunk-NNNNNN.parquet``), whether or not it exists.

        Parameters
        ----------
        index : int
            Chunk index.

        Returns
        -------
        pathlib.Path
        """
        return self.chunk_dir / f"chunk-{index:06d}.parquet"

    def finished(self) -> dict[int, Path]:
        """Every finished chunk.

        Returns
        -------
        dict of int to pathlib.Path
            Chunk index -> its file, in index order.
        """
        if not self.chunk_dir.is_dir():
            return {}
        out = {}
        for p in self.chunk_dir.iterdir():
            m = _CHUNK_RE.match(p.name)
            if m:
                out[int(m.group(1))] = p
        return dict(sorted(out.items()))

    def chunk_info(self, index: int) -> dict:
        """The metadata a finished chunk was written with.

        Parameters
        ----------
        index : int
            A finished chunk.

        Returns
        -------
        dict
            ``index``, ``start`` (first member), ``rows``, ``hash`` (content hash of its initial
            conditions) and ``definition_hash``.
        """
        _pa_mod, pq = _pa()
        meta = pq.read_schema(self.chunk_path(index)).metadata or {}
        if _CHUNK_KEY not in meta:
            raise ValueError(f"store: {self.chunk_path(index)} carries no chunk metadata")
        return json.loads(meta[_CHUNK_KEY])

    def remove_stale_temporaries(self) -> None:
        """Delete temporary chunk files left by runs that are no longer alive."""
        if not self.chunk_dir.is_dir():
            return
        for p in self.chunk_dir.iterdir():
            m = _TEMP_RE.match(p.name)
            if m and not _pid_alive(int(m.group(1))):
                try:
                    p.unlink()
                except FileNotFoundError:
                    pass

    def write_chunk(self, index: int, table: Any, info: Mapping[str, Any]) -> Path:
        """Write one finished chunk atomically (temporary file, fsync, rename).

        Parameters
        ----------
        index : int
            Chunk index.
        table : pyarrow.Table
            Its rows.
        info : mapping
            Chunk metadata (see ``chunk_info``).

        Returns
        -------
        pathlib.Path
            The chunk's file.
        """
        _pa_mod, pq = _pa()
        meta = dict(table.schema.metadata or {})
        meta[_CHUNK_KEY] = canonical_json(dict(info)).encode()
        table = table.replace_schema_metadata(meta)
        target = self.chunk_path(index)
        tmp = self.chunk_dir / f".{target.name}.{os.getpid()}.{uuid.uuid4().hex}.tmp"
        try:
            with open(tmp, "wb") as f:
                pq.write_table(table, f)
                f.flush()
                os.fsync(f.fileno())
            os.replace(tmp, target)
        except BaseException:
            try:
                tmp.unlink()
            except FileNotFoundError:
                pass
            raise
        return target

    def _write_atomic(self, target: Path, data: bytes) -> None:
        tmp = target.parent / f".{target.name}.{os.getpid()}.{uuid.uuid4().hex}.tmp"
        with open(tmp, "wb") as f:
            f.write(data)
            f.flush()
            os.fsync(f.fileno())
        os.replace(tmp, target)

    def read(self, columns: Iterable[str] | None = None):
        """Every finished chunk as one table.

        Parameters
        ----------
        columns : iterable of str, optional
            Columns to read (default all).

        Returns
        -------
        pyarrow.Table
            Rows in member order.
        """
        pa, pq = _pa()
        files = list(self.finished().values())
        cols = None if columns is None else list(columns)
        if not files:
            return pa.table({}) if cols is None else pa.table({c: pa.array([]) for c in cols})
        tables = [pq.read_table(p, columns=cols) for p in files]
        table = pa.concat_tables(tables).replace_schema_metadata(None)
        if "member" in table.column_names:
            order = np.argsort(table.column("member").to_numpy(), kind="stable")
            if np.any(np.diff(order) != 1):
                table = table.take(pa.array(order))
        return table


def read_store(path: Any, format: str = "pandas", columns: Iterable[str] | None = None) -> Any:
    """The results held by a sweep store (finished chunks only).

    Parameters
    ----------
    path : str or os.PathLike
        The store directory.
    format : {"pandas", "arrow"}, optional
        A pandas DataFrame (default) or a ``pyarrow.Table`` (whose limb columns ``limbs`` turns
        into arrays).
    columns : iterable of str, optional
        Columns to read (default all).

    Returns
    -------
    pandas.DataFrame or pyarrow.Table
        One row per finished member, in member order.

    Raises
    ------
    ValueError
        When ``path`` holds no store.
    """
    store = SweepStore(path)
    if store.read_manifest() is None:
        raise ValueError(f"store: {store.path} holds no {MANIFEST}")
    return _convert(store.read(columns), format)


def _convert(table: Any, format: str) -> Any:
    if format == "arrow":
        return table
    if format == "pandas":
        return table.to_pandas()
    raise ValueError(f"format: expected 'pandas' or 'arrow', got {format!r}")

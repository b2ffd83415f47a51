"""Sweeps: one task over every member of a (possibly huge) ensemble, in chunks, into a resumable store.

::

    sweep = Sweep(loschmidt.ics.free_fall_grid(200, 200), task="roundtrip", store="ff.sweep", t=100)
    sweep.run()                      # Ctrl-C, a crash or SIGKILL: run again to resume
    df = sweep.results()             # pandas DataFrame, one row per member, in member order

The ensemble (an ``Ensemble``, or an iterable of ``Ensemble`` pieces of one family, streamed) is cut
into chunks of ``chunk_size`` consecutive members (pieces of a stream are re-cut, so the chunks do
not depend on how the stream was split). Each chunk runs a *task*, a function
``run(chunk: Ensemble, options: dict) -> columns`` (a dict of (len(chunk), ...) arrays) looked up by
name in a small registry (``register_task``); "roundtrip", "integrate", "lifetime" and
"amplification" are built in (the last two: ``loschmidt.tasks``). The batch tasks take every option
of ``integrate_batch``, the chain method's radii and post-Newtonian terms included.

Where chunks run:

- ``executor=None``: one after another on the local C++ thread pool (``threads`` per chunk, default
  all cores);
- a ``concurrent.futures.Executor`` (threads or processes) or a ``dask.distributed.Client``: up to
  ``max_pending`` chunks in flight (default twice the workers), each with ``threads`` C++ threads
  (default 1). Workers receive only the chunk's arrays and the options, never the ensemble, and
  send back the columns; the calling process writes the store.

The store (``loschmidt.store``) gets one Parquet file per finished chunk, written atomically, and a
manifest with the sweep definition (task, options, precision, chunk size, loschmidt version, the
ensemble's family, shape and content hash) and its hash. A rerun skips finished chunks (after
checking their content hash against the ensemble's); a store made by another definition is refused
with ``ValueError``; an unwritable store fails before any work. Results are the same bits whatever
the executor, thread count or number of interruptions (``wall_time`` aside, and unless a wall-clock
budget was hit).

Ctrl-C raises ``KeyboardInterrupt`` within a fraction of a second (the engine polls for signals
about every 50 ms): every chunk already written is kept, the running chunks are dropped (never
half-written: each file is written to a temporary name and renamed) and run again on resume, so at
most ``chunk_size`` members per worker are recomputed. On a ``concurrent.futures`` executor, chunks
already running in its workers cannot be cancelled and run to their end there, unrecorded; a Dask
client cancels them.
"""

from __future__ import annotations

import concurrent.futures as cf
import hashlib
import itertools
import numbers
import os
import signal
import sys
import threading
from dataclasses import dataclass
from typing import Any, Callable, Iterable, Iterator, Mapping

import numpy as np

from . import options as _options
from .batch import batch_options, integrate_batch, roundtrip_batch
from .ensemble import Ensemble
from .store import SweepStore, _convert, limbs as _limbs

__all__ = ["Sweep", "register_task", "available_tasks", "TaskSpec"]


# ---------------------------------------------------------------------------------------------------
# task registry


@dataclass(frozen=True)
class TaskSpec:
    """A sweep task: ``run(chunk, options) -> columns``; ``prepare(**options) -> options`` validates
    the user's options once, before any work, and returns them JSON-friendly (they are hashed into
    the store's manifest; a ``"precision"`` entry, if any, is recorded as the sweep's precision).
    Both must be importable module-level functions when chunks run in other processes.

    Attributes
    ----------
    name : str
        The task's name in the registry.
    run : callable
        ``run(chunk: Ensemble, options: dict) -> dict of (len(chunk), ...) arrays``.
    prepare : callable
        ``prepare(**options) -> dict``.
    """

    name: str
    run: Callable[[Ensemble, dict], Mapping[str, np.ndarray]]
    prepare: Callable[..., dict]


_TASKS: dict[str, TaskSpec] = {}

#: Options every task receives at run time besides its prepared ones (not part of the definition).
RUNTIME_OPTIONS = ("threads", "progress")


def register_task(name: str, run: Callable, prepare: Callable | None = None, *, replace: bool = False) -> TaskSpec:
    """Add a task to the registry.

    Parameters
    ----------
    name : str
        An identifier.
    run : callable
        ``run(chunk, options) -> columns`` (see ``TaskSpec``); a module-level function when chunks
        run in other processes.
    prepare : callable, optional
        ``prepare(**options) -> options``: validation before any work (default: no options).
    replace : bool, optional
        Replace a task of the same name (default: refuse with ``ValueError``).

    Returns
    -------
    TaskSpec

    Examples
    --------
    >>> import numpy as np
    >>> import loschmidt
    >>> def energies(chunk, options):
    ...     return {"energy": chunk.energy()}
    >>> spec = loschmidt.register_task("doc_energies", energies, replace=True)
    >>> "doc_energies" in loschmidt.available_tasks()
    True
    """
    if not isinstance(name, str) or not name.isidentifier():
        raise ValueError(f"name: expected an identifier, got {name!r}")
    if not callable(run) or (prepare is not None and not callable(prepare)):
        raise TypeError("run and prepare must be callables")
    if name in _TASKS and not replace:
        raise ValueError(f"name: task {name!r} is already registered (replace=True to override)")
    spec = TaskSpec(name, run, prepare if prepare is not None else _no_options)
    _TASKS[name] = spec
    return spec


def available_tasks() -> tuple[str, ...]:
    """Names of the registered tasks.

    Returns
    -------
    tuple of str
        Sorted names (``"amplification"``, ``"integrate"``, ``"lifetime"``, ``"roundtrip"`` and any
        added by ``register_task``).
    """
    return tuple(sorted(_TASKS))


def _task(name: Any) -> TaskSpec:
    if not isinstance(name, str) or name not in _TASKS:
        raise ValueError(
            f"task: unknown task {name!r}; available tasks: {', '.join(available_tasks())} "
            "(more plug in through loschmidt.sweep.register_task)"
        )
    return _TASKS[name]


def _no_options(**options: Any) -> dict:
    if options:
        raise ValueError(f"options: this task takes none, got {sorted(options)}")
    return {}


#: Options of the batch tasks: the span, method, precision and every batch option of loschmidt.options.
_BATCH_KEYS = ("t", "method", "precision") + _options.names_for("batch")


def _prepare_batch(**options: Any) -> dict:
    unknown = sorted(set(options) - set(_BATCH_KEYS))
    if unknown:
        raise ValueError(f"options: unknown {unknown}; expected some of {list(_BATCH_KEYS)}")
    if "t" not in options:
        raise ValueError("t: the time span is required (Sweep(..., t=...))")
    if options.get("radii") is not None and np.ndim(options["radii"]) != 1:
        raise ValueError("radii: a sweep takes one radius per body, shared by every member "
                         "(per-member radii belong in the Ensemble)")
    return batch_options(**options)


def _batch_call(fn: Callable, chunk: Ensemble, options: Mapping[str, Any]) -> dict:
    o = dict(options)
    t = o.pop("t")
    return fn(chunk, t, **o).to_table()


def run_roundtrip(chunk: Ensemble, options: Mapping[str, Any]) -> dict:
    """Task "roundtrip": ``roundtrip_batch`` on the chunk; the columns of ``BatchResult.to_table``."""
    return _batch_call(roundtrip_batch, chunk, options)


def run_integrate(chunk: Ensemble, options: Mapping[str, Any]) -> dict:
    """Task "integrate": ``integrate_batch`` on the chunk."""
    return _batch_call(integrate_batch, chunk, options)


register_task("roundtrip", run_roundtrip, _prepare_batch)
register_task("integrate", run_integrate, _prepare_batch)


def _register_builtin_tasks() -> None:
    from .tasks import prepare_amplification, prepare_lifetime, run_amplification, run_lifetime

    register_task("lifetime", run_lifetime, prepare_lifetime, replace=True)
    register_task("amplification", run_amplification, prepare_amplification, replace=True)
    from .scattering import prepare_scattering, run_scattering

    register_task("scattering", run_scattering, prepare_scattering, replace=True)


_register_builtin_tasks()


def _run_chunk(run: Callable, chunk: Ensemble, options: Mapping[str, Any]) -> dict:
    """What a worker executes: the task on one chunk, with its columns checked."""
    cols = dict(run(chunk, dict(options)))
    for name, value in cols.items():
        a = np.asarray(value)
        if a.ndim == 0 or a.shape[0] != len(chunk):
            raise ValueError(f"task column {name!r} has shape {a.shape}, expected {len(chunk)} rows")
    return cols


# ---------------------------------------------------------------------------------------------------
# ensemble sources


def _chunk_digest(chunk: Ensemble) -> str:
    """Content hash of a chunk's initial conditions (float64 little-endian bytes, shapes, params)."""
    h = hashlib.sha256()

    def put(tag: str, a: np.ndarray) -> None:
        a = np.ascontiguousarray(a)
        if a.dtype.kind in "fiub":
            a = a.astype(a.dtype.newbyteorder("<"), copy=False)
        h.update(f"{tag}:{a.dtype.str}:{a.shape};".encode())
        h.update(a.tobytes())

    put("masses", chunk.masses)
    put("positions", chunk.positions)
    put("velocities", chunk.velocities)
    if chunk.radii is not None:
        put("radii", chunk.radii)
    params = chunk.params
    for key in sorted(params):
        put(f"param.{key}", params[key])
    return h.hexdigest()


class _Source:
    """Chunks (index, first member, Ensemble) of an Ensemble or of a stream of Ensemble pieces."""

    def __init__(self, ensemble: Any, chunk_size: int) -> None:
        self.chunk_size = chunk_size
        if isinstance(ensemble, Ensemble):
            self.ensemble: Ensemble | None = ensemble
            self.stream: Iterator[Ensemble] | None = None
            first = ensemble
        else:
            if isinstance(ensemble, (str, bytes, Mapping)) or not isinstance(ensemble, Iterable):
                raise TypeError("ensemble: expected an Ensemble or an iterable of Ensemble pieces")
            it = iter(ensemble)
            try:
                first = next(it)
            except StopIteration:
                raise ValueError("ensemble: the stream of Ensemble pieces is empty") from None
            if not isinstance(first, Ensemble):
                raise TypeError(f"ensemble: the stream yielded {type(first).__name__}, expected Ensemble")
            self.ensemble = None
            self.stream = itertools.chain([first], it)
        self.family = first.family
        self.bodies = first.n
        self.param_names = sorted(first.params)
        self.radii = first.radii is not None
        self.members = None if self.ensemble is None else len(self.ensemble)
        self._used = False

    def describe(self) -> dict:
        d = {"family": self.family, "bodies": self.bodies, "params": self.param_names, "radii": self.radii,
             "members": self.members, "hash": None}
        if self.ensemble is not None:
            h = hashlib.sha256()
            for _i, _s, c in self.chunks():
                h.update(_chunk_digest(c).encode())
            d["hash"] = h.hexdigest()
        return d

    def chunk_length(self, index: int) -> int | None:
        if self.members is None:
            return None
        return max(0, min(self.chunk_size, self.members - index * self.chunk_size))

    def chunks(self) -> Iterator[tuple[int, int, Ensemble]]:
        cs = self.chunk_size
        if self.ensemble is not None:
            for index, start in enumerate(range(0, len(self.ensemble), cs)):
                yield index, start, self.ensemble[start : start + cs]
            return
        if self._used:
            raise ValueError("ensemble: a stream of Ensemble pieces can be run only once; pass it again")
        self._used = True
        assert self.stream is not None
        buffer: list[Ensemble] = []
        held = 0
        index = start = 0
        for k, piece in enumerate(self.stream):
            if not isinstance(piece, Ensemble):
                raise TypeError(f"ensemble: piece {k} of the stream is a {type(piece).__name__}, expected Ensemble")
            if piece.n != self.bodies or sorted(piece.params) != self.param_names or (piece.radii is not None) != self.radii:
                raise ValueError(f"ensemble: piece {k} of the stream does not match the first (bodies, params, radii)")
            if len(piece) == 0:
                continue
            buffer.append(piece)
            held += len(piece)
            while held >= cs:
                joined = buffer[0] if len(buffer) == 1 else Ensemble.concat(buffer)
                yield index, start, joined[:cs]
                index += 1
                start += cs
                rest = joined[cs:]
                buffer = [rest] if len(rest) else []
                held = len(rest)
        if held:
            joined = buffer[0] if len(buffer) == 1 else Ensemble.concat(buffer)
            yield index, start, joined


# ---------------------------------------------------------------------------------------------------
# Ctrl-C


class _StopRequest:
    """While active (main thread only), SIGINT raises KeyboardInterrupt at once, as usual, after
    saying what is kept; ``requested`` records that it came."""

    def __init__(self, say: Callable[[str], None]) -> None:
        self.requested = False
        self._say = say
        self._old: Any = None

    def _handler(self, signum: int, frame: Any) -> None:
        if not self.requested:
            self.requested = True
            self._say("Stopping: every finished chunk is kept; the running ones are dropped and rerun on resume.")
        raise KeyboardInterrupt

    def __enter__(self) -> "_StopRequest":
        if threading.current_thread() is threading.main_thread():
            self._old = signal.signal(signal.SIGINT, self._handler)
        return self

    def __exit__(self, *exc: Any) -> None:
        if self._old is not None:
            signal.signal(signal.SIGINT, self._old)
            self._old = None


# ---------------------------------------------------------------------------------------------------
# the sweep


def _positive_int(value: Any, name: str, allow_none: bool = False) -> int | None:
    if value is None and allow_none:
        return None
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Integral):
        raise TypeError(f"{name}: expected a positive integer, got {type(value).__name__}")
    if value < 1:
        raise ValueError(f"{name}: must be at least 1, got {value}")
    return int(value)


def _version() -> str:
    try:
        from importlib.metadata import version

        return version("loschmidt")
    except Exception:  # pragma: no cover - running from a source tree
        from . import _core

        return str(getattr(_core, "__version__", "0+unknown"))


_RESERVED = ("member", "start_masses", "start_positions", "start_velocities", "start_radii")


class Sweep:
    """A task over every member of an ensemble, stored chunk by chunk (see the module docstring).

    Parameters
    ----------
    ensemble : Ensemble or iterable of Ensemble
        The initial conditions; an iterable is streamed (memory holds about one chunk of it) and can
        be run once per Sweep object.
    task : str
        A registered task (``available_tasks()``): ``"roundtrip"``, ``"integrate"``,
        ``"lifetime"`` and ``"amplification"`` are built in.
    store : path
        Directory of the store (created if needed).
    chunk_size : int
        Members per chunk (one Parquet file each).
    executor : None, concurrent.futures.Executor or dask.distributed.Client
        Where chunks run (None: the local C++ thread pool).
    threads : int, optional
        C++ threads per chunk (default: all cores locally, 1 on an executor).
    max_pending : int, optional
        Chunks in flight on an executor (default: twice its workers).
    total : int, optional
        Members of a stream, for the progress bar's ETA.
    **options
        The task's options; for "roundtrip" and "integrate": ``t`` (required), ``method``,
        ``precision`` (default "dd"), ``tol``, ``atol``, ``max_steps``, ``max_wall_time``,
        ``max_order``, ``initial_step`` as for ``roundtrip_batch``.

    Examples
    --------
    >>> import os, tempfile
    >>> import loschmidt
    >>> ens = loschmidt.ics.free_fall_grid(3, 5)
    >>> with tempfile.TemporaryDirectory() as d:
    ...     sweep = loschmidt.Sweep(ens, task="roundtrip", store=os.path.join(d, "ff"), chunk_size=4,
    ...                             t=1, precision="f64", method="chain")
    ...     df = sweep.run(progress=False).results()
    ...     done = sweep.status()
    >>> len(df), done["chunks_finished"], list(df.columns[:5])
    (11, 3, ['member', 'ix', 'iy', 'x', 'y'])
    """

    def __init__(
        self,
        ensemble: Any,
        task: str = "roundtrip",
        store: Any = None,
        chunk_size: int = 512,
        executor: Any = None,
        *,
        threads: int | None = None,
        max_pending: int | None = None,
        total: int | None = None,
        **options: Any,
    ) -> None:
        self.task = _task(task)
        self.chunk_size = _positive_int(chunk_size, "chunk_size")
        self.threads = _positive_int(threads, "threads", allow_none=True)
        self.max_pending = _positive_int(max_pending, "max_pending", allow_none=True)
        self._total = _positive_int(total, "total", allow_none=True)
        self._backend = _backend(executor)
        self.executor = executor
        self.options = self.task.prepare(**options)
        self.store = SweepStore(store)
        self._source = _Source(ensemble, self.chunk_size)
        if self._source.members is not None:
            self._total = self._source.members
        if self._source.radii and self.options.get("method") in _options.METHODS:
            _options.check_carried_radii(self.options["method"])  # before the store is touched
        self.definition = {
            "format": "loschmidt-sweep-1",
            "task": self.task.name,
            "options": self.options,
            "precision": self.options.get("precision"),
            "chunk_size": self.chunk_size,
            "loschmidt_version": _version(),
            "ensemble": self._source.describe(),
        }
        self.definition_hash = self.store.open(self.definition)  # fails here, before any work

    def __repr__(self) -> str:
        return (f"Sweep(task={self.task.name!r}, store={str(self.store.path)!r}, "
                f"members={self._total}, chunk_size={self.chunk_size})")

    # -- progress ------------------------------------------------------------------------------------
    def status(self) -> dict:
        """Progress of the sweep.

        Returns
        -------
        dict
            ``chunks_finished``, ``chunks``, ``members_finished``, ``members`` (totals None where
            unknown, as for a stream).
        """
        done = self.store.finished()
        rows = sum(self.store.chunk_info(i)["rows"] for i in done)
        chunks = None if self._total is None else -(-self._total // self.chunk_size)
        return {"chunks_finished": len(done), "chunks": chunks, "members_finished": rows, "members": self._total}

    # -- running -------------------------------------------------------------------------------------
    def run(self, progress: bool = True) -> "Sweep":
        """Run every chunk not yet in the store.

        Parameters
        ----------
        progress : bool, optional
            Show a progress bar on standard error (default True).

        Returns
        -------
        Sweep
            This sweep (``.results()`` then reads the store).
        """
        self.store.open(self.definition)
        self.store.remove_stale_temporaries()
        finished = self.store.finished()
        from tqdm import tqdm

        initial = sum(self.store.chunk_info(i)["rows"] for i in finished)
        # the bar counts members kept (written to the store), never members still running, and its
        # rate (hence the ETA) is the average since this run began: chunks finish in lumps, and a
        # moving average over them swung the early ETA to twice the real time
        bar = tqdm(total=self._total, initial=initial, unit="system", desc=f"sweep {self.task.name} (kept)",
                   disable=not progress, smoothing=0, dynamic_ncols=True, file=sys.stderr)
        stop = _StopRequest(bar.write if progress else (lambda msg: print(msg, file=sys.stderr)))
        try:
            with stop:
                todo = self._pending(finished)
                if self._backend == "local":
                    self._run_local(todo, bar, stop)
                else:
                    self._run_pool(todo, bar, stop)
        except KeyboardInterrupt:
            raise KeyboardInterrupt("sweep stopped by Ctrl-C; finished chunks are kept, run again to resume") from None
        finally:
            bar.close()
        return self

    def _pending(self, finished: Mapping[int, Any]) -> Iterator[tuple[int, int, Ensemble, str]]:
        """Chunks still to run, with their content hashes; finished ones are checked and skipped."""
        seen = 0
        for index, start, chunk in self._source.chunks():
            seen = index + 1
            digest = _chunk_digest(chunk)
            if index in finished:
                info = self.store.chunk_info(index)
                if info.get("hash") != digest or info.get("rows") != len(chunk) or info.get("start") != start:
                    raise ValueError(
                        f"store: chunk {index} was made from different initial conditions than this "
                        "ensemble provides; use another store path"
                    )
                continue
            yield index, start, chunk, digest
        beyond = [i for i in finished if i >= seen]
        if beyond:
            raise ValueError(f"store: holds chunk {beyond[0]}, beyond the end of this ensemble; use another store path")

    def _runtime_options(self, threads: int | None, progress: Callable | None) -> dict:
        o = dict(self.options)
        o["threads"] = threads
        if progress is not None:
            o["progress"] = progress
        return o

    def _run_local(self, todo: Iterator, bar: Any, stop: _StopRequest) -> None:
        for index, start, chunk, digest in todo:
            if stop.requested:
                return
            def advance(done: int, size: int = len(chunk)) -> None:
                bar.set_postfix_str(f"running chunk: {done}/{size}", refresh=True)

            cols = _run_chunk(self.task.run, chunk, self._runtime_options(self.threads, advance))
            self._write(index, start, chunk, digest, cols)
            bar.set_postfix_str("", refresh=False)
            bar.update(len(chunk))

    def _run_pool(self, todo: Iterator, bar: Any, stop: _StopRequest) -> None:
        pool = _pool(self._backend, self.executor)
        limit = self.max_pending or 2 * pool.workers()
        options = self._runtime_options(self.threads or 1, None)
        in_flight: dict[Any, tuple[int, int, Ensemble, str]] = {}
        error: BaseException | None = None
        exhausted = False
        try:
            while True:
                while not exhausted and error is None and not stop.requested and len(in_flight) < limit:
                    item = next(todo, None)
                    if item is None:
                        exhausted = True
                        break
                    fut = pool.submit(_run_chunk, self.task.run, item[2], options)
                    in_flight[fut] = item
                if not in_flight:
                    break
                if (error is not None or stop.requested) and not pool.drains:
                    for fut in list(in_flight):
                        if pool.cancel(fut):
                            del in_flight[fut]
                    if not in_flight:
                        break
                for fut in pool.wait_first(list(in_flight)):
                    index, start, chunk, digest = in_flight.pop(fut)
                    try:
                        cols = pool.result(fut)
                    except BaseException as exc:  # noqa: BLE001 - reported after the drain
                        if not (stop.requested and _interrupted(exc)) and error is None:
                            error = exc
                        continue
                    self._write(index, start, chunk, digest, cols)
                    bar.update(len(chunk))
        finally:
            for fut in in_flight:
                pool.cancel(fut)
        if error is not None:
            raise error

    def _write(self, index: int, start: int, chunk: Ensemble, digest: str, cols: Mapping[str, np.ndarray]) -> None:
        from .store import columns_to_arrow

        m = len(chunk)
        out: dict[str, np.ndarray] = {"member": np.arange(start, start + m, dtype=np.int64)}
        taken = set(_RESERVED) | set(cols)
        for key, value in chunk.params.items():
            out[key if key not in taken else f"param_{key}"] = np.asarray(value)
        for name, value in cols.items():
            if name in _RESERVED:
                raise ValueError(f"task column {name!r} clashes with a column the sweep adds")
            out[name] = value
        out["start_masses"] = np.ascontiguousarray(chunk.masses)
        out["start_positions"] = np.ascontiguousarray(chunk.positions)
        out["start_velocities"] = np.ascontiguousarray(chunk.velocities)
        if chunk.radii is not None:
            out["start_radii"] = np.ascontiguousarray(chunk.radii)
        info = {"index": index, "start": start, "rows": m, "hash": digest, "definition_hash": self.definition_hash}
        self.store.write_chunk(index, columns_to_arrow(out), info)

    # -- results -------------------------------------------------------------------------------------
    def results(self, format: str = "pandas", columns: Iterable[str] | None = None) -> Any:
        """Rows of every finished chunk, in member order.

        Parameters
        ----------
        format : {"pandas", "arrow"}, optional
            A pandas DataFrame (default) or a ``pyarrow.Table``.
        columns : iterable of str, optional
            Columns to read (default all).

        Returns
        -------
        pandas.DataFrame or pyarrow.Table
            Full-precision columns hold flattened limbs (``limbs`` rebuilds them).
        """
        return _convert(self.store.read(columns), format)

    def limbs(self, name: str) -> np.ndarray:
        """A full-precision column of the finished rows.

        Parameters
        ----------
        name : str
            A limb column (``"returned_positions"`` ...).

        Returns
        -------
        numpy.ndarray
            Shape (rows, ..., k).
        """
        return _limbs(self.store.read([name]), name)

    def systems(self, member: int) -> dict:
        """The stored states of one finished member as ``System`` objects, exactly.

        Parameters
        ----------
        member : int
            Index of a member in a finished chunk.

        Returns
        -------
        dict
            ``{"start": System}`` (the initial conditions, whose float64 values are exact in
            every precision, with the ensemble's radii if any) plus, when the task stored them, the
            full-precision states: ``"final"`` (tasks "integrate" and "amplification": columns ``t``,
            ``positions``, ``velocities``), or ``"forward"`` and ``"returned"`` (task "roundtrip";
            None where the leg did not run). Integrating ``start`` again with the sweep's options
            gives these states bit for bit.
        """
        from .system import System

        if isinstance(member, (bool, np.bool_)) or not isinstance(member, numbers.Integral):
            raise TypeError(f"member: expected an integer, got {type(member).__name__}")
        index = int(member) // self.chunk_size
        if member < 0 or index not in self.store.finished():
            raise ValueError(f"member: {member} is not in a finished chunk of this store")
        import pyarrow.parquet as pq

        table = pq.read_table(self.store.chunk_path(index))
        rows = table.column("member").to_numpy()
        hit = np.nonzero(rows == member)[0]
        if len(hit) != 1:
            raise ValueError(f"member: {member} is not in a finished chunk of this store")
        row = table.slice(int(hit[0]), 1)
        prec = self.options.get("precision") or "dd"
        names = set(row.column_names)

        def col(name: str) -> np.ndarray:
            return _limbs(row, name)[0] if name in names else None

        radii = col("start_radii")
        out = {"start": System(col("start_masses"), col("start_positions"), col("start_velocities"),
                               precision=prec, radii=radii)}

        def state(t: str | None, x: str, v: str) -> System | None:
            if x not in names:
                return None
            px, vx = col(x), col(v)
            if not (np.all(np.isfinite(px)) and np.all(np.isfinite(vx))):
                return None
            return System.from_limbs(out["start"].limbs("masses"), px, vx, prec, radii=radii,
                                     time=None if t is None else col(t), check=False)

        if "forward_positions" in names:
            out["forward"] = state("forward_t", "forward_positions", "forward_velocities")
            # comparable with the start (as BatchResult.systems gives it): time 0
            out["returned"] = state(None, "returned_positions", "returned_velocities")
        elif "positions" in names:
            out["final"] = state("t", "positions", "velocities")
        return out


# ---------------------------------------------------------------------------------------------------
# executors


def _is_dask_client(obj: Any) -> bool:
    mod = type(obj).__module__ or ""
    if not mod.startswith("distributed"):
        return False
    try:
        import distributed
    except ImportError:  # pragma: no cover
        return False
    return isinstance(obj, distributed.Client)


def _backend(executor: Any) -> str:
    if executor is None:
        return "local"
    if isinstance(executor, cf.Executor):
        return "futures"
    if _is_dask_client(executor):
        return "dask"
    raise TypeError(
        f"executor: expected None, a concurrent.futures.Executor or a dask.distributed.Client, got {type(executor).__name__}"
    )


def _interrupted(exc: BaseException) -> bool:
    """Failures a Ctrl-C causes in workers (they share the terminal's process group)."""
    from concurrent.futures.process import BrokenProcessPool

    return isinstance(exc, (KeyboardInterrupt, cf.CancelledError, BrokenProcessPool))


class _FuturesPool:
    drains = False  # queued futures can be cancelled, running ones finish

    def __init__(self, executor: cf.Executor) -> None:
        self.executor = executor

    def workers(self) -> int:
        return int(getattr(self.executor, "_max_workers", None) or os.cpu_count() or 1)

    def submit(self, fn: Callable, *args: Any) -> cf.Future:
        return self.executor.submit(fn, *args)

    def wait_first(self, futures: list) -> set:
        done, _ = cf.wait(futures, return_when=cf.FIRST_COMPLETED)
        return done

    def cancel(self, fut: cf.Future) -> bool:
        return fut.cancel()

    @staticmethod
    def result(fut: cf.Future) -> Any:
        return fut.result()


class _DaskPool:
    drains = True  # tasks handed to the cluster are let finish

    def __init__(self, client: Any) -> None:
        import distributed

        self.client = client
        self._ac = distributed.as_completed()

    def workers(self) -> int:
        return max(1, sum(self.client.nthreads().values()))

    def submit(self, fn: Callable, *args: Any) -> Any:
        fut = self.client.submit(fn, *args, pure=False)
        self._ac.add(fut)
        return fut

    def wait_first(self, futures: list) -> list:
        return self._ac.next_batch(block=True)

    def cancel(self, fut: Any) -> bool:
        fut.cancel()
        return True

    @staticmethod
    def result(fut: Any) -> Any:
        return fut.result()


def _pool(backend: str, executor: Any) -> Any:
    return _DaskPool(executor) if backend == "dask" else _FuturesPool(executor)

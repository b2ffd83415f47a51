"""The event log of a run: pericentre passages and closest approaches of every pair, without dense output.

``integrate(..., events=True)`` asks the engine (both methods) to look at the state after every
accepted step (cpp/include/loschmidt/methods/events.hpp): a pair whose separation stopped
shrinking and started growing within a step had a pericentre passage there, located from the
pair's osculating two-body orbit (Kepler's equation; exact for an isolated pair however long the
step) or, when that orbit does not place it inside the step (a strongly perturbed, near-circular
or near-parabolic pair), from the cubic Hermite interpolant of the separation through both ends
of the step. For three bodies the body outside the most bound pair is watched about that pair's
centre of mass the same way: its pericentre passages are the close approaches of a resonant
encounter. A step spanning several orbits of a pair records one passage. Times and distances are
computed in double precision from the working-precision state.

``integrate(..., stop="pair_distance", stop_distance=d, stop_pair=(i, j))`` ends the run with
status ``stop_condition`` at the end of the first step in which the pair (any pair when
``stop_pair`` is None) came closer than d (minima inside a step count).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

__all__ = ["EventLog"]


@dataclass(frozen=True)
class EventLog:
    """Events of one run: each a dict of equal-length arrays ``t``, ``i``, ``j``, ``distance``.

    Attributes
    ----------
    passages : dict of numpy.ndarray
        Pericentre passages of pairs (i < j), in time order: time, bodies, pericentre distance.
    outer : dict of numpy.ndarray
        Three bodies: pericentre passages of the body ``i`` outside the most bound pair about the
        pair's centre of mass (``j`` is -1); empty otherwise.
    closest : dict of numpy.ndarray
        One row per pair (i < j, row by row): the smallest separation seen and when.
    dropped : int
        Passages beyond ``max_events`` that were counted but not kept.

    Examples
    --------
    >>> import loschmidt
    >>> s = loschmidt.ics.binary(1, 1, 1, 0.5, precision="f64")    # period 2 pi / sqrt(2)
    >>> r = loschmidt.integrate(s, 10, events=True)
    >>> r.events.passages["t"].round(6)                           # pericentre every 4.442883
    array([4.442883, 8.885766])
    >>> r.events.passages["distance"].round(12)
    array([0.5, 0.5])
    """

    passages: dict
    outer: dict
    closest: dict
    dropped: int

    @classmethod
    def _from_record(cls, record: Any, t0: float = 0.0) -> "EventLog":
        """From the engine's ``_core.EventRecord``; ``t0`` is added to the times (the engine counts
        from the start of the run)."""

        def cols(c: Any) -> dict:
            t = np.asarray(c.t)
            return {"t": t + t0 if t0 else t, "i": np.asarray(c.i), "j": np.asarray(c.j),
                    "distance": np.asarray(c.distance)}

        return cls(cols(record.passages), cols(record.outer), cols(record.closest), int(record.dropped))

    def pair(self, i: int, j: int) -> dict:
        """The passages of one pair.

        Parameters
        ----------
        i, j : int
            Two body indices (either order).

        Returns
        -------
        dict of numpy.ndarray
            ``t`` and ``distance`` of that pair's pericentre passages.
        """
        a, b = min(i, j), max(i, j)
        sel = (self.passages["i"] == a) & (self.passages["j"] == b)
        return {"t": self.passages["t"][sel], "distance": self.passages["distance"][sel]}

"""loschmidt: high-precision few-body gravitational dynamics.

Integrate chaotic few-body systems forward and backward in time in double, compensated double,
double-double and quad-double precision, and tell converged, reversible solutions from round-off noise.
"""

from __future__ import annotations

from . import _core
from . import ics, orbits, precision, scattering, units
from .ensemble import Ensemble
from .chaos import (
    Convergence,
    Lyapunov,
    RoundTrip,
    Threshold,
    amplification,
    converge,
    growth,
    irreversibility_threshold,
    lyapunov,
    roundtrip,
)
from . import batch, events, plots, report, store, sweep
from .batch import BatchResult, integrate_batch, roundtrip_batch
from .store import read_store
from .sweep import Sweep, available_tasks, register_task
from .outcome import DEFAULT_DISTANCE_FACTOR, OUTCOME_KINDS, BoundPair, Outcome, integrate_until_escape, outcome
from .integrate import DEFAULT_TOLERANCE, METHODS, Result, Trajectory, integrate, merged, phase_distance, phase_distances
from .precision import PRECISIONS
from .status import STATUSES
from .system import System

from ._version import __version__

__all__ = [
    "__version__",
    "PRECISIONS",
    "METHODS",
    "STATUSES",
    "DEFAULT_TOLERANCE",
    "System",
    "Result",
    "Trajectory",
    "integrate",
    "merged",
    "phase_distance",
    "phase_distances",
    "precision",
    "units",
    "ics",
    "orbits",
    "Ensemble",
    "roundtrip",
    "RoundTrip",
    "amplification",
    "growth",
    "lyapunov",
    "Lyapunov",
    "converge",
    "Convergence",
    "irreversibility_threshold",
    "Threshold",
    "outcome",
    "Outcome",
    "BoundPair",
    "OUTCOME_KINDS",
    "DEFAULT_DISTANCE_FACTOR",
    "integrate_until_escape",
    "integrate_batch",
    "roundtrip_batch",
    "BatchResult",
    "Sweep",
    "register_task",
    "available_tasks",
    "read_store",
]

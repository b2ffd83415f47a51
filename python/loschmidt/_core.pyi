# Stubs of the private extension module loschmidt._core (cpp/bindings/). Use the loschmidt package;
# loschmidt.engine is the one caller of the kernels below, loschmidt.precision and loschmidt.status
# read the tables. Limb arrays are float64 arrays whose last axis holds the k limbs of one value
# (k = 1, 1, 2, 4 for f64, f64c, dd, qd); <p> is one of f64, f64c, dd, qd.

from typing import Callable, Optional, Sequence

import numpy as np
import numpy.typing as npt

Limbs = npt.NDArray[np.float64]

__version__: str
hardware_fma: bool

#: (code, name, message) of every status (methods/status.hpp).
statuses: list[tuple[int, str, str]]

#: (name, limbs, digits, unit_roundoff, operation_error, default_tolerance, order_limit, compensated)
#: of every working precision, narrowest first (bindings/precision_table.hpp, scalar/traits.hpp).
precisions: list[tuple[str, int, int, float, float, float, int, bool]]

def request_stop(on: bool = True) -> None: ...

class Options:
    """The engine's options of one run (methods/options.hpp); the defaults are the C++ ones."""

    rtol: float
    atol: float
    max_steps: int
    max_wall_time: float
    max_order: int
    initial_step: float
    min_step_fraction: float
    min_step_ratio: float
    sequence: int
    stop: int
    check_every: int
    distance_factor: float
    fixed_step: float
    #: StopCondition.pair_distance (bit 2 of stop): the distance, and the pair watched ((-1, -1): any).
    stop_distance: float
    stop_pair: tuple[int, int]
    def __init__(self) -> None: ...

class ChainOptions:
    """The chain method's options (methods/chain.hpp)."""

    regularization: int
    radii: list[float]
    pn_orders: int
    light_speed: list[float]
    merger_factor: float
    def __init__(self) -> None: ...

class Stats:
    """Status code and counters of one run."""

    @property
    def status(self) -> int: ...
    @property
    def steps(self) -> int: ...
    @property
    def rejected(self) -> int: ...
    @property
    def evaluations(self) -> int: ...
    @property
    def wall_time(self) -> float: ...
    @property
    def stopped_by(self) -> int: ...
    @property
    def stop_i(self) -> int: ...
    @property
    def stop_j(self) -> int: ...

class EventColumns:
    """Events as columns of equal length: time t (from the start of the run), bodies i, j (int64;
    j = -1 for body i about the centre of mass of the others) and distance."""

    @property
    def t(self) -> npt.NDArray[np.float64]: ...
    @property
    def i(self) -> npt.NDArray[np.int64]: ...
    @property
    def j(self) -> npt.NDArray[np.int64]: ...
    @property
    def distance(self) -> npt.NDArray[np.float64]: ...

class EventRecord:
    """The event log of one run (methods/events.hpp): pericentre passages of pairs, the outer
    orbit's passages (three bodies), one closest approach per pair, and the passages dropped
    beyond max_events."""

    @property
    def passages(self) -> EventColumns: ...
    @property
    def outer(self) -> EventColumns: ...
    @property
    def closest(self) -> EventColumns: ...
    @property
    def dropped(self) -> int: ...

class RunRecord:
    """One single-system run (integrate_<p>, lyapunov_<p>). Limbs: positions, velocities (N, 3, k),
    t (k,), the span reached; trajectory_* at the output times (M, k), (M, N, 3, k); the Lyapunov
    fields are None (log_growth nan) for integrate. energy_error: |E - E0| / |E0| in the working
    precision (with post-Newtonian terms, the error of the energy bookkeeping)."""

    @property
    def positions(self) -> Limbs: ...
    @property
    def velocities(self) -> Limbs: ...
    @property
    def t(self) -> Limbs: ...
    @property
    def stats(self) -> Stats: ...
    @property
    def energy_error(self) -> float: ...
    @property
    def collision_i(self) -> int: ...
    @property
    def collision_j(self) -> int: ...
    @property
    def rechains(self) -> int: ...
    @property
    def trajectory_t(self) -> Optional[Limbs]: ...
    @property
    def trajectory_positions(self) -> Optional[Limbs]: ...
    @property
    def trajectory_velocities(self) -> Optional[Limbs]: ...
    @property
    def output_t(self) -> Optional[Limbs]: ...
    @property
    def output_log_growth(self) -> Optional[npt.NDArray[np.float64]]: ...
    @property
    def log_growth(self) -> float: ...
    @property
    def renormalizations(self) -> int: ...
    @property
    def tangent_positions(self) -> Optional[Limbs]: ...
    @property
    def tangent_velocities(self) -> Optional[Limbs]: ...
    @property
    def events(self) -> Optional[EventRecord]: ...

class BatchRecord:
    """One batch: per-system columns, first axis M. positions, velocities (M, N, 3, k) and t (M, k):
    the final state (integrate) or the turning point (roundtrip). Status codes, counters (int64),
    wall_time and energy errors (float64) per system; pair_i/pair_j the pair of a collision or
    merger and stopped_by/stop_i/stop_j the stop condition met (-1, 0 when none). The returned_*
    and delta* columns exist for roundtrip only (None for integrate)."""

    positions: Limbs
    velocities: Limbs
    t: Limbs
    status: npt.NDArray[np.int32]
    forward_status: npt.NDArray[np.int32]
    steps: npt.NDArray[np.int64]
    rejected: npt.NDArray[np.int64]
    evaluations: npt.NDArray[np.int64]
    wall_time: npt.NDArray[np.float64]
    energy_error: npt.NDArray[np.float64]
    forward_energy_error: npt.NDArray[np.float64]
    pair_i: npt.NDArray[np.int32]
    pair_j: npt.NDArray[np.int32]
    rechains: npt.NDArray[np.int64]
    stopped_by: npt.NDArray[np.int32]
    stop_i: npt.NDArray[np.int32]
    stop_j: npt.NDArray[np.int32]
    returned_positions: Optional[Limbs]
    returned_velocities: Optional[Limbs]
    returned_t: Optional[Limbs]
    delta: Optional[npt.NDArray[np.float64]]
    delta_position: Optional[npt.NDArray[np.float64]]
    delta_velocity: Optional[npt.NDArray[np.float64]]

# One of each per precision <p> in f64, f64c, dd, qd (shown for f64).
def integrate_f64(method: str, masses: Limbs, positions: Limbs, velocities: Limbs, t_end: Limbs, times: Limbs,
                  options: Options, chain: ChainOptions, max_events: int = 0) -> RunRecord: ...
# max_events > 0: the run keeps an event log of at most that many passages (RunRecord.events);
# the pair-distance stop needs one.
def lyapunov_f64(masses: Limbs, positions: Limbs, velocities: Limbs, tangent_positions: Limbs,
                 tangent_velocities: Limbs, t_end: Limbs, times: Limbs, options: Options,
                 renormalize: float) -> RunRecord: ...
def batch_integrate_f64(method: str, masses: Limbs, positions: Limbs, velocities: Limbs, t_end: Limbs,
                        options: Options, chain: ChainOptions, radii: Sequence[float], threads: int,
                        progress: Optional[Callable[[int], object]] = None) -> BatchRecord: ...
def batch_roundtrip_f64(method: str, masses: Limbs, positions: Limbs, velocities: Limbs, t_end: Limbs,
                        options: Options, chain: ChainOptions, radii: Sequence[float], threads: int,
                        progress: Optional[Callable[[int], object]] = None) -> BatchRecord: ...
def diagnostics_f64(masses: Limbs, positions: Limbs, velocities: Limbs) -> dict[str, Limbs]: ...
# Arithmetic kernels exist for f64, dd and qd (f64c computes in plain double).
def limb_binary_f64(op: int, a: Limbs, b: Limbs) -> Limbs: ...
def limb_unary_f64(op: int, a: Limbs) -> Limbs: ...
def two_sum(a: float, b: float) -> tuple[float, float]: ...
def two_prod(a: float, b: float) -> tuple[float, float]: ...

integrate_f64c = integrate_f64
integrate_dd = integrate_f64
integrate_qd = integrate_f64
lyapunov_f64c = lyapunov_f64
lyapunov_dd = lyapunov_f64
lyapunov_qd = lyapunov_f64
batch_integrate_f64c = batch_integrate_f64
batch_integrate_dd = batch_integrate_f64
batch_integrate_qd = batch_integrate_f64
batch_roundtrip_f64c = batch_roundtrip_f64
batch_roundtrip_dd = batch_roundtrip_f64
batch_roundtrip_qd = batch_roundtrip_f64
diagnostics_f64c = diagnostics_f64
diagnostics_dd = diagnostics_f64
diagnostics_qd = diagnostics_f64
limb_binary_dd = limb_binary_f64
limb_binary_qd = limb_binary_f64
limb_unary_dd = limb_unary_f64
limb_unary_qd = limb_unary_f64

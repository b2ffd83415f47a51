"""The integration options, each declared once: name, type, default, check, methods, doc, manifest form.

Every entry point reads them here: ``integrate``, ``roundtrip`` and the other functions of
:mod:`loschmidt.chaos`, ``integrate_batch``/``roundtrip_batch``, ``lyapunov``, the sweep tasks (whose
manifest records :meth:`Settings.manifest`) and the TOML files of the command line (a key of
``[run]`` or ``[task]`` is an option's name; its value goes through the same check). An option a
method does not accept is refused with the same ``ValueError`` from all of them, naming the option
and the method, before any work.

Adding an option means one :class:`Option` in ``OPTIONS`` below (and, when it reaches the engine,
the field of the engine's options that it sets, in :func:`Settings.engine_options`).

Examples
--------
>>> from loschmidt import options
>>> s = options.resolve({"max_steps": 50}, method="gbs", precision="f64")
>>> s["max_steps"], s["tol"], s["atol"]
(50, 1e-13, 1e-13)
>>> options.resolve({"regularization": "logarithmic"}, method="gbs", precision="f64")
Traceback (most recent call last):
...
ValueError: regularization: not accepted by method 'gbs' (only by method 'chain')
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass
from dataclasses import field as _field
from typing import Any, Callable, Mapping

import numpy as np

from . import precision as _p

__all__ = [
    "Option",
    "OPTIONS",
    "METHODS",
    "REGULARIZATIONS",
    "PN_ORDERS",
    "DEFAULT_MERGER_FACTOR",
    "DEFAULT_DISTANCE_FACTOR",
    "DEFAULT_MAX_STEPS",
    "DEFAULT_MAX_EVENTS",
    "STOP_CODES",
    "Settings",
    "resolve",
    "names_for",
    "check_tolerance",
    "check_method",
    "resolve_method",
    "CHAIN_MAX_BODIES",
    "parameters_doc",
]

#: Names of the integration methods, ``"gbs"`` (Gragg-Bulirsch-Stoer in Cartesian coordinates) and
#: ``"chain"`` (the same extrapolation over a regularized leapfrog in chain coordinates).
METHODS = ("gbs", "chain")

#: Most bodies for which the automatic choice (``method=None``, the default) takes ``"chain"``.
#: Few-body work is what the chain is for (Mikkola & Aarseth 1993 built it for small-N
#: subsystems); measured on the free-fall triples of ``ics.free_fall_grid(6, 6)``, t = 20, dd:
#: gbs ends 7 of 25 members with step_underflow, chain finishes all 25. Above this count the chain
#: is long and ``gbs`` is the method for smooth many-body problems.
CHAIN_MAX_BODIES = 10

#: Regularizations of the chain method's leapfrog substep (engine codes: their index).
REGULARIZATIONS = ("logarithmic", "time_transformed")

#: Post-Newtonian orders the chain method can switch on, and their bits in the engine's mask.
PN_ORDERS = {1: 1, 2: 2, 2.5: 4}

#: Default merger distance in units of the pair's summed Schwarzschild radii 2 G (m_i + m_j) / c^2.
DEFAULT_MERGER_FACTOR = 8.0

#: Default k of the escape test R > k a_binary: a body farther than k semimajor axes of the
#: remaining pair (common practice; 10 is a usual choice).
DEFAULT_DISTANCE_FACTOR = 10.0

#: The step budget when none is given: high enough never to end a useful run (10**9 steps take
#: hours), low enough that a run that cannot progress still ends.
DEFAULT_MAX_STEPS = 10**9

#: Largest integer option the engine takes (a C++ long long); ``max_order`` and ``check_every``
#: are C++ ints.
_INT64_MAX = 2**63 - 1
_INT32_MAX = 2**31 - 1

#: The engine's codes of the stop conditions (StopCondition in methods/options.hpp); a set of bits.
STOP_CODES = {"escape": 1, "pair_distance": 2}

#: Most passages an event log keeps when ``max_events`` is not given (the rest are counted).
DEFAULT_MAX_EVENTS = 1_000_000

#: The entry points, for options that only some of them take.
ENTRIES = ("integrate", "batch", "lyapunov")


# ---------------------------------------------------------------------------------------------------
# checks of single values (each returns the option's canonical, JSON-friendly form)


def _no_bool(value: Any, name: str) -> None:
    if isinstance(value, (bool, np.bool_)):
        raise TypeError(f"{name}: expected a number, got bool")


def positive(value: Any, name: str, integer: bool = False, maximum: int = _INT64_MAX) -> Any:
    """A positive finite number (or integer up to ``maximum``); None stays None.

    Parameters
    ----------
    value : number or None
        The value.
    name : str
        The argument name used in error messages.
    integer : bool, optional
        Require an integer.
    maximum : int, optional
        Largest integer accepted.

    Returns
    -------
    int, float or None
    """
    if value is None:
        return None
    _no_bool(value, name)
    if integer:
        if not isinstance(value, numbers.Integral):
            raise TypeError(f"{name}: expected an integer, got {type(value).__name__}")
        if value <= 0:
            raise ValueError(f"{name}: must be positive, got {value}")
        if value > maximum:
            raise ValueError(f"{name}: must be at most {maximum}, got {value}")
        return int(value)
    if not isinstance(value, numbers.Real):
        raise TypeError(f"{name}: expected a number, got {type(value).__name__}")
    v = _p._real(value)
    if not math.isfinite(v) or v <= 0:
        raise ValueError(f"{name}: must be a positive finite number, got {value}")
    return v


def check_tolerance(tol: Any, prec: str, name: str = "tol") -> float:
    """Validate a relative tolerance.

    Parameters
    ----------
    tol : float or None
        The tolerance; None gives the precision's default (``precision.default_tolerance``).
    prec : str
        The working precision.
    name : str, optional
        The argument name used in error messages.

    Returns
    -------
    float

    Raises
    ------
    ValueError
        Outside (0, 1), or below about 50 units of round-off of ``prec``.
    """
    if tol is None:
        return _p.default_tolerance(prec)
    _no_bool(tol, name)
    if not isinstance(tol, numbers.Real):
        raise TypeError(f"{name}: expected a number, got {type(tol).__name__}")
    v = _p._real(tol)
    if not (0 < v < 1) or not math.isfinite(v):
        raise ValueError(f"{name}: must lie in (0, 1), got {tol}")
    # Below this the error estimate, a difference of two states, is round-off noise: measured
    # against the representation's unit roundoff (precision.epsilon), as it always was.
    floor = 50 * _p.epsilon(prec)
    if v < floor:
        raise ValueError(
            f"{name}: {v:g} is below what precision {prec!r} can resolve (about {floor:.1e}); "
            "use a higher precision"
        )
    return v


def check_method(method: Any) -> str:
    """Validate the name of an integration method.

    Parameters
    ----------
    method : str
        One of ``METHODS``.

    Returns
    -------
    str
    """
    if not isinstance(method, str):
        raise TypeError(f"method: expected one of {METHODS}, got {type(method).__name__}")
    if method not in METHODS:
        raise ValueError(f"method: unknown method {method!r}; expected one of {METHODS}")
    return method


def resolve_method(method: Any, bodies: int | None, given: Mapping[str, Any] | None = None,
                   carries_radii: bool = False) -> str | None:
    """The integration method to run: ``method`` itself, or for None the automatic choice.

    The automatic choice is the one method every given option (and radii the bodies carry) is
    accepted by, when only one is; otherwise ``"chain"`` for at most ``CHAIN_MAX_BODIES`` bodies
    and ``"gbs"`` above. Every entry point calls this one function, and results record the method
    that ran.

    Parameters
    ----------
    method : {None, "gbs", "chain"}
        The method asked for; None chooses.
    bodies : int or None
        Number of bodies; None when not known yet (a batch's options before its systems): then
        None is returned unless the options decide.
    given : mapping, optional
        The options given (name -> value; None is unset).
    carries_radii : bool, optional
        The bodies carry radii (a System's or an Ensemble's).

    Returns
    -------
    str or None
        ``"gbs"`` or ``"chain"`` (None only as said for ``bodies``).

    Examples
    --------
    >>> from loschmidt.options import resolve_method
    >>> resolve_method(None, 3), resolve_method(None, 50), resolve_method("gbs", 3)
    ('chain', 'gbs', 'gbs')
    >>> resolve_method(None, 50, {"pn": [1], "c": 100})
    'chain'
    """
    if method is not None:
        return check_method(method)
    allowed = set(METHODS)
    for name, value in (given or {}).items():
        option = OPTIONS.get(name)
        if option is not None and not option.unset(value) and allowed & set(option.methods):
            allowed &= set(option.methods)
    if carries_radii and allowed & set(OPTIONS["radii"].methods):
        allowed &= set(OPTIONS["radii"].methods)
    if len(allowed) == 1:
        return allowed.pop()
    if bodies is None:
        return None
    return "gbs" if bodies > CHAIN_MAX_BODIES else "chain"


def check_distance_factor(value: Any, name: str = "distance_factor") -> float:
    """k of the escape test: a finite number >= 0.

    Parameters
    ----------
    value : float
        The factor.
    name : str, optional
        The argument name used in error messages.

    Returns
    -------
    float
    """
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Real):
        raise TypeError(f"{name}: expected a real number, got {type(value).__name__}")
    v = _p._real(value)
    if not math.isfinite(v) or v < 0:
        raise ValueError(f"{name}: must be a finite number >= 0, got {value!r}")
    return v


# Each check takes (value, context) and returns the canonical form; value is never None here.

def _tol(v: Any, c: "_Context") -> float:
    return check_tolerance(v, c.precision, "tol")


def _atol(v: Any, c: "_Context") -> float:
    return positive(v, "atol")


def _max_steps(v: Any, c: "_Context") -> int:
    return positive(v, "max_steps", integer=True)


def _max_wall_time(v: Any, c: "_Context") -> float:
    return positive(v, "max_wall_time")


def _max_order(v: Any, c: "_Context") -> int:
    order = positive(v, "max_order", integer=True, maximum=_INT32_MAX)
    # Error and order control need three rows of the tableau (two error estimates to compare);
    # in fixed-step mode any number of rows >= 1 (order 2 * rows).
    if order < 3 and c.given.get("fixed_step") is None:
        raise ValueError(f"max_order: must be at least 3, got {v}")
    return order


def _initial_step(v: Any, c: "_Context") -> float:
    if c.given.get("fixed_step") is not None:
        raise ValueError("initial_step: not used with fixed_step (every step has the fixed size)")
    return positive(v, "initial_step")


def _fixed_step(v: Any, c: "_Context") -> float:
    h = positive(v, "fixed_step")
    if c.t_limbs is not None and c.given.get("max_steps") is None:
        # Without an explicit budget, refuse a span that needs more steps than the default budget:
        # the run could only end with status max_steps, after hours.
        needed = abs(float(_p.to_float(c.t_limbs))) / h
        if needed > DEFAULT_MAX_STEPS:
            raise ValueError(
                f"fixed_step: |t| / fixed_step = {needed:.3g} steps exceed the default budget of "
                f"{DEFAULT_MAX_STEPS} steps; use a larger fixed_step, or pass max_steps to run part of the way"
            )
    return h


def _regularization(v: Any, c: "_Context") -> str:
    if not isinstance(v, str) or v not in REGULARIZATIONS:
        raise ValueError(f"regularization: expected one of {REGULARIZATIONS}, got {v!r}")
    return v


def _radii(v: Any, c: "_Context") -> list:
    if isinstance(v, (str, bytes)):
        raise TypeError("radii: expected numbers, one per body (shared) or an (M, N) array")
    try:
        r = np.asarray(v, dtype=np.float64)
    except (TypeError, ValueError):
        raise TypeError("radii: expected numbers, one per body (shared) or an (M, N) array") from None
    if r.ndim not in (1, 2) or r.size == 0:
        raise ValueError(f"radii: expected shape (N,) or (M, N), got {r.shape}")
    if not np.all(np.isfinite(r)) or np.any(r < 0):
        raise ValueError("radii: must be finite and non-negative")
    return r.tolist()


def _pn(v: Any, c: "_Context") -> list:
    if isinstance(v, np.ndarray):
        v = v.tolist() if v.ndim == 1 else v
    orders = v if isinstance(v, (tuple, list, set, frozenset)) else (v,)
    mask = 0
    for order in orders:
        if isinstance(order, (bool, np.bool_)) or not isinstance(order, numbers.Real):
            raise TypeError(f"pn: expected post-Newtonian orders among {tuple(PN_ORDERS)}, got {order!r}")
        if order not in PN_ORDERS:
            raise ValueError(f"pn: unknown post-Newtonian order {order!r}; expected a subset of {tuple(PN_ORDERS)}")
        mask |= PN_ORDERS[order]
    if c.given.get("c") is None:
        raise ValueError("c: the speed of light in N-body units (loschmidt.units.Scale(...).c) is required with pn")
    return [order for order, bit in sorted(PN_ORDERS.items()) if mask & bit]


def _light_speed(v: Any, c: "_Context") -> str:
    if _pn_unset(c.given.get("pn")):
        raise ValueError("c: the speed of light is only used with pn")
    _no_bool(v, "c")
    limbs = _p.to_limbs(v, c.precision, name="c")
    if limbs.ndim != 1:
        raise ValueError("c: expected a single number")
    value = float(_p.to_float(limbs))
    if not math.isfinite(value) or not value > 0:
        raise ValueError(f"c: must be a positive finite number, got {v}")
    return str(_p.to_string(limbs, exact=True))


def _merger_factor(v: Any, c: "_Context") -> float:
    if _pn_unset(c.given.get("pn")):
        raise ValueError("merger_factor: only used with pn")
    _no_bool(v, "merger_factor")
    if not isinstance(v, numbers.Real):
        raise TypeError(f"merger_factor: expected a number, got {type(v).__name__}")
    f = _p._real(v)
    if not math.isfinite(f) or f < 0:
        raise ValueError(f"merger_factor: must be a finite number >= 0, got {v}")
    return f


def _stop(v: Any, c: "_Context") -> str:
    if not isinstance(v, str) or v not in STOP_CODES:
        raise ValueError(f"stop: expected None, 'escape' or 'pair_distance', got {v!r}")
    if v == "pair_distance":
        if c.entry != "integrate":
            raise ValueError("stop: 'pair_distance' needs the event log of a single run (integrate), "
                             f"not {c.entry}")
        if c.given.get("stop_distance") is None:
            raise ValueError("stop_distance: required with stop='pair_distance' (a positive distance)")
    return v


def _events(v: Any, c: "_Context") -> bool:
    if not isinstance(v, (bool, np.bool_)):
        raise TypeError(f"events: expected True or False, got {type(v).__name__}")
    return bool(v)


def _max_events(v: Any, c: "_Context") -> int:
    return positive(v, "max_events", integer=True)


def _stop_distance(v: Any, c: "_Context") -> float:
    if c.given.get("stop") != "pair_distance":
        raise ValueError("stop_distance: only with stop='pair_distance'")
    return positive(v, "stop_distance")


def _stop_pair(v: Any, c: "_Context") -> list:
    if c.given.get("stop") != "pair_distance":
        raise ValueError("stop_pair: only with stop='pair_distance'")
    if isinstance(v, (str, bytes)):
        raise TypeError("stop_pair: expected a pair of body indices, or None for any pair")
    try:
        pair = list(v)
    except TypeError:
        raise TypeError("stop_pair: expected a pair of body indices, or None for any pair") from None
    if len(pair) != 2 or any(isinstance(x, (bool, np.bool_)) or not isinstance(x, numbers.Integral) for x in pair):
        raise TypeError("stop_pair: expected a pair of body indices, or None for any pair")
    i, j = int(pair[0]), int(pair[1])
    below = _INT32_MAX if c.bodies is None else c.bodies
    if not (0 <= i < below and 0 <= j < below and i != j):
        raise ValueError(f"stop_pair: expected two different body indices below {below}, got {v!r}")
    return [i, j]


def _check_every(v: Any, c: "_Context") -> int:
    return positive(v, "check_every", integer=True, maximum=_INT32_MAX)


def _distance_factor(v: Any, c: "_Context") -> float:
    return check_distance_factor(v)


def _pn_unset(value: Any) -> bool:
    if value is None:
        return True
    if isinstance(value, np.ndarray):
        return value.size == 0
    return isinstance(value, (tuple, list, set, frozenset)) and len(value) == 0


# ---------------------------------------------------------------------------------------------------
# the declarations


@dataclass(frozen=True)
class Option:
    """One integration option.

    Attributes
    ----------
    name : str
        Its keyword (and its key in TOML files and sweep manifests).
    type : str
        The type, as the documentation shows it.
    default : str
        What happens when it is not given, as the documentation shows it.
    doc : str
        What it does.
    check : callable
        ``check(value, context) -> canonical value`` (JSON-friendly), raising ``TypeError`` or
        ``ValueError`` that name the option.
    methods : tuple of str
        The methods that accept it.
    entries : tuple of str
        The entry points that take it (``"integrate"``, ``"batch"``, ``"lyapunov"``).
    manifest : {"always", "given"}
        How a sweep manifest records it: always (None when unset), or only when given (so
        definitions without it keep their hash).
    toml : str
        What a TOML file holds for it: ``"number"``, ``"integer"``, ``"string"``, ``"span"`` (a number
        or a decimal string), ``"numbers"`` (a list), ``"integers"`` (a list of integers), ``"boolean"``
        or ``"orders"`` (a list of PN orders).
    field : str or None
        The field of the engine's ``Options`` or ``ChainOptions`` (``_core.pyi``) it sets when
        given; unset, the field keeps its C++ default. None: not passed as a field.
    engine : callable or None
        ``engine(canonical value) -> field value`` when the two forms differ.
    """

    name: str
    type: str
    default: str
    doc: str
    check: Callable[[Any, Any], Any] = _field(repr=False)
    methods: tuple = METHODS
    entries: tuple = ENTRIES
    manifest: str = "always"
    toml: str = "number"
    field: str | None = None
    engine: Callable[[Any], Any] | None = _field(default=None, repr=False)

    def unset(self, value: Any) -> bool:
        """Whether ``value`` means "not given".

        Parameters
        ----------
        value : object
            A value of the option.

        Returns
        -------
        bool
        """
        return _pn_unset(value) if self.name == "pn" else value is None


_O = Option
#: Every integration option, in documentation order.
OPTIONS: dict[str, Option] = {o.name: o for o in (
    _O("tol", "float", "per precision (``precision.default_tolerance``)",
       "Relative tolerance of the local error.", _tol, field="rtol"),
    _O("atol", "float", "``tol``", "Absolute tolerance.", _atol, field="atol"),
    _O("max_steps", "int", f"no limit beyond {DEFAULT_MAX_STEPS:.0e} steps",
       "Budget of macro steps (status ``max_steps`` when spent; per system and leg in a batch).", _max_steps,
       toml="integer", field="max_steps"),
    _O("max_wall_time", "float", "none",
       "Budget of seconds (status ``max_wall_time``; per system and leg in a batch).", _max_wall_time,
       field="max_wall_time"),
    _O("max_order", "int", "grows with the precision (``precision.info(p).order_limit``)",
       "Highest extrapolation column, at least 3 (any number >= 1 with ``fixed_step``).", _max_order,
       toml="integer", field="max_order"),
    _O("initial_step", "float", "chosen automatically", "First step size; not with ``fixed_step``.", _initial_step,
       field="initial_step"),
    _O("fixed_step", "float", "none (adaptive steps)",
       "Fixed-step mode, for measuring the order of the method: every step has this size (the last "
       "before each output time and ``t`` shortened to land), with exactly ``max_order`` rows of "
       "extrapolation and no error control (``tol`` is not used); with method 'chain' a physical "
       "time, as ``initial_step``.", _fixed_step,
       entries=("integrate", "batch", "lyapunov"), manifest="given", field="fixed_step"),
    _O("radii", "array-like", "the System's or Ensemble's own radii",
       "Body radii: status ``collision`` when two bodies touch. One per body; in a batch shared by "
       "all systems, or an (M, N) array.", _radii,
       methods=("chain",), entries=("batch",), manifest="given", toml="numbers"),  # per system: engine.batch
    _O("regularization", "{'logarithmic', 'time_transformed'}", "'logarithmic'",
       "Time transformation of the chain method's leapfrog (Mikkola & Tanikawa 1999; Mikkola & "
       "Aarseth 2002).", _regularization,
       methods=("chain",), entries=("integrate", "batch"), manifest="given", toml="string",
       field="regularization", engine=REGULARIZATIONS.index),
    _O("pn", "tuple of {1, 2, 2.5}", "Newtonian",
       "Post-Newtonian terms for compact bodies, harmonic coordinates: 1 the full "
       "Einstein-Infeld-Hoffmann N-body 1PN equations; 2 and 2.5 (radiation reaction) the two-body "
       "relative accelerations (Blanchet 2014, Living Rev. Relativ. 17, 2) applied pair by pair and "
       "split by mass ratio, so each pair term conserves momentum; the three-body terms at those "
       "orders are left out (common practice in few-body work; Kupi, Amaro-Seoane & Spurzem 2006, "
       "MNRAS 371, L45). With 1PN on, the 2PN pair term leaves out the part that the EIH terms "
       "already produce (cpp/include/loschmidt/nbody/post_newtonian.hpp), so a binary follows the "
       "two-body 2PN motion in its centre-of-mass frame. The PN forces depend on the velocities in "
       "the frame given (harmonic coordinates; not Galilean invariant). 2.5PN (radiation reaction) "
       "makes the motion irreversible: a round trip does not come back.", _pn,
       methods=("chain",), entries=("integrate", "batch"), manifest="given", toml="orders",
       field="pn_orders", engine=lambda orders: sum(PN_ORDERS[o] for o in orders)),
    _O("c", "number or decimal string", "none (required with ``pn``)",
       "The speed of light in N-body units (``loschmidt.units.Scale(...).c``, or the decimal string "
       "``Scale(...).decimal(\"c\")`` for extended precision); required with ``pn``.", _light_speed,
       methods=("chain",), entries=("integrate", "batch"), manifest="given", toml="span",
       field="light_speed"),  # its limbs in the working precision: Settings.engine_options
    _O("merger_factor", "float", f"{DEFAULT_MERGER_FACTOR:g}",
       "With ``pn``, a pair closer than ``merger_factor`` times the sum of its Schwarzschild radii, "
       "``merger_factor * 2 G (m_i + m_j) / c^2``, ends the run with status ``merger`` and the pair in "
       "``Result.collision`` (8: 16 G M / c^2, v/c ~ 0.25 on a circular orbit, where the PN expansion "
       "is about to fail); 0 switches the test off. The bodies are not merged.", _merger_factor,
       methods=("chain",), entries=("integrate", "batch"), manifest="given", field="merger_factor"),
    _O("stop", "{None, 'escape', 'pair_distance'}", "None",
       "``'escape'``: every ``check_every`` accepted steps the engine tests, in double precision, "
       "whether a body escapes, and stops with status ``stop_condition`` when one does; ``t`` is then "
       "the longest span and ``Result.lifetime`` the time it stopped. The test is that of "
       ":mod:`loschmidt.outcome` for two and three bodies (three: the body outside the most bound pair "
       "has positive energy relative to the pair's centre of mass, recedes, and is farther than "
       "``distance_factor`` semimajor axes of the pair); for N > 3 a body unbound from the centre of "
       "mass of all the others, receding, and farther than ``distance_factor`` times their size "
       "(cpp/include/loschmidt/nbody/escape.hpp). It is a trigger: classify the final state with "
       "``loschmidt.outcome``. ``'pair_distance'`` (``integrate`` only): see ``stop_distance``.", _stop,
       entries=("integrate", "batch"), manifest="given", toml="string",
       field="stop", engine=lambda name: STOP_CODES[name]),
    _O("check_every", "int", "10", "Accepted steps between escape tests.", _check_every,
       entries=("integrate", "batch"), manifest="given", toml="integer", field="check_every"),
    _O("distance_factor", "float", f"{DEFAULT_DISTANCE_FACTOR:g}",
       "k of the escape test (``loschmidt.outcome``); 0 drops the distance condition.", _distance_factor,
       entries=("integrate", "batch"), manifest="given", field="distance_factor"),
    _O("events", "bool", "False",
       "Record the event log (:mod:`loschmidt.events`): pericentre passages and the closest approach "
       "of every pair (and, for three bodies, the outer orbit's passages), in ``Result.events``, "
       "found after every accepted step without output times.", _events,
       entries=("integrate",), manifest="given", toml="boolean"),  # the kernel's log: engine.integrate
    _O("max_events", "int", f"{DEFAULT_MAX_EVENTS:,}",
       "Most passages the event log keeps (the rest are counted in ``EventLog.dropped``).", _max_events,
       entries=("integrate",), manifest="given", toml="integer"),
    _O("stop_distance", "float", "none (required with ``stop='pair_distance'``)",
       "With ``stop='pair_distance'``: end the run (status ``stop_condition``) at the end of the first "
       "accepted step in which ``stop_pair`` (any pair when unset) came closer than this (minima inside "
       "a step count); the pair is in ``Result.stop_pair``. Keeps an event log.", _stop_distance,
       entries=("integrate",), manifest="given", field="stop_distance"),
    _O("stop_pair", "(int, int)", "any pair", "The pair watched by ``stop_distance`` (bodies from 0).",
       _stop_pair, entries=("integrate",), manifest="given", toml="integers", field="stop_pair"),
)}


def names_for(entry: str, method: str | None = None) -> tuple:
    """The options an entry point takes (and, given a method, that the method accepts).

    Parameters
    ----------
    entry : {"integrate", "batch", "lyapunov"}
        The entry point.
    method : str, optional
        A method.

    Returns
    -------
    tuple of str
    """
    return tuple(n for n, o in OPTIONS.items() if entry in o.entries and (method is None or method in o.methods))


def parameters_doc(entry: str, indent: str = "    ") -> str:
    """The NumPy-style Parameters entries of the options an entry point takes (for docstrings).

    Parameters
    ----------
    entry : {"integrate", "batch", "lyapunov"}
        The entry point.
    indent : str, optional
        Indentation of the entries.

    Returns
    -------
    str
    """
    import textwrap

    lines = []
    for name in names_for(entry):
        o = OPTIONS[name]
        only = "" if o.methods == METHODS else f" Method {' or '.join(repr(m) for m in o.methods)} only."
        lines.append(f"{indent}{name} : {o.type}, optional")
        lines.extend(textwrap.wrap(f"{o.doc}{only} Default: {o.default}.", 100 - len(indent) - 4,
                                   initial_indent=indent + "    ", subsequent_indent=indent + "    ",
                                   break_on_hyphens=False))
    return "\n".join(lines)


# ---------------------------------------------------------------------------------------------------
# resolution


@dataclass(frozen=True)
class _Context:
    method: str
    precision: str
    given: Mapping[str, Any]
    t_limbs: Any
    entry: str = "integrate"
    bodies: int | None = None


@dataclass(frozen=True)
class Settings:
    """Validated options of one run or batch: canonical values by name (None when unset).

    Attributes
    ----------
    method, precision : str
        The method and working precision they were checked for.
    values : dict
        Option name -> canonical value (JSON-friendly), or None when not given; ``tol`` and
        ``atol`` are always resolved.
    """

    method: str
    precision: str
    values: dict

    def __getitem__(self, name: str) -> Any:
        return self.values[name]

    def get(self, name: str, default: Any = None) -> Any:
        """The canonical value of an option, or ``default`` when unset.

        Parameters
        ----------
        name : str
            The option.
        default : object, optional
            Returned when the option is unset.

        Returns
        -------
        object
        """
        value = self.values.get(name)
        return default if value is None else value

    def manifest(self, entry: str = "batch") -> dict:
        """The JSON-friendly form a sweep manifest records: the options of ``entry`` declared
        ``"always"`` (None when unset), and those declared ``"given"`` only when given.

        Parameters
        ----------
        entry : str, optional
            The entry point whose options are recorded (default "batch").

        Returns
        -------
        dict
        """
        out = {}
        for name in names_for(entry):
            value = self.values.get(name)
            if OPTIONS[name].manifest == "always" or value is not None:
                out[name] = value
        return out

    # -- the engine's view --------------------------------------------------------------------------
    @property
    def pn_mask(self) -> int:
        """The engine's bit mask of post-Newtonian orders (0: Newtonian)."""
        return sum(PN_ORDERS[o] for o in self.values.get("pn") or ())

    def light_speed_limbs(self) -> list:
        """The limbs of ``c`` in the working precision (empty without ``pn``).

        Returns
        -------
        list of float
        """
        c = self.values.get("c")
        return [] if c is None else [float(x) for x in _p.to_limbs(c, self.precision, name="c")]

    def event_capacity(self) -> int:
        """Most passages the run's event log keeps; 0 when the run keeps no log (neither ``events``
        nor ``stop='pair_distance'``, whose test is the log's).

        Returns
        -------
        int
        """
        if not (self.values.get("events") or self.values.get("stop") == "pair_distance"):
            return 0
        return self.get("max_events", DEFAULT_MAX_EVENTS)

    def engine_options(self) -> dict:
        """What the engine's options receive: the fields of the options given (``Option.field``);
        the others keep the engine's defaults (``_core.Options()``).

        Returns
        -------
        dict
            Field name -> value of the engine's ``Options`` or ``ChainOptions`` (``_core.pyi``).
        """
        out = {}
        for name, value in self.values.items():
            option = OPTIONS[name]
            if value is None or option.field is None:
                continue
            out[option.field] = option.engine(value) if option.engine is not None else value
        if "light_speed" in out:
            out["light_speed"] = self.light_speed_limbs()
        return out


def refuse(name: str, method: str) -> ValueError:
    """The error for an option a method does not accept (the same from every entry point).

    Parameters
    ----------
    name : str
        The option.
    method : str
        The method.

    Returns
    -------
    ValueError
    """
    accepted = OPTIONS[name].methods
    only = " or ".join(f"method {m!r}" for m in accepted)
    return ValueError(f"{name}: not accepted by method {method!r} (only by {only})")


def resolve(given: Mapping[str, Any], *, method: Any = "gbs", precision: Any = "dd", entry: str = "integrate",
            t_limbs: Any = None, bodies: int | None = None) -> Settings:
    """Check the options of one entry point and return their canonical values.

    Parameters
    ----------
    given : mapping
        Option name -> value as the user gave it (None: unset).
    method : str, optional
        The integration method.
    precision : str, optional
        The working precision.
    entry : {"integrate", "batch", "lyapunov"}, optional
        The entry point: an option it does not take is a ``TypeError``.
    t_limbs : numpy.ndarray, optional
        The span (limbs), for checks that need it (``fixed_step``'s budget).
    bodies : int, optional
        Number of bodies, for checks that need it (``stop_pair``'s indices).

    Returns
    -------
    Settings

    Raises
    ------
    TypeError
        For an unknown option, or a value of the wrong type.
    ValueError
        For a bad value, or an option the method does not accept (before any work).
    """
    method = check_method(method)
    prec = _p.check_precision(precision)
    for name in given:
        if name not in OPTIONS or entry not in OPTIONS[name].entries:
            raise TypeError(f"{name}: not an option of {entry} (expected some of {list(names_for(entry))})")
    ctx = _Context(method, prec, given, t_limbs, entry, bodies)
    values: dict = {}
    for name in names_for(entry):
        option = OPTIONS[name]
        value = given.get(name)
        if option.unset(value):
            values[name] = None
            continue
        if method not in option.methods:
            raise refuse(name, method)
        values[name] = option.check(value, ctx)
    if values["tol"] is None:
        values["tol"] = check_tolerance(None, prec)
    if values["atol"] is None:
        values["atol"] = values["tol"]
    return Settings(method, prec, values)


def system_radii(radii: Any, method: str) -> list:
    """The radii a System or Ensemble carries, as the engine takes them: a list (empty: none).

    Radii only mean something to the chain method (contact ends the run with status
    ``collision``), so bodies with radii and another method are refused like an explicit ``radii``
    option: never silently dropped.

    Parameters
    ----------
    radii : array-like or None
        The radii carried by the system (or ensemble).
    method : str
        The method.

    Returns
    -------
    list of float
    """
    if radii is None:
        return []
    check_carried_radii(method)
    return [float(r) for r in np.asarray(radii, dtype=np.float64).ravel()]


def check_carried_radii(method: str) -> None:
    """Refuse bodies that carry radii (a System's or an Ensemble's) with a method that ignores them.

    Parameters
    ----------
    method : str
        The method.
    """
    if method not in OPTIONS["radii"].methods:
        raise ValueError(f"{refuse('radii', method)}; the bodies carry radii: use method='chain', or drop "
                         "them (System.with_radii(None))")


def document(doc: str | None, entry: str) -> str | None:
    """``doc`` with its ``<options>`` line replaced by the Parameters entries of ``entry``'s options.

    Parameters
    ----------
    doc : str or None
        A docstring holding a line ``<options>``.
    entry : {"integrate", "batch", "lyapunov"}
        The entry point.

    Returns
    -------
    str or None
    """
    if doc is None:  # python -OO
        return None
    lines = doc.split("\n")
    for i, line in enumerate(lines):
        if line.strip() == "<options>":
            indent = line[: len(line) - len(line.lstrip())]
            lines[i] = parameters_doc(entry, indent)
            return "\n".join(lines)
    raise ValueError("doc: no <options> line")

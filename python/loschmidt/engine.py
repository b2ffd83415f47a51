"""The one door to the C++ engine: which kernel of ``_core`` serves a precision, and the calls.

Every other module goes through here: ``integrate``, ``lyapunov``, the batches, the diagnostics
and the limb arithmetic. The precision -> kernel map lives in ``_KERNELS`` (f64c shares the double
kernels' arithmetic and has its own compensated integrators); the options reach the engine from
:class:`loschmidt.options.Settings` only.
"""

from __future__ import annotations

from typing import Any, Callable

import numpy as np

from . import _core

# engine sits below options and precision and imports neither: ``settings`` arguments are
# loschmidt.options.Settings objects.
Settings = Any

__all__ = ["engine_options", "integrate", "batch", "lyapunov", "diagnostics", "limb_binary", "limb_unary"]

#: precision -> (suffix of its integration kernels, suffix of its arithmetic kernels).
_KERNELS = {"f64": ("f64", "f64"), "f64c": ("f64c", "f64"), "dd": ("dd", "dd"), "qd": ("qd", "qd")}


def _kernel(kind: str, precision: str, arithmetic: bool = False) -> Callable:
    suffix = _KERNELS[precision][1 if arithmetic else 0]  # the callers have checked the name
    return getattr(_core, f"{kind}_{suffix}")


def engine_options(settings: Settings) -> tuple:
    """The engine's own option objects for validated settings: ``(_core.Options, _core.ChainOptions)``.

    Parameters
    ----------
    settings : loschmidt.options.Settings
        The validated options.

    Returns
    -------
    tuple of (_core.Options, _core.ChainOptions)
        Each field set from ``Settings.engine_options``, whose keys are the fields' names.
    """
    opt, chain = _core.Options(), _core.ChainOptions()
    for name, value in settings.engine_options().items():
        setattr(opt if hasattr(opt, name) else chain, name, value)
    return opt, chain


def integrate(method: str, masses: np.ndarray, positions: np.ndarray, velocities: np.ndarray, t_limbs: np.ndarray,
              times: np.ndarray, settings: Settings, radii: list) -> Any:
    """One run of ``integrate`` on validated limb arrays.

    Parameters
    ----------
    method : str
        The method.
    masses, positions, velocities : numpy.ndarray
        Limb arrays (N, k), (N, 3, k), (N, 3, k).
    t_limbs, times : numpy.ndarray
        The span (k,) and output offsets (M, k).
    settings : loschmidt.options.Settings
        The validated options.
    radii : list of float
        One radius per body, or empty.

    Returns
    -------
    _core.RunRecord
        The engine's record of the run (``_core.pyi``); its ``events`` is the event log when the
        settings keep one (``Settings.event_capacity``).
    """
    opt, chain = engine_options(settings)
    chain.radii = radii
    return _kernel("integrate", settings.precision)(method, masses, positions, velocities, t_limbs, times, opt, chain,
                                                    settings.event_capacity())


def batch(task: str, masses: np.ndarray, positions: np.ndarray, velocities: np.ndarray, t_limbs: np.ndarray,
          settings: Settings, radii: list, threads: int, progress: Callable[[int], Any] | None) -> Any:
    """A batch (``task`` "integrate" or "roundtrip") on validated limb arrays.

    Parameters
    ----------
    task : {"integrate", "roundtrip"}
        What each member does.
    masses, positions, velocities : numpy.ndarray
        Limb arrays (M, N, k), (M, N, 3, k), (M, N, 3, k).
    t_limbs : numpy.ndarray
        The span, (k,) or (M, k).
    settings : loschmidt.options.Settings
        The validated options.
    radii : list of float
        None, N shared or M * N row-major radii.
    threads : int
        C++ threads.
    progress : callable or None
        Called with the number of members finished.

    Returns
    -------
    _core.BatchRecord
        The engine's columns (``_core.pyi``).
    """
    opt, chain = engine_options(settings)
    return _kernel(f"batch_{task}", settings.precision)(settings.method, masses, positions, velocities, t_limbs, opt,
                                                       chain, radii, threads, progress)


def lyapunov(masses: np.ndarray, positions: np.ndarray, velocities: np.ndarray, tangent_positions: np.ndarray,
             tangent_velocities: np.ndarray, t_limbs: np.ndarray, times: np.ndarray, settings: Settings,
             renormalize: float) -> Any:
    """The orbit and its tangent (variational equations) on validated limb arrays.

    Parameters
    ----------
    masses, positions, velocities : numpy.ndarray
        Limb arrays of the orbit's start.
    tangent_positions, tangent_velocities : numpy.ndarray
        Limb arrays of the initial tangent.
    t_limbs, times : numpy.ndarray
        The span and output offsets.
    settings : loschmidt.options.Settings
        The validated options.
    renormalize : float
        Bound on the tangent norm.

    Returns
    -------
    _core.RunRecord
        The engine's record of the run, with its Lyapunov fields (``_core.pyi``).
    """
    opt, _chain = engine_options(settings)
    return _kernel("lyapunov", settings.precision)(masses, positions, velocities, tangent_positions,
                                                   tangent_velocities, t_limbs, times, opt, renormalize)


def diagnostics(masses: np.ndarray, positions: np.ndarray, velocities: np.ndarray, precision: str) -> dict:
    """Energy, its parts, momentum and angular momentum in the working precision.

    Parameters
    ----------
    masses, positions, velocities : numpy.ndarray
        Limb arrays.
    precision : str
        The working precision.

    Returns
    -------
    dict
        Limb arrays by name.
    """
    return _kernel("diagnostics", precision)(masses, positions, velocities)


def limb_binary(op: int, a: np.ndarray, b: np.ndarray, precision: str) -> np.ndarray:
    """Element-wise ``a op b`` on (M, k) limb arrays (op: 0 add, 1 sub, 2 mul, 3 div).

    Parameters
    ----------
    op : int
        The operation.
    a, b : numpy.ndarray
        Operands, (M, k).
    precision : str
        The working precision.

    Returns
    -------
    numpy.ndarray
    """
    return _kernel("limb_binary", precision, arithmetic=True)(op, a, b)


def limb_unary(op: int, a: np.ndarray, precision: str) -> np.ndarray:
    """Element-wise op on an (M, k) limb array (op: 0 sqrt, 1 neg, 2 abs).

    Parameters
    ----------
    op : int
        The operation.
    a : numpy.ndarray
        Operand, (M, k).
    precision : str
        The working precision.

    Returns
    -------
    numpy.ndarray
    """
    return _kernel("limb_unary", precision, arithmetic=True)(op, a)

"""Integration statuses: one table, shared by every method (the names and messages live in C++,
cpp/include/loschmidt/methods/status.hpp, and are read from there)."""

from __future__ import annotations

from . import _core

__all__ = ["STATUSES", "status_name", "status_message", "SUCCESS_STATUSES"]

#: code -> (name, message), read from the engine's single status table.
STATUSES: dict[int, tuple[str, str]] = {int(code): (str(name), str(msg)) for code, name, msg in _core.statuses}
_BY_NAME = {name: code for code, (name, _msg) in STATUSES.items()}

#: Statuses whose result is a trustworthy state (the run reached its end, or stopped at a physical
#: event it was asked to detect). The others (budgets, step underflow, interrupts, non-finite values)
#: mean the run did not finish.
SUCCESS_STATUSES = frozenset({"success", "stop_condition", "collision", "merger"})


def status_name(code: int) -> str:
    """Name of a status code.

    Parameters
    ----------
    code : int
        A code of ``STATUSES``.

    Returns
    -------
    str
        The status name, e.g. ``"success"``.

    Examples
    --------
    >>> from loschmidt.status import status_name
    >>> status_name(0)
    'success'
    """
    return STATUSES[int(code)][0]


def status_message(code_or_name: int | str) -> str:
    """Human-readable message of a status.

    Parameters
    ----------
    code_or_name : int or str
        A code of ``STATUSES`` or a status name.

    Returns
    -------
    str
        One sentence explaining the status.

    Examples
    --------
    >>> from loschmidt.status import status_message
    >>> status_message("max_steps")
    'The budget of steps was used up before the final time.'
    """
    code = _BY_NAME[code_or_name] if isinstance(code_or_name, str) else int(code_or_name)
    return STATUSES[code][1]

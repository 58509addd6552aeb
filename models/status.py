"""Reason codes and the exception tree of ``models``.

Exception tree::

    BrayscopeModelError                 base of everything raised by ``models``
    └── ModelInputError (ValueError)    the caller misused the API: a scalar out of its valid
                                        range, a wrong shape, an unknown species.  Carries
                                        ``name``, ``value`` and ``valid`` (the range).

"The plant sent bad data" is not an exception inside ``models``: vectorised functions return
NaN for the affected elements and set a bit of :class:`Reason` in a per-element ``uint32``
status array, so one bad snapshot never hides the others.
"""

from __future__ import annotations

from enum import IntFlag
from typing import Any

import numpy as np
from numpy.typing import NDArray

__all__ = [
    "WARNING_REASONS",
    "BrayscopeModelError",
    "ModelInputError",
    "Reason",
    "combine",
    "flag",
    "reason_names",
]


class BrayscopeModelError(Exception):
    """Base class of every exception raised by ``models``."""


class ModelInputError(BrayscopeModelError, ValueError):
    """A caller passed a value outside the valid range (or of the wrong form).

    Parameters
    ----------
    name : str
        Name of the offending argument or field.
    value : object
        The value received.
    valid : str
        Human-readable valid range, with its unit, e.g. ``"200 K to 3000 K"``.
    """

    def __init__(self, name: str, value: object, valid: str, detail: str = "") -> None:
        self.name = name
        self.value = value
        self.valid = valid
        msg = f"{name}={value!r} is outside the valid range ({valid})"
        if detail:
            msg += f": {detail}"
        super().__init__(msg)


class Reason(IntFlag):
    """Why an element of a vectorised result is NaN or flagged.  Bits combine."""

    OK = 0
    INPUT_MISSING = 1 << 0  # a needed input is NaN / absent
    INPUT_NONPHYSICAL = 1 << 1  # T <= 0, p <= 0, negative flow, RH outside 0..1
    TEMPERATURE_OUT_OF_RANGE = 1 << 2  # outside the property data's validity range
    PRESSURE_OUT_OF_RANGE = 1 << 3
    NOT_CONVERGED = 1 << 4  # an iterative solve did not converge
    DISCHARGE_NOT_HOTTER = 1 << 5  # compressor discharge not hotter than inlet
    PRESSURE_RATIO_INVALID = 1 << 6  # p2 <= p1 or turbine expansion ratio <= 1
    ENERGY_BALANCE_INFEASIBLE = 1 << 7  # heat balance gives no positive air flow / TIT
    EFFICIENCY_OUT_OF_RANGE = 1 << 8  # an efficiency outside 0..1 (physically impossible)
    EFFICIENCY_IMPLAUSIBLE = 1 << 9  # outside the trade's plausible band (warning only)
    HEAT_RATE_IMPLAUSIBLE = 1 << 10  # outside the trade's plausible band (warning only)
    FUEL_INVALID = 1 << 11  # composition does not sum to 1, unknown species, LHV <= 0
    CORRECTION_UNAVAILABLE = 1 << 12  # no correction tables, or outside their range
    NOT_STEADY = 1 << 13  # steady-state test says transient (warning only)
    INPUT_STALE = 1 << 14  # set by the daemon: an input exceeded its maximum age
    INPUT_BAD_QUALITY = 1 << 15  # set by the daemon: source quality flag bad
    HUMIDITY_SATURATED = 1 << 16  # water partial pressure capped at saturation
    INPUT_STUCK = 1 << 17  # set by the daemon: a sensor's value has not moved for too long
    INPUT_DISAGREE = 1 << 18  # set by the daemon: redundant sensors differ beyond max_spread
    PEAK_PRESSURE_CLIPPED = 1 << 19  # ideal dual cycle: measured peak pressure unusable as given
    CLOCK_AHEAD = 1 << 20  # set by the daemon: a held input's source clock ran ahead (warning)


#: Reasons that are warnings: the number is computed but deserves a look.
WARNING_REASONS = (
    Reason.EFFICIENCY_IMPLAUSIBLE
    | Reason.HEAT_RATE_IMPLAUSIBLE
    | Reason.NOT_STEADY
    | Reason.CORRECTION_UNAVAILABLE
    | Reason.HUMIDITY_SATURATED
    | Reason.PEAK_PRESSURE_CLIPPED
    | Reason.CLOCK_AHEAD
)


def reason_names(code: int | np.integer[Any]) -> list[str]:
    """Return the lower-case names of the bits set in ``code`` (empty list for OK).

    >>> reason_names(Reason.NOT_CONVERGED | Reason.INPUT_MISSING)
    ['input_missing', 'not_converged']
    """
    c = int(code)
    return [m.name.lower() for m in Reason if m.value and c & m.value and m.name]


def combine(*codes: NDArray[np.uint32]) -> NDArray[np.uint32]:
    """Bitwise-or of status arrays (broadcast)."""
    out = np.zeros(np.broadcast(*codes).shape, dtype=np.uint32)
    for c in codes:
        out |= c
    return out


def flag(status: NDArray[np.uint32], mask: NDArray[np.bool_], reason: Reason) -> None:
    """Set the bit ``reason`` in ``status`` where ``mask`` is true, in place.

    Parameters
    ----------
    status : ndarray of uint32
        Per-element status, modified in place.
    mask : ndarray of bool
        Elements to flag; broadcasts against ``status``.
    reason : Reason
        The bit to set.

    Examples
    --------
    >>> st = np.zeros(3, dtype=np.uint32)
    >>> flag(st, np.array([False, True, False]), Reason.INPUT_MISSING)
    >>> reason_names(st[1]), int(st[0])
    (['input_missing'], 0)
    """
    np.bitwise_or(status, np.uint32(reason), out=status, where=mask)

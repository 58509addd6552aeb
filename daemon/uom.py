"""Units of measure at the boundary: plant units in, SI out, once per tag.

Plant tags arrive in whatever unit the instrument or historian uses (°C, barg, inH2O, kg/h, MW,
%RH ...).  ``models`` only ever sees SI (K, Pa, kg/s, W, fractions).  This module turns a tag's
unit-of-measure string into a :class:`Converter` once, when the plant file is loaded, so that
the live path is a single multiply-add per value::

    x_SI = scale · x + offset  (+ p_baro for gauge pressures)

The unit arithmetic itself is pint's (its default definition file follows NIST SP 811 and
CODATA); we only add the plant spellings pint does not know:

* gauge pressure: ``barg``, ``mbarg``, ``kPag``, ``MPag``, ``Pag``, ``psig`` — converted to
  absolute with a barometric reference (a measured ambient pressure or a fixed value);
* explicitly absolute pressure: ``bara``, ``mbara``, ``kPaa``, ``psia``;
* relative humidity: ``%RH`` (per cent → fraction), ``fraction``.

Exception tree::

    UomError (ValueError)            a unit string we cannot use; carries ``uom`` and ``fix``
    ├── UnknownUnitError             not a unit at all (typo, unsupported spelling)
    └── IncompatibleUnitError        a unit, but of the wrong kind for the measurement

The pint registry is expensive to build (~0.3 s), so :func:`get_registry` builds it once on
first use and caches it; nothing happens at import time.  Tests may pass their own registry.
"""

from __future__ import annotations

import difflib
import functools
import math
from dataclasses import dataclass
from typing import Any, overload

import numpy as np
import pint
from numpy.typing import NDArray

__all__ = [
    "Converter",
    "IncompatibleUnitError",
    "ParsedUom",
    "UnknownUnitError",
    "UomError",
    "compile_converter",
    "get_registry",
    "make_registry",
    "parse_uom",
    "suggested_uoms",
]

FloatArray = NDArray[np.float64]

#: Gauge spellings → the pint unit of the same scale.  The reading is relative to the local
#: barometric pressure and needs a reference to become absolute.
GAUGE_UNITS: dict[str, str] = {
    "barg": "bar",
    "mbarg": "mbar",
    "kPag": "kPa",
    "MPag": "MPa",
    "Pag": "Pa",
    "psig": "psi",
}

#: Explicitly-absolute spellings (the ``a`` suffix of plant practice).
ABSOLUTE_ALIASES: dict[str, str] = {
    "bara": "bar",
    "mbara": "mbar",
    "kPaa": "kPa",
    "psia": "psi",
}

#: Other plant spellings pint does not know.  Water columns at 39.2 °F are water at its
#: density maximum (4 °C), as NIST SP 811 names them.
OTHER_ALIASES: dict[str, str] = {
    "inH2O_39F": "inH2O_4C",
    "inH2O_39.2F": "inH2O_4C",
}

#: Dimensionless spellings for humidity and fractions.
RATIO_ALIASES: dict[str, str] = {
    "%RH": "percent",
    "%rh": "percent",
    "percent_rh": "percent",
    "RH%": "percent",
    "fraction": "dimensionless",
    "ratio": "dimensionless",
}

#: The spellings we show in error messages, by the SI unit of the measurement they fit.
SUGGESTIONS: dict[str, tuple[str, ...]] = {
    "K": ("K", "degC", "degF", "degR"),
    "Pa": (
        "Pa",
        "kPa",
        "MPa",
        "bar",
        "mbar",
        "psi",
        "inH2O",
        "inH2O_60F",
        "mmHg",
        "inHg",
        "bara",
        "psia",
        "barg",
        "mbarg",
        "kPag",
        "MPag",
        "psig",
    ),
    "kg/s": ("kg/s", "kg/h", "t/h", "lb/s", "lb/h", "g/s"),
    "W": ("W", "kW", "MW", "hp"),
    "1": ("fraction", "percent", "%", "%RH"),
}


class UomError(ValueError):
    """A unit-of-measure string that cannot be used for a measurement.

    Parameters
    ----------
    uom : str
        The offending unit string, as written in the plant file.
    message : str
        What is wrong.
    fix : str
        What to write instead.
    """

    def __init__(self, uom: str, message: str, fix: str) -> None:
        self.uom = uom
        self.message = message
        self.fix = fix
        super().__init__(f"{message} — fix: {fix}")


class UnknownUnitError(UomError):
    """The string is not a unit pint or our plant spellings know."""


class IncompatibleUnitError(UomError):
    """The string is a unit, but of another kind than the measurement (e.g. bar for a flow)."""


def make_registry() -> pint.UnitRegistry[Any]:
    """Build a fresh pint registry with pint's default definitions (NIST SP 811 based).

    Returns
    -------
    pint.UnitRegistry
        A new registry; offset units (°C, °F) are allowed in plain quantities.
    """
    return pint.UnitRegistry(autoconvert_offset_to_baseunit=False, cache_folder=None)


@functools.cache
def get_registry() -> pint.UnitRegistry[Any]:
    """Return the process-wide registry, built on first call (never at import)."""
    return make_registry()


@dataclass(frozen=True, slots=True)
class ParsedUom:
    """A unit string split into the pint expression and our plant qualifiers."""

    text: str
    pint_expr: str
    gauge: bool


def parse_uom(uom: str) -> ParsedUom:
    """Split a plant unit string into the pint expression and the gauge flag.

    Parameters
    ----------
    uom : str
        Unit as written in the plant file, e.g. ``"barg"``, ``"degC"``, ``"%RH"``.

    Returns
    -------
    ParsedUom
        ``pint_expr`` is what pint parses; ``gauge`` tells whether a barometric reference
        must be added to reach absolute pressure.

    Examples
    --------
    >>> parse_uom("psig")
    ParsedUom(text='psig', pint_expr='psi', gauge=True)
    >>> parse_uom("%RH").pint_expr
    'percent'
    """
    text = uom.strip()
    if text in GAUGE_UNITS:
        return ParsedUom(text, GAUGE_UNITS[text], gauge=True)
    if text in ABSOLUTE_ALIASES:
        return ParsedUom(text, ABSOLUTE_ALIASES[text], gauge=False)
    if text in RATIO_ALIASES:
        return ParsedUom(text, RATIO_ALIASES[text], gauge=False)
    if text in OTHER_ALIASES:
        return ParsedUom(text, OTHER_ALIASES[text], gauge=False)
    return ParsedUom(text, text, gauge=False)


def suggested_uoms(target: str | None = None) -> tuple[str, ...]:
    """Spellings to suggest for a measurement whose SI unit is ``target`` (all when None)."""
    if target is not None and target in SUGGESTIONS:
        return SUGGESTIONS[target]
    seen: dict[str, None] = {}
    for group in SUGGESTIONS.values():
        seen.update(dict.fromkeys(group))
    return tuple(seen)


def _fix_list(uom: str, target: str | None) -> str:
    options = suggested_uoms(target)
    same_case = [o for o in options if o.lower() == uom.lower()]
    close = difflib.get_close_matches(uom, options, n=3, cutoff=0.5)
    ordered = list(dict.fromkeys([*same_case, *close, *options]))
    hint = f" (did you mean {same_case[0]!r}? units are case-sensitive)" if same_case else ""
    return "use one of " + ", ".join(ordered) + hint


@dataclass(frozen=True, slots=True)
class Converter:
    """A compiled unit conversion: ``x_SI = scale · x + offset (+ baro for gauge)``.

    Built once per tag by :func:`compile_converter`; calling it is a multiply-add and works
    on floats and NumPy arrays alike.
    """

    uom: str
    target: str
    scale: float
    offset: float
    gauge: bool = False

    @overload
    def __call__(self, value: float, baro_pa: float | None = None) -> float: ...

    @overload
    def __call__(
        self, value: FloatArray, baro_pa: float | FloatArray | None = None
    ) -> FloatArray: ...

    def __call__(self, value: Any, baro_pa: Any = None) -> Any:
        """Convert ``value`` (tag units) to SI.

        Parameters
        ----------
        value : float or ndarray
            Reading(s) in the tag's unit.
        baro_pa : float or ndarray, optional
            Barometric pressure [Pa] to add for gauge units; required for gauge units.

        Returns
        -------
        float or ndarray
            The value in the SI unit ``target``.

        Raises
        ------
        ValueError
            A gauge unit called without ``baro_pa``.
        """
        out = value * self.scale + self.offset
        if self.gauge:
            if baro_pa is None:
                raise ValueError(
                    f"gauge unit {self.uom!r} needs a barometric reference (baro_pa) to give "
                    "absolute pressure"
                )
            out = out + baro_pa
        return out

    def inverse(self, value_si: float, baro_pa: float | None = None) -> float:
        """Convert an SI value back to the tag's unit (for messages and range checks)."""
        v = value_si
        if self.gauge:
            if baro_pa is None:
                raise ValueError(f"gauge unit {self.uom!r} needs baro_pa")
            v = v - baro_pa
        return (v - self.offset) / self.scale


def compile_converter(
    uom: str, target: str, registry: pint.UnitRegistry[Any] | None = None
) -> Converter:
    """Compile the conversion from a plant unit string to a measurement's SI unit.

    Parameters
    ----------
    uom : str
        Unit as written in the plant file (``"degC"``, ``"barg"``, ``"kg/h"``, ``"%RH"`` ...).
    target : str
        The measurement's SI unit from the unit type (``"K"``, ``"Pa"``, ``"kg/s"``, ``"W"``,
        ``"1"``).
    registry : pint.UnitRegistry, optional
        Registry to use; the cached process registry by default.

    Returns
    -------
    Converter
        ``scale`` and ``offset`` such that ``x_SI = scale · x + offset`` (+ barometric pressure
        for gauge units).

    Raises
    ------
    UnknownUnitError
        ``uom`` is empty or not a unit.
    IncompatibleUnitError
        ``uom`` has another dimension than ``target``, or a gauge unit for a non-pressure.

    Notes
    -----
    The conversion is affine for every unit pint handles (offset units such as °C and °F are
    affine; everything else is linear), so two evaluations define it:
    ``offset = f(0)`` and ``scale = (f(1000) − f(0)) / 1000``.  A third point checks the
    affinity.

    Examples
    --------
    >>> c = compile_converter("degF", "K")
    >>> round(c(32.0), 6)
    273.15
    """
    reg = registry if registry is not None else get_registry()
    if not uom or not uom.strip():
        raise UnknownUnitError(uom, "missing unit of measure", _fix_list("", target))
    parsed = parse_uom(uom)
    try:
        src_unit = reg.parse_units(parsed.pint_expr)
    except Exception as exc:  # pint raises several types (UndefinedUnitError, token errors)
        raise UnknownUnitError(
            uom, f"unknown unit {uom!r}", _fix_list(parsed.text, target)
        ) from exc
    try:
        dst_unit = reg.parse_units(target)
    except Exception as exc:
        raise UnknownUnitError(
            target, f"unknown SI target unit {target!r}", "report a bug"
        ) from exc
    if src_unit.dimensionality != dst_unit.dimensionality:
        raise IncompatibleUnitError(
            uom,
            f"unit {uom!r} is a {_kind(src_unit)}, but this measurement is a {_kind(dst_unit)} "
            f"(SI unit {target})",
            _fix_list(parsed.text, target),
        )
    if parsed.gauge and dst_unit.dimensionality != reg.parse_units("Pa").dimensionality:
        raise IncompatibleUnitError(uom, f"gauge unit {uom!r} on a non-pressure", "use Pa units")

    def f(x: float) -> float:
        return float(reg.Quantity(x, src_unit).to(dst_unit).magnitude)

    offset = f(0.0)
    scale = (f(1000.0) - offset) / 1000.0  # a wide span keeps rounding at the ulp level
    probe = f(1.0)
    if not math.isclose(probe, scale + offset, rel_tol=1e-12, abs_tol=1e-12 * abs(scale)):
        raise IncompatibleUnitError(uom, f"unit {uom!r} does not convert linearly", "use SI units")
    if not (math.isfinite(scale) and scale != 0.0 and math.isfinite(offset)):
        raise IncompatibleUnitError(uom, f"unit {uom!r} has no usable scale", "use SI units")
    return Converter(uom=parsed.text, target=target, scale=scale, offset=offset, gauge=parsed.gauge)


def _kind(unit: pint.Unit) -> str:
    dims = {
        "[temperature]": "temperature",
        "[mass] / [length] / [time] ** 2": "pressure",
        "[mass] / [time]": "mass flow",
        "[length] ** 2 * [mass] / [time] ** 3": "power",
        "": "dimensionless ratio",
    }
    key = str(unit.dimensionality)
    if key == "dimensionless":
        key = ""
    return dims.get(key, f"quantity of dimension {key}")

"""Names that changed, and how an old name is still accepted on input for one release.

brayscope uses one name per thing (``docs/glossary.md``).  Where a released name was changed to
keep that rule, the old name is still **accepted on input** (plant file, ``brayscope calc``
records, API requests, command-line options) for one release, with a deprecation warning that
names the new spelling (on standard error for the command line, in the daemon's log for the
API and the plant file, and in ``PlantConfig.deprecations``); output always uses the new names.
The next release refuses the old names.  ``CHANGELOG.md`` lists every rename for users.

Nothing here is used on the hot path: inputs are normalised once, when they are read.
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Callable, Mapping
from typing import Any

__all__ = [
    "REMOVED_DAEMON_KEYS",
    "RENAMED_CALC_KEYS",
    "RENAMED_EVENT_KEYS",
    "RENAMED_RESULTS",
    "RENAMED_TREND_LINES",
    "RENAMED_UNIT_KEYS",
    "add_renamed_option",
    "deprecation_message",
    "renamed_value",
]

#: Result names (JSON, SQL columns, plant-file baselines, trend KPIs): old -> new.  The
#: heat-rate names now say their basis (LHV or HHV) and are all lower case.
RENAMED_RESULTS: Mapping[str, str] = {
    "heat_rate_kJ_per_kWh": "heat_rate_lhv_kj_per_kwh",
    "heat_rate_hhv_kJ_per_kWh": "heat_rate_hhv_kj_per_kwh",
    "corrected_heat_rate_kJ_per_kWh": "corrected_heat_rate_lhv_kj_per_kwh",
    "corrected_heat_rate_model_kJ_per_kWh": "corrected_heat_rate_lhv_model_kj_per_kwh",
    "corrected_heat_rate_curve_kJ_per_kWh": "corrected_heat_rate_lhv_curve_kj_per_kwh",
}

#: Keys of a ``[units.NAME]`` table of the plant file: old -> new.
RENAMED_UNIT_KEYS: Mapping[str, str] = {"type": "unit_type"}

#: Keys of ``[daemon]`` that no longer do anything (accepted and ignored for one release).
REMOVED_DAEMON_KEYS: Mapping[str, str] = {
    "steady_window": (
        "the steady-state test is a recursive filter (Cao & Rhinehart) with a fixed warm-up "
        "of 20 ticks, not a window; the key never had an effect"
    ),
}

#: Top-level keys of a ``brayscope calc`` record: old -> new.
RENAMED_CALC_KEYS: Mapping[str, str] = {"timestamp": "ts"}

#: Keys of the ``POST /api/events`` body: old -> new.
RENAMED_EVENT_KEYS: Mapping[str, str] = {"text": "detail"}

#: Values of the trend forecast line (``--line``, ``line=``): old -> new.
RENAMED_TREND_LINES: Mapping[str, str] = {"nonrecoverable": "post_wash"}


def deprecation_message(where: str, old: str, new: str) -> str:
    """The text of a deprecation warning: where, the old name and its replacement.

    >>> deprecation_message("units.KR-GT1", "type", "unit_type")[:58]
    "units.KR-GT1: 'type' is a deprecated name: use 'unit_type'"
    """
    return (
        f"{where}: {old!r} is a deprecated name: use {new!r} "
        "(the old name is accepted in this release only)"
    )


def add_renamed_option(
    parser: argparse.ArgumentParser, old: str, new: str, dest: str, **kwargs: Any
) -> None:
    """Accept the renamed command-line option ``old`` (hidden from ``--help``) for one
    release: it sets ``dest`` like ``new`` does and says on standard error what to write."""

    class _Renamed(argparse.Action):
        def __call__(
            self,
            p: argparse.ArgumentParser,
            namespace: argparse.Namespace,
            values: Any,
            option_string: str | None = None,
        ) -> None:
            sys.stderr.write(f"{p.prog}: {deprecation_message('option', old, new)}\n")
            setattr(namespace, self.dest, values)

    parser.add_argument(
        old, dest=dest, action=_Renamed, help=argparse.SUPPRESS, default=argparse.SUPPRESS,
        **kwargs,
    )  # fmt: skip


def renamed_value(renames: Mapping[str, str], what: str) -> Callable[[str], str]:
    """An argparse ``type`` that maps an old value to its new name (with a message on
    standard error) and passes every other value through."""

    def convert(value: str) -> str:
        new = renames.get(value)
        if new is None:
            return value
        sys.stderr.write(deprecation_message(what, value, new) + "\n")
        return new

    return convert

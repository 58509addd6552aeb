"""Micro-batched compute of the live path: snapshots due in a tick → results.

All snapshots of a tick go through their unit type's ``compute`` together: snapshots are
grouped by unit type, fuel and parameter names (units of the same type burning the same fuel
share one call; their parameters are passed as per-element arrays), and each group is one
vectorised call.  :func:`compute_tick` runs that work in a worker thread so the event loop
keeps serving the feed and the HTTP API.

The status of a :class:`Result` is the unit type's status bits OR the snapshot's quality bits of
the required measurements (``INPUT_STALE``, ``INPUT_BAD_QUALITY``, ``INPUT_MISSING``,
``INPUT_NONPHYSICAL``) OR ``NOT_STEADY`` when the steady-state test says transient.  A
measurement whose quality bits are set is passed to ``compute`` as NaN whatever value the
snapshot holds, so a result is never computed from a stale or bad input.
"""

from __future__ import annotations

import asyncio
import json
import logging
import math
import time
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from daemon.types import Snapshot
from models.status import WARNING_REASONS, ModelInputError, Reason, reason_names
from models.units.base import UnitType

__all__ = [
    "INPUT_REASONS",
    "INPUT_WARNINGS",
    "Result",
    "UnitBinding",
    "bindings_from_plant",
    "compute_batch",
    "compute_tick",
    "steady_state_word",
]

log = logging.getLogger("brayscope.compute")

#: Snapshot quality bits that make a measurement unusable.
INPUT_REASONS = int(
    Reason.INPUT_MISSING
    | Reason.INPUT_NONPHYSICAL
    | Reason.INPUT_STALE
    | Reason.INPUT_BAD_QUALITY
    | Reason.INPUT_STUCK
    | Reason.INPUT_DISAGREE
)

#: Snapshot quality bits that flag a usable measurement; passed on to the result's status.
INPUT_WARNINGS = int(Reason.CLOCK_AHEAD)


def steady_state_word(steady: bool | None) -> str:
    """The steady-state verdict as the one word used in the API, the page and the demo:
    ``"steady"``, ``"transient"`` or ``"undecided"`` (the test is still warming up; a missing
    signal counts as transient).  SQL stores it as a boolean (NULL undecided), the metric as
    1, 0 or NaN."""
    if steady is None:
        return "undecided"
    return "steady" if steady else "transient"


@dataclass(frozen=True)
class UnitBinding:
    """What the compute needs to know about one unit of the plant file.

    Attributes
    ----------
    name : str
        Unit name.
    unit_type : UnitType
        The unit type (measurement schema, compute, result schema).
    fuel : object
        The unit type's fuel object (``models.properties.fuel.FuelProperties`` for gas turbines).
    fuel_key : str
        Text identifying the fuel; units with equal keys may share one compute call.
    parameters : dict of str to float
        Parameters with the unit type's defaults filled in [SI].
    baseline : dict of str to float
        Baseline (new-and-clean) values by result name, for deviations.
    """

    name: str
    unit_type: UnitType
    fuel: Any
    fuel_key: str
    parameters: dict[str, float] = field(default_factory=dict)
    baseline: dict[str, float] = field(default_factory=dict)


def bindings_from_plant(plant: Any) -> dict[str, UnitBinding]:
    """Build a :class:`UnitBinding` per unit of a loaded ``daemon.config.PlantConfig``."""
    out: dict[str, UnitBinding] = {}
    for name, unit in plant.units.items():
        out[name] = UnitBinding(
            name=name,
            unit_type=unit.unit_type_impl,
            fuel=unit.fuel_properties,
            fuel_key=json.dumps(unit.fuel.model_dump(), sort_keys=True),
            parameters=dict(unit.effective_parameters()),
            baseline={k: float(v) for k, v in unit.baseline.items()},
        )
    return out


@dataclass(frozen=True)
class Result:
    """What the unit type computed for one snapshot.

    Attributes
    ----------
    unit, unit_type : str
        Unit name and unit type name.
    ts : float
        Snapshot time [s since the Unix epoch, UTC].
    values : dict of str to float
        Every result of the unit type by glossary name [SI; heat rates in kJ/kWh]; NaN where
        not computed.
    status : int
        :class:`models.status.Reason` bits (compute status | input quality | not steady).
    labels : dict of str to str
        Text labels (``air_mass_flow_source``, ``correction_method`` ...).
    inputs : dict of str to float
        The measurements passed to compute [SI]; NaN where unusable.
    input_quality : dict of str to int
        Quality bits per measurement from the snapshot.
    steady_state : bool or None
        Steady-state verdict of the snapshot (True steady, False transient, None undecided);
        see :func:`steady_state_word`.
    r_statistic : float or None
        R-statistic of the snapshot.
    deviations : dict of str to float
        Result minus baseline, for each baseline value given [result units].
    """

    unit: str
    unit_type: str
    ts: float
    values: dict[str, float]
    status: int
    labels: dict[str, str]
    inputs: dict[str, float]
    input_quality: dict[str, int]
    steady_state: bool | None
    r_statistic: float | None
    deviations: dict[str, float] = field(default_factory=dict)

    @property
    def reasons(self) -> list[str]:
        """Names of the non-warning reason bits (a result with any of these is not valid)."""
        return reason_names(self.status & ~int(WARNING_REASONS))

    @property
    def warnings(self) -> list[str]:
        """Names of the warning bits (computed, but worth a look)."""
        return reason_names(self.status & int(WARNING_REASONS))

    @property
    def valid(self) -> bool:
        """True when no non-warning reason bit is set."""
        return not (self.status & ~int(WARNING_REASONS))

    def to_json(self) -> dict[str, Any]:
        """JSON-ready mapping (NaN → None; ts as ISO 8601 UTC and epoch seconds)."""
        from datetime import UTC, datetime

        def num(v: float | None) -> float | None:
            return float(v) if v is not None and math.isfinite(v) else None

        return {
            "unit": self.unit,
            "unit_type": self.unit_type,
            "ts": datetime.fromtimestamp(self.ts, UTC).isoformat().replace("+00:00", "Z"),
            "ts_epoch_s": self.ts,
            "valid": self.valid,
            "status": self.status,
            "reasons": self.reasons,
            "warnings": self.warnings,
            "steady_state": steady_state_word(self.steady_state),
            "r_statistic": num(self.r_statistic),
            "labels": dict(self.labels),
            "results": {k: num(v) for k, v in self.values.items()},
            "deviations": {k: num(v) for k, v in self.deviations.items()},
            "inputs": {k: num(v) for k, v in self.inputs.items()},
        }


def _param_group_key(b: UnitBinding) -> tuple[str, str, tuple[str, ...]]:
    return (b.unit_type.name, b.fuel_key, tuple(sorted(b.parameters)))


def compute_batch(
    snapshots: Sequence[Snapshot], bindings: Mapping[str, UnitBinding]
) -> list[Result]:
    """Compute every snapshot, one vectorised call per (unit type, fuel, parameter set) group.

    Parameters
    ----------
    snapshots : sequence of Snapshot
        Snapshots due in this tick (any units, any order).
    bindings : mapping of str to UnitBinding
        Per-unit static data; snapshots of units not in it are skipped (and logged).

    Returns
    -------
    list of Result
        One per computed snapshot, in the order of ``snapshots``.  A group whose compute raises
        :class:`models.status.ModelInputError` (a static parameter or fuel the models refuse)
        yields no results; the error is logged with the unit names.
    """
    groups: dict[tuple[str, str, tuple[str, ...]], list[int]] = {}
    for i, s in enumerate(snapshots):
        b = bindings.get(s.unit)
        if b is None:
            log.warning("snapshot of unknown unit %r skipped", s.unit)
            continue
        groups.setdefault(_param_group_key(b), []).append(i)
    out: dict[int, Result] = {}
    for idx in groups.values():
        out.update(_compute_group([snapshots[i] for i in idx], idx, bindings))
    return [out[i] for i in sorted(out)]


def _compute_group(
    snaps: list[Snapshot], idx: list[int], bindings: Mapping[str, UnitBinding]
) -> dict[int, Result]:
    first = bindings[snaps[0].unit]
    ut = first.unit_type
    n = len(snaps)
    specs = ut.measurements
    meas: dict[str, np.ndarray[Any, np.dtype[np.float64]]] = {}
    qual = np.zeros(n, dtype=np.uint32)
    for spec in specs:
        arr = np.full(n, np.nan)
        for j, s in enumerate(snaps):
            q = int(s.quality.get(spec.name, 0 if spec.name in s.values else Reason.INPUT_MISSING))
            v = s.values.get(spec.name, math.nan)
            if q & INPUT_REASONS:
                v = math.nan
            elif not math.isnan(v):
                qual[j] |= q & INPUT_WARNINGS  # a used input's warnings go to the result
            arr[j] = v
            if spec.required:
                qual[j] |= q & INPUT_REASONS
        if spec.required or not np.all(np.isnan(arr)):
            meas[spec.name] = arr
    params: dict[str, Any] = {}
    for name in first.parameters:
        vals = np.array([bindings[s.unit].parameters[name] for s in snaps], dtype=np.float64)
        params[name] = float(vals[0]) if np.all(vals == vals[0]) else vals
    try:
        co = ut.compute(meas, first.fuel, params)
    except ModelInputError as exc:
        log.error("compute of %s refused its static data: %s", sorted({s.unit for s in snaps}), exc)
        return {}
    status = np.asarray(co.status, dtype=np.uint32) | qual
    results: dict[int, Result] = {}
    for j, s in enumerate(snaps):
        st = int(status[j])
        if s.steady is False:
            st |= int(Reason.NOT_STEADY)
        values = {
            r.name: float(co.values[r.name][j]) if r.name in co.values else math.nan
            for r in ut.results
        }
        labels = dict(co.labels)
        labels.update({k: str(v[j]) for k, v in co.label_arrays.items()})
        b = bindings[s.unit]
        deviations: dict[str, float] = {}
        for key, base in b.baseline.items():
            if key in values:  # baseline keys are result names (checked at load)
                deviations[key] = values[key] - base
        results[idx[j]] = Result(
            unit=s.unit,
            unit_type=ut.name,
            ts=s.ts,
            values=values,
            status=st,
            labels=labels,
            inputs={k: float(v[j]) for k, v in meas.items()},
            input_quality={k: int(v) for k, v in s.quality.items()},
            steady_state=s.steady,
            r_statistic=s.r_statistic,
            deviations=deviations,
        )
    return results


async def compute_tick(
    snapshots: Sequence[Snapshot], bindings: Mapping[str, UnitBinding]
) -> tuple[list[Result], float]:
    """Run :func:`compute_batch` in a worker thread; return the results and the elapsed time [s].

    The wall time includes the thread hand-off, which is what the event loop waits.
    """
    t0 = time.perf_counter()
    if not snapshots:
        return [], 0.0
    results = await asyncio.to_thread(compute_batch, list(snapshots), bindings)
    return results, time.perf_counter() - t0

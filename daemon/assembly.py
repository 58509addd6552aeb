"""Snapshot assembly: readings in, one :class:`~daemon.types.Snapshot` per unit per tick out.

Rules (per unit, per measurement):

* **Sample and hold.**  The latest *usable* reading (quality good or uncertain) is held and
  used at every tick until it is older than the tag's ``max_age_s`` (the largest when several
  tags feed one measurement).  Age is ``tick_ts − t``, clamped at 0 for readings stamped
  slightly after the tick, where ``t`` is the reading's *hold time* (next rule).
* **Hold time.**  A reading counts at ``t = min(source_ts, received_ts)``: its source time, or
  its receive time when the source clock is ahead of the receive clock.  A reading stamped in
  the future (inside ``future_tolerance_s``) is therefore held in receive order: the next
  correct reading replaces it instead of being ignored as older, and it ages from its receipt.
  While such a reading (ahead by more than :data:`CLOCK_AHEAD_SLACK_S`) is held, the
  measurement carries the warning bit ``CLOCK_AHEAD`` (the value is used; the result's
  warnings say ``clock_ahead``).  Bad marks use the same hold time.  The rule needs only
  ``source_ts`` and ``received_ts``, both stored, so a warm start from stored readings ends in
  the same state.
* **Order.**  A reading older than (or as old as) the held one never replaces it: shuffled and
  redelivered readings cannot move a value back in time.
* **Bad marks.**  A quarantined value that belonged to a known measurement (reason
  ``bad_quality``, ``out_of_range``, ``non_finite``, ``wrong_type``, ``conversion_error`` →
  ``INPUT_BAD_QUALITY``; ``nonphysical`` → ``INPUT_NONPHYSICAL``) and is newer than the held
  value makes the measurement NaN with that bit until a newer usable reading arrives: a failing
  sensor is never papered over by its last good value.  Timestamp rejections mark nothing (a
  clock problem is not a sensor fault).
* **Sensor faults.**  A tag with ``stuck_after_s`` whose readings stay within ``stuck_band``
  (tag units, from the first value of the run) for longer than that is NaN with
  ``INPUT_STUCK``; redundant sensors (``NAME:LABEL`` tags) are combined by their mean when the
  usable ones agree within ``max_spread`` and give NaN with ``INPUT_DISAGREE`` when they do
  not.  Compute refuses a value with either bit, and the result carries it.
* **Auxiliary values** (``aux.<name>``) are held with the same rules but never enter a
  snapshot: :meth:`Assembler.aux`.
* **Tick output.**  ``values`` NaN and a :class:`models.status.Reason` bit where the value is
  missing (``INPUT_MISSING``: never received), stale (``INPUT_STALE``) or bad (see above);
  ``age_s`` NaN when nothing was ever held.  ``CLOCK_AHEAD`` is the one warning bit: it comes
  with a usable value.
* **Silence.**  A unit for which nothing at all has arrived yet (no reading, no bad mark) emits
  no snapshot; once anything arrived it emits one every tick, NaN and flagged as it ages.
* **Ticks** are aligned to multiples of ``tick_s`` in UTC epoch seconds (``floor(now / tick_s) ·
  tick_s``).  When the caller falls behind, only the latest due tick is emitted (missed ticks are
  skipped, never back-filled from held values).

Steady state: per unit the Cao–Rhinehart R-statistic (:mod:`models.steady`) is updated once per
emitted tick on each signal of ``steady_signals`` (default ``generator_power``), with the
hysteresis of :func:`models.steady.steady_step`.  ``Snapshot.steady`` is None until every
signal's filter has passed its warm-up, then True only when all signals are steady;
``r_statistic`` is the largest R of the signals (None when not finite).

The only I/O-like dependency is the clock, injected.
"""

from __future__ import annotations

import functools
import math
import time
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from daemon.types import Quarantined, Reading, Snapshot
from models.status import Reason
from models.steady import DEFAULT_ENTER, DEFAULT_LEAVE, RStatisticState, steady_step, update

__all__ = [
    "BAD_MARK_REASONS",
    "CLOCK_AHEAD_BITS",
    "CLOCK_AHEAD_SLACK_S",
    "DISAGREE_BITS",
    "STUCK_BITS",
    "Assembler",
    "AssemblyCounters",
    "UnitSpec",
    "hold_time",
]

#: Prefix of auxiliary measurements (``daemon.config.AUX_PREFIX``).
AUX_PREFIX = "aux."
#: Separator of a redundant sensor's label (``daemon.config.SENSOR_SEP``).
SENSOR_SEP = ":"

#: Quarantine reasons that mark a measurement bad, and the bit they set.
BAD_MARK_REASONS: dict[str, Reason] = {
    "bad_quality": Reason.INPUT_BAD_QUALITY,
    "out_of_range": Reason.INPUT_BAD_QUALITY,
    "non_finite": Reason.INPUT_BAD_QUALITY,
    "wrong_type": Reason.INPUT_BAD_QUALITY,
    "conversion_error": Reason.INPUT_BAD_QUALITY,
    "nonphysical": Reason.INPUT_NONPHYSICAL,
}


@dataclass(frozen=True)
class UnitSpec:
    """What the assembler needs to know about a unit.

    Attributes
    ----------
    name : str
        Unit name.
    unit_type : str
        Unit type name.
    max_age_s : mapping of str to float
        Reading name → maximum age of a held value [s].  Reading names are the tags'
        measurements: canonical names, ``name:label`` for redundant sensors and
        ``aux.<name>`` for auxiliary values.  The snapshot's measurements are the canonical
        names among them (together with ``extra_measurements``); auxiliary values are held
        but never enter the snapshot (see :meth:`Assembler.aux`).
    extra_measurements : tuple of str
        Measurements the unit type needs but no tag maps (always ``INPUT_MISSING``).
    max_spread : mapping of str to float
        Canonical measurement of a redundant group → largest allowed difference between its
        usable sensors [SI]; absent = no limit.
    stuck : mapping of str to (float, float)
        Reading name → (``stuck_after_s`` [s], ``stuck_band`` [the tag's own unit]) of the
        stuck-sensor test; absent = test off.
    """

    name: str
    unit_type: str
    max_age_s: Mapping[str, float]
    extra_measurements: tuple[str, ...] = ()
    max_spread: Mapping[str, float] = field(default_factory=dict)
    stuck: Mapping[str, tuple[float, float]] = field(default_factory=dict)

    @functools.cached_property
    def sensors(self) -> dict[str, tuple[str, ...]]:
        """Redundant sensors: canonical measurement → its sensor reading names."""
        out: dict[str, list[str]] = {}
        for m in self.max_age_s:
            if SENSOR_SEP in m and not is_aux(m):
                out.setdefault(_canonical(m), []).append(m)
        return {k: tuple(v) for k, v in out.items()}

    @property
    def measurements(self) -> tuple[str, ...]:
        """Snapshot measurements: canonical names, auxiliary values excluded."""
        own = tuple(dict.fromkeys(_canonical(m) for m in self.max_age_s if not is_aux(m)))
        extra = tuple(m for m in self.extra_measurements if m not in own)
        return (*own, *extra)

    @property
    def aux_names(self) -> tuple[str, ...]:
        """Auxiliary reading names (``aux.<name>``)."""
        return tuple(m for m in self.max_age_s if is_aux(m))

    @classmethod
    def from_config(cls, name: str, unit: Any) -> UnitSpec:
        """Build from a ``daemon.config.UnitConfig`` (tags → measurements and max ages)."""
        ages: dict[str, float] = {}
        spread: dict[str, float] = {}
        stuck: dict[str, tuple[float, float]] = {}
        for tag in unit.tags:
            m = tag.measurement
            ages[m] = max(ages.get(m, 0.0), float(tag.max_age_s))
            s = getattr(tag, "max_spread_si", None)
            if s is not None:
                c = _canonical(m)
                spread[c] = min(spread.get(c, math.inf), float(s))
            after = getattr(tag, "stuck_after_s", None)
            if after is not None:
                stuck[m] = (float(after), float(getattr(tag, "stuck_band", 0.0)))
        extra: tuple[str, ...] = ()
        try:
            ut = unit.unit_type_impl
            extra = tuple(f.name for f in ut.measurements if f.required)
        except (RuntimeError, AttributeError):
            extra = ()
        return cls(
            name=name,
            unit_type=str(unit.unit_type),
            max_age_s=ages,
            extra_measurements=extra,
            max_spread=spread,
            stuck=stuck,
        )


#: (value [SI], Reason bits, age [s]) of one reading name at one tick.
_Channel = tuple[float, int, float]

#: A source time ahead of the receive time by more than this is flagged ``CLOCK_AHEAD`` [s]
#: (smaller leads are ordinary clock jitter; they are held in receive order all the same).
CLOCK_AHEAD_SLACK_S = 1.0
#: Warning bit of a held value whose source clock was ahead of the receive clock.
CLOCK_AHEAD_BITS = int(Reason.CLOCK_AHEAD)
#: Bits that flag a value without making it unusable.
_WARNING_BITS = CLOCK_AHEAD_BITS


def hold_time(source_ts: float, received_ts: float) -> tuple[float, bool]:
    """The time a reading is held at, and whether its source clock was ahead.

    Parameters
    ----------
    source_ts : float
        Source timestamp [s since the epoch].
    received_ts : float
        Receive time [s since the epoch].

    Returns
    -------
    (float, bool)
        ``min(source_ts, received_ts)`` [s], and True when the source time was more than
        :data:`CLOCK_AHEAD_SLACK_S` ahead of the receive time.

    Examples
    --------
    >>> hold_time(1000.0, 1000.2)
    (1000.0, False)
    >>> hold_time(1290.0, 1000.0)
    (1000.0, True)
    """
    if source_ts > received_ts:
        return received_ts, source_ts - received_ts > CLOCK_AHEAD_SLACK_S
    return source_ts, False


#: Bits of a stuck sensor (``daemon.compute.INPUT_REASONS`` refuses the value).
STUCK_BITS = int(Reason.INPUT_STUCK)
#: Bits of a redundant group whose sensors disagree.
DISAGREE_BITS = int(Reason.INPUT_DISAGREE)


def _raw_number(r: Reading) -> float:
    """The reading's value in the tag's own unit when it is a plain number (the stuck band
    is in those units), else its SI value."""
    raw = r.raw_value
    if isinstance(raw, bool):
        return r.value
    if isinstance(raw, int | float):
        return float(raw)
    if isinstance(raw, str):  # readings replayed from storage keep the raw JSON text
        try:
            return float(raw)
        except ValueError:
            return r.value
    return r.value


def is_aux(name: str) -> bool:
    """True for an auxiliary reading name (``aux.<name>``)."""
    return name.startswith(AUX_PREFIX)


def _canonical(name: str) -> str:
    return name.split(SENSOR_SEP, 1)[0]


@dataclass
class _Held:
    value: float = math.nan
    source_ts: float = -math.inf  # hold time of the value (see hold_time)
    quality: str = ""
    ahead: bool = False  # the held value's source clock was ahead (CLOCK_AHEAD)
    bad_ts: float = -math.inf
    bad_bit: int = 0
    run_value: float = math.nan  # first value of the current run within the stuck band
    run_start: float = -math.inf  # its source time
    stuck: bool = False


@dataclass
class _UnitState:
    spec: UnitSpec
    held: dict[str, _Held] = field(default_factory=dict)
    seen: bool = False
    steady_state: RStatisticState | None = None
    steady_flag: Any = False


@dataclass
class AssemblyCounters:
    """What the assembler ignored (for logs and metrics)."""

    older_ignored: int = 0
    unknown_ignored: int = 0
    stuck_flagged: int = 0  # times a sensor entered the stuck state
    clock_ahead: int = 0  # readings held whose source clock was ahead of the receive clock


class Assembler:
    """Hold the latest readings per unit and emit aligned snapshots.

    Parameters
    ----------
    units : sequence of UnitSpec
        Units to assemble.
    tick_s : float
        Tick period [s].
    clock : callable
        Wall clock [s since the epoch, UTC]; used when ``tick()`` gets no ``now``.
    steady_signals : sequence of str
        Measurements whose R-statistic decides the steady flag.
    steady_enter, steady_leave : float
        Hysteresis thresholds of R [1] (:func:`models.steady.steady_step`).
    uncertain_as_bad : bool
        Treat quality ``"uncertain"`` as bad (NaN, ``INPUT_BAD_QUALITY``); by default an
        uncertain value is used.
    """

    def __init__(
        self,
        units: Sequence[UnitSpec],
        tick_s: float,
        *,
        clock: Callable[[], float] = time.time,
        steady_signals: Sequence[str] = ("generator_power",),
        steady_enter: float = DEFAULT_ENTER,
        steady_leave: float = DEFAULT_LEAVE,
        uncertain_as_bad: bool = False,
    ) -> None:
        if not (tick_s > 0 and math.isfinite(tick_s)):
            raise ValueError(f"tick_s must be a positive number of seconds, got {tick_s!r}")
        self.tick_s = float(tick_s)
        self._clock = clock
        self.steady_signals = tuple(steady_signals)
        self.steady_enter = steady_enter
        self.steady_leave = steady_leave
        self.uncertain_as_bad = uncertain_as_bad
        self._units: dict[str, _UnitState] = {u.name: _UnitState(spec=u) for u in units}
        self._last_tick = -math.inf
        self.counters = AssemblyCounters()

    @classmethod
    def from_plant(cls, plant: Any, **kwargs: Any) -> Assembler:
        """Build from a ``daemon.config.PlantConfig`` (tick from ``daemon.tick_s``)."""
        specs = [UnitSpec.from_config(name, u) for name, u in plant.units.items()]
        return cls(specs, float(plant.daemon.tick_s), **kwargs)

    # -- input -----------------------------------------------------------------------------

    def ingest(self, readings: Iterable[Reading], quarantined: Iterable[Quarantined] = ()) -> None:
        """Take in accepted readings and quarantined items (order within a call is free)."""
        for r in readings:
            st = self._units.get(r.unit)
            if st is None or r.measurement not in st.spec.max_age_s:
                self.counters.unknown_ignored += 1
                continue
            st.seen = True
            h = st.held.setdefault(r.measurement, _Held())
            t, ahead = hold_time(r.source_ts, r.received_ts)
            if r.quality == "bad" or (self.uncertain_as_bad and r.quality == "uncertain"):
                if t > h.bad_ts:
                    h.bad_ts, h.bad_bit = t, int(Reason.INPUT_BAD_QUALITY)
                continue
            if t <= h.source_ts:
                self.counters.older_ignored += 1
                continue
            h.value, h.source_ts, h.quality, h.ahead = r.value, t, r.quality, ahead
            self.counters.clock_ahead += ahead
            rule = st.spec.stuck.get(r.measurement)
            if rule is not None:
                self._track_run(h, r, t, rule)
        for q in quarantined:
            bit = BAD_MARK_REASONS.get(q.reason)
            if bit is None or q.unit is None or q.measurement is None:
                continue
            st = self._units.get(q.unit)
            if st is None or q.measurement not in st.spec.max_age_s:
                continue
            st.seen = True
            h = st.held.setdefault(q.measurement, _Held())
            ts = q.received_ts
            if q.source_ts is not None:
                ts = hold_time(q.source_ts, q.received_ts)[0]
            if ts > h.bad_ts:
                h.bad_ts, h.bad_bit = ts, int(bit)

    def _track_run(self, h: _Held, r: Reading, t: float, rule: tuple[float, float]) -> None:
        after_s, band = rule
        x = _raw_number(r)
        if not abs(x - h.run_value) <= band:  # moved out of the band (or first value): new run
            h.run_value, h.run_start = x, t
        was = h.stuck
        h.stuck = t - h.run_start > after_s
        if h.stuck and not was:
            self.counters.stuck_flagged += 1

    # -- ticks -----------------------------------------------------------------------------

    def tick_at(self, now: float) -> float:
        """The tick boundary at or before ``now`` [s]: ``floor(now / tick_s) · tick_s``."""
        return math.floor(now / self.tick_s) * self.tick_s

    def next_tick_at(self, now: float | None = None) -> float:
        """The first tick boundary strictly after ``now`` [s]."""
        t = self._clock() if now is None else now
        return self.tick_at(t) + self.tick_s

    def tick(self, now: float | None = None) -> list[Snapshot]:
        """Emit the snapshots of the latest due tick, once; empty when it was already emitted.

        Parameters
        ----------
        now : float, optional
            Current time [s since the epoch]; the injected clock by default.
        """
        t = self.tick_at(self._clock() if now is None else now)
        if t <= self._last_tick:
            return []
        self._last_tick = t
        out: list[Snapshot] = []
        for st in self._units.values():
            if not st.seen:
                continue
            snap = self._snapshot(st, t)
            out.append(self._with_steady(st, snap))
        return out

    def snapshot(self, unit: str, ts: float) -> Snapshot | None:
        """The snapshot of one unit at ``ts`` without advancing ticks or the steady filter."""
        st = self._units.get(unit)
        if st is None or not st.seen:
            return None
        return self._snapshot(st, ts)

    def aux(self, unit: str, ts: float) -> dict[str, tuple[float, int, float]]:
        """Auxiliary values of ``unit`` at ``ts``: ``aux.<name>`` → (value [SI], Reason bits,
        age [s]), with the same hold, stale and bad-mark rules as the snapshot's measurements.
        Never part of :class:`~daemon.types.Snapshot` (so never passed to compute); empty for
        an unknown unit."""
        st = self._units.get(unit)
        if st is None:
            return {}
        return {m: self._channel(st, m, ts) for m in st.spec.aux_names}

    def _channel(self, st: _UnitState, m: str, t: float) -> _Channel:
        h = st.held.get(m)
        max_age = st.spec.max_age_s.get(m, math.inf)
        if h is None:
            return math.nan, int(Reason.INPUT_MISSING), math.nan
        has_value = h.source_ts > -math.inf
        age = max(0.0, t - h.source_ts) if has_value else math.nan
        if h.bad_ts > h.source_ts:  # the latest news is bad
            bits = h.bad_bit
            if t - h.bad_ts > max_age:
                bits |= int(Reason.INPUT_STALE)
            return math.nan, bits, age
        if age > max_age:
            return math.nan, int(Reason.INPUT_STALE), age
        if h.stuck:
            return math.nan, STUCK_BITS, age
        return h.value, CLOCK_AHEAD_BITS if h.ahead else 0, age

    def _group(self, st: _UnitState, m: str, names: tuple[str, ...], t: float) -> _Channel:
        """Combine the redundant sensors of ``m``: the mean of the usable ones when they agree
        within ``max_spread``, NaN with ``INPUT_DISAGREE`` when they do not."""
        chans = [self._channel(st, n, t) for n in names]
        usable: list[tuple[float, float]] = []
        warn = 0  # warning bits of the sensors used
        for v, b, a in chans:
            if b & ~_WARNING_BITS == 0:
                usable.append((v, a))
                warn |= b
        if not usable:
            seen = [b for _, b, _ in chans if b != int(Reason.INPUT_MISSING)]
            bits = 0
            for b in seen:
                bits |= b
            ages = [a for _, _, a in chans if not math.isnan(a)]
            return math.nan, bits or int(Reason.INPUT_MISSING), min(ages, default=math.nan)
        vals = [v for v, _ in usable]
        age = max(a for _, a in usable)
        if max(vals) - min(vals) > st.spec.max_spread.get(m, math.inf):
            return math.nan, DISAGREE_BITS, age
        return math.fsum(vals) / len(vals), warn, age

    def channels(self, unit: str, ts: float) -> dict[str, _Channel]:
        """Every reading name of ``unit`` (plain measurements, each redundant sensor,
        auxiliary values) at ``ts``: name → (value [SI], Reason bits, age [s]).  For looking
        at one sensor of a group; empty for an unknown unit."""
        st = self._units.get(unit)
        if st is None:
            return {}
        return {m: self._channel(st, m, ts) for m in st.spec.max_age_s}

    def _snapshot(self, st: _UnitState, t: float) -> Snapshot:
        values: dict[str, float] = {}
        quality: dict[str, int] = {}
        ages: dict[str, float] = {}
        sensors = st.spec.sensors
        for m in st.spec.measurements:
            names = sensors.get(m)
            if names is None:
                values[m], quality[m], ages[m] = self._channel(st, m, t)
            else:
                values[m], quality[m], ages[m] = self._group(st, m, names, t)
        return Snapshot(
            unit=st.spec.name,
            unit_type=st.spec.unit_type,
            ts=t,
            values=values,
            quality=quality,
            age_s=ages,
            steady=None,
            r_statistic=None,
        )

    def _with_steady(self, st: _UnitState, snap: Snapshot) -> Snapshot:
        signals = [s for s in self.steady_signals if s in snap.values]
        if not signals:
            return snap
        x = np.array([snap.values[s] for s in signals], dtype=np.float64)
        if st.steady_state is None:
            st.steady_state = RStatisticState.empty(len(signals))
            st.steady_flag = np.zeros(len(signals), dtype=bool)
        st.steady_state, R = update(st.steady_state, x)
        st.steady_flag = steady_step(R, st.steady_flag, self.steady_enter, self.steady_leave)
        warm = bool(np.all(st.steady_state.count > st.steady_state.warmup))
        steady: bool | None = bool(np.all(st.steady_flag)) if warm else None
        r_max = float(np.max(R)) if np.all(np.isfinite(R)) else None
        return Snapshot(
            unit=snap.unit,
            unit_type=snap.unit_type,
            ts=snap.ts,
            values=snap.values,
            quality=snap.quality,
            age_s=snap.age_s,
            steady=steady,
            r_statistic=r_max,
        )

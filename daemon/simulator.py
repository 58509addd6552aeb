"""A simulator of the invented Kestrel Ridge Energy Park, publishing plant readings to MQTT.

The demo needs a plant that behaves like one: loads change, the air warms up by day and cools
at night, compressors foul and lose efficiency and flow capacity, one unit is washed offline
and recovers, sensors are noisy and now and then send rubbish.  This module builds that plant
on top of the forward cycle model :func:`models.units.gas_turbine.simulate.simulate` (component
health and operating point in, sensor values out) and turns its SI values into the payloads the
plant file's tag map expects (topics, units of measure, payload forms).

Everything here is invented demonstration data.  Nothing is a property of a real machine.

Time
----
The scenario runs on an *accelerated clock*: ``speed`` scenario seconds per wall second
(default 3600, one scenario hour per second, so a day of ambient swing passes in 24 s).
Compressor fouling runs ``fouling_speedup`` times faster again (default 60), so that a run of
half a minute shows a trend of a point or two of compressor efficiency — real fouling takes
weeks to do that.  Payload timestamps are wall-clock time (the daemon checks them against its
own clock); only the physics moves fast.

The clock is a time-lapse: after an opening fast-forward (``opening_s``, default 24 s, a
scenario day) it holds *dispatch blocks* for ``hold_s`` wall seconds in real time, every load
constant, and fast-forwards ``move_s`` seconds between them while the loads ramp to the next
block.  A steady-state test on the daemon side therefore sees both steady periods and
transients, and fouling still shows within the first 20 s.

Scenario (defaults, see :func:`kestrel_ridge_scenario`)
------------------------------------------------------
* ambient: daily cycle of temperature (±6 K about 14 °C, warmest at 15:00) and relative
  humidity (anti-correlated), barometric pressure of a 150 m site with a slow swing;
* KR-GT1: base load, fouling from nearly clean;
* KR-GT2: older, starts well fouled, is taken offline for a wash at scenario hour 10 for
  two hours and comes back with most of its recoverable loss recovered;
* KR-GT3: load following between about 70 % and 100 % in the opening, then dispatch blocks;
* after the opening fast-forward the clock holds dispatch blocks in real time, with ramps
  between them while it fast-forwards again (:meth:`PlantScenario.scenario_hours`);
* noise on every sensor; KR-GT1 sends ``"NaN"`` text for its compressor discharge
  temperature once in a while, KR-GT2 reports an ambient temperature of 999 °C now and then
  (out of range), KR-GT3's site gateway sends a bare ``NaN`` token for its exhaust
  pressure once in a while; KR-GT2's humidity sensor is stuck between scenario hours 4 and 16.

The daemon is expected to quarantine the rubbish (with its reason code), to flag results
computed while a value is missing, and to go on running.
"""

from __future__ import annotations

import asyncio
import contextlib
import json
import math
import time
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass, field, replace
from datetime import UTC, datetime
from typing import Any

import numpy as np
from numpy.typing import NDArray

__all__ = [
    "FaultSpec",
    "PlantScenario",
    "PlantSimulator",
    "UnitScenario",
    "ambient_conditions",
    "aux_values",
    "dispatch_level",
    "fouling_state",
    "kestrel_ridge_scenario",
    "publish_loop",
]

FloatArray = NDArray[np.float64]

#: Reference conditions the design points below are stated at (ISO 2314: 15 °C, 101.325 kPa).
ISO_TEMPERATURE = 288.15
ISO_PRESSURE = 101325.0

#: Standard deviation of the sensor noise, by measurement (SI; invented demo values, of the
#: order of good plant instrumentation).  Relative where the name ends in ``_rel``.
NOISE: Mapping[str, tuple[float, bool]] = {
    "ambient_temperature": (0.08, False),
    "ambient_pressure": (15.0, False),
    "ambient_relative_humidity": (0.004, False),
    "compressor_inlet_temperature": (0.08, False),
    "compressor_inlet_pressure": (15.0, False),
    "compressor_discharge_temperature": (0.15, False),
    "compressor_discharge_pressure": (0.0004, True),
    "exhaust_temperature": (0.4, False),
    "exhaust_pressure": (15.0, False),
    "fuel_mass_flow": (0.0015, True),
    "fuel_temperature": (0.2, False),
    "generator_power": (0.0008, True),
    "air_mass_flow": (0.01, True),
    "aux.bearing1_vibration": (0.00015, False),
    "aux.lube_oil_temperature": (0.2, False),
}


def aux_values(ambient_temperature: float, level: float, online: bool) -> dict[str, float]:
    """Auxiliary sensor values [SI] (invented): bearing vibration velocity [m/s] and lube-oil
    header temperature [K]; plant files may map them as ``aux.*`` tags."""
    if not online:
        return {
            "aux.bearing1_vibration": 0.0002,
            "aux.lube_oil_temperature": ambient_temperature + 15.0,
        }
    return {
        "aux.bearing1_vibration": 0.0018 + 0.0012 * level,
        "aux.lube_oil_temperature": 322.0 + 0.25 * (ambient_temperature - ISO_TEMPERATURE),
    }


@dataclass(frozen=True)
class FaultSpec:
    """A scripted sensor fault.

    Attributes
    ----------
    measurement : str
        Canonical measurement the fault hits.
    kind : str
        ``"nan_text"`` (the JSON string ``"NaN"``), ``"nan_token"`` (the bare ``NaN`` token
        that Python's ``json`` writes and strict parsers refuse), ``"value"`` (a fixed value in
        the tag's own unit, e.g. an out-of-range 999 °C) or ``"stuck"`` (the sensor repeats
        the value it had when the fault began).
    every_s : float
        For the one-off kinds: the fault recurs every ``every_s`` wall seconds (one message).
    start_h, end_h : float
        For ``"stuck"``: the scenario-hour window of the fault.
    value : float
        For ``"value"``: what is sent, in the tag's unit of measure.
    """

    measurement: str
    kind: str
    every_s: float = 0.0
    start_h: float = 0.0
    end_h: float = 0.0
    value: float = math.nan


@dataclass(frozen=True)
class UnitScenario:
    """Design point, health and behaviour of one simulated unit (invented values).

    Attributes
    ----------
    name : str
        Unit name as in the plant file.
    air_mass_flow : float
        Compressor air flow at ISO conditions, base load, clean [kg/s].
    pressure_ratio : float
        Compressor pressure ratio at the same point [1].
    turbine_inlet_temperature : float
        Heat-balance turbine inlet temperature at base load [K].
    compressor_efficiency : float
        Isentropic efficiency when clean [1].
    turbine_efficiency : float
        Turbine isentropic efficiency [1].
    inlet_loss : float
        Inlet filter and duct pressure loss at ISO base-load flow [Pa] (scales with flow²).
    exhaust_loss : float
        Exhaust back-pressure above ambient at ISO base-load flow [Pa] (scales with flow²).
    fuel_temperature : float
        Fuel gas temperature [K].
    fouling_eta_loss : float
        Asymptotic recoverable loss of compressor efficiency from fouling [1].
    fouling_flow_loss : float
        Asymptotic relative loss of flow capacity from fouling [1].
    fouling_time_h : float
        Time constant of the fouling asymptote [fouling hours].
    fouled_h0 : float
        Fouling hours already accumulated at scenario start.
    nonrecoverable_eta_loss : float
        Permanent loss of compressor efficiency (age) [1].
    wash_start_h, wash_hours, wash_recovery : float
        Offline wash: start [scenario h] (NaN: no wash), duration [h], fraction of the
        recoverable loss it removes [1].
    load_min, load_max, load_period_h : float
        Load following during the opening fast-forward: firing between ``load_min`` and
        ``load_max`` of base-load turbine inlet temperature rise over a period [h]; equal
        values mean base load.
    dispatch : tuple of float
        Firing levels of the dispatch blocks after the opening fast-forward, used in turn
        (the first block holds the level reached at its start); ``(1.0,)`` is base load.
    faults : tuple of FaultSpec
        Scripted sensor faults.
    """

    name: str
    air_mass_flow: float
    pressure_ratio: float
    turbine_inlet_temperature: float
    compressor_efficiency: float
    turbine_efficiency: float
    inlet_loss: float = 900.0
    exhaust_loss: float = 3000.0
    fuel_temperature: float = 300.0
    fouling_eta_loss: float = 0.03
    fouling_flow_loss: float = 0.05
    fouling_time_h: float = 1500.0
    fouled_h0: float = 0.0
    nonrecoverable_eta_loss: float = 0.0
    wash_start_h: float = math.nan
    wash_hours: float = 2.0
    wash_recovery: float = 0.85
    load_min: float = 1.0
    load_max: float = 1.0
    load_period_h: float = 6.0
    dispatch: tuple[float, ...] = (1.0,)
    faults: tuple[FaultSpec, ...] = ()


@dataclass(frozen=True)
class PlantScenario:
    """The whole plant: units, site ambient, clock.

    Attributes
    ----------
    units : tuple of UnitScenario
    speed : float
        Scenario seconds per wall second while fast-forwarding.
    opening_s : float
        Wall seconds of the opening fast-forward (at ``speed``) before the first dispatch
        block [s].
    hold_s : float
        Wall seconds each dispatch block is held [s]; 0 runs the whole scenario at ``speed``.
    hold_speed : float
        Scenario seconds per wall second while a block is held (1: real time).
    move_s : float
        Wall seconds of fast-forward between two blocks, during which the loads ramp to the
        next block's level [s].
    fouling_speedup : float
        Extra acceleration of fouling relative to the scenario clock.
    start_h : float
        Scenario hour of day at wall time zero (0..24).
    mean_temperature, temperature_swing : float
        Daily mean [K] and half amplitude [K] of the ambient temperature.
    mean_humidity, humidity_swing : float
        Daily mean and half amplitude of the relative humidity [1].
    site_pressure : float
        Mean barometric pressure of the site [Pa].
    seed : int
        Seed of the noise generator.
    """

    units: tuple[UnitScenario, ...]
    speed: float = 3600.0
    opening_s: float = 24.0
    hold_s: float = 45.0
    hold_speed: float = 1.0
    move_s: float = 6.0
    fouling_speedup: float = 60.0
    start_h: float = 6.0
    mean_temperature: float = 287.15
    temperature_swing: float = 6.0
    mean_humidity: float = 0.62
    humidity_swing: float = 0.18
    site_pressure: float = 99500.0
    seed: int = 20260601

    @property
    def _holding(self) -> bool:
        return self.hold_s > 0.0 and self.hold_speed < self.speed

    def scenario_hours(self, elapsed_s: float | FloatArray) -> Any:
        """Scenario hours since the start for ``elapsed_s`` wall seconds [h].

        Notes
        -----
        A time-lapse clock: ``opening_s`` wall seconds at ``speed``, then cycles of a held
        dispatch block (``hold_s`` at ``hold_speed``) and a move to the next block
        (``move_s`` at ``speed``).  Without holds, simply ``elapsed_s * speed / 3600``.
        """
        e = np.maximum(np.asarray(elapsed_s, dtype=np.float64), 0.0)
        if not self._holding:
            return e * self.speed / 3600.0
        fast, slow = self.speed, self.hold_speed
        first = np.minimum(e, self.opening_s) * fast
        rest = np.maximum(e - self.opening_s, 0.0)
        period = self.hold_s + self.move_s
        n = np.floor(rest / period)
        r = rest - n * period
        cycles = n * (self.hold_s * slow + self.move_s * fast)
        part = np.minimum(r, self.hold_s) * slow + np.maximum(r - self.hold_s, 0.0) * fast
        return (first + cycles + part) / 3600.0

    def dispatch_phase(self, hours: float | FloatArray) -> tuple[Any, Any]:
        """Dispatch block and ramp progress at scenario time ``hours``.

        Returns
        -------
        block : ndarray of int
            -1 during the opening fast-forward, else the index of the block held or being
            ramped to.
        progress : ndarray of float
            Progress of the ramp towards ``block`` (0..1); 1 while the block is held.
        """
        h = np.asarray(hours, dtype=np.float64)
        if not self._holding:
            return np.full(h.shape, -1), np.ones(h.shape)
        h_open = self.opening_s * self.speed / 3600.0
        h_hold = self.hold_s * self.hold_speed / 3600.0
        h_move = self.move_s * self.speed / 3600.0
        rest = h - h_open
        n = np.floor(np.maximum(rest, 0.0) / (h_hold + h_move))
        r = np.maximum(rest, 0.0) - n * (h_hold + h_move)
        moving = r >= h_hold
        block = np.where(rest < 0.0, -1, np.where(moving, n + 1, n)).astype(np.int64)
        progress = np.where(moving, (r - h_hold) / max(h_move, 1e-12), 1.0)
        return block, np.clip(progress, 0.0, 1.0)


def kestrel_ridge_scenario(speed: float = 3600.0, fouling_speedup: float = 60.0) -> PlantScenario:
    """The default scenario of the three Kestrel Ridge units (all values invented).

    Parameters
    ----------
    speed : float
        Scenario seconds per wall second (3600: an hour per second).
    fouling_speedup : float
        How much faster than the scenario clock the compressors foul.

    Returns
    -------
    PlantScenario
    """
    gt1 = UnitScenario(
        name="KR-GT1",
        air_mass_flow=130.0,
        pressure_ratio=15.4,
        turbine_inlet_temperature=1440.0,
        compressor_efficiency=0.874,
        turbine_efficiency=0.885,
        inlet_loss=950.0,
        exhaust_loss=3200.0,
        fuel_temperature=318.15,
        fouling_eta_loss=0.035,
        fouling_flow_loss=0.05,
        fouling_time_h=1800.0,
        fouled_h0=60.0,
        faults=(FaultSpec("compressor_discharge_temperature", "nan_text", every_s=23.0),),
    )
    gt2 = UnitScenario(
        name="KR-GT2",
        air_mass_flow=139.0,
        pressure_ratio=15.0,
        turbine_inlet_temperature=1425.0,
        compressor_efficiency=0.866,
        turbine_efficiency=0.875,
        inlet_loss=1150.0,
        exhaust_loss=3500.0,
        fuel_temperature=313.15,
        fouling_eta_loss=0.04,
        fouling_flow_loss=0.06,
        fouling_time_h=1500.0,
        fouled_h0=900.0,
        nonrecoverable_eta_loss=0.006,
        wash_start_h=10.0,
        wash_hours=2.0,
        wash_recovery=0.85,
        dispatch=(1.0, 1.0, 0.9, 1.0),
        faults=(
            FaultSpec("ambient_temperature", "value", every_s=17.0, value=999.0),
            FaultSpec("ambient_relative_humidity", "stuck", start_h=4.0, end_h=16.0),
        ),
    )
    gt3 = UnitScenario(
        name="KR-GT3",
        air_mass_flow=33.5,
        pressure_ratio=19.5,
        turbine_inlet_temperature=1470.0,
        compressor_efficiency=0.868,
        turbine_efficiency=0.89,
        inlet_loss=800.0,
        exhaust_loss=2500.0,
        fuel_temperature=308.15,
        fouling_eta_loss=0.03,
        fouling_flow_loss=0.045,
        fouling_time_h=1200.0,
        fouled_h0=150.0,
        load_min=0.70,
        load_max=1.0,
        load_period_h=8.0,
        dispatch=(0.85, 1.0, 0.75, 0.92, 0.8, 1.0),
        faults=(FaultSpec("exhaust_pressure", "nan_token", every_s=29.0),),
    )
    return PlantScenario(units=(gt1, gt2, gt3), speed=speed, fouling_speedup=fouling_speedup)


# --------------------------------------------------------------------------------------------
# Pure scenario functions
# --------------------------------------------------------------------------------------------


def ambient_conditions(scenario: PlantScenario, hours: float | FloatArray) -> dict[str, FloatArray]:
    """Site ambient at scenario time ``hours`` (hours since the start).

    Parameters
    ----------
    scenario : PlantScenario
    hours : float or ndarray
        Scenario hours since the start [h].

    Returns
    -------
    dict
        ``ambient_temperature`` [K], ``ambient_pressure`` [Pa], ``ambient_relative_humidity``
        [1]; same shape as ``hours``.

    Notes
    -----
    A sinusoidal day, warmest at 15:00: T = T_mean + ΔT sin(2π (h_day − 9) / 24); the
    relative humidity swings the other way, RH = RH_mean − ΔRH sin(...), clipped to
    0.05..0.99; barometric pressure p = p_site + 250 Pa · sin(2π h / 40) (a slow weather
    swing).
    """
    h = np.asarray(hours, dtype=np.float64)
    hod = scenario.start_h + h
    phase = np.sin(2.0 * np.pi * (hod - 9.0) / 24.0)
    T0 = scenario.mean_temperature + scenario.temperature_swing * phase
    RH = np.clip(scenario.mean_humidity - scenario.humidity_swing * phase, 0.05, 0.99)
    p0 = scenario.site_pressure + 250.0 * np.sin(2.0 * np.pi * h / 40.0)
    return {
        "ambient_temperature": np.asarray(T0),
        "ambient_pressure": np.asarray(p0),
        "ambient_relative_humidity": np.asarray(RH),
    }


def fouling_state(
    unit: UnitScenario, hours: float | FloatArray, fouling_speedup: float
) -> dict[str, FloatArray]:
    """Compressor health and on-line state of a unit at scenario time ``hours``.

    Parameters
    ----------
    unit : UnitScenario
    hours : float or ndarray
        Scenario hours since the start [h].
    fouling_speedup : float
        Fouling hours per scenario hour.

    Returns
    -------
    dict
        ``compressor_efficiency`` [1], ``flow_capacity`` [1] (multiplier of the clean air
        flow), ``online`` (1.0 running, 0.0 offline for the wash).

    Notes
    -----
    Fouling approaches an asymptote, the usual shape of recoverable compressor fouling:
    loss(t) = L_max (1 − exp(−t_f / τ)), t_f the fouling hours.  An offline wash at
    ``wash_start_h`` removes the fraction ``wash_recovery`` of the loss reached then; after it
    fouling resumes from the remaining loss (the equivalent fouling hours are recomputed).
    """
    h = np.asarray(hours, dtype=np.float64)
    k = fouling_speedup
    tau = unit.fouling_time_h

    def frac(tf: FloatArray) -> FloatArray:
        return np.asarray(1.0 - np.exp(-np.maximum(tf, 0.0) / tau))

    tf = unit.fouled_h0 + k * h
    f = frac(tf)
    online = np.ones_like(h)
    if math.isfinite(unit.wash_start_h):
        ws, we = unit.wash_start_h, unit.wash_start_h + unit.wash_hours
        f_at_wash = float(frac(np.asarray(unit.fouled_h0 + k * ws)))
        f_after = f_at_wash * (1.0 - unit.wash_recovery)
        # equivalent fouling hours of the remaining loss, then fouling resumes after the wash
        t_eq = -tau * math.log(1.0 - f_after)
        f = np.where(h >= ws, f_after, f)
        f = np.where(h >= we, frac(t_eq + k * (h - we)), f)
        online = np.where((h >= ws) & (h < we), 0.0, 1.0)
    eta = unit.compressor_efficiency - unit.nonrecoverable_eta_loss - unit.fouling_eta_loss * f
    cap = 1.0 - unit.fouling_flow_loss * f
    return {
        "compressor_efficiency": np.asarray(eta),
        "flow_capacity": np.asarray(cap),
        "online": np.asarray(online),
    }


def load_fraction(unit: UnitScenario, hours: float | FloatArray) -> FloatArray:
    """Firing level 0..1 between ``load_min`` and ``load_max`` (a smooth cycle) [1].

    Used during the opening fast-forward; afterwards :func:`dispatch_level` holds blocks.

    Notes
    -----
    level = m + a cos(2π h / P), m = (max + min)/2, a = (max − min)/2: the unit starts at
    ``load_max`` and dips to ``load_min`` half a period later.
    """
    h = np.asarray(hours, dtype=np.float64)
    m = 0.5 * (unit.load_max + unit.load_min)
    a = 0.5 * (unit.load_max - unit.load_min)
    return np.asarray(m + a * np.cos(2.0 * np.pi * h / max(unit.load_period_h, 1e-9)))


def dispatch_level(
    unit: UnitScenario, scenario: PlantScenario, hours: float | FloatArray
) -> FloatArray:
    """Firing level 0..1 of a unit on the time-lapse clock: plateaus with ramps between [1].

    Parameters
    ----------
    unit : UnitScenario
    scenario : PlantScenario
        Its clock decides where the dispatch blocks are.
    hours : float or ndarray
        Scenario hours since the start [h].

    Notes
    -----
    During the opening fast-forward the level is :func:`load_fraction`.  Block 0 holds the
    level reached at its start; block k >= 1 holds ``unit.dispatch[(k - 1) % n]``.  Between
    blocks the level moves along a smooth ramp, L = L_a + (L_b - L_a) (3 s^2 - 2 s^3) with s
    the progress of the move (0..1), so loads change only while the clock fast-forwards.
    """
    h = np.asarray(hours, dtype=np.float64)
    block, s = scenario.dispatch_phase(h)
    h_open = scenario.opening_s * scenario.speed / 3600.0
    level0 = float(load_fraction(unit, h_open))
    levels = np.asarray(unit.dispatch or (1.0,), dtype=np.float64)

    def level_of(k: Any) -> FloatArray:
        k = np.asarray(k)
        return np.asarray(np.where(k <= 0, level0, levels[np.maximum(k - 1, 0) % levels.size]))

    ease = s * s * (3.0 - 2.0 * s)
    ramp = level_of(block - 1) + (level_of(block) - level_of(block - 1)) * ease
    return np.asarray(np.where(block < 0, load_fraction(unit, h), ramp))


def operating_point(
    unit: UnitScenario,
    ambient: Mapping[str, FloatArray],
    health: Mapping[str, FloatArray],
    level: FloatArray,
) -> dict[str, FloatArray]:
    """Operating point of a unit from ambient, compressor health and firing level.

    Parameters
    ----------
    unit : UnitScenario
    ambient : mapping
        From :func:`ambient_conditions`.
    health : mapping
        From :func:`fouling_state`.
    level : ndarray
        Firing level from :func:`load_fraction` [1].

    Returns
    -------
    dict
        Keyword arguments for :func:`models.units.gas_turbine.simulate.simulate` (air flow,
        pressure ratio, turbine inlet temperature, efficiencies, inlet and exhaust losses as
        fractions).

    Notes
    -----
    A deliberately simple control law (invented, enough for a demo):

    * air flow follows the compressor's corrected flow, reduced by fouling and by closing the
      inlet guide vanes at part load: m = m_ISO · cap · (1 − 0.5 (1 − L)) · δ / √θ,
      δ = p1 / 101325 Pa, θ = T1 / 288.15 K;
    * the first turbine nozzle is choked, so p3 ∝ m √T3 and the pressure ratio is
      r = r_ISO · (m / m_ISO) · √(T3 / T3_base) · (p1_ISO / p1);
    * the turbine inlet temperature falls 300 K per unit of lost firing level:
      T3 = T3_base − 300 K · (1 − L);
    * inlet and exhaust losses scale with the square of the flow.
    """
    T0 = np.asarray(ambient["ambient_temperature"])
    p0 = np.asarray(ambient["ambient_pressure"])
    L = np.asarray(level, dtype=np.float64)
    cap = np.asarray(health["flow_capacity"])
    T3 = unit.turbine_inlet_temperature - 300.0 * (1.0 - L)
    # inlet loss at design flow first, then the flow it allows (one pass is plenty here)
    p1 = p0 - unit.inlet_loss
    ma = unit.air_mass_flow * cap * (1.0 - 0.5 * (1.0 - L)) * (p1 / ISO_PRESSURE)
    ma = ma / np.sqrt(T0 / ISO_TEMPERATURE)
    flow2 = (ma / unit.air_mass_flow) ** 2
    inlet_frac = unit.inlet_loss * flow2 / p0
    exhaust_frac = unit.exhaust_loss * flow2 / p0
    p1 = p0 * (1.0 - inlet_frac)
    p1_iso = ISO_PRESSURE - unit.inlet_loss
    pr = (
        unit.pressure_ratio
        * (ma / unit.air_mass_flow)
        * np.sqrt(T3 / unit.turbine_inlet_temperature)
    )
    pr = pr * (p1_iso / p1)
    return {
        "air_mass_flow": np.asarray(ma),
        "pressure_ratio": np.asarray(pr),
        "turbine_inlet_temperature": np.asarray(T3),
        "compressor_isentropic_efficiency": np.asarray(health["compressor_efficiency"]),
        "turbine_isentropic_efficiency": np.full(T0.shape, unit.turbine_efficiency),
        "inlet_pressure_loss": np.asarray(inlet_frac),
        "exhaust_pressure_loss": np.asarray(exhaust_frac),
    }


def shutdown_values(ambient: Mapping[str, float], fuel_temperature: float) -> dict[str, float]:
    """Sensor values of a unit standing still (offline for a wash) [SI].

    The compressor has cooled towards ambient, the hot section is still warm (washes are
    done on a cooled but not cold machine), no fuel flows and the generator is open (zero
    terminal power).
    """
    T0 = ambient["ambient_temperature"]
    p0 = ambient["ambient_pressure"]
    return {
        **ambient,
        "compressor_inlet_temperature": T0,
        "compressor_inlet_pressure": p0,
        "compressor_discharge_temperature": T0 + 12.0,
        "compressor_discharge_pressure": p0,
        "exhaust_temperature": T0 + 130.0,
        "exhaust_pressure": p0,
        "fuel_mass_flow": 0.0,
        "fuel_temperature": fuel_temperature,
        "generator_power": 0.0,
    }


# --------------------------------------------------------------------------------------------
# The simulator: scenario + forward model + tag map → MQTT messages
# --------------------------------------------------------------------------------------------


@dataclass
class _Stream:
    """One topic the simulator publishes: its tags and its payload form."""

    topic: str
    unit: str
    form: str  # "number" | "object" | "unit_object"
    tags: list[Any]
    seq: int = 0


@dataclass
class UnitTruth:
    """What the simulator knows about a unit at its last step (for tests and the demo)."""

    hours: float
    online: bool
    compressor_efficiency: float
    flow_capacity: float
    values: dict[str, float] = field(default_factory=dict)  # noise-free SI sensor values
    status: int = 0


class PlantSimulator:
    """Turns the scenario into MQTT messages in the forms the plant file's tag map expects.

    Parameters
    ----------
    plant : daemon.config.PlantConfig
        The loaded plant file (tags with their converters, units with fuel and parameters).
    scenario : PlantScenario
        Units of ``plant`` without a scenario entry are not simulated.
    t0 : float, optional
        Wall time of scenario hour 0 [s since the epoch]; the first :meth:`step` by default.
    noise : bool
        Add sensor noise (default True).
    faults : bool
        Inject the scripted sensor faults (default True).
    number_units : iterable of str
        Units whose one-tag topics carry bare JSON numbers (default ``{"KR-GT2"}``); other
        one-tag topics carry ``{"value": x, "ts": t, "seq": n}`` objects; topics whose tags
        have keys carry one flat unit object ``{"ts": ISO-8601, "seq": n, KEY: x, ...}``.

    Notes
    -----
    Gauge-pressure tags are sent as the transmitter would read them, against the *true*
    ambient pressure; a tag configured with a fixed ``baro_pa`` therefore carries the small
    error of that fixed value, as on a real plant.
    """

    def __init__(
        self,
        plant: Any,
        scenario: PlantScenario,
        *,
        t0: float | None = None,
        noise: bool = True,
        faults: bool = True,
        number_units: Iterable[str] = ("KR-GT2",),
    ) -> None:
        self.plant = plant
        self.scenario = scenario
        self.t0 = t0
        self.noise = noise
        self.faults = faults
        self._rng = np.random.default_rng(scenario.seed)
        self._units = {u.name: u for u in scenario.units if u.name in plant.units}
        self.skipped = sorted(set(plant.units) - set(self._units))
        numbers = set(number_units)
        self._streams: list[_Stream] = []
        by_topic: dict[str, _Stream] = {}
        for unit_name, tag in plant.iter_tags():
            if unit_name not in self._units:
                continue
            st = by_topic.get(tag.topic)
            if st is None:
                form = "number" if unit_name in numbers else "object"
                if tag.key:
                    form = "unit_object"
                st = _Stream(tag.topic, unit_name, form, [])
                by_topic[tag.topic] = st
                self._streams.append(st)
            st.tags.append(tag)
        self._stuck: dict[tuple[str, str], float] = {}
        self._fault_next: dict[tuple[str, str], float] = {}
        self.truth: dict[str, UnitTruth] = {}
        self.messages_sent = 0
        self.faults_sent: dict[str, int] = {}

    @property
    def topics(self) -> list[str]:
        """Topics this simulator publishes on."""
        return [s.topic for s in self._streams]

    @property
    def units(self) -> list[str]:
        """Names of the simulated units."""
        return list(self._units)

    # -- physics ----------------------------------------------------------------------------

    def unit_values(self, hours: float) -> dict[str, UnitTruth]:
        """Noise-free sensor values [SI] of every simulated unit at scenario time ``hours``."""
        from models.units.gas_turbine.simulate import simulate

        sc = self.scenario
        amb = {k: float(v) for k, v in ambient_conditions(sc, hours).items()}
        out: dict[str, UnitTruth] = {}
        for name, u in self._units.items():
            cfg = self.plant.units[name]
            health = fouling_state(u, hours, sc.fouling_speedup)
            online = bool(health["online"] >= 0.5)
            truth = UnitTruth(
                hours=hours,
                online=online,
                compressor_efficiency=float(health["compressor_efficiency"]),
                flow_capacity=float(health["flow_capacity"]),
            )
            if not online:
                truth.values = shutdown_values(amb, u.fuel_temperature)
                truth.values.update(aux_values(amb["ambient_temperature"], 0.0, False))
                out[name] = truth
                continue
            amb_a = {k: np.atleast_1d(v) for k, v in amb.items()}
            level = np.atleast_1d(dispatch_level(u, sc, hours))
            op = operating_point(u, amb_a, health, level)
            par = cfg.effective_parameters()
            meas, status = simulate(
                **amb_a,
                **op,
                fuel=cfg.fuel_properties,
                fuel_temperature=u.fuel_temperature,
                **{k: v for k, v in par.items() if k in _SIM_PARAMETERS},
            )
            truth.values = {k: float(v[0]) for k, v in meas.items()}
            truth.values.update(aux_values(amb["ambient_temperature"], float(level[0]), True))
            truth.status = int(status[0])
            out[name] = truth
        return out

    def _noisy(self, measurement: str, value: float) -> float:
        if not self.noise or not math.isfinite(value):
            return value
        sd, rel = NOISE.get(measurement, (0.0, False))
        if sd == 0.0:
            return value
        scale = abs(value) * sd if rel else sd
        return float(value + self._rng.normal(0.0, scale))

    # -- messages ---------------------------------------------------------------------------

    def step(self, now: float | None = None) -> list[tuple[str, bytes]]:
        """Advance to wall time ``now`` and return the messages ``(topic, payload)`` to send.

        Parameters
        ----------
        now : float, optional
            Wall time [s since the epoch]; ``time.time()`` by default.  Payload timestamps are
            this time (the daemon checks them against its own clock).
        """
        now = time.time() if now is None else now
        if self.t0 is None:
            self.t0 = now
        elapsed = now - self.t0
        hours = float(self.scenario.scenario_hours(elapsed))
        self.truth = self.unit_values(hours)
        sensed: dict[str, dict[str, float]] = {}
        for name, truth in self.truth.items():
            sensed[name] = {m: self._noisy(m, v) for m, v in truth.values.items()}
        msgs: list[tuple[str, bytes]] = []
        iso = datetime.fromtimestamp(now, UTC).isoformat(timespec="milliseconds")
        iso = iso.replace("+00:00", "Z")
        for st in self._streams:
            vals = sensed[st.unit]
            unit_sc = self._units[st.unit]
            fields = [
                (tag, self._encode(tag, st.unit, unit_sc, vals, elapsed, hours)) for tag in st.tags
            ]
            st.seq += 1
            if st.form == "unit_object":
                doc: dict[str, object] = {"ts": iso, "seq": st.seq}
                for tag, v in fields:
                    doc[tag.key] = v
                payload = _dumps(doc)
            elif st.form == "number":
                payload = _dumps(fields[0][1])
            else:
                payload = _dumps({"value": fields[0][1], "ts": round(now, 3), "seq": st.seq})
            msgs.append((st.topic, payload))
        self.messages_sent += len(msgs)
        return msgs

    def _encode(  # noqa: PLR0917
        self,
        tag: Any,
        unit: str,
        sc: UnitScenario,
        vals: Mapping[str, float],
        elapsed: float,
        hours: float,
    ) -> object:
        """The value of one tag as sent: in the tag's unit, rounded, or a scripted fault."""
        m = tag.measurement
        # a redundant sensor ("NAME:A") reads the same quantity as its group
        si = vals.get(m, vals.get(tag.canonical, math.nan))
        baro = vals.get("ambient_pressure", self.scenario.site_pressure)
        x = tag.converter.inverse(si, baro) if math.isfinite(si) else math.nan
        x = float(f"{x:.6g}") if math.isfinite(x) else x
        if not self.faults:
            return x
        for f in sc.faults:
            if f.measurement != m:
                continue
            key = (unit, m)
            if f.kind == "stuck":
                if f.start_h <= hours < f.end_h:
                    return self._stuck.setdefault(key, x)
                self._stuck.pop(key, None)
                continue
            due = self._fault_next.setdefault(key, f.every_s)
            if elapsed >= due:
                self._fault_next[key] = due + f.every_s * math.ceil(
                    (elapsed - due + 1e-9) / f.every_s
                )
                self.faults_sent[f.kind] = self.faults_sent.get(f.kind, 0) + 1
                if f.kind == "nan_text":
                    return "NaN"
                if f.kind == "nan_token":
                    return math.nan
                return f.value
        return x


#: Unit parameters :func:`models.units.gas_turbine.simulate.simulate` accepts.
_SIM_PARAMETERS = frozenset(
    {
        "generator_efficiency",
        "combustor_pressure_loss",
        "combustion_efficiency",
        "casing_heat_loss_fraction",
        "mechanical_loss",
    }
)


def _dumps(obj: object) -> bytes:
    # allow_nan=True on purpose: the scripted "nan_token" fault sends the bare NaN token
    return json.dumps(obj, separators=(",", ":"), allow_nan=True).encode()


async def publish_loop(
    client: Any,
    simulator: PlantSimulator,
    interval_s: float = 1.0,
    *,
    stop: asyncio.Event | None = None,
    qos: int = 1,
    clock: Callable[[], float] = time.time,
    on_step: Callable[[PlantSimulator], None] | None = None,
) -> int:
    """Publish the simulator's messages every ``interval_s`` until ``stop`` is set.

    Parameters
    ----------
    client : aiomqtt.Client
        A connected client (anything with ``async publish(topic, payload, qos=)``).
    simulator : PlantSimulator
    interval_s : float
        Wall seconds between scans [s].
    stop : asyncio.Event, optional
        Set it to end the loop; without it the loop runs until cancelled.
    qos : int
        MQTT QoS of the published messages.
    clock : callable
        Wall clock (seconds since the epoch).
    on_step : callable, optional
        Called after each scan with the simulator.

    Returns
    -------
    int
        Number of messages published.
    """
    stop = stop or asyncio.Event()
    sent = 0
    next_t = clock()
    while not stop.is_set():
        for topic, payload in simulator.step(clock()):
            await client.publish(topic, payload, qos=qos)
            sent += 1
        if on_step is not None:
            on_step(simulator)
        next_t += interval_s
        delay = max(0.0, next_t - clock())
        with contextlib.suppress(TimeoutError):
            await asyncio.wait_for(stop.wait(), timeout=delay)
    return sent


def scenario_for(names: Sequence[str], base: PlantScenario) -> PlantScenario:
    """``base`` restricted to the units in ``names`` (order kept)."""
    return replace(base, units=tuple(u for u in base.units if u.name in set(names)))

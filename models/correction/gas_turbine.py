"""Correction of measured gas-turbine performance to reference ambient conditions.

Two methods, always labelled in the results (``correction_method``):

``"model"``
    Model-based.  The measured component health (compressor and turbine isentropic
    efficiencies, combustor pressure loss, combustion efficiency, inlet and exhaust pressure
    ratios, losses) is held, a control law fixes the operating point, and the cycle is run
    forward twice with :func:`models.units.gas_turbine.simulate.simulate`: at the measured
    ambient and at the reference ambient.  Then::

        P_corr  = P_meas  * P_model(ref) / P_model(meas)                    (1)
        HR_corr = HR_meas * HR_model(ref) / HR_model(meas)                  (2)

    Control law (:func:`reference_operating_point`), a fixed-speed, temperature-controlled
    machine at base load:

    * turbine inlet temperature held at its reconstructed value;
    * fixed shaft speed, constant inlet volume flow: ``m_a ∝ delta / theta`` with
      ``theta = T1 / T1_ref`` and ``delta = p1 / p1_ref`` (the corrected flow
      ``m_a sqrt(theta) / delta`` falls with the corrected speed ``N / sqrt(theta)``);
    * first turbine nozzle choked, ``m_g sqrt(T3) / p3 = const``; with T3 and the fuel-air
      ratio held this makes ``p3 ∝ m_a`` and the pressure ratio scale as ``1 / theta``:
      ``PR_ref = PR_meas T1_meas / T1_ref``.

    Under this law a heavy-duty cycle loses about 0.6-0.75 % of power per kelvin of inlet
    temperature, the trade's usual 0.5-0.8 %/K (checked in ``tests/test_correction.py``).

``"curve"``
    Curve-based, from unit-supplied tables of correction factors versus compressor inlet
    temperature, ambient pressure and ambient relative humidity::

        P_corr  = P_meas  / (alpha_T alpha_p alpha_RH)                      (3)
        HR_corr = HR_meas / (beta_T beta_p beta_RH)                         (4)

    Factors are linearly interpolated (:func:`numpy.interp`); outside a table's range the
    result is NaN with :attr:`models.status.Reason.CORRECTION_UNAVAILABLE` (no
    extrapolation).  A table that is not supplied contributes a factor of 1.

Reference conditions (ISO 2314 / ISO 3977-2 standard reference): 15 °C, 101.325 kPa,
60 % relative humidity.

References
----------
.. [1] ISO 2314:2009, Gas turbines — Acceptance tests.
.. [2] ISO 3977-2:1997, Gas turbines — Procurement — Part 2: Standard reference conditions
   and ratings.
.. [3] ASME PTC 22-2014, Performance Test Code on Gas Turbines (correction of measured
   performance to base reference conditions by correction curves or by a cycle model).
.. [4] H. I. H. Saravanamuttoo, G. F. C. Rogers, H. Cohen, P. V. Straznicky, A. C. Nix,
   *Gas Turbine Theory*, 7th ed., Pearson, 2017, ch. 9 (off-design: choked nozzle and
   corrected (non-dimensional) flow).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from models.status import ModelInputError, Reason, flag

__all__ = [
    "REFERENCE_PRESSURE",
    "REFERENCE_RELATIVE_HUMIDITY",
    "REFERENCE_TEMPERATURE",
    "CorrectionCurve",
    "CorrectionTables",
    "curve_correction",
    "reference_operating_point",
]

FloatArray = NDArray[np.float64]
StatusArray = NDArray[np.uint32]

#: Reference ambient temperature [K] (15 °C, ISO 2314 / ISO 3977-2).
REFERENCE_TEMPERATURE: float = 288.15
#: Reference ambient pressure [Pa] (ISO 2314 / ISO 3977-2).
REFERENCE_PRESSURE: float = 101325.0
#: Reference ambient relative humidity [-] (ISO 2314 / ISO 3977-2).
REFERENCE_RELATIVE_HUMIDITY: float = 0.60


@dataclass(frozen=True)
class CorrectionCurve:
    """One correction-factor table: ``factor`` versus ``x`` (strictly increasing).

    Parameters
    ----------
    x : sequence of float
        Abscissa in SI: compressor inlet temperature [K], ambient pressure [Pa] or ambient
        relative humidity [-]; at least two points, strictly increasing, finite.
    factor : sequence of float
        Correction factor [-] at each ``x``; finite and > 0.  Defined as the ratio of the
        quantity at ``x`` to the quantity at reference (so corrected = measured / factor).
    name : str, optional
        Label used in error messages.
    """

    x: tuple[float, ...]
    factor: tuple[float, ...]
    name: str = "curve"

    def __post_init__(self) -> None:
        """Check the table (raises ModelInputError)."""
        x = np.asarray(self.x, dtype=np.float64)
        f = np.asarray(self.factor, dtype=np.float64)
        if x.ndim != 1 or x.size < 2 or x.shape != f.shape:
            raise ModelInputError(
                f"{self.name}.x", self.x, "at least two points, same length as factor"
            )
        if not (np.all(np.isfinite(x)) and np.all(np.diff(x) > 0.0)):
            raise ModelInputError(f"{self.name}.x", self.x, "finite and strictly increasing")
        if not (np.all(np.isfinite(f)) and np.all(f > 0.0)):
            raise ModelInputError(f"{self.name}.factor", self.factor, "finite and > 0")
        object.__setattr__(self, "x", tuple(float(v) for v in x))
        object.__setattr__(self, "factor", tuple(float(v) for v in f))

    @classmethod
    def from_points(
        cls, x: Sequence[float], factor: Sequence[float], name: str = "curve"
    ) -> CorrectionCurve:
        """Build from any two sequences (converted to float tuples and validated)."""
        return cls(tuple(float(v) for v in x), tuple(float(v) for v in factor), name)

    def __call__(self, value: ArrayLike) -> tuple[FloatArray, NDArray[np.bool_]]:
        """Interpolated factor and an "outside the table or NaN" mask."""
        v = np.asarray(value, dtype=np.float64)
        xs = np.asarray(self.x)
        out = np.interp(v, xs, np.asarray(self.factor))
        outside = ~((v >= xs[0]) & (v <= xs[-1]))
        return np.where(outside, np.nan, out), outside


@dataclass(frozen=True)
class CorrectionTables:
    """A unit's correction curves (any may be ``None``: factor 1).

    ``power_*`` curves give alpha (power ratio to reference), ``heat_rate_*`` curves give beta
    (heat-rate ratio to reference), each versus compressor inlet temperature [K], ambient
    pressure [Pa] or ambient relative humidity [-].
    """

    power_vs_inlet_temperature: CorrectionCurve | None = None
    power_vs_ambient_pressure: CorrectionCurve | None = None
    power_vs_relative_humidity: CorrectionCurve | None = None
    heat_rate_vs_inlet_temperature: CorrectionCurve | None = None
    heat_rate_vs_ambient_pressure: CorrectionCurve | None = None
    heat_rate_vs_relative_humidity: CorrectionCurve | None = None


def _product(
    curves: Sequence[tuple[CorrectionCurve | None, FloatArray]], shape: tuple[int, ...]
) -> tuple[FloatArray, NDArray[np.bool_]]:
    prod = np.ones(shape)
    outside = np.zeros(shape, dtype=bool)
    for curve, x in curves:
        if curve is None:
            continue
        f, o = curve(x)
        prod = prod * f
        outside |= o
    return prod, outside


def curve_correction(
    tables: CorrectionTables | None,
    *,
    compressor_inlet_temperature: ArrayLike,
    ambient_pressure: ArrayLike,
    ambient_relative_humidity: ArrayLike,
    power: ArrayLike,
    heat_rate: ArrayLike,
) -> tuple[FloatArray, FloatArray, StatusArray]:
    r"""Correct power and heat rate to reference conditions with unit-supplied curves.

    Parameters
    ----------
    tables : CorrectionTables or None
        The unit's curves; ``None`` gives NaN with ``CORRECTION_UNAVAILABLE`` everywhere.
    compressor_inlet_temperature : array_like
        T1 [K].
    ambient_pressure : array_like
        p0 [Pa].
    ambient_relative_humidity : array_like
        RH [-] (fraction 0..1).
    power : array_like
        Measured generator power [W].
    heat_rate : array_like
        Measured heat rate (any unit; returned in the same unit).

    Returns
    -------
    power_corrected, heat_rate_corrected : ndarray
        Corrected values, NaN where a curve is out of range or an input is NaN.
    status : ndarray of uint32
        ``CORRECTION_UNAVAILABLE`` where the correction could not be made.

    Notes
    -----
    .. math::

        P_{corr} = \frac{P}{\alpha_T \alpha_p \alpha_{RH}}, \qquad
        HR_{corr} = \frac{HR}{\beta_T \beta_p \beta_{RH}}

    ``P_corr = P / (alpha_T alpha_p alpha_RH)``, ``HR_corr = HR / (beta_T beta_p beta_RH)``,
    factors by linear interpolation, never extrapolated.

    References
    ----------
    .. [1] ASME PTC 22-2014, Performance Test Code on Gas Turbines (correction curves).
    .. [2] ISO 2314:2009, Gas turbines — Acceptance tests.

    Examples
    --------
    >>> t = CorrectionTables(power_vs_inlet_temperature=CorrectionCurve.from_points(
    ...     [268.15, 288.15, 308.15], [1.12, 1.0, 0.87]))
    >>> P, HR, st = curve_correction(t, compressor_inlet_temperature=298.15,
    ...     ambient_pressure=101325.0, ambient_relative_humidity=0.6, power=40.0e6,
    ...     heat_rate=10000.0)
    >>> round(float(P) / 1e6, 3), float(HR), int(st)
    (42.781, 10000.0, 0)
    """
    T1 = np.asarray(compressor_inlet_temperature, dtype=np.float64)
    p0 = np.asarray(ambient_pressure, dtype=np.float64)
    rh = np.asarray(ambient_relative_humidity, dtype=np.float64)
    P = np.asarray(power, dtype=np.float64)
    HR = np.asarray(heat_rate, dtype=np.float64)
    shape = np.broadcast(T1, p0, rh, P, HR).shape
    status = np.zeros(shape, dtype=np.uint32)
    if tables is None:
        status |= np.uint32(Reason.CORRECTION_UNAVAILABLE)
        nan = np.full(shape, np.nan)
        return nan, nan.copy(), status
    alpha, out_a = _product(
        [
            (tables.power_vs_inlet_temperature, T1),
            (tables.power_vs_ambient_pressure, p0),
            (tables.power_vs_relative_humidity, rh),
        ],
        shape,
    )
    beta, out_b = _product(
        [
            (tables.heat_rate_vs_inlet_temperature, T1),
            (tables.heat_rate_vs_ambient_pressure, p0),
            (tables.heat_rate_vs_relative_humidity, rh),
        ],
        shape,
    )
    P_corr = P / alpha
    HR_corr = HR / beta
    unavailable = out_a | out_b | np.isnan(P_corr) | np.isnan(HR_corr)
    flag(status, unavailable, Reason.CORRECTION_UNAVAILABLE)
    bad = status != 0
    return np.where(bad, np.nan, P_corr), np.where(bad, np.nan, HR_corr), status


def reference_operating_point(
    *,
    compressor_inlet_temperature: ArrayLike,
    compressor_inlet_pressure: ArrayLike,
    pressure_ratio: ArrayLike,
    air_mass_flow: ArrayLike,
    reference_inlet_temperature: ArrayLike,
    reference_inlet_pressure: ArrayLike,
) -> tuple[FloatArray, FloatArray]:
    r"""Pressure ratio and air flow at reference inlet conditions under the control law.

    Parameters
    ----------
    compressor_inlet_temperature, compressor_inlet_pressure : array_like
        Measured T1 [K] and p1 [Pa].
    pressure_ratio : array_like
        Measured compressor pressure ratio p2/p1 [-].
    air_mass_flow : array_like
        Measured or heat-balance air flow [kg/s].
    reference_inlet_temperature, reference_inlet_pressure : array_like
        T1 [K] and p1 [Pa] at reference ambient.

    Returns
    -------
    pressure_ratio_ref : ndarray
        ``PR T1 / T1_ref`` [-].
    air_mass_flow_ref : ndarray
        ``m_a (p1_ref / p1) (T1 / T1_ref)`` [kg/s].

    Notes
    -----
    .. math::

        m_{a,ref} = m_a \frac{\delta_{ref} / \delta}{\theta_{ref} / \theta}, \qquad
        PR_{ref} = PR \frac{T_1}{T_{1,ref}}, \qquad
        \theta = T_1 / T_{1,ref},\; \delta = p_1 / p_{1,ref}

    Constant inlet volume flow at fixed speed (``m_a ∝ p1 / T1``) and a choked first turbine
    nozzle at constant turbine inlet temperature (``m_g sqrt(T3)/p3`` constant, fuel-air ratio
    held): ``p3 / p1 ∝ m_a / p1 ∝ 1/theta``.  This is the simplest law that makes power fall
    with inlet temperature at the rate heavy-duty machines show; a unit with variable inlet
    guide vanes, inlet cooling or a part-load control mode needs a law of its own.

    References
    ----------
    .. [1] H. I. H. Saravanamuttoo, G. F. C. Rogers, H. Cohen, P. V. Straznicky, A. C. Nix,
       *Gas Turbine Theory*, 7th ed., Pearson, 2017, ch. 9 (off-design: choked nozzle,
       corrected flow).
    """
    T1 = np.asarray(compressor_inlet_temperature, dtype=np.float64)
    p1 = np.asarray(compressor_inlet_pressure, dtype=np.float64)
    ratio = T1 / np.asarray(reference_inlet_temperature, dtype=np.float64)
    pr_ref = np.asarray(pressure_ratio, dtype=np.float64) * ratio
    ma_ref = (
        np.asarray(air_mass_flow, dtype=np.float64)
        * (np.asarray(reference_inlet_pressure, dtype=np.float64) / p1)
        * ratio
    )
    return pr_ref, ma_ref

"""Humid air: water saturation pressure, enhancement factor, composition from T, p and RH.

Dry air is :data:`DRY_AIR` (ISO 2533 with 400 ppm CO2); water vapour is added from the relative
humidity, ``x_w = RH f(T, p) p_sat(T) / p``, with the saturation pressure over liquid water at
and above the triple point and over ice below it.  :func:`humid_air` returns checked mole
fractions for :class:`models.properties.mixtures.Mixture`; :func:`water_mass_fraction` and
:func:`humid_air_fluid` are the unchecked fast path of the unit types (humid air per kg as
dry air plus ``y_w`` times (water minus dry air), two basis fluids of the property kernel).

All quantities are SI: T [K], p [Pa] (absolute), RH a fraction 0..1 [-].

References
----------
.. [1] W. Wagner, A. Pruss, "The IAPWS formulation 1995 for the thermodynamic properties of
   ordinary water substance for general and scientific use", J. Phys. Chem. Ref. Data 31
   (2002) 387-535 (auxiliary vapour-pressure equation, eq. 2.5).
.. [2] W. Wagner, T. Riethmann, R. Feistel, A. H. Harvey, "New equations for the sublimation
   pressure and melting pressure of H2O ice Ih", J. Phys. Chem. Ref. Data 40 (2011) 043103
   (IAPWS R14-08(2011)).
.. [3] A. Picard, R. S. Davis, M. Glaeser, K. Fujii, "Revised formula for the density of moist
   air (CIPM-2007)", Metrologia 45 (2008) 149-155.
.. [4] ISO 2533:1975, Standard Atmosphere, Table 1 (composition of dry air).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from models.properties import kernel
from models.properties.mixtures import MOLAR_MASS, R_UNIVERSAL, check_composition
from models.properties.species import INDEX, N_SPECIES
from models.status import Reason

__all__ = [
    "DRY_AIR",
    "DRY_AIR_MASS_FRACTIONS",
    "RH_TOLERANCE",
    "enhancement_factor",
    "humid_air",
    "humid_air_fluid",
    "saturation_pressure",
    "water_mass_fraction",
]

FloatArray = NDArray[np.float64]
StatusArray = NDArray[np.uint32]

#: Relative humidity above 1 accepted (and capped to 1) before it counts as nonphysical [-].
RH_TOLERANCE: float = 1e-3


def _f(a: ArrayLike) -> FloatArray:
    return np.asarray(a, dtype=np.float64)


def _dry_air() -> FloatArray:
    x = np.zeros(N_SPECIES)
    # N2, O2, Ar: ISO 2533:1975 Table 1 (78.084, 20.9476, 0.934 % by volume); CO2 raised from
    # that table's 0.0314 % to a present-day 400 ppm (common practice); normalised to sum 1.
    x[INDEX["N2"]] = 0.78084
    x[INDEX["O2"]] = 0.209476
    x[INDEX["Ar"]] = 0.00934
    x[INDEX["CO2"]] = 0.0004
    x /= x.sum()
    x.flags.writeable = False
    return x


#: Mole fractions of dry air over SPECIES (ISO 2533 with 400 ppm CO2, normalised).
DRY_AIR: FloatArray = _dry_air()
#: Mass fractions of dry air over SPECIES [-].
DRY_AIR_MASS_FRACTIONS: FloatArray = DRY_AIR * MOLAR_MASS / np.sum(DRY_AIR * MOLAR_MASS)
DRY_AIR_MASS_FRACTIONS.flags.writeable = False
_M_DRY = float(1.0 / np.sum(DRY_AIR_MASS_FRACTIONS / MOLAR_MASS))
_M_W = float(MOLAR_MASS[INDEX["H2O"]])
_R_DRY = R_UNIVERSAL / _M_DRY
_R_W = R_UNIVERSAL / _M_W
_ROWS_DRY = kernel.mixture_rows(DRY_AIR_MASS_FRACTIONS)  # (2, 17)
_ROWS_WMD = kernel.SPECIES_ROWS[:, INDEX["H2O"], :] - _ROWS_DRY  # water minus dry air


_TC, _PC = 647.096, 22.064e6  # K, Pa: IAPWS-95 critical point
_WP_A = (-7.85951783, 1.84408259, -11.7866497, 22.6807411, -15.9618719, 1.80122502)
_TT, _PT = 273.16, 611.657  # K, Pa: triple point (IAPWS 2011)
_SUB_A = (-0.212144006e2, 0.273203819e2, -0.610598130e1)
_SUB_B = (0.333333333e-2, 0.120666667e1, 0.170333333e1)


def saturation_pressure(T: ArrayLike) -> FloatArray:
    r"""Saturation pressure of water [Pa] over liquid (T >= 273.16 K) or ice (below).

    Parameters
    ----------
    T : array_like
        Temperature [K]; NaN outside 50 K .. 647.096 K.

    Notes
    -----
    .. math::

        \ln\frac{p}{p_c} = \frac{T_c}{T}\left(a_1 \vartheta + a_2 \vartheta^{1.5} + a_3 \vartheta^3
        + a_4 \vartheta^{3.5} + a_5 \vartheta^4 + a_6 \vartheta^{7.5}\right),
        \quad \vartheta = 1 - T/T_c

        \ln\frac{p}{p_t} = \theta^{-1} \sum_i a_i \theta^{b_i},
        \quad \theta = T / T_t \;\text{(ice)}

    Liquid, Wagner & Pruss (2002) eq. 2.5 [1]_, ϑ = 1 - T/T_c::

        ln(p/p_c) = (T_c/T)(a1 ϑ + a2 ϑ^1.5 + a3 ϑ³ + a4 ϑ^3.5 + a5 ϑ⁴ + a6 ϑ^7.5)

    Ice Ih, IAPWS R14-08(2011) [2]_, θ = T/T_t::

        ln(p/p_t) = θ⁻¹ Σ a_i θ^(b_i)

    References
    ----------
    .. [1] W. Wagner, A. Pruss, "The IAPWS formulation 1995 for the thermodynamic properties of
       ordinary water substance", J. Phys. Chem. Ref. Data 31 (2002) 387-535, eq. 2.5.
    .. [2] IAPWS R14-08(2011), W. Wagner et al., J. Phys. Chem. Ref. Data 40 (2011) 043103.
    """
    T = _f(T)
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        v = 1.0 - T / _TC
        a = _WP_A
        # half-integer powers from one square root (v^1.5 = v sqrt(v), ...)
        sv = np.sqrt(v)
        v3 = v * v * v
        half = a[1] * v + a[3] * v3 + a[5] * (v3 * v3 * v)  # times sqrt(v)
        half *= sv
        half += a[0] * v + a[2] * v3 + a[4] * (v3 * v)
        half *= _TC / T
        out: FloatArray = np.asarray(_PC * np.exp(half))
        below = T < _TT
        if below.any():  # the ice branch only where it is used
            th = T[below] / _TT
            ice = sum(ai * th**bi for ai, bi in zip(_SUB_A, _SUB_B, strict=True)) / th
            out[below] = _PT * np.exp(ice)
        out = np.where((T >= 50.0) & (T <= _TC), out, np.nan)
    return out


def enhancement_factor(T: ArrayLike, p: ArrayLike) -> FloatArray:
    r"""Water-vapour enhancement factor f(T, p) of moist air [-].

    Notes
    -----
    .. math::

        f = 1.00062 + 3.14 \times 10^{-8}\, p + 5.6 \times 10^{-7}\, t^2, \quad t = T - 273.15\,K

    CIPM-2007 [3]_: f = 1.00062 + 3.14e-8 p + 5.6e-7 t², p [Pa], t [°C].  Stated for
    600-1100 hPa and 15-27 °C; used here over the whole ambient range (the factor stays within
    about 1.003-1.006, small beside RH sensor uncertainty).

    References
    ----------
    .. [1] A. Picard, R. S. Davis, M. Glaeser, K. Fujii, "Revised formula for the density of
       moist air (CIPM-2007)", Metrologia 45 (2008) 149-155.
    """
    t = _f(T) - 273.15
    out: FloatArray = 1.00062 + 3.14e-8 * _f(p) + 5.6e-7 * t * t
    return out


def humid_air(
    T: ArrayLike, p: ArrayLike, RH: ArrayLike, dry: ArrayLike = DRY_AIR
) -> tuple[FloatArray, StatusArray]:
    r"""Mole fractions (..., n_species) of humid air from T [K], p [Pa], RH [-].

    Parameters
    ----------
    T : array_like
        Air temperature [K].
    p : array_like
        Total (absolute) pressure [Pa].
    RH : array_like
        Relative humidity as a fraction 0..1 [-] (not percent).
    dry : array_like
        Dry-air mole fractions (..., n_species); default :data:`DRY_AIR`.

    Returns
    -------
    x : ndarray (..., n_species)
        Mole fractions; NaN rows where status has an error bit.
    status : ndarray of uint32
        HUMIDITY_SATURATED (warning) where RH >= 1 (values up to 1 + RH_TOLERANCE are capped to
        1) or the vapour pressure reaches p; INPUT_NONPHYSICAL for RH < 0 or > 1 +
        RH_TOLERANCE, T <= 0, p <= 0; INPUT_MISSING for NaN.

    Notes
    -----
    .. math::

        x_w = RH\, f(T, p)\, \frac{p_{sat}(T)}{p}, \qquad \mathbf{x} = (1 - x_w)\, \mathbf{x}_{dry}
        + x_w\, \mathbf{e}_{H_2O}

    x_w = RH · f(T, p) · p_sat(T) / p, x = (1 - x_w) x_dry + x_w e_H2O, with p_sat from
    :func:`saturation_pressure` and f from :func:`enhancement_factor`.

    Raises
    ------
    ModelInputError
        ``dry`` is not a valid composition.

    References
    ----------
    .. [1] W. Wagner, A. Pruss, J. Phys. Chem. Ref. Data 31 (2002) 387-535, eq. 2.5.
    .. [2] A. Picard et al., "Revised formula for the density of moist air (CIPM-2007)",
       Metrologia 45 (2008) 149-155.
    .. [3] ISO 2533:1975, Standard Atmosphere, Table 1 (dry air).
    """
    T = _f(T)
    p = _f(p)
    RH = _f(RH)
    xd = check_composition(_f(dry), "dry")
    shape = np.broadcast_shapes(T.shape, p.shape, RH.shape, xd.shape[:-1])
    status = np.zeros(shape, dtype=np.uint32)
    Tb, pb, rb = (np.broadcast_to(a, shape) for a in (T, p, RH))
    miss = np.isnan(Tb) | np.isnan(pb) | np.isnan(rb)
    with np.errstate(invalid="ignore"):
        nonphys = ~miss & ((Tb <= 0) | (pb <= 0) | (rb < 0) | (rb > 1 + RH_TOLERANCE))
        sat = ~miss & ~nonphys & (rb >= 1)
    status[miss] |= np.uint32(Reason.INPUT_MISSING)
    status[nonphys] |= np.uint32(Reason.INPUT_NONPHYSICAL)
    rc = np.minimum(rb, 1.0)
    with np.errstate(invalid="ignore", divide="ignore"):
        xw = rc * enhancement_factor(Tb, pb) * saturation_pressure(Tb) / pb
        boil = xw >= 1.0
    sat |= boil & (status == 0)
    status[sat] |= np.uint32(Reason.HUMIDITY_SATURATED)
    xw = np.minimum(xw, 1.0)
    x = (1.0 - xw)[..., None] * xd
    x[..., INDEX["H2O"]] += xw
    err = (status & ~np.uint32(Reason.HUMIDITY_SATURATED)) != 0
    if err.any():
        x[err] = np.nan
    return x, status


def water_mass_fraction(
    T: FloatArray, p: FloatArray, RH: FloatArray, status: StatusArray | None = None
) -> FloatArray:
    r"""Water mass fraction of humid air (the fast path of :func:`humid_air`, unchecked).

    Parameters
    ----------
    T : ndarray
        Air temperature [K], finite and within the saturation-pressure range.
    p : ndarray
        Total (absolute) pressure [Pa], > 0.
    RH : ndarray
        Relative humidity [-], 0..1 + :data:`RH_TOLERANCE`.
    status : ndarray of uint32, optional
        ORed in place with HUMIDITY_SATURATED where RH >= 1 or the vapour pressure reaches p.

    Returns
    -------
    ndarray
        y_w [-], mass of water per kg of humid air.

    Notes
    -----
    .. math:: x_w = \min(RH, 1)\, f(T, p)\, \frac{p_{sat}(T)}{p}, \qquad
        y_w = \frac{x_w M_w}{x_w M_w + (1 - x_w) M_{dry}}

    with :math:`x_w` capped at 0.999.  The caller checks the inputs first (the unit types
    flag and replace bad elements); use :func:`humid_air` for checked compositions.

    References
    ----------
    .. [1] W. Wagner, A. Pruss, J. Phys. Chem. Ref. Data 31 (2002) 387-535, eq. 2.5.
    .. [2] A. Picard et al., "Revised formula for the density of moist air (CIPM-2007)",
       Metrologia 45 (2008) 149-155.

    Examples
    --------
    >>> y = water_mass_fraction(np.array(288.15), np.array(101325.0), np.array(0.6))
    >>> round(float(y), 5)  # CoolProp HAPropsSI (ASHRAE RP-1485): W/(1+W) = 0.00633
    0.00633
    """
    sat = RH >= 1.0
    rc = np.minimum(RH, 1.0)
    xw = rc * enhancement_factor(T, p) * saturation_pressure(T) / p
    if status is not None:
        boil = xw >= 1.0
        np.bitwise_or(status, np.uint32(Reason.HUMIDITY_SATURATED), out=status, where=sat | boil)
    xw = np.minimum(xw, 0.999)
    mw = xw * _M_W
    return np.asarray(mw / (mw + (1.0 - xw) * _M_DRY))


def humid_air_fluid(y_w: float | FloatArray) -> kernel.Fluid:
    r"""Humid air per kg of humid air as a kernel fluid of two basis parts.

    Parameters
    ----------
    y_w : float or ndarray
        Water mass fraction [-] (from :func:`water_mass_fraction`).

    Returns
    -------
    models.properties.kernel.Fluid
        Rows ``dry air + y_w (water - dry air)``, gas constant
        ``R_dry + y_w (R_w - R_dry)``.

    Notes
    -----
    .. math:: c(y_w) = c_{dry} + y_w\,(c_{H_2O} - c_{dry})

    exact, because the NASA polynomials are linear in the mass fractions; the rows of the two
    parts are computed once, at import.

    References
    ----------
    .. [1] B. J. McBride, S. Gordon, M. A. Reno, NASA TM-4513, 1993.

    Examples
    --------
    >>> air = humid_air_fluid(0.0)
    >>> round(float(air.cp(np.array([300.0]))[0]), 1)  # dry air, NASA TM-4513 data
    1004.8
    """
    return kernel.Fluid([(_ROWS_DRY, 1.0), (_ROWS_WMD, y_w)], _R_DRY + y_w * (_R_W - _R_DRY))

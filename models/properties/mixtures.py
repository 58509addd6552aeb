"""Ideal-gas mixture properties and the real-gas departure of air-like gases.

Length (about 700 lines, above the project's 600): one class, the Mixture front, with its
constructors, properties and three checked solvers; most of it is documentation.

All quantities are SI: T [K], p [Pa] (absolute), h [J/kg], cp and s [J/(kg K)], molar mass
[kg/mol], compositions as mole (``x``) or mass (``y``) fractions over
:data:`models.properties.species.SPECIES` on the last axis.  Every function is vectorised and
broadcasts over a batch shape ``(...)``.

Exceptions and status
---------------------
Misuse by the caller (a composition with negative entries or not summing to 1, a wrong last-axis
length) raises :class:`models.status.ModelInputError`.  Bad plant data never raises: the affected
elements are NaN and the solvers return a ``uint32`` status array of :class:`models.status.Reason`
bits (``TEMPERATURE_OUT_OF_RANGE``, ``NOT_CONVERGED``, ``INPUT_MISSING``, ``INPUT_NONPHYSICAL``,
``PRESSURE_OUT_OF_RANGE``).  The plain property functions (``h``, ``cp``,
``s0``, ``s``) return NaN outside ``T_MIN..T_MAX`` without a status array.

One engine
----------
A :class:`Mixture` is a checked front over the property kernel (:mod:`models.properties.kernel`):
the species coefficient rows, their mixing (linear in the mass fractions, so each property is
one Horner polynomial, not a loop over species), the real-gas departure and the Newton loop
are the kernel's; this module adds the input checks, the status bits and the pressure and
mixing terms of the entropy.  The gas-turbine reconstruction uses the same kernel directly.

References
----------
.. [1] B. J. McBride, S. Gordon, M. A. Reno, "Coefficients for Calculating Thermodynamic and
   Transport Properties of Individual Species", NASA TM-4513, 1993.
.. [2] E. W. Lemmon, R. T. Jacobsen, S. G. Penoncello, D. G. Friend, "Thermodynamic properties
   of air and mixtures of nitrogen, argon, and oxygen from 60 to 2000 K at pressures to
   2000 MPa", J. Phys. Chem. Ref. Data 29 (2000) 331-385.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from models.properties import kernel
from models.properties import thermo_data as _td
from models.properties.species import N_SPECIES, SPECIES
from models.status import ModelInputError, Reason

__all__ = [
    "MAX_ITER",
    "MOLAR_MASS",
    "P_MAX_REAL",
    "P_REF",
    "R_UNIVERSAL",
    "T_MAX",
    "T_MIN",
    "T_REF",
    "Mixture",
    "check_composition",
    "compressibility",
    "residual",
]

FloatArray = NDArray[np.float64]
StatusArray = NDArray[np.uint32]

#: Lowest temperature the property functions accept [K].
T_MIN: float = 200.0
#: Highest temperature the property functions accept [K].
T_MAX: float = 3000.0
#: Standard-state pressure of the NASA data [Pa].
P_REF: float = kernel.P_REF
#: Reference temperature of the sensible enthalpy, h(T_REF) = 0 [K].
T_REF: float = kernel.T_REF
#: Highest pressure of the real-gas departure fit [Pa].
P_MAX_REAL: float = 6.0e6
#: Molar gas constant [J/(mol K)].
R_UNIVERSAL: float = kernel.R_UNIVERSAL
#: Molar masses over SPECIES [kg/mol] (ISO 6976:2016 atomic weights).
MOLAR_MASS: FloatArray = _td.MOLAR_MASS.copy()
MOLAR_MASS.flags.writeable = False
#: Newton iteration cap of the temperature solvers.
MAX_ITER: int = 8
#: Convergence criterion of the temperature solvers [K].
_T_TOL: float = 1e-6
#: Tolerance on the sum of a composition [-].
_SUM_TOL: float = 1e-5


# --------------------------------------------------------------------------------------------
# Small helpers
# --------------------------------------------------------------------------------------------
def _f(a: ArrayLike) -> FloatArray:
    return np.asarray(a, dtype=np.float64)


def _t_out_of_range(T: FloatArray) -> NDArray[np.bool_]:
    with np.errstate(invalid="ignore"):
        return ~((T >= T_MIN) & (T <= T_MAX))


def _compact(z: FloatArray, name: str) -> tuple[NDArray[np.intp], FloatArray]:
    """Validate a composition (..., N_SPECIES) and return (present species, their fractions).

    Rows containing NaN pass through (and give NaN properties); the result is normalised.
    """
    if z.ndim == 0 or z.shape[-1] != N_SPECIES:
        raise ModelInputError(
            name, z.shape, f"last axis of length {N_SPECIES} ({', '.join(SPECIES)})"
        )
    present = np.any(z != 0.0, axis=tuple(range(z.ndim - 1))) if z.ndim > 1 else z != 0.0
    idx = np.flatnonzero(present)
    if idx.size == 0:
        raise ModelInputError(f"sum({name})", 0.0, f"1 +/- {_SUM_TOL:g}")
    zk = z[..., idx]
    tot = zk.sum(axis=-1)
    with np.errstate(invalid="ignore"):
        zmin = np.nanmin(zk) if np.isfinite(tot).any() else 0.0
        if zmin < -1e-12:
            rows = np.any(zk < -1e-12, axis=-1)
            raise ModelInputError(name, z[rows][0].tolist(), "fractions >= 0")
        off = np.abs(tot - 1.0) > _SUM_TOL  # NaN rows compare False
    if np.any(off):
        raise ModelInputError(f"sum({name})", float(tot[off][0]), f"1 +/- {_SUM_TOL:g}")
    if zmin < 0.0:  # round-off negatives
        zk = np.clip(zk, 0.0, None)
        tot = zk.sum(axis=-1)
    zk /= tot[..., None]
    return idx, zk


def check_composition(z: FloatArray, name: str) -> FloatArray:
    """Return a validated, normalised composition over all species.

    Parameters
    ----------
    z : ndarray, shape (..., N_SPECIES)
        Mole or mass fractions [-]; rows containing NaN pass through.
    name : str
        Name of the argument, for the error message.

    Returns
    -------
    ndarray, shape (..., N_SPECIES)
        The fractions, normalised to sum 1 [-].

    Raises
    ------
    ModelInputError
        Wrong last-axis length, negative fractions or a sum off 1 by more than 1e-5.
    """
    idx, zk = _compact(z, name)
    out = np.zeros(z.shape)
    out[..., idx] = zk
    return out


def _status_like(shape: tuple[int, ...]) -> StatusArray:
    return np.zeros(shape, dtype=np.uint32)


# --------------------------------------------------------------------------------------------
# Mixture
# --------------------------------------------------------------------------------------------
@dataclass(frozen=True, eq=False)
class Mixture:
    """An ideal-gas mixture of batch shape ``(...)``.

    Build it with :meth:`from_mole_fractions` or :meth:`from_mass_fractions`; its properties
    come from a :class:`models.properties.kernel.Fluid` of the same composition (the mixture's
    coefficient rows, built on first use, so each property is one polynomial).

    Attributes
    ----------
    M : ndarray, shape (...)
        Molar mass [kg/mol].
    R : ndarray, shape (...)
        Specific gas constant R_u / M [J/(kg K)].
    y : ndarray, shape (..., n_species)
        Mass fractions [-].
    """

    M: FloatArray
    R: FloatArray
    _idx: NDArray[np.intp] = field(repr=False)  # species present somewhere in the batch
    _yk: FloatArray = field(repr=False)  # mass fractions of those species (..., k)
    _s_mix: FloatArray = field(repr=False)  # -R sum x ln x [J/(kg K)]
    _cp_ref: FloatArray = field(repr=False)  # cp(298.15 K)
    _phi_ref: FloatArray = field(repr=False)  # s0(298.15 K)
    _fluid: kernel.Fluid = field(repr=False, compare=False)  # the kernel's rows of this mixture

    # ---- construction ------------------------------------------------------------------
    @classmethod
    def from_mass_fractions(cls, y: ArrayLike) -> Mixture:
        """Mixture from mass fractions ``y`` (..., n_species) [-].

        Raises
        ------
        ModelInputError
            Wrong last-axis length, negative fractions or a sum off 1 by more than 1e-5.
            Rows containing NaN are accepted and give NaN properties.
        """
        idx, yk = _compact(_f(y), "y")
        return cls._build(idx, yk, None)

    @classmethod
    def from_mole_fractions(cls, x: ArrayLike) -> Mixture:
        """Mixture from mole fractions ``x`` (..., n_species) [-] (same checks as above)."""
        idx, xk = _compact(_f(x), "x")
        return cls._build(idx, None, xk)

    @classmethod
    def _build(cls, idx: NDArray[np.intp], yk: FloatArray | None, xk: FloatArray | None) -> Mixture:
        mk = MOLAR_MASS[idx]
        if yk is not None:
            inv_m = _f(yk @ (1.0 / mk))  # mol/kg
            M = _f(1.0 / inv_m)
            xk = yk * (M[..., None] / mk)
        else:
            assert xk is not None
            M = _f(xk @ mk)
            inv_m = _f(1.0 / M)
            yk = xk * (mk / M[..., None])
        R = _f(R_UNIVERSAL * inv_m)
        with np.errstate(divide="ignore", invalid="ignore"):
            lx = np.log(xk)
            lx *= xk
            lx[xk <= 0.0] = 0.0  # x ln x -> 0
        s_mix = _f(-R * lx.sum(axis=-1))
        for a in (M, R, yk, s_mix):
            a.flags.writeable = False
        mix = cls(M, R, idx, yk, s_mix, M, M, kernel.Fluid.from_mass_fractions(yk, R, idx))
        t = _f(T_REF)
        object.__setattr__(mix, "_cp_ref", _f(mix._cp_raw(t)))
        object.__setattr__(mix, "_phi_ref", _f(mix._phi_raw(t)))
        return mix

    # ---- basic attributes ----------------------------------------------------------------
    @property
    def shape(self) -> tuple[int, ...]:
        """Batch shape of the mixture."""
        return tuple(self.M.shape)

    @property
    def y(self) -> FloatArray:
        """Mass fractions (..., n_species) [-]."""
        out = np.zeros((*self.shape, N_SPECIES))
        out[..., self._idx] = self._yk
        return out

    @property
    def x(self) -> FloatArray:
        """Mole fractions (..., n_species) [-]."""
        out = np.zeros((*self.shape, N_SPECIES))
        out[..., self._idx] = self._yk * (self.M[..., None] / MOLAR_MASS[self._idx])
        return out

    @property
    def s_mixing(self) -> FloatArray:
        """Ideal mixing entropy -R Σ x_i ln x_i [J/(kg K)]."""
        return self._s_mix

    # ---- the kernel (unchecked) -------------------------------------------------------------
    def _fit(self, out: FloatArray, T: FloatArray) -> FloatArray:
        """Reshape kernel output to the broadcast shape of T and the batch.

        The kernel keeps a unit batch axis for a mixture without one.
        """
        shape = np.broadcast_shapes(T.shape, self.shape)
        return out if out.shape == shape else out.reshape(shape)

    def _h_raw(self, T: FloatArray) -> FloatArray:
        return self._fit(self._fluid.evaluate(kernel.H, T), T)

    def _cp_raw(self, T: FloatArray) -> FloatArray:
        return self._fit(self._fluid.evaluate(kernel.CP, T), T)

    def _phi_raw(self, T: FloatArray) -> FloatArray:
        return self._fit(self._fluid.evaluate(kernel.PHI, T), T)

    def _h_cp_raw(self, T: FloatArray) -> tuple[FloatArray, FloatArray]:
        h, cp = self._fluid.evaluate_with_cp(kernel.H, T)
        return self._fit(h, T), self._fit(cp, T)

    def _phi_cp_raw(self, T: FloatArray) -> tuple[FloatArray, FloatArray]:
        phi, cp = self._fluid.evaluate_with_cp(kernel.PHI, T)
        return self._fit(phi, T), self._fit(cp, T)

    @staticmethod
    def _nan_out(out: FloatArray, T: FloatArray) -> FloatArray:
        bad = _t_out_of_range(T)
        if bad.any():
            return np.where(bad, np.nan, out)
        return out

    # ---- properties ------------------------------------------------------------------------
    def h(self, T: ArrayLike) -> FloatArray:
        """Sensible enthalpy h(T) - h(298.15 K) [J/kg].

        Parameters
        ----------
        T : array_like
            Temperature [K]; NaN is returned outside ``T_MIN..T_MAX``.

        Notes
        -----
        h = Σ y_i (R_u/M_i) [a1 T + a2 T²/2 + a3 T³/3 + a4 T⁴/4 + a5 T⁵/5 + a6] - h(298.15 K),
        NASA 7-coefficient form [1]_, evaluated as one polynomial with mixture coefficients.
        The heat of combustion is not included (it enters via the fuel's LHV).
        """
        T = _f(T)
        return self._nan_out(self._h_raw(T), T)

    def cp(self, T: ArrayLike) -> FloatArray:
        """Isobaric specific heat capacity of the ideal gas [J/(kg K)] at T [K]."""
        T = _f(T)
        return self._nan_out(self._cp_raw(T), T)

    def cv(self, T: ArrayLike) -> FloatArray:
        """Isochoric specific heat capacity cp - R of the ideal gas [J/(kg K)] at T [K]."""
        out: FloatArray = self.cp(T) - self.R
        return out

    def gamma(self, T: ArrayLike) -> FloatArray:
        """Ratio of specific heats cp/(cp - R) of the ideal gas [-] at T [K]."""
        cp = self.cp(T)
        out: FloatArray = cp / (cp - self.R)
        return out

    def s0(self, T: ArrayLike) -> FloatArray:
        """Standard-state entropy function φ(T) [J/(kg K)].

        Notes
        -----
        φ(T) = Σ y_i s°_i(T) / M_i = ∫_{298.15}^{T} cp/T dT + s°(298.15 K) at P_REF = 1 bar,
        with no pressure and no mixing term.
        """
        T = _f(T)
        with np.errstate(invalid="ignore", divide="ignore"):
            out = self._phi_raw(T)
        return self._nan_out(out, T)

    def s(self, T: ArrayLike, p: ArrayLike) -> FloatArray:
        """Ideal-gas mixture entropy [J/(kg K)] at T [K] and p [Pa].

        Notes
        -----
        s = φ(T) - R ln(p / P_REF) - R Σ x_i ln x_i  (per kg of mixture).  NaN for p <= 0.
        """
        p = _f(p)
        with np.errstate(invalid="ignore", divide="ignore"):
            lnp = np.log(np.where(p > 0, p, np.nan) / P_REF)
        out: FloatArray = self.s0(T) - self.R * lnp + self._s_mix
        return out

    def h_real(self, T: ArrayLike, p: ArrayLike) -> FloatArray:
        """Enthalpy with the real-gas departure, h(T) + (h - h_ig)(T, p) [J/kg]."""
        dh, _ = residual(T, p, self)
        out: FloatArray = self.h(T) + dh
        return out

    def s_real(self, T: ArrayLike, p: ArrayLike) -> FloatArray:
        """Entropy with the real-gas departure, s(T, p) + (s - s_ig)(T, p) [J/(kg K)]."""
        _, ds = residual(T, p, self)
        out: FloatArray = self.s(T, p) + ds
        return out

    # ---- solvers ---------------------------------------------------------------------------
    def _finish(
        self, T: FloatArray, done: NDArray[np.bool_], status: StatusArray
    ) -> tuple[FloatArray, StatusArray]:
        # a root on the boundary may land a rounding error outside: accept within 1e-6 K
        T = np.clip(T, T_MIN, T_MAX, out=T, where=np.abs(T - np.clip(T, T_MIN, T_MAX)) < _T_TOL)
        # an iterate outside the range means the root is outside (h and φ increase with T)
        oor = _t_out_of_range(T) & (status == 0)
        status[oor] |= np.uint32(Reason.TEMPERATURE_OUT_OF_RANGE)
        nc = ~done & (status == 0)
        status[nc] |= np.uint32(Reason.NOT_CONVERGED)
        bad = status != 0
        if bad.any():
            T = np.where(bad, np.nan, T)
        return T, status

    def T_from_h(
        self, h: ArrayLike, T_guess: ArrayLike | None = None, p: ArrayLike | None = None
    ) -> tuple[FloatArray, StatusArray]:
        """Temperature [K] at sensible enthalpy h [J/kg] (Newton, at most MAX_ITER steps).

        Parameters
        ----------
        h : array_like
            Sensible enthalpy [J/kg] as returned by :meth:`h` (or :meth:`h_real` when ``p``
            is given).
        T_guess : array_like, optional
            Starting temperature [K]; default from cp(298.15 K).
        p : array_like, optional
            Pressure [Pa]; when given, ``h`` includes the real-gas departure.

        Returns
        -------
        T : ndarray
            Temperature [K]; NaN where status is not zero.
        status : ndarray of uint32
            Reason bits: INPUT_MISSING (h NaN), INPUT_NONPHYSICAL (p <= 0),
            PRESSURE_OUT_OF_RANGE (p > P_MAX_REAL), NOT_CONVERGED (|ΔT| >= 1e-6 K after
            MAX_ITER steps), TEMPERATURE_OUT_OF_RANGE (outside T_MIN..T_MAX).
        """
        h = _f(h)
        pa = None if p is None else _f(p)
        shapes = [h.shape, self.shape] + ([] if pa is None else [pa.shape])
        if T_guess is not None:
            shapes.append(np.shape(T_guess))
        shape = np.broadcast_shapes(*shapes)
        status = _status_like(shape)
        hw = np.broadcast_to(h, shape)
        miss = ~np.isfinite(hw)
        if miss.any():
            status[miss] |= np.uint32(Reason.INPUT_MISSING)
            hw = np.where(miss, 0.0, hw)
        if pa is not None:
            pa = self._check_p(pa, shape, status)
        if T_guess is None:
            # cp(298.15 K), then the cp at the midpoint of that first estimate
            T = np.broadcast_to(T_REF + hw / self._cp_ref, shape).copy()
            np.clip(T, 100.0, 5000.0, out=T)
            Tm = T + T_REF
            Tm *= 0.5
            T = np.array(np.broadcast_to(T_REF + hw / self._cp_raw(Tm), shape), dtype=np.float64)
        else:
            T = np.broadcast_to(_f(T_guess), shape).copy()
            gbad = ~np.isfinite(T)
            T[gbad] = 1000.0
        np.clip(T, 100.0, 5000.0, out=T)

        def step(T: FloatArray) -> FloatArray:
            hv, cpv = self._h_cp_raw(T)
            if pa is not None:
                hv = hv + self.R * T * kernel.departure(kernel.DEPARTURE_H, T, pa)
                cpv = cpv + self.R * kernel.departure(kernel.DEPARTURE_CP, T, pa)
            dT = hv - hw
            dT /= cpv
            return dT

        T, done = kernel.newton(step, T, tol=_T_TOL, max_iter=MAX_ITER)
        return self._finish(T, done, status)

    def _check_p(self, p: FloatArray, shape: tuple[int, ...], status: StatusArray) -> FloatArray:
        pb = np.broadcast_to(p, shape)
        miss = np.isnan(pb)
        with np.errstate(invalid="ignore"):
            nonphys = ~miss & ~(pb > 0)
            high = pb > P_MAX_REAL
        bad = miss | nonphys | high
        if bad.any():
            status[miss] |= np.uint32(Reason.INPUT_MISSING)
            status[nonphys] |= np.uint32(Reason.INPUT_NONPHYSICAL)
            status[high] |= np.uint32(Reason.PRESSURE_OUT_OF_RANGE)
            pb = np.where(bad, P_REF, pb)
        return pb

    def _solve_phi(
        self,
        phi_t: FloatArray,
        T: FloatArray,
        status: StatusArray,
        p_real: FloatArray | None,
    ) -> tuple[FloatArray, StatusArray]:
        """Newton on φ(T) [+ s_res(T, p_real)] = phi_t from the guess T."""
        np.clip(T, 100.0, 5000.0, out=T)

        def step(T: FloatArray) -> FloatArray:
            phi, cpv = self._phi_cp_raw(T)
            if p_real is not None:
                phi = phi + self.R * kernel.departure(kernel.DEPARTURE_S, T, p_real)
                cpv = cpv + self.R * kernel.departure(kernel.DEPARTURE_CP, T, p_real)
            dT = phi - phi_t
            dT *= T
            dT /= cpv
            return dT

        T, done = kernel.newton(step, T, tol=_T_TOL, max_iter=MAX_ITER)
        return self._finish(T, done, status)

    def T_from_s(
        self,
        s: ArrayLike,
        p: ArrayLike,
        T_guess: ArrayLike | None = None,
        real_gas: bool = False,
    ) -> tuple[FloatArray, StatusArray]:
        """Temperature [K] at entropy s [J/(kg K)] and pressure p [Pa] (Newton).

        Parameters
        ----------
        s : array_like
            Mixture entropy as from :meth:`s` (or :meth:`s_real` with ``real_gas``) [J/(kg K)].
        p : array_like
            Pressure [Pa].
        T_guess : array_like, optional
            Starting temperature [K].
        real_gas : bool
            Include the real-gas departure (:func:`residual`).

        Returns
        -------
        T, status
            As :meth:`T_from_h`.

        Notes
        -----
        Solves φ(T) [+ s_res(T, p)] = s + R ln(p/P_REF) + R Σ x_i ln x_i.
        """
        s = _f(s)
        p = _f(p)
        shapes = [s.shape, p.shape, self.shape]
        if T_guess is not None:
            shapes.append(np.shape(T_guess))
        shape = np.broadcast_shapes(*shapes)
        status = _status_like(shape)
        sw = np.broadcast_to(s, shape)
        miss = ~np.isfinite(sw)
        if miss.any():
            status[miss] |= np.uint32(Reason.INPUT_MISSING)
            sw = np.where(miss, 0.0, sw)
        pb = self._check_p(p, shape, status) if real_gas else self._check_p_ideal(p, shape, status)
        phi_t = sw + self.R * np.log(pb / P_REF) - self._s_mix
        if T_guess is None:
            # cp(298.15 K), then the cp at the geometric mean of that first estimate
            T = np.broadcast_to(T_REF * np.exp((phi_t - self._phi_ref) / self._cp_ref), shape)
            T = np.clip(T, 100.0, 5000.0)
            T = T_REF * np.exp((phi_t - self._phi_ref) / self._cp_raw(np.sqrt(T * T_REF)))
            T = np.array(np.broadcast_to(T, shape), dtype=np.float64)
        else:
            T = np.array(np.broadcast_to(_f(T_guess), shape), dtype=np.float64)
            T[~np.isfinite(T)] = 1000.0
        return self._solve_phi(phi_t, T, status, pb if real_gas else None)

    def _check_p_ideal(
        self, p: FloatArray, shape: tuple[int, ...], status: StatusArray
    ) -> FloatArray:
        pb = np.broadcast_to(p, shape)
        with np.errstate(invalid="ignore"):
            ok = pb > 0
        if not ok.all():
            miss = np.isnan(pb)
            status[miss] |= np.uint32(Reason.INPUT_MISSING)
            status[~miss & ~ok] |= np.uint32(Reason.INPUT_NONPHYSICAL)
            pb = np.where(ok, pb, P_REF)
        return pb

    def isentropic_T(
        self, T1: ArrayLike, p1: ArrayLike, p2: ArrayLike, real_gas: bool = False
    ) -> tuple[FloatArray, StatusArray]:
        """Isentropic end temperature T2s [K] with s(T2s, p2) = s(T1, p1).

        Parameters
        ----------
        T1 : array_like
            Start temperature [K].
        p1, p2 : array_like
            Start and end pressure [Pa].
        real_gas : bool
            Include the real-gas departure at both ends.

        Returns
        -------
        T2s : ndarray
            [K]; NaN where status is not zero.
        status : ndarray of uint32
            As :meth:`T_from_h`; TEMPERATURE_OUT_OF_RANGE also for T1.

        Notes
        -----
        Ideal gas: φ(T2s) = φ(T1) + R ln(p2/p1); real gas: φ(T2s) + s_res(T2s, p2) =
        φ(T1) + s_res(T1, p1) + R ln(p2/p1).  The composition is frozen.
        """
        T1 = _f(T1)
        p1 = _f(p1)
        p2 = _f(p2)
        shape = np.broadcast_shapes(T1.shape, p1.shape, p2.shape, self.shape)
        status = _status_like(shape)
        Tb = np.broadcast_to(T1, shape)
        miss = np.isnan(Tb)
        with np.errstate(invalid="ignore"):
            nonphys = ~miss & ~(Tb > 0)
        oor = _t_out_of_range(Tb) & ~miss & ~nonphys
        if miss.any() or nonphys.any() or oor.any():
            status[miss] |= np.uint32(Reason.INPUT_MISSING)
            status[nonphys] |= np.uint32(Reason.INPUT_NONPHYSICAL)
            status[oor] |= np.uint32(Reason.TEMPERATURE_OUT_OF_RANGE)
            Tb = np.where(status != 0, T_REF, Tb)
        chk = self._check_p if real_gas else self._check_p_ideal
        p1b = chk(p1, shape, status)
        p2b = chk(p2, shape, status)
        phi1, cp1 = self._phi_cp_raw(Tb)
        lnpr = np.log(p2b / p1b)
        phi_t = phi1 + self.R * lnpr
        if real_gas:
            sr1 = kernel.departure(kernel.DEPARTURE_S, Tb, p1b)
            phi_t = phi_t + self.R * sr1
        # first estimate with cp(T1), then with cp at the geometric mean temperature
        dlnT = self.R * lnpr
        T = Tb * np.exp(dlnT / cp1)
        T = np.clip(T, 100.0, 5000.0)
        T = Tb * np.exp(dlnT / self._cp_raw(np.sqrt(T * Tb)))
        T = np.array(np.broadcast_to(T, shape), dtype=np.float64)
        return self._solve_phi(phi_t, T, status, p2b if real_gas else None)

    # ---- blending --------------------------------------------------------------------------
    @staticmethod
    def blend(parts: Sequence[tuple[Mixture, NDArray[np.float64] | float]]) -> Mixture:
        """Mass-weighted mixture of ``parts`` = [(mixture, mass or mass flow), ...].

        Weights [kg or kg/s] broadcast with the mixtures' batch shapes; the result is exact
        (NASA coefficients are linear in the mass fractions).
        """
        if not parts:
            raise ModelInputError("parts", parts, "at least one (Mixture, weight) pair")
        num: Any = 0.0
        den: Any = 0.0
        for mix, w in parts:
            wa = _f(w)
            with np.errstate(invalid="ignore"):
                if np.any(wa < 0):
                    raise ModelInputError("weight", wa.tolist(), ">= 0 kg")
            num = num + mix.y * wa[..., None]
            den = den + wa
        with np.errstate(invalid="ignore", divide="ignore"):
            y = _f(num / _f(den)[..., None])
        return Mixture.from_mass_fractions(y)


# --------------------------------------------------------------------------------------------
# Real-gas departure
# --------------------------------------------------------------------------------------------
def residual(T: ArrayLike, p: ArrayLike, mix: Mixture) -> tuple[FloatArray, FloatArray]:
    r"""Real-gas departure (h - h_ig) [J/kg] and (s - s_ig) [J/(kg K)] at the same T, p.

    Parameters
    ----------
    T : array_like
        Temperature [K], ``T_MIN..T_MAX`` (NaN outside).
    p : array_like
        Pressure [Pa], 0 < p <= P_MAX_REAL (NaN outside).
    mix : Mixture
        The gas; its specific gas constant scales the molar departure.

    Notes
    -----
    .. math::

        h - h^{ig} = R T\, d_h(T, p), \qquad s - s^{ig} = R\, d_s(T, p)

    Pressure-explicit truncated virial form fitted to the Lemmon et al. (2000) air equation of
    state [2]_ (fit in ``tools/gen_thermo_data.py``), with τ = 300 K / T, π = p / 1 MPa::

        Z - 1 = π Σ b_i τ^i + π² Σ c_i τ^i
        (h - h_ig)/(R T) = π Σ i b_i τ^i + (π²/2) Σ i c_i τ^i
        (s - s_ig)/R = -π Σ (1-i) b_i τ^i - (π²/2) Σ (1-i) c_i τ^i

    The molar departure of air is applied to any mixture (corresponding states on a molar
    basis): right for dry and humid air at compressor conditions, an approximation for
    combustion gas, where at turbine-inlet temperatures the departure is small anyway.

    References
    ----------
    .. [1] E. W. Lemmon, R. T. Jacobsen, S. G. Penoncello, D. G. Friend, J. Phys. Chem. Ref.
       Data 29 (2000) 331-385 (the equation of state the fit follows).
    """
    T = _f(T)
    p = _f(p)
    with np.errstate(invalid="ignore", divide="ignore"):
        bad = _t_out_of_range(T) | ~((p > 0) & (p <= P_MAX_REAL))
        hr = kernel.departure(kernel.DEPARTURE_H, T, p)
        sr = kernel.departure(kernel.DEPARTURE_S, T, p)
    dh: FloatArray = mix.R * T * hr
    ds: FloatArray = mix.R * sr
    if np.any(bad):
        dh = np.where(bad, np.nan, dh)
        ds = np.where(bad, np.nan, ds)
    return dh, ds


def compressibility(T: ArrayLike, p: ArrayLike) -> FloatArray:
    r"""Compressibility factor Z = p/(ρ R T) of air [-] from the fit of :func:`residual`.

    Notes
    -----
    .. math::

        Z = 1 + \pi \sum_i b_i \tau^i + \pi^2 \sum_i c_i \tau^i, \quad \tau = T_s / T,\;
        \pi = p / p_s

    References
    ----------
    .. [1] E. W. Lemmon, R. T. Jacobsen, S. G. Penoncello, D. G. Friend, J. Phys. Chem. Ref.
       Data 29 (2000) 331-385 (the equation of state the fit follows).
    """
    T = _f(T)
    p = _f(p)
    with np.errstate(invalid="ignore", divide="ignore"):
        bad = _t_out_of_range(T) | ~((p > 0) & (p <= P_MAX_REAL))
        z1 = kernel.departure(kernel.DEPARTURE_Z, T, p)
    z: FloatArray = 1.0 + z1
    return np.where(bad, np.nan, z) if np.any(bad) else z

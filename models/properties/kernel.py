r"""The fast property kernel: ideal-gas mixture properties from coefficient rows, Newton solvers.

Length (about 900 lines, above the project's 600): the hot path of every property
evaluation (rows, departure, Newton, Fluid) is kept in one module so that each piece can
be read beside the others; about two thirds of it is documentation.

Every ideal-gas property in ``models`` is evaluated here, once:
:class:`models.properties.mixtures.Mixture` is a checked front over a :class:`Fluid`, and the
gas-turbine reconstruction uses :class:`Fluid` objects directly.

Coefficient rows
----------------
NASA 7-coefficient polynomials (:mod:`models.properties.thermo_data`) are linear in the
species amounts, so the mass-specific coefficients of any mixture are the mass-fraction
weighted sum of the species rows :data:`SPECIES_ROWS` (shape ``(2, N_SPECIES, 17)``: low and
high range, species, row).  Row groups (slices :data:`H`, :data:`CP`, :data:`PHI`):

.. math::

    h(T) &= \sum_{k=0}^{5} c_k T^k \quad \text{(rows 0-5, sensible: } h(298.15\,K) = 0)

    c_p(T) &= \sum_{k=0}^{4} c_{6+k} T^k \quad \text{(rows 6-10)}

    \varphi(T) &= c_{11} \ln T + \sum_{k=1}^{4} c_{11+k} T^k + c_{16} \quad
    \text{(rows 11-16)}

with :math:`\varphi(T) = s^\circ(T)` at :data:`P_REF` (no pressure and no mixing term).  The
high-range constants are shifted so that h and φ are exactly continuous at :data:`T_MID`
(the published fits jump by a few parts per million there; a jump would leave a Newton solve
without a root in the gap).  A :class:`Fluid` is ``base + Σ w_k tab_k``: dry air plus
``y_w`` times (water minus dry air) is humid air per kg of humid air, and adding ``f`` times
the species change of burnt fuel gives the combustion gas per kg of air.

Real-gas departure
------------------
Truncated virial fit to the Lemmon et al. (2000) air equation of state
(:data:`models.properties.thermo_data.AIR_VIRIAL_B`, ``_C``), τ = T_s / T, π = p / p_s:

.. math::

    Z - 1 &= \pi \sum_i b_i \tau^i + \pi^2 \sum_i c_i \tau^i

    \frac{h - h^{ig}}{R T} &= \pi \sum_i i\, b_i \tau^i
        + \frac{\pi^2}{2} \sum_i i\, c_i \tau^i

    \frac{s - s^{ig}}{R} &= -\pi \sum_i (1 - i)\, b_i \tau^i
        - \frac{\pi^2}{2} \sum_i (1 - i)\, c_i \tau^i

    \frac{c_p - c_p^{ig}}{R} &\approx \pi \sum_i i (1 - i)\, b_i \tau^i
        + \frac{\pi^2}{2} \sum_i i (1 - i)\, c_i \tau^i

applied on a molar basis to any mixture (corresponding states), scaled by its gas constant.

Newton solves
-------------
:func:`newton` iterates ``T <- T - step(T)`` with a bounded iteration count and a
convergence flag per element, never a silent wrong answer; a block of several *groups*
(chunks) stops each group on its own, so results do not depend on how a batch is split.

Nothing here checks its input: fronts (:class:`models.properties.mixtures.Mixture`, the
unit types) flag bad elements with :class:`models.status.Reason` bits and substitute safe
values before they call the kernel.

References
----------
.. [1] B. J. McBride, S. Gordon, M. A. Reno, "Coefficients for Calculating Thermodynamic and
   Transport Properties of Individual Species", NASA TM-4513, 1993.
.. [2] E. W. Lemmon, R. T. Jacobsen, S. G. Penoncello, D. G. Friend, "Thermodynamic properties
   of air and mixtures of nitrogen, argon, and oxygen from 60 to 2000 K at pressures to
   2000 MPa", J. Phys. Chem. Ref. Data 29 (2000) 331-385.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence

import numpy as np
from numpy.typing import NDArray

from models.properties import thermo_data as _td
from models.properties.species import N_SPECIES
from models.status import ModelInputError

__all__ = [
    "CP",
    "DEPARTURE_CP",
    "DEPARTURE_H",
    "DEPARTURE_S",
    "DEPARTURE_Z",
    "NEWTON_MAX_ITER",
    "NEWTON_TOL",
    "N_ROWS",
    "PHI",
    "P_REF",
    "R_UNIVERSAL",
    "SPECIES_ROWS",
    "T_MID",
    "T_REF",
    "Fluid",
    "Groups",
    "H",
    "departure",
    "departure_coefficients",
    "log_mean",
    "mixture_rows",
    "newton",
    "poly",
]

FloatArray = NDArray[np.float64]
Num = float | FloatArray

#: Molar gas constant [J/(mol K)].
R_UNIVERSAL: float = float(_td.R_UNIVERSAL)
#: Reference temperature of the sensible enthalpy, h(T_REF) = 0 [K].
T_REF: float = 298.15
#: Standard-state pressure of the NASA data [Pa].
P_REF: float = 1.0e5
#: Break temperature between the low and the high range of every species [K].
T_MID: float = 1000.0
#: Coefficient rows per range: h (0-5), cp (6-10), φ (11-16).
N_ROWS: int = 17
#: Row group of the sensible enthalpy [J/kg]: ascending powers T^0..T^5.
H: slice = slice(0, 6)
#: Row group of cp [J/(kg K)]: ascending powers T^0..T^4.
CP: slice = slice(6, 11)
#: Row group of φ [J/(kg K)]: ln T, T..T^4, constant.
PHI: slice = slice(11, 17)
#: Step criterion of the kernel's Newton solves [K]: with quadratic convergence (C < 1e-3 /K)
#: the error after a step of 0.03 K is below 1e-5 K (checked in the tests against a tight
#: solve).
NEWTON_TOL: float = 0.03
#: Iteration cap of the kernel's Newton solves.
NEWTON_MAX_ITER: int = 10
#: Bounds the Newton iterates are clipped to between steps [K].
_CLIP = (100.0, 5000.0)

#: Rows of the departure table: Z - 1, (h - h_ig)/(R T), (s - s_ig)/R, (cp - cp_ig)/R.
DEPARTURE_Z, DEPARTURE_H, DEPARTURE_S, DEPARTURE_CP = 0, 1, 2, 3


def _h_over_r(a: FloatArray, T: float) -> FloatArray:
    """h/R [K] of NASA-7 rows ``a`` (n, 7) at T [K]."""
    out: FloatArray = a[:, 5] + T * (
        a[:, 0] + T * (a[:, 1] / 2 + T * (a[:, 2] / 3 + T * (a[:, 3] / 4 + T * a[:, 4] / 5)))
    )
    return out


def _s_over_r(a: FloatArray, T: float) -> FloatArray:
    """s°/R [-] of NASA-7 rows ``a`` (n, 7) at T [K]."""
    out: FloatArray = (
        a[:, 0] * np.log(T)
        + T * (a[:, 1] + T * (a[:, 2] / 2 + T * (a[:, 3] / 3 + T * a[:, 4] / 4)))
        + a[:, 6]
    )
    return out


def _species_rows() -> FloatArray:
    """Mass-specific coefficient rows of every species, shape (2, N_SPECIES, 17), read only."""
    if not np.all(_td.T_MID == T_MID):
        raise RuntimeError("thermo_data: every species must break at 1000 K")  # pragma: no cover
    lo = np.array(_td.COEFF_LOW, dtype=np.float64)
    hi = np.array(_td.COEFF_HIGH, dtype=np.float64)
    h298 = _h_over_r(lo, T_REF)
    lo[:, 5] -= h298  # sensible enthalpy: h(298.15 K) = 0 for every species
    hi[:, 5] -= h298
    # h and s exactly continuous at the break
    hi[:, 5] += _h_over_r(lo, T_MID) - _h_over_r(hi, T_MID)
    hi[:, 6] += _s_over_r(lo, T_MID) - _s_over_r(hi, T_MID)
    out = np.empty((2, N_SPECIES, N_ROWS))
    for r, a in enumerate((lo, hi)):
        out[r, :, 0] = a[:, 5]
        out[r, :, 1] = a[:, 0]
        out[r, :, 2] = a[:, 1] / 2
        out[r, :, 3] = a[:, 2] / 3
        out[r, :, 4] = a[:, 3] / 4
        out[r, :, 5] = a[:, 4] / 5
        out[r, :, 6:11] = a[:, 0:5]
        out[r, :, 11] = a[:, 0]
        out[r, :, 12] = a[:, 1]
        out[r, :, 13] = a[:, 2] / 2
        out[r, :, 14] = a[:, 3] / 3
        out[r, :, 15] = a[:, 4] / 4
        out[r, :, 16] = a[:, 6]
    out *= (R_UNIVERSAL / np.asarray(_td.MOLAR_MASS))[None, :, None]
    out.flags.writeable = False
    return out


#: Mass-specific coefficient rows of every species over :data:`models.properties.species.
#: SPECIES`, shape (2 ranges, N_SPECIES, 17 rows) [J/kg, J/(kg K) per power of T]; read only.
SPECIES_ROWS: FloatArray = _species_rows()


def _departure_table() -> tuple[tuple[tuple[float, ...], tuple[float, ...]], ...]:
    i = np.arange(np.asarray(_td.AIR_VIRIAL_B).size, dtype=np.float64)
    b = np.asarray(_td.AIR_VIRIAL_B, dtype=np.float64)
    c = np.asarray(_td.AIR_VIRIAL_C, dtype=np.float64)
    rows = (
        (b, c),
        (i * b, i * c / 2),
        (-(1 - i) * b, -(1 - i) * c / 2),
        (i * (1 - i) * b, i * (1 - i) * c / 2),
    )
    # Python floats: the Horner loops below multiply arrays by scalars
    return tuple((tuple(map(float, bb)), tuple(map(float, cc))) for bb, cc in rows)


_DEPARTURE = _departure_table()
_V_T = float(_td.AIR_VIRIAL_T_SCALE)
_V_P = float(_td.AIR_VIRIAL_P_SCALE)


def poly(c: Sequence[Num] | FloatArray, T: FloatArray) -> FloatArray:
    r"""Evaluate a polynomial in ascending powers by Horner's rule, in place on one temporary.

    Parameters
    ----------
    c : sequence of float or ndarray
        Coefficients ``c[0] .. c[n-1]`` (n >= 2), each broadcasting against ``T``.
    T : ndarray
        Argument (a temperature [K] or a reduced temperature [-]).

    Returns
    -------
    ndarray
        ``c[0] + c[1] T + ... + c[n-1] T^(n-1)``, in the unit of the coefficients.

    Notes
    -----
    .. math:: p(T) = c_0 + T (c_1 + T (c_2 + \dots + T c_{n-1}))

    References
    ----------
    .. [1] D. E. Knuth, *The Art of Computer Programming*, vol. 2, 3rd ed., 1997, sec. 4.6.4.

    Examples
    --------
    >>> float(poly((1.0, 2.0, 3.0), np.array(2.0)))
    17.0
    """
    out: FloatArray = c[-1] * T
    for k in range(len(c) - 2, 0, -1):
        out += c[k]
        out *= T
    out += c[0]
    return out


def departure(row: int, T: FloatArray, p: Num) -> FloatArray:
    r"""Dimensionless real-gas departure of air at T and p (unchecked).

    Parameters
    ----------
    row : int
        :data:`DEPARTURE_Z` (Z - 1), :data:`DEPARTURE_H` ((h - h_ig)/(R T)),
        :data:`DEPARTURE_S` ((s - s_ig)/R) or :data:`DEPARTURE_CP` ((cp - cp_ig)/R).
    T : ndarray
        Temperature [K].
    p : float or ndarray
        Pressure [Pa].

    Returns
    -------
    ndarray
        The departure [-].

    Notes
    -----
    .. math:: d(T, p) = \pi \sum_i \beta_i \tau^i + \pi^2 \sum_i \gamma_i \tau^i,
        \quad \tau = T_s / T, \; \pi = p / p_s

    with (β, γ) the row's coefficients (module docstring) of the fit to Lemmon et al. 2000.

    References
    ----------
    .. [1] E. W. Lemmon et al., J. Phys. Chem. Ref. Data 29 (2000) 331-385.

    Examples
    --------
    >>> z = 1.0 + departure(DEPARTURE_Z, np.array(300.0), 1.0e6)
    >>> round(float(z), 4)  # air at 300 K, 1 MPa; CoolProp (Lemmon 2000 EOS): 0.9972
    0.9972
    """
    bc, cc = _DEPARTURE[row]
    tau = _V_T / T
    pi = p * (1.0 / _V_P)
    out: FloatArray = poly(cc, tau) * pi
    out += poly(bc, tau)
    out *= pi
    return out


def departure_coefficients(row: int, p: Num) -> list[Num]:
    r"""Coefficients of the departure polynomial in τ at fixed pressure.

    Parameters
    ----------
    row : int
        As :func:`departure`.
    p : float or ndarray
        Pressure [Pa].

    Returns
    -------
    list of float or ndarray
        ``a_i`` [-] with ``departure(row, T, p) == poly(a, T_s / T)``.

    Notes
    -----
    .. math:: a_i = (\beta_i + \gamma_i \pi)\, \pi

    A solver that evaluates the departure at many temperatures and one pressure computes
    these once.

    References
    ----------
    .. [1] E. W. Lemmon et al., J. Phys. Chem. Ref. Data 29 (2000) 331-385.

    Examples
    --------
    >>> a = departure_coefficients(DEPARTURE_H, 1.0e6)
    >>> T = np.array(400.0)
    >>> bool(np.isclose(poly(a, 300.0 / T), departure(DEPARTURE_H, T, 1.0e6)))
    True
    """
    bc, cc = _DEPARTURE[row]
    pi = p * (1.0 / _V_P)
    return [(b + c * pi) * pi for b, c in zip(bc, cc, strict=True)]


def log_mean(a: FloatArray, b: FloatArray) -> FloatArray:
    r"""Logarithmic mean temperature to second order, for first guesses.

    Parameters
    ----------
    a, b : ndarray
        Temperatures [K] (> 0).

    Returns
    -------
    ndarray
        Approximate logarithmic mean [K].

    Notes
    -----
    .. math:: \frac{b - a}{\ln(b / a)} \approx A - \frac{(b - a)^2}{12 A},
        \quad A = \frac{a + b}{2}

    The constant cp of an isentropic step from a to b is close to cp at this temperature
    (cp averaged over ln T).  The series is about 1 K low at b / a = 1.9 and 4 K low at
    b / a = 3, which the Newton solve then removes.

    References
    ----------
    .. [1] Series expansion of the logarithmic mean (common practice).

    Examples
    --------
    >>> round(float(log_mean(np.array(300.0), np.array(600.0))), 1)  # exact 300/ln 2 = 432.8
    433.3
    """
    A = 0.5 * (a + b)
    d = b - a
    d *= d
    d /= 12.0 * A
    A -= d
    return A


#: Start indices of the convergence groups of a block (None: the block is one group).
Groups = NDArray[np.intp] | None


def newton(
    step: Callable[[FloatArray], FloatArray],
    T: FloatArray,
    groups: Groups = None,
    *,
    tol: float = NEWTON_TOL,
    max_iter: int = NEWTON_MAX_ITER,
) -> tuple[FloatArray, NDArray[np.bool_]]:
    r"""Newton iteration ``T <- T - step(T)`` with a bounded count and a flag per element.

    Parameters
    ----------
    step : callable
        ``step(T)`` returns the Newton step [K], ``(g(T) - target) / g'(T)``.
    T : ndarray
        First guess [K], shape (N,) (or any shape when ``groups`` is None).
    groups : ndarray of intp, optional
        Start indices of the convergence groups along the only axis; None: one group.
    tol : float
        Step criterion [K]: a group stops when its largest |step| is below it.
    max_iter : int
        Iteration cap.

    Returns
    -------
    T : ndarray
        Solution [K] (iterates are clipped to 100-5000 K between steps).
    converged : ndarray of bool
        |last step| < ``tol`` per element.

    Notes
    -----
    .. math:: T_{k+1} = T_k - \frac{g(T_k) - g^*}{g'(T_k)}

    Each group stops on its own when its largest step is below ``tol``, exactly as if it
    were solved alone: a block of several groups gives element for element the numbers of
    one solve per group, with fewer, longer array operations.  Groups that stop early keep
    their values while the others go on.

    References
    ----------
    .. [1] W. H. Press et al., *Numerical Recipes*, 3rd ed., Cambridge, 2007, sec. 9.4.

    Examples
    --------
    >>> T, ok = newton(lambda T: (T * T - 2.0e6) / (2.0 * T), np.array([1000.0, 2000.0]))
    >>> np.round(T, 2).tolist(), ok.tolist()
    ([1414.21, 1414.21], [True, True])
    """
    lo, hi = _CLIP
    if T.size == 0:
        return T.copy(), np.ones(T.shape, dtype=bool)
    if groups is None:
        dT = step(T)
        for it in range(max_iter):
            if it:
                dT = step(T)
            T = np.asarray(T - dT)  # 0-d stays an array
            if np.abs(dT).max() < tol:
                break
            np.clip(T, lo, hi, out=T)
        return T, np.abs(dT) < tol
    active = np.ones(groups.size, dtype=bool)
    sizes = np.diff(groups, append=T.size)
    T_res: FloatArray | None = None
    dT_res: FloatArray | None = None
    dT = step(T)
    for it in range(max_iter):
        if it:
            dT = step(T)
        T = np.asarray(T - dT)
        stop = active & (np.maximum.reduceat(np.abs(dT), groups) < tol)
        if stop.any():
            active &= ~stop
            if not active.any() and T_res is None:
                return T, np.abs(dT) < tol
            if T_res is None or dT_res is None:
                T_res, dT_res = T.copy(), dT.copy()
            else:
                lanes = np.repeat(stop, sizes)
                np.copyto(T_res, T, where=lanes)
                np.copyto(dT_res, dT, where=lanes)
            if not active.any():
                return T_res, np.abs(dT_res) < tol
        np.clip(T, lo, hi, out=T)
    if T_res is None or dT_res is None:
        return T, np.abs(dT) < tol
    lanes = np.repeat(active, sizes)
    np.copyto(T_res, T, where=lanes)
    np.copyto(dT_res, dT, where=lanes)
    return T_res, np.abs(dT_res) < tol


def mixture_rows(y: FloatArray, species: NDArray[np.intp] | None = None) -> FloatArray:
    r"""Coefficient rows of a mixture from its mass fractions.

    Parameters
    ----------
    y : ndarray, shape (..., k)
        Mass fractions [-] (or any mass-specific amounts, e.g. kg of species per kg of fuel).
    species : ndarray of intp, optional
        Species indices of the k columns of ``y``; default all N_SPECIES.

    Returns
    -------
    ndarray, shape (2, 17, ...)
        Rows per range, batch axes last (the layout :class:`Fluid` takes).

    Notes
    -----
    .. math:: c_{r,j}(\mathbf{y}) = \sum_i y_i\, c_{r,j,i}

    exact, because the NASA polynomials are linear in the species amounts.

    References
    ----------
    .. [1] B. J. McBride et al., NASA TM-4513, 1993.

    Examples
    --------
    >>> from models.properties.species import INDEX, N_SPECIES
    >>> y = np.zeros(N_SPECIES)
    >>> y[INDEX["N2"]] = 1.0
    >>> mixture_rows(y).shape
    (2, 17)
    """
    rows = SPECIES_ROWS if species is None else SPECIES_ROWS[:, species, :]
    out: FloatArray = np.einsum("...s,rsk->rk...", y, rows)
    return out


class Fluid:
    r"""An ideal gas (plus the air departure) whose coefficient rows are ``base + Σ w_k tab_k``.

    Quantities are per kg of the fluid's *reference mass* (kg of air for combustion gas made
    with :meth:`with_part`).  Rows are built lazily per range and row group, once per
    object; a fluid made with :meth:`with_part` reuses the rows of its base.

    Parameters
    ----------
    parts : list of (ndarray, float or ndarray)
        ``(tab, w)`` pairs: ``tab`` of shape (2, 17) or (2, 17, ...) (from
        :func:`mixture_rows`), weight ``w`` [-] broadcasting with the batch.
    R : float or ndarray
        Gas constant per kg of reference mass [J/(kg K)].
    base : Fluid, optional
        A fluid whose rows are added.

    Notes
    -----
    .. math::

        h(T, p) &= \sum_k c_{H,k} T^k + R\, T\, d_h(T, p)

        \varphi(T, p) &= c_{\varphi,0} \ln T + \sum_{k=1}^{4} c_{\varphi,k} T^k
            + c_{\varphi,5} + R\, d_s(T, p)

    with the low-range rows at T <= :data:`T_MID`, the high-range rows above, and the
    departures :math:`d_h, d_s` of :func:`departure` when a pressure is given.

    References
    ----------
    .. [1] B. J. McBride et al., NASA TM-4513, 1993.
    .. [2] E. W. Lemmon et al., J. Phys. Chem. Ref. Data 29 (2000) 331-385.

    Examples
    --------
    >>> from models.properties.species import INDEX, N_SPECIES
    >>> y = np.zeros(N_SPECIES)
    >>> y[INDEX["N2"]] = 1.0
    >>> n2 = Fluid([(mixture_rows(y), 1.0)], R_UNIVERSAL / 0.0280134)
    >>> round(float(n2.cp(np.array([300.0]))[0]), 1)  # Cantera, NASA TM-4513 data: 1039.7
    1039.7
    """

    __slots__ = ("R", "_cache", "_y", "base", "parts")

    def __init__(self, parts: list[tuple[FloatArray, Num]], R: Num, base: Fluid | None = None):
        self.parts = parts
        self.R = R
        self.base = base
        self._y: tuple[FloatArray, NDArray[np.intp]] | None = None
        self._cache: dict[tuple[int, int], FloatArray] = {}

    @classmethod
    def from_mass_fractions(
        cls, y: FloatArray, R: Num, species: NDArray[np.intp] | None = None
    ) -> Fluid:
        """Make a fluid of composition ``y`` whose rows are built lazily, per range and group.

        Parameters
        ----------
        y : ndarray, shape (..., k)
            Mass fractions [-] of the species ``species`` (default: all N_SPECIES).
        R : float or ndarray
            Gas constant of the mixture [J/(kg K)], batch shape (...).
        species : ndarray of intp, optional
            Species indices of the k columns of ``y``.

        Returns
        -------
        Fluid
            Rows as :func:`mixture_rows` gives them, computed only for the groups used.
        """
        fluid = cls([], R)
        idx = np.arange(N_SPECIES) if species is None else np.asarray(species, dtype=np.intp)
        fluid._y = (y, idx)
        return fluid

    def with_part(self, tab: FloatArray, w: Num, R: Num) -> Fluid:
        """Return this fluid plus ``w`` times the rows ``tab`` (gas constant ``R`` per unit w).

        Parameters
        ----------
        tab : ndarray, shape (2, 17) or (2, 17, N)
            Rows of the added part (per kg of it).
        w : float or ndarray
            Amount added per kg of reference mass [-] (e.g. the fuel-air ratio).
        R : float or ndarray
            Gas constant of the added part [J/(kg K)].

        Returns
        -------
        Fluid
            Sharing the cached rows of this one.
        """
        return Fluid([(tab, w)], self.R + w * R, base=self)

    def rows(self, r: int, g: slice) -> FloatArray:
        """Coefficient rows of range ``r`` (0 low, 1 high) and row group ``g``.

        Parameters
        ----------
        r : int
            0 for T <= T_MID, 1 above.
        g : slice
            :data:`H`, :data:`CP` or :data:`PHI`.

        Returns
        -------
        ndarray, shape (k, ...)
            Rows, batch axes last (a unit batch axis for a fluid without one).
        """
        key = (r, g.start)
        c = self._cache.get(key)
        if c is None:
            acc: FloatArray | None = None if self.base is None else self.base.rows(r, g)
            if self._y is not None:
                y, idx = self._y
                sp = SPECIES_ROWS[r, idx, g]  # (k, rows)
                c0 = (sp.T @ y.reshape(-1, idx.size).T).reshape((sp.shape[1], *y.shape[:-1]))
                acc = c0[:, None] if c0.ndim == 1 else c0
            for tab, w in self.parts:
                t = tab[r, g]
                if t.ndim == 1:
                    t = t[:, None]  # (k, 1): broadcasts with any weight and batch
                if isinstance(w, float) and w == 1.0:
                    acc = t if acc is None else acc + t
                else:
                    term = t * w  # a new array: accumulate in place
                    if acc is not None:
                        term += acc
                    acc = term
            if acc is None:
                raise ModelInputError("parts", self.parts, "at least one (tab, w) pair")
            c = acc
            self._cache[key] = c
        return c

    def _eval_r(self, r: int, g: slice, T: FloatArray, phi: bool) -> FloatArray:
        c = self.rows(r, g)
        if not phi:
            return poly(c, T)
        out: FloatArray = c[4] * T  # c1 T + c2 T^2 + c3 T^3 + c4 T^4 (Horner)
        for k in (3, 2, 1):
            out += c[k]
            out *= T
        lnT = np.log(T)
        lnT *= c[0]
        out += lnT
        out += c[5]
        return out

    def evaluate(self, g: slice, T: FloatArray) -> FloatArray:
        """Ideal-gas value of row group ``g`` at T, each element in its own range.

        Parameters
        ----------
        g : slice
            :data:`H` (h [J/kg]), :data:`CP` (cp [J/(kg K)]) or :data:`PHI` (φ [J/(kg K)]).
        T : ndarray
            Temperature [K].

        Returns
        -------
        ndarray
            The property, broadcast over T and the batch.
        """
        phi = g.start == PHI.start
        low = T <= T_MID
        if low.all():
            return self._eval_r(0, g, T, phi)
        if not low.any():
            return self._eval_r(1, g, T, phi)
        return np.where(low, self._eval_r(0, g, T, phi), self._eval_r(1, g, T, phi))

    def evaluate_with_cp(self, g: slice, T: FloatArray) -> tuple[FloatArray, FloatArray]:
        """Row group ``g`` and cp at T with one range check.

        Parameters
        ----------
        g : slice
            :data:`H` or :data:`PHI`.
        T : ndarray
            Temperature [K].

        Returns
        -------
        value, cp : ndarray
            h [J/kg] or φ [J/(kg K)], and cp [J/(kg K)].
        """
        phi = g.start == PHI.start
        low = T <= T_MID
        if low.all():
            return self._eval_r(0, g, T, phi), self._eval_r(0, CP, T, False)
        if not low.any():
            return self._eval_r(1, g, T, phi), self._eval_r(1, CP, T, False)
        return (
            np.where(low, self._eval_r(0, g, T, phi), self._eval_r(1, g, T, phi)),
            np.where(low, self._eval_r(0, CP, T, False), self._eval_r(1, CP, T, False)),
        )

    def h(self, T: FloatArray, p: Num | None = None) -> FloatArray:
        """Sensible enthalpy [J/kg], with the real-gas departure at p [Pa] when given.

        Parameters
        ----------
        T : ndarray
            Temperature [K].
        p : float or ndarray, optional
            Pressure [Pa]; None: ideal gas.

        Returns
        -------
        ndarray
            h(T) - h(298.15 K) [J/kg] (+ the departure).
        """
        out = self.evaluate(H, T)
        if p is not None:
            out = out + self.R * T * departure(DEPARTURE_H, T, p)
        return out

    def cp(self, T: FloatArray) -> FloatArray:
        """Ideal-gas isobaric specific heat capacity [J/(kg K)] at T [K].

        Parameters
        ----------
        T : ndarray
            Temperature [K].

        Returns
        -------
        ndarray
            cp [J/(kg K)].
        """
        return self.evaluate(CP, T)

    def phi(self, T: FloatArray, p: Num | None = None) -> FloatArray:
        """Entropy function φ(T) [J/(kg K)], plus R (s - s_ig)/R at p [Pa] when given.

        Parameters
        ----------
        T : ndarray
            Temperature [K].
        p : float or ndarray, optional
            Pressure [Pa]; None: ideal gas.

        Returns
        -------
        ndarray
            φ [J/(kg K)] (no pressure and no mixing term).
        """
        out = self.evaluate(PHI, T)
        if p is not None:
            out = out + self.R * departure(DEPARTURE_S, T, p)
        return out

    def h_at(self, T: FloatArray, coeffs: list[Num]) -> FloatArray:
        """h(T, p) [J/kg] with ``coeffs = departure_coefficients(DEPARTURE_H, p)`` given.

        Parameters
        ----------
        T : ndarray
            Temperature [K].
        coeffs : list of float or ndarray
            Departure coefficients at the pressure [-].

        Returns
        -------
        ndarray
            Sensible enthalpy with the real-gas departure [J/kg].
        """
        v = poly(coeffs, _V_T / T)
        v *= T
        v *= self.R
        v += self.evaluate(H, T)
        return v

    def T_from_h(
        self, H_target: FloatArray, p: Num | None, T: FloatArray, groups: Groups = None
    ) -> tuple[FloatArray, NDArray[np.bool_]]:
        """Temperature [K] with h(T, p) = H_target [J/kg], by Newton from the guess T.

        Parameters
        ----------
        H_target : ndarray
            Enthalpy [J/kg].
        p : float or ndarray or None
            Pressure [Pa]; None: ideal gas.
        T : ndarray
            First guess [K].
        groups : ndarray, optional
            Convergence groups (:func:`newton`).

        Returns
        -------
        T, converged : ndarray
            Solution [K] and its convergence flag.

        Notes
        -----
        The real-gas term enters the function, not the derivative (its share of cp, frozen
        at the first guess, is below 1e-3 from 400 K up), so the last step's error is below
        1e-3 of the step criterion (measured: below 3e-6 K from 400 K at 2 MPa).  Near
        ambient temperature at 2 MPa the share is about 1 % and the error of the last step
        grows to about 5e-4 K with a first guess 60 K off (measured).
        """
        vc = None if p is None else departure_coefficients(DEPARTURE_H, p)
        cres = 0.0 if p is None else self.R * departure(DEPARTURE_CP, T, p)

        def step(T: FloatArray) -> FloatArray:
            dT, cp = self.evaluate_with_cp(H, T)
            cp += cres
            if vc is not None:
                v = poly(vc, _V_T / T)
                v *= T
                v *= self.R
                dT += v
            dT -= H_target
            dT /= cp
            return dT

        return newton(step, T, groups)

    def T_from_phi(
        self, target: FloatArray, p: Num | None, T: FloatArray, groups: Groups = None
    ) -> tuple[FloatArray, NDArray[np.bool_]]:
        """Temperature [K] with φ(T) + R (s - s_ig)/R (T, p) = target [J/(kg K)] (Newton).

        Parameters
        ----------
        target : ndarray
            Target entropy function [J/(kg K)].
        p : float or ndarray or None
            Pressure [Pa]; None: ideal gas.
        T : ndarray
            First guess [K].
        groups : ndarray, optional
            Convergence groups (:func:`newton`).

        Returns
        -------
        T, converged : ndarray
            Solution [K] and its convergence flag.
        """
        vc = None if p is None else departure_coefficients(DEPARTURE_S, p)
        cres = 0.0 if p is None else self.R * departure(DEPARTURE_CP, T, p)

        def step(T: FloatArray) -> FloatArray:
            dT, cp = self.evaluate_with_cp(PHI, T)
            cp += cres
            if vc is not None:
                v = poly(vc, _V_T / T)
                v *= self.R
                dT += v
            dT -= target
            dT *= T
            dT /= cp
            return dT

        return newton(step, T, groups)

    def isentropic_T(
        self,
        T1: FloatArray,
        p1: Num,
        p2: Num,
        guess: FloatArray | None = None,
        *,
        lnpr: Num | None = None,
        phi1: FloatArray | None = None,
        groups: Groups = None,
    ) -> tuple[FloatArray, NDArray[np.bool_]]:
        r"""Isentropic end temperature T2s [K], s(T2s, p2) = s(T1, p1), real gas at both ends.

        Parameters
        ----------
        T1 : ndarray
            Start temperature [K].
        p1, p2 : float or ndarray
            Start and end pressure [Pa].
        guess : ndarray, optional
            First guess [K]; default from cp at T1, then at the log-mean temperature.
        lnpr : float or ndarray, optional
            ln(p2/p1) [-] if known.
        phi1 : ndarray, optional
            Ideal-gas φ(T1) [J/(kg K)] if known (used with ``guess``).
        groups : ndarray, optional
            Convergence groups (:func:`newton`).

        Returns
        -------
        T2s, converged : ndarray
            End temperature [K] and its convergence flag.

        Notes
        -----
        .. math:: \varphi(T_{2s}) + R\, d_s(T_{2s}, p_2) = \varphi(T_1) + R\, d_s(T_1, p_1)
            + R \ln(p_2 / p_1)

        The composition is frozen.
        """
        Rl = self.R * (np.log(p2 / p1) if lnpr is None else lnpr)
        if guess is None:
            target, cp1 = self.evaluate_with_cp(PHI, T1)
            # first guess with cp at T1, second with cp at the mean temperature
            guess = T1 * np.exp(Rl / cp1)
            guess = T1 * np.exp(Rl / self.cp(log_mean(T1, guess)))
        else:
            target = self.phi(T1) if phi1 is None else phi1
        target = target + self.R * departure(DEPARTURE_S, T1, p1)
        target += Rl
        return self.T_from_phi(target, p2, np.asarray(guess, dtype=np.float64), groups)

"""Generate ``models/properties/thermo_data.py`` from the NASA 7-coefficient data that Cantera
ships.

Run once at development time (Cantera is a test/dev dependency, not a runtime one)::

    .venv/bin/python tools/gen_thermo_data.py > models/properties/thermo_data.py
    .venv/bin/ruff format models/properties/thermo_data.py

Sources
-------
* ``nasa_gas.yaml`` (Cantera data directory): B. J. McBride, S. Gordon, M. A. Reno,
  "Coefficients for Calculating Thermodynamic and Transport Properties of Individual Species",
  NASA TM-4513, 1993.  Every species except n-hexane.
* n-hexane is not in that file.  Its polynomials come from the n-hexane mechanism shipped in
  Cantera's ``example_data/n-hexane-NUIG-2015.yaml`` (K. Zhang et al., Combust. Flame 162 (2015)
  4194-4207), whose break temperature is 1394 K.  They are refitted here onto the common
  1000 K break: cp/R is least-squares fitted on each side with cp(1000 K) pinned to the
  original value, then a6 and a7 are set so that h(298.15 K), s(298.15 K) equal the original
  and h, s are continuous at 1000 K.  ``tests/test_gas.py`` checks the refit against the
  original polynomials.
* Ar and He have one range (200-6000 K) in the source; the coefficients are duplicated into
  both ranges with the common 1000 K break.
* The real-gas departure of air is a fit to E. W. Lemmon, R. T. Jacobsen, S. G. Penoncello,
  D. G. Friend, J. Phys. Chem. Ref. Data 29 (2000) 331-385, as implemented in CoolProp
  (see :func:`fit_air_virial`).
* Molar masses use the atomic weights of ISO 6976:2016 (C 12.0107, H 1.00794, O 15.9994,
  N 14.0067, S 32.065, Ar 39.948, He 4.002602 g/mol).
"""

from __future__ import annotations

import os
import sys

import cantera as ct
import numpy as np

sys.path.insert(0, os.path.join(os.path.dirname(__file__), ".."))
from models.properties.species import SPECIES

NASA_NAME = {
    "n-C4H10": "C4H10,n-butane",
    "i-C4H10": "C4H10,isobutane",
    "n-C5H12": "C5H12,n-pentane",
    "i-C5H12": "C5H12,i-pentane",
}
ATOMIC_WEIGHT = {  # g/mol, ISO 6976:2016
    "C": 12.0107,
    "H": 1.00794,
    "O": 15.9994,
    "N": 14.0067,
    "S": 32.065,
    "Ar": 39.948,
    "He": 4.002602,
}
T_BREAK = 1000.0
T298 = 298.15


def _cp(a: np.ndarray, T: np.ndarray) -> np.ndarray:
    return a[0] + T * (a[1] + T * (a[2] + T * (a[3] + T * a[4])))


def _h(a: np.ndarray, T: float) -> float:  # h/R [K]
    return float(
        T * (a[0] + T * (a[1] / 2 + T * (a[2] / 3 + T * (a[3] / 4 + T * a[4] / 5)))) + a[5]
    )


def _s(a: np.ndarray, T: float) -> float:  # s/R [-]
    return float(
        a[0] * np.log(T) + T * (a[1] + T * (a[2] / 2 + T * (a[3] / 3 + T * a[4] / 4))) + a[6]
    )


def _refit(thermo: ct.SpeciesThermo) -> tuple[float, float, np.ndarray, np.ndarray]:
    """Refit a NASA-7 species onto the 1000 K break (see module docstring)."""
    t_lo, t_hi = thermo.min_temp, thermo.max_temp
    sp = ct.Species("X", "C:1")
    sp.thermo = thermo

    def cp_r(T: np.ndarray) -> np.ndarray:
        return np.array([thermo.cp(t) for t in T]) / ct.gas_constant

    cp_b = float(cp_r(np.array([T_BREAK]))[0])
    out = []
    for T in (np.linspace(t_lo, T_BREAK, 300), np.linspace(T_BREAK, t_hi, 600)):
        u = T / T_BREAK  # scaled variable keeps the least-squares problem well conditioned
        A = np.stack([u**k - 1.0 for k in range(1, 5)], axis=-1)
        b, *_ = np.linalg.lstsq(A, cp_r(T) - cp_b, rcond=None)
        b = b / T_BREAK ** np.arange(1, 5)
        a0 = cp_b - sum(b[k - 1] * T_BREAK**k for k in range(1, 5))
        out.append(np.array([a0, *b, 0.0, 0.0]))
    lo, hi = out
    lo[5] = thermo.h(T298) / ct.gas_constant - _h(lo, T298)
    lo[6] = thermo.s(T298) / ct.gas_constant - _s(lo, T298)
    hi[5] = _h(lo, T_BREAK) - _h(hi, T_BREAK)
    hi[6] = _s(lo, T_BREAK) - _s(hi, T_BREAK)
    return t_lo, t_hi, lo, hi


VIRIAL_T_SCALE = 300.0  # K
VIRIAL_P_SCALE = 1.0e6  # Pa
VIRIAL_TERMS = 6


def fit_air_virial() -> tuple[np.ndarray, np.ndarray, float]:
    """Fit Z - 1 = pi*sum(b_i tau^i) + pi^2*sum(c_i tau^i) to Lemmon et al. (2000) air.

    tau = 300 K / T, pi = p / 1 MPa.  One linear least-squares fit to Z - 1, (h - h_ig)/(R T)
    and (s - s_ig)/R (all at the same T, p) computed from CoolProp's Helmholtz-energy
    derivatives, over 200-2000 K and 0.05-6 MPa (above 3 MPa only T >= 240 K).  The
    departures follow from Z(T, p) exactly, so the fitted model is thermodynamically
    consistent.  Returns b, c and the largest absolute residual of the fit (dimensionless).
    """
    import CoolProp.CoolProp as CP  # noqa: N817

    state = CP.AbstractState("HEOS", "Air")
    Ts = np.concatenate([np.linspace(200, 1000, 81), np.linspace(1000, 2000, 21)[1:]])
    ps = np.linspace(0.05e6, 6e6, 40)
    i = np.arange(VIRIAL_TERMS)
    rows, rhs = [], []
    for T in Ts:
        for p in ps:
            if T < 240 and p > 3e6:
                continue
            state.update(CP.PT_INPUTS, p, T)
            R = state.gas_constant()
            Z = p / (state.rhomolar() * R * T)
            tat = state.tau() * state.dalphar_dTau()
            dad = state.delta() * state.dalphar_dDelta()
            hr = tat + dad
            sr = tat - state.alphar() + np.log(Z)
            tau_i = (VIRIAL_T_SCALE / T) ** i
            pi = p / VIRIAL_P_SCALE
            rows += [
                np.concatenate([pi * tau_i, pi**2 * tau_i]),
                np.concatenate([pi * i * tau_i, pi**2 / 2 * i * tau_i]),
                np.concatenate([-pi * (1 - i) * tau_i, -(pi**2) / 2 * (1 - i) * tau_i]),
            ]
            rhs += [Z - 1, hr, sr]
    A, y = np.array(rows), np.array(rhs)
    coef, *_ = np.linalg.lstsq(A, y, rcond=None)
    err = float(np.abs(A @ coef - y).max())
    return coef[:VIRIAL_TERMS], coef[VIRIAL_TERMS:], err


def main() -> None:
    data_dir = os.path.join(os.path.dirname(ct.__file__), "data")
    nasa = {s.name: s for s in ct.Species.list_from_file("nasa_gas.yaml")}
    nuig = {
        s.name: s
        for s in ct.Species.list_from_file(
            os.path.join(data_dir, "example_data", "n-hexane-NUIG-2015.yaml")
        )
    }
    rows = []
    for name in SPECIES:
        if name == "n-C6H14":
            sp = nuig["NC6H14"]
            note = "Zhang et al. 2015 (NUIG), refit onto 1000 K break"
            t_lo, t_hi, lo, hi = _refit(sp.thermo)
        else:
            sp = nasa[NASA_NAME.get(name, name)]
            note = f"McBride et al. 1993 ({sp.input_data['thermo'].get('note', '').strip()})"
            c = sp.thermo.coeffs
            t_lo, t_hi = sp.thermo.min_temp, sp.thermo.max_temp
            if c[0] == T_BREAK:
                hi, lo = np.array(c[1:8]), np.array(c[8:15])
            elif c[0] >= t_hi:  # one range: duplicate
                hi = lo = np.array(c[1:8])
                note += ", single range duplicated"
            else:
                raise SystemExit(f"{name}: break at {c[0]} K needs a refit")
        M = sum(ATOMIC_WEIGHT[el] * n for el, n in sp.composition.items()) / 1000.0
        rows.append((name, note, t_lo, t_hi, lo, hi, M, sp.composition))

    def arr(vals: list[float]) -> str:
        return "np.array([" + ", ".join(repr(float(v)) for v in vals) + "])"

    def mat(vals: list[np.ndarray]) -> str:
        body = ",\n".join("        [" + ", ".join(repr(float(x)) for x in v) + "]" for v in vals)
        return "np.array(\n    [\n" + body + ",\n    ]\n)"

    print(
        '"""NASA 7-coefficient polynomials of the species in '
        ":data:`models.properties.species.SPECIES`."
    )
    print()
    print("GENERATED by ``tools/gen_thermo_data.py`` from the data Cantera ships; do not edit by")
    print("hand.  See that script for the sources and the n-hexane refit.")
    print()
    print("Per species i (rows in SPECIES order), for T_LOW <= T <= T_MID use COEFF_LOW, for")
    print("T_MID < T <= T_HIGH use COEFF_HIGH, with a = (a1..a7)::")
    print()
    print("    cp/R = a1 + a2 T + a3 T^2 + a4 T^3 + a5 T^4")
    print("    h/(R T) = a1 + a2 T/2 + a3 T^2/3 + a4 T^3/4 + a5 T^4/5 + a6/T")
    print("    s°/R = a1 ln T + a2 T + a3 T^2/2 + a4 T^3/3 + a5 T^4/4 + a7")
    print()
    print("h includes the standard enthalpy of formation at 298.15 K; s° is at 1 bar.")
    print("T_LOW is the source's own lower limit; ``models.properties.mixtures`` extrapolates the")
    print("low-range polynomial down to 200 K where T_LOW is higher (SO2, H2S, pentanes,")
    print("n-hexane).")
    print()
    print("Sources per species::")
    print()
    for r in rows:
        print(f"    {r[0]:8s} {r[1]}")
    print()
    print("References")
    print("----------")
    print(".. [1] B. J. McBride, S. Gordon, M. A. Reno, NASA TM-4513, 1993.")
    print(".. [2] K. Zhang et al., Combust. Flame 162 (2015) 4194-4207 (n-hexane).")
    print(".. [3] ISO 6976:2016, atomic weights used for MOLAR_MASS.")
    print('"""')
    print()
    print("from __future__ import annotations")
    print()
    print("from collections.abc import Mapping")
    print("from types import MappingProxyType")
    print()
    print("import numpy as np")
    print("from numpy.typing import NDArray")
    print()
    print("__all__ = [")
    for n in (
        "AIR_VIRIAL_B",
        "AIR_VIRIAL_C",
        "AIR_VIRIAL_P_SCALE",
        "AIR_VIRIAL_T_SCALE",
        "COEFF_HIGH",
        "COEFF_LOW",
        "ELEMENTS",
        "MOLAR_MASS",
        "R_UNIVERSAL",
        "T_HIGH",
        "T_LOW",
        "T_MID",
    ):
        print(f'    "{n}",')
    print("]")
    print()
    print("#: Molar gas constant [J/(mol K)] (CODATA 2018 exact value, as used by Cantera).")
    print("R_UNIVERSAL: float = 8.314462618")
    print("#: Source lower temperature limit per species [K].")
    print(f"T_LOW: NDArray[np.float64] = {arr([r[2] for r in rows])}")
    print("#: Break temperature per species [K] (common to all: 1000 K).")
    print(f"T_MID: NDArray[np.float64] = {arr([T_BREAK for r in rows])}")
    print("#: Source upper temperature limit per species [K].")
    print(f"T_HIGH: NDArray[np.float64] = {arr([r[3] for r in rows])}")
    print("#: Low-range coefficients a1..a7, shape (n_species, 7).")
    print(f"COEFF_LOW: NDArray[np.float64] = {mat([r[4] for r in rows])}")
    print("#: High-range coefficients a1..a7, shape (n_species, 7).")
    print(f"COEFF_HIGH: NDArray[np.float64] = {mat([r[5] for r in rows])}")
    print("#: Molar mass [kg/mol] from ISO 6976:2016 atomic weights.")
    print(f"MOLAR_MASS: NDArray[np.float64] = {arr([r[6] for r in rows])}")
    print("#: Elemental composition (atoms per molecule) per species.")
    print("ELEMENTS: tuple[Mapping[str, float], ...] = (")
    for r in rows:
        comp = {k: float(v) for k, v in r[7].items()}
        print(f"    MappingProxyType({comp!r}),")
    print(")")
    b, c, err = fit_air_virial()
    print()
    print("# Real-gas departure of air: Z - 1 = pi*sum_i B_i tau^i + pi^2*sum_i C_i tau^i with")
    print(
        "# tau = AIR_VIRIAL_T_SCALE / T and pi = p / AIR_VIRIAL_P_SCALE, least-squares fit to the"
    )
    print("# Lemmon et al. (2000) air equation of state (CoolProp 'Air') over 200-2000 K and")
    print(f"# 0.05-6 MPa; largest dimensionless residual of the fit {err:.2e}.")
    print(f"AIR_VIRIAL_T_SCALE: float = {VIRIAL_T_SCALE!r}")
    print(f"AIR_VIRIAL_P_SCALE: float = {VIRIAL_P_SCALE!r}")
    print(f"AIR_VIRIAL_B: NDArray[np.float64] = {arr(list(b))}")
    print(f"AIR_VIRIAL_C: NDArray[np.float64] = {arr(list(c))}")


if __name__ == "__main__":
    main()

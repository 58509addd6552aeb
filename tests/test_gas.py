"""Tests of models.gas against outside references (Cantera, CoolProp, published equations)."""

from __future__ import annotations

import cantera as ct
import pytest

from models.gas import DRY_AIR, Mixture
from models.species import SPECIES


def test_dry_air_against_cantera_nasa_data() -> None:
    # Oracle: Cantera with nasa_gas.yaml (McBride et al. 1993, the same polynomials).
    air = Mixture.from_mole_fractions(DRY_AIR)
    names = {"Ar": "Ar"}
    sp = [
        s for s in ct.Species.list_from_file("nasa_gas.yaml") if s.name in ("N2", "O2", "Ar", "CO2")
    ]
    g = ct.Solution(thermo="ideal-gas", species=sp)
    X = {names.get(n, n): DRY_AIR[i] for i, n in enumerate(SPECIES) if DRY_AIR[i] > 0}
    g.TPX = 298.15, 1e5, X
    h0 = g.enthalpy_mole
    for T in (250.0, 600.0, 1800.0):
        g.TPX = T, 1e5, X
        assert air.cp(T) * air.M == pytest.approx(g.cp_mole / 1e3, rel=1e-9)
        assert air.h(T) * air.M == pytest.approx((g.enthalpy_mole - h0) / 1e3, rel=1e-6)

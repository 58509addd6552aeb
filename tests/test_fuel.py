"""Tests of models.properties.fuel against outside references.

Sources (named beside each value):
* ISO 6976:2016 Annex D worked examples (Examples 1, 2, 3), values as published in the
  standard (transcribed in the public test suites of RuedigerForster/ISO_6976).
* ISO 6976:2016 Table A.4 25 °C gross values as quoted in the project physics notes.
* Cantera 3 with GRI-Mech 3.0 (formation enthalpies, ideal-gas enthalpies).
* CoolProp (IAPWS-95 water; Setzmann–Wagner methane; Span–Wagner CO2).
* Common practice: stoichiometric air-fuel ratios quoted in combustion handbooks.
"""

from __future__ import annotations

import cantera as ct
import CoolProp.CoolProp as CP
import numpy as np
import pytest

from models.properties import fuel
from models.properties.fuel import (
    GAS_COMPONENTS,
    LATENT_HEAT_WATER_25C,
    SPECIES_MOLAR_MASS,
    STANDARD_DRY_AIR,
    FuelProperties,
    gas_fuel,
    iso6976,
    liquid_fuel,
    stoichiometric_air_ratio,
)
from models.properties.species import INDEX, N_SPECIES, SPECIES
from models.status import ModelInputError

# ISO 6976:2016 Annex D, Example 1 (clause D.2) composition [mol/mol]
EX1 = {"CH4": 0.933212, "C2H6": 0.025656, "C3H8": 0.015368, "N2": 0.010350, "CO2": 0.015414}
# ISO 6976:2016 Annex D, Example 2 (clause D.3), with water vapour
EX2 = {"CH4": 0.931819, "C2H6": 0.025618, "N2": 0.010335, "CO2": 0.015391, "H2O": 0.016837}
# ISO 6976:2016 Annex D, Example 3 (clause D.4), 11 components
EX3 = {
    "CH4": 0.922393,
    "C2H6": 0.025358,
    "C3H8": 0.015190,
    "n-C4H10": 0.000523,
    "i-C4H10": 0.001512,
    "n-C5H12": 0.002846,
    "i-C5H12": 0.002832,
    "neo-C5H12": 0.001015,
    "n-C6H14": 0.002865,
    "N2": 0.010230,
    "CO2": 0.015236,
}


# --- ISO 6976:2016 Annex D -------------------------------------------------------------------
def test_annex_d_example1_15_15() -> None:
    r = iso6976(EX1, combustion_temperature_C=15.0, metering_temperature_C=15.0)
    # ISO 6976:2016 D.2: M = 17.3884301 kg/kmol, Z = 0.99776224, (Hc)G = 906.1799588 kJ/mol,
    # (Hm)G = 52.113961 MJ/kg, (Hv)G = 38.410611 MJ/m^3 — to the published digits.
    assert r["molar_mass"] == pytest.approx(17.3884301e-3, abs=0.5e-10)
    assert r["compression_factor"] == pytest.approx(0.99776224, abs=0.5e-8)
    assert r["gross_molar"] == pytest.approx(906.1799588e3, abs=0.5e-4)
    assert r["gross_mass"] == pytest.approx(52.113961e6, abs=0.5)
    assert r["gross_volumetric"] == pytest.approx(38.410611e6, abs=0.5)


def test_annex_d_example2_water_vapour_15_55() -> None:
    r = iso6976(EX2, combustion_temperature_C=15.55, metering_temperature_C=15.55)
    # ISO 6976:2016 D.3: M = 16.9891697 kg/kmol, Z = 0.9975690, (Hc)G = 871.443916 kJ/mol,
    # (Hm)G = 51.294085 MJ/kg
    assert r["molar_mass"] == pytest.approx(16.9891697e-3, abs=0.5e-10)
    assert r["compression_factor"] == pytest.approx(0.9975690, abs=0.5e-7)
    assert r["gross_molar"] == pytest.approx(871.443916e3, abs=0.5e-3)
    assert r["gross_mass"] == pytest.approx(51.294085e6, abs=0.5)
    # D.3 (Hv)G = 36.874304 MJ/m^3: the published figure is not consistent with the published
    # Z and (Hc)G (it implies Z larger by ~1.9e-5); the same discrepancy is recorded by the
    # RuedigerForster/ISO_6976 implementation.  Hence a looser relative tolerance here.
    assert r["gross_volumetric"] == pytest.approx(36.874304e6, rel=3e-5)


@pytest.mark.parametrize(
    ("t_comb", "t_meter", "expected"),
    [
        # ISO 6976:2016 D.4.3 (15 °C / 15 °C): Hv,G, Hv,N [MJ/m^3], density [kg/m^3], G [-],
        # W_G, W_N [MJ/m^3], real gas, as published (5 decimals)
        (15.0, 15.0, (39.73351, 35.86811, 0.76462, 0.62391, 50.30318, 45.40954)),
        # ISO 6976:2016 D.4.4 (25 °C / 0 °C)
        (25.0, 0.0, (41.89360, 37.85228, 0.80701, 0.62411, 53.02930, 47.91376)),
    ],
)
def test_annex_d_example3(t_comb: float, t_meter: float, expected: tuple[float, ...]) -> None:
    r = iso6976(EX3, combustion_temperature_C=t_comb, metering_temperature_C=t_meter)
    got = (
        r["gross_volumetric"] / 1e6,
        r["net_volumetric"] / 1e6,
        r["density"],
        r["relative_density"],
        r["wobbe_gross"] / 1e6,
        r["wobbe_net"] / 1e6,
    )
    for g, e in zip(got, expected, strict=True):
        assert g == pytest.approx(e, abs=0.6e-5)


def test_ideal_real_relations_example3() -> None:
    # ISO 6976:2016 clauses 8-9: Hv = Hv_ideal / Z, W_ideal = Hv_ideal / sqrt(G_ideal)
    r = iso6976(EX3)
    Z = r["compression_factor"]
    assert r["gross_volumetric"] == pytest.approx(r["gross_volumetric_ideal"] / Z, rel=1e-12)
    assert r["wobbe_gross_ideal"] == pytest.approx(
        r["gross_volumetric_ideal"] / np.sqrt(r["relative_density_ideal"]), rel=1e-12
    )
    # ISO 6976:2016 Table A.1: M_air = 28.96546 kg/kmol
    assert r["relative_density_ideal"] == pytest.approx(r["molar_mass"] / 28.96546e-3, rel=1e-12)


# --- Table A.4 25 °C values and reference libraries -------------------------------------------
@pytest.mark.parametrize(
    ("species", "gross_kJ_mol"),
    # ISO 6976:2016 Table A.4, ideal-gas gross molar calorific value at 25 °C (physics notes)
    [("CH4", 890.58), ("C2H6", 1560.69), ("C3H8", 2219.17), ("n-C4H10", 2877.40),
     ("H2", 285.83), ("H2S", 562.01)],
)  # fmt: skip
def test_table_a4_gross_25C(species: str, gross_kJ_mol: float) -> None:
    f = gas_fuel({species: 1.0})
    assert f.hhv_molar == pytest.approx(gross_kJ_mol * 1e3, abs=1e-6)


def test_methane_lhv_25C() -> None:
    # ISO 6976:2016 basis, CH4 net 50.03 MJ/kg at 25 °C (physics notes; 802.55 kJ/mol / M)
    assert gas_fuel({"CH4": 1.0}).lhv == pytest.approx(50.03e6, abs=0.01e6)


def _gri_heat_of_combustion(fuel_species: str, n_c: int, n_h: int, n_o: int = 0) -> float:
    """Net heat of complete combustion at 298.15 K from GRI-Mech 3.0 [J/kg fuel]."""
    gas = ct.Solution("gri30.yaml")

    def h(sp: str) -> float:
        gas.TPX = 298.15, ct.one_atm, {sp: 1.0}
        return float(gas.enthalpy_mole) / 1e3  # J/mol

    o2 = n_c + n_h / 4 - n_o / 2
    q = h(fuel_species) + o2 * h("O2") - n_c * h("CO2") - n_h / 2 * h("H2O")
    return q / (gas.molecular_weights[gas.species_index(fuel_species)] / 1e3)


@pytest.mark.parametrize(
    ("species", "n_c", "n_h", "n_o"),
    [("CH4", 1, 4, 0), ("C2H6", 2, 6, 0), ("C3H8", 3, 8, 0), ("H2", 0, 2, 0), ("CO", 1, 0, 1)],
)
def test_lhv_vs_cantera_gri30(species: str, n_c: int, n_h: int, n_o: int) -> None:
    # Cantera 3 / GRI-Mech 3.0 formation enthalpies: complete-combustion heat at 25 °C with
    # water as vapour, vs our ISO 6976 net value at 25 °C: within 0.1 %.
    expected = _gri_heat_of_combustion(species, n_c, n_h, n_o)
    assert gas_fuel({species: 1.0}).lhv == pytest.approx(expected, rel=1e-3)


def test_latent_heat_vs_iapws95() -> None:
    # CoolProp IAPWS-95: h_fg of water at 25 °C = 2441.7 kJ/kg (saturation); ISO's L°(25 °C)
    # (ideal-gas vapour) differs by < 0.1 %.
    h_fg = CP.PropsSI("H", "T", 298.15, "Q", 1, "Water") - CP.PropsSI(
        "H", "T", 298.15, "Q", 0, "Water"
    )
    assert h_fg == pytest.approx(2441.7e3, abs=0.1e3)
    assert pytest.approx(h_fg, rel=1e-3) == LATENT_HEAT_WATER_25C


@pytest.mark.parametrize(
    ("species", "coolprop_name"), [("CH4", "Methane"), ("CO2", "CO2"), ("N2", "Nitrogen")]
)
def test_compression_factor_vs_coolprop(species: str, coolprop_name: str) -> None:
    # CoolProp reference equations of state at 15 °C, 101.325 kPa; ISO's summation-factor Z
    # agrees within 2e-5.
    z_ref = CP.PropsSI("Z", "T", 288.15, "P", 101325.0, coolprop_name)
    assert gas_fuel({species: 1.0}).compression_factor == pytest.approx(z_ref, abs=2e-5)


def test_standard_dry_air_molar_mass() -> None:
    # ISO 6976:2016 Table A.1: M_air = 28.96546 kg/kmol (same CIPM-2007 basis)
    m = sum(x * SPECIES_MOLAR_MASS[INDEX[k]] for k, x in STANDARD_DRY_AIR.items())
    assert m == pytest.approx(28.96546e-3, rel=2e-5)
    assert sum(STANDARD_DRY_AIR.values()) == pytest.approx(1.0, abs=1e-12)


# --- stoichiometry --------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("species", "o2_mol", "air_mol_common", "air_kg_common"),
    [
        # common practice (air as 21 % O2, 3.76 N2/O2): CH4 9.52 mol/mol, 17.19 kg/kg;
        # C3H8 23.8 mol/mol, 15.7 kg/kg; H2 2.38 mol/mol, 34.2 kg/kg
        ("CH4", 2.0, 9.52, 17.19),
        ("C3H8", 5.0, 23.8, 15.7),
        ("H2", 0.5, 2.38, 34.2),
    ],
)
def test_stoichiometric_air(
    species: str, o2_mol: float, air_mol_common: float, air_kg_common: float
) -> None:
    f = gas_fuel({species: 1.0})
    # exact stoichiometry: O2 consumed per mol of fuel
    o2 = -f.product_delta[INDEX["O2"]] * f.molar_mass / SPECIES_MOLAR_MASS[INDEX["O2"]]
    assert o2 == pytest.approx(o2_mol, rel=1e-12)
    # the handbook figures assume 21 % O2; our dry air has 20.939 % (CIPM-2007), hence 0.5 %
    air_mol = o2 / STANDARD_DRY_AIR["O2"]
    assert air_mol == pytest.approx(air_mol_common, rel=5e-3)
    assert f.stoichiometric_air == pytest.approx(air_kg_common, rel=5e-3)


def test_diesel_like_liquid() -> None:
    # common practice: Diesel-like fuel, LHV 42.8 MJ/kg, C 0.866, H 0.134 by mass,
    # stoichiometric air about 14.5 kg/kg; HHV about 45.7 MJ/kg (LHV + ~2.9 MJ/kg)
    f = liquid_fuel(42.8e6, 0.866, 0.134)
    assert f.kind == "liquid"
    assert f.stoichiometric_air == pytest.approx(14.5, rel=1e-2)
    assert f.hhv == pytest.approx(45.7e6, rel=5e-3)
    assert np.isnan(f.molar_mass) and np.isnan(f.wobbe_index)
    assert f.composition is None


def test_liquid_given_hhv_and_sensible_enthalpy() -> None:
    f = liquid_fuel(42.8e6, 0.866, 0.134, higher_heating_value=45.6e6, liquid_cp=1900.0)
    assert f.hhv == 45.6e6
    # definition: cp_liquid (T - 298.15 K)
    assert f.sensible_enthalpy(318.15) == pytest.approx(1900.0 * 20.0, rel=1e-12)


def test_gas_and_liquid_paths_agree() -> None:
    # The liquid path fed with a gas's elemental analysis must give the same products
    # (two independent code paths: per-component atoms vs elemental mass fractions).
    g = gas_fuel({"CH4": 0.9, "C3H8": 0.05, "H2S": 0.02, "H2": 0.03})
    liq = liquid_fuel(
        g.lhv, g.carbon_mass_fraction, g.hydrogen_mass_fraction, g.sulfur_mass_fraction
    )
    np.testing.assert_allclose(liq.product_delta, g.product_delta, rtol=1e-12, atol=1e-15)
    assert liq.stoichiometric_air == pytest.approx(g.stoichiometric_air, rel=1e-12)
    assert liq.hhv == pytest.approx(g.hhv, rel=1e-3)  # ISO gross vs LHV + water · L°


# --- conservation -------------------------------------------------------------------------
MIXES = [
    EX1,
    EX2,
    {"CH4": 0.80, "H2": 0.10, "CO": 0.03, "H2S": 0.01, "O2": 0.01, "Ar": 0.01, "He": 0.04},
    {"n-C4H10": 0.2, "i-C4H10": 0.2, "n-C5H12": 0.2, "i-C5H12": 0.2, "n-C6H14": 0.2},
]


@pytest.mark.parametrize("mix", MIXES)
def test_product_delta_mass_and_elements(mix: dict[str, float]) -> None:
    f = gas_fuel(mix)
    d = f.product_delta
    assert d.shape == (N_SPECIES,)
    assert d.sum() == pytest.approx(1.0, abs=1e-12)  # mass conservation
    mol = d / SPECIES_MOLAR_MASS  # mol per kg fuel
    m_c, m_h, m_s = (fuel.iso.ATOMIC_MASS[e] * 1e-3 for e in ("C", "H", "S"))
    # element balance, against the fuel's own elemental mass fractions
    assert mol[INDEX["CO2"]] * m_c == pytest.approx(f.carbon_mass_fraction, rel=1e-12, abs=1e-15)
    assert 2 * mol[INDEX["H2O"]] * m_h == pytest.approx(f.hydrogen_mass_fraction, abs=1e-15)
    assert mol[INDEX["SO2"]] * m_s == pytest.approx(f.sulfur_mass_fraction, abs=1e-15)
    # oxygen atoms: products = fuel-bound + consumed O2
    x = f.composition
    assert x is not None
    o_fuel = (x[INDEX["CO2"]] * 2 + x[INDEX["CO"]] + x[INDEX["H2O"]] + 2 * x[INDEX["O2"]]) / (
        f.molar_mass
    )
    o_out = 2 * mol[INDEX["CO2"]] + mol[INDEX["H2O"]] + 2 * mol[INDEX["SO2"]]
    assert o_out == pytest.approx(o_fuel - 2 * mol[INDEX["O2"]], rel=1e-12)
    # fuel species never appear in the products
    for s in ("CH4", "C2H6", "H2", "CO", "H2S"):
        assert d[INDEX[s]] == 0.0


def test_liquid_product_delta_sums_to_one() -> None:
    # remainder (here 0.01) carried as inert N2, O-bearing biodiesel-like fuel
    f = liquid_fuel(37.0e6, 0.77, 0.12, 0.0001, oxygen_mass_fraction=0.1)
    assert f.product_delta.sum() == pytest.approx(1.0, abs=1e-12)
    assert f.product_delta[INDEX["N2"]] == pytest.approx(1 - 0.77 - 0.12 - 0.0001 - 0.1)


def test_stoichiometric_air_ratio_other_air() -> None:
    f = gas_fuel({"CH4": 1.0})
    x_air = np.array([STANDARD_DRY_AIR.get(s, 0.0) for s in SPECIES])
    y = x_air * SPECIES_MOLAR_MASS / np.sum(x_air * SPECIES_MOLAR_MASS)
    assert stoichiometric_air_ratio(f, y) == pytest.approx(f.stoichiometric_air, rel=1e-12)
    assert stoichiometric_air_ratio(f, {"O2": 0.2}) == pytest.approx(
        -f.product_delta[INDEX["O2"]] / 0.2
    )


# --- vectorisation and normalisation -------------------------------------------------------
def _fields(f: FuelProperties) -> dict[str, np.ndarray]:
    names = ("molar_mass", "lhv", "hhv", "lhv_molar", "hhv_molar", "wobbe_index",
             "relative_density", "compression_factor", "stoichiometric_air",
             "carbon_mass_fraction", "hydrogen_mass_fraction", "sulfur_mass_fraction",
             "product_delta", "composition")  # fmt: skip
    return {n: np.asarray(getattr(f, n)) for n in names}


def test_vectorised_equals_scalars() -> None:
    ch4 = np.array([0.95, 0.90, 0.80, 0.70])
    h2 = np.array([0.00, 0.05, 0.15, 0.25])
    n2 = 1.0 - ch4 - h2 - 0.01
    batch = gas_fuel({"CH4": ch4, "H2": h2, "N2": n2, "CO2": 0.01})
    assert batch.shape == (4,)
    assert batch.product_delta.shape == (4, N_SPECIES)
    for i in range(4):
        single = gas_fuel({"CH4": ch4[i], "H2": h2[i], "N2": n2[i], "CO2": 0.01})
        for name, v in _fields(single).items():
            np.testing.assert_allclose(_fields(batch)[name][i], v, rtol=1e-14, err_msg=name)


def test_liquid_vectorised() -> None:
    f = liquid_fuel(np.array([42.8e6, 43.1e6]), 0.866, np.array([0.134, 0.130]))
    assert f.stoichiometric_air.shape == (2,)
    assert f.stoichiometric_air[1] == pytest.approx(
        liquid_fuel(43.1e6, 0.866, 0.130).stoichiometric_air
    )


def test_normalises_within_band() -> None:
    a = gas_fuel({"CH4": 0.95, "N2": 0.05 + 5e-5})
    b = gas_fuel({"CH4": 0.95 / (1 + 5e-5), "N2": (0.05 + 5e-5) / (1 + 5e-5)})
    assert a.lhv == pytest.approx(b.lhv, rel=1e-14)


def test_reference_conditions_selectable() -> None:
    # 15 °C combustion gives a larger gross value than 25 °C (ISO Table A.4: 891.51 vs 890.58)
    f15 = gas_fuel({"CH4": 1.0}, combustion_temperature=288.15)
    assert f15.hhv_molar == pytest.approx(891.51e3)
    # Wobbe index default basis 15/15 °C equals iso6976's at 15/15
    f = gas_fuel(EX1)
    assert f.wobbe_index == pytest.approx(iso6976(EX1)["wobbe_gross"], rel=1e-14)
    # 60 °F given exactly (288.7056 K) is accepted as ISO's 15.55 °C
    f60 = gas_fuel(EX1, metering_temperature=288.7056, wobbe_combustion_temperature=288.7056)
    r60 = iso6976(EX1, combustion_temperature_C=15.55, metering_temperature_C=15.55)
    assert f60.wobbe_index == pytest.approx(r60["wobbe_gross"], rel=1e-14)


def test_sensible_enthalpy_gas_vs_cantera() -> None:
    pytest.importorskip("models.properties.mixtures")
    mix = {"CH4": 0.9, "C2H6": 0.05, "N2": 0.03, "CO2": 0.02}
    f = gas_fuel(mix)
    gas = ct.Solution("gri30.yaml")
    gas.TPX = 298.15, ct.one_atm, mix
    h0 = gas.enthalpy_mass
    gas.TPX = 450.0, ct.one_atm, mix
    # Cantera / GRI-Mech 3.0 ideal-gas enthalpy difference, within 0.5 %
    assert f.sensible_enthalpy(450.0) == pytest.approx(gas.enthalpy_mass - h0, rel=5e-3)


# --- errors ---------------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("composition", "fragment"),
    [
        ({"CH4": 0.9, "XeF2": 0.1}, "XeF2"),
        ({"CH4": 0.9, "C2H6": 0.2, "N2": -0.1}, "N2"),
        ({"CH4": 0.9, "N2": 0.09}, "sum(composition)"),
        ({"CH4": 95.0, "N2": 5.0}, "CH4"),
        ({"CH4": 0.9, "neo-C5H12": 0.1}, "neo-C5H12"),
        ({"CH4": float("nan"), "N2": 0.1}, "CH4"),
        ({}, "composition"),
    ],
)
def test_gas_input_errors(composition: dict[str, float], fragment: str) -> None:
    with pytest.raises(ModelInputError, match=fragment.replace("(", r"\(").replace(")", r"\)")):
        gas_fuel(composition)


def test_batch_sum_error_names_sum() -> None:
    with pytest.raises(ModelInputError, match="sum"):
        gas_fuel({"CH4": np.array([0.9, 0.95]), "N2": 0.05})


@pytest.mark.parametrize(
    ("kwargs", "fragment"),
    [
        ({"combustion_temperature": 303.15}, "combustion_temperature"),
        ({"metering_temperature": 298.15}, "metering_temperature"),
        ({"metering_pressure": 50e3}, "pressure"),
        ({"wobbe_combustion_temperature": 280.0}, "wobbe_combustion_temperature"),
    ],
)
def test_reference_condition_errors(kwargs: dict[str, float], fragment: str) -> None:
    with pytest.raises(ModelInputError, match=fragment):
        gas_fuel({"CH4": 1.0}, **kwargs)


def test_iso6976_errors() -> None:
    with pytest.raises(ModelInputError, match="combustion_temperature_C"):
        iso6976(EX1, combustion_temperature_C=30.0)
    with pytest.raises(ModelInputError, match="metering_temperature_C"):
        iso6976(EX1, metering_temperature_C=25.0)
    with pytest.raises(ModelInputError, match="pressure"):
        iso6976(EX1, pressure=2e5)


@pytest.mark.parametrize(
    ("args", "kwargs", "fragment"),
    [
        ((0.0, 0.86, 0.13), {}, "lower_heating_value"),
        ((-1.0, 0.86, 0.13), {}, "lower_heating_value"),
        ((42e6, 1.2, 0.13), {}, "carbon_mass_fraction"),
        ((42e6, 0.86, -0.1), {}, "hydrogen_mass_fraction"),
        ((42e6, 0.86, 0.13, 1.5), {}, "sulfur_mass_fraction"),
        ((42e6, 0.90, 0.13), {}, "carbon \\+ hydrogen"),
        ((42e6, 0.86, 0.13), {"higher_heating_value": 40e6}, "higher_heating_value"),
        ((42e6, 0.86, 0.13), {"liquid_cp": 0.0}, "liquid_cp"),
    ],
)
def test_liquid_input_errors(
    args: tuple[float, ...], kwargs: dict[str, float], fragment: str
) -> None:
    with pytest.raises(ModelInputError, match=fragment):
        liquid_fuel(*args, **kwargs)


def test_public_api() -> None:
    assert set(fuel.__all__) >= {"FuelProperties", "gas_fuel", "liquid_fuel", "iso6976",
                                 "GAS_COMPONENTS"}  # fmt: skip
    assert all(c in SPECIES for c in GAS_COMPONENTS)


def test_on_invalid_nan_flags_bad_elements() -> None:
    from models.status import Reason

    ch4 = np.array([0.95, np.nan, 0.90, 0.95, -0.01])
    n2 = np.array([0.05, 0.05, 0.05, 0.05, 1.01])
    f = gas_fuel({"CH4": ch4, "N2": n2}, on_invalid="nan")
    assert f.status is not None
    assert f.status.tolist() == [0, Reason.INPUT_MISSING, Reason.FUEL_INVALID, 0,
                                 Reason.FUEL_INVALID]  # fmt: skip
    bad = f.status != 0
    assert np.all(np.isnan(f.lhv[bad])) and np.all(np.isnan(f.product_delta[bad]))
    good = gas_fuel({"CH4": 0.95, "N2": 0.05})
    np.testing.assert_allclose(f.lhv[~bad], good.lhv, rtol=1e-14)
    # the default still raises for the same batch
    with pytest.raises(ModelInputError, match="CH4"):
        gas_fuel({"CH4": ch4, "N2": n2})
    with pytest.raises(ModelInputError, match="on_invalid"):
        gas_fuel({"CH4": 1.0}, on_invalid="ignore")  # type: ignore[arg-type]


def test_sensible_enthalpy_batch_and_temperature_array() -> None:
    pytest.importorskip("models.properties.mixtures")
    f = gas_fuel({"CH4": np.array([1.0, 0.9]), "H2": np.array([0.0, 0.1])})
    h = f.sensible_enthalpy(np.array([350.0, 350.0]))
    assert h.shape == (2,)
    single = gas_fuel({"CH4": 0.9, "H2": 0.1})
    assert h[1] == pytest.approx(single.sensible_enthalpy(350.0), rel=1e-12)
    ts = single.sensible_enthalpy(np.array([298.15, 400.0, 500.0]))
    assert ts.shape == (3,)
    assert ts[0] == pytest.approx(0.0, abs=1e-6)  # reference state 298.15 K
    # Cantera / GRI-Mech 3.0 at 500 K for the same mixture, within 0.5 %
    gas = ct.Solution("gri30.yaml")
    gas.TPX = 298.15, ct.one_atm, {"CH4": 0.9, "H2": 0.1}
    h0 = gas.enthalpy_mass
    gas.TPX = 500.0, ct.one_atm, {"CH4": 0.9, "H2": 0.1}
    assert ts[2] == pytest.approx(gas.enthalpy_mass - h0, rel=5e-3)


def test_stoichiometric_air_with_cycle_dry_air() -> None:
    humid_air = pytest.importorskip("models.properties.humid_air")
    # models.properties.humid_air.DRY_AIR (ISO 2533 basis) and our CIPM-2007 standard air: the
    # O2 mass fractions agree within 0.1 %, so both stoichiometric ratios agree as closely.
    f = gas_fuel(EX1)
    y = np.asarray(humid_air.DRY_AIR_MASS_FRACTIONS)
    assert stoichiometric_air_ratio(f, y) == pytest.approx(f.stoichiometric_air, rel=1e-3)

"""Tests for lowgmap.physics.properties.fluids: property sources, checks against published values, error messages."""
from __future__ import annotations

import csv
import json
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from lowgmap.physics.properties.fluids import (
    MOLAR_GAS_CONSTANT,
    TABLE_PATH,
    FluidPair,
    fluid_names,
    make_fluid_pair,
    table_liquid_info,
    water_surface_tension_iapws,
)

ATM = 101325.0


# ---------------------------------------------------------------------------------------------
# Water surface tension, IAPWS R1-76(2014)
# ---------------------------------------------------------------------------------------------
@pytest.mark.parametrize("t_c, sigma_mN_m", [
    (20.0, 72.74),   # IAPWS R1-76(2014), table of values (0.01 mN/m rounding)
    (25.0, 71.97),   # IAPWS R1-76(2014), table of values
    (100.0, 58.91),  # IAPWS R1-76(2014), table of values
])
def test_water_sigma_iapws_table(t_c, sigma_mN_m):
    s = water_surface_tension_iapws(t_c + 273.15) * 1e3
    assert abs(s - sigma_mN_m) <= 0.005 + 1e-9  # within the table's rounding


def test_water_sigma_limits_and_trend():
    # Closed form: sigma = 0 at the critical point tau = 0 (IAPWS R1-76(2014) equation)
    assert water_surface_tension_iapws(647.096) == 0.0
    T = np.linspace(273.16, 647.0, 200)
    s = water_surface_tension_iapws(T)
    assert np.all(np.diff(s) < 0)  # surface tension falls monotonically with temperature
    out = water_surface_tension_iapws(np.array([250.0, 300.0, 700.0]))
    assert np.isnan(out[0]) and np.isnan(out[2]) and out[1] > 0  # documented NaN outside range


def test_water_sigma_scalar_out_of_range_names_temperature():
    with pytest.raises(ValueError, match=r"temperature must be within \[273\.16, 647\.096\] K"):
        water_surface_tension_iapws(250.0)


def test_water_pair_uses_iapws_sigma_not_coolprop():
    fp = make_fluid_pair("water", 293.15, ATM, gas="air")
    assert fp.sigma == pytest.approx(water_surface_tension_iapws(293.15), rel=1e-12)
    assert "IAPWS R1-76(2014)" in fp.liquid_source


# ---------------------------------------------------------------------------------------------
# CoolProp liquids against published values
# ---------------------------------------------------------------------------------------------
def test_water_20C_1atm_density_viscosity():
    fp = make_fluid_pair("Water", 293.15, ATM, gas="air")
    # IAPWS-95 (Wagner & Pruss, J. Phys. Chem. Ref. Data 31:387, 2002, doi:10.1063/1.1461829):
    # 998.207 kg/m3 at 20 degC, 101325 Pa
    assert fp.rho_l == pytest.approx(998.207, abs=0.001)
    # IAPWS 2008 viscosity (Huber et al., J. Phys. Chem. Ref. Data 38:101, 2009, doi:10.1063/1.3088050):
    # 1.0016 mPa s at 20 degC, 1 atm
    assert fp.mu_l == pytest.approx(1.0016e-3, abs=0.00005e-3)
    assert fp.pressure == ATM


def test_water_saturation_100C():
    fp = make_fluid_pair("water", 373.15)
    # IAPWS-IF97 steam tables: saturation pressure 0.101418 MPa at 373.15 K
    assert fp.pressure == pytest.approx(101418.0, rel=2e-5)
    assert fp.gas == "Water" and "saturated vapour" in fp.gas_source
    # IAPWS R1-76(2014) table: 58.91 mN/m at 100 degC
    assert fp.sigma == pytest.approx(58.91e-3, abs=0.006e-3)
    # Ideal gas with M = 18.015268 g/mol (IAPWS-95 molar mass) at p_sat, T: the real vapour is denser by
    # about 1.7 % (compressibility of saturated steam at 1 atm, Z ~ 0.983; from memory) -> bound 1..3 %
    rho_ideal = fp.pressure * 0.018015268 / (MOLAR_GAS_CONSTANT * 373.15)
    assert 1.01 < fp.rho_g / rho_ideal < 1.03


def test_nitrogen_normal_boiling_point():
    # Span et al. (2000), J. Phys. Chem. Ref. Data 29, 1361 (nitrogen EOS): normal boiling point 77.355 K,
    # saturated liquid density 806.08 kg/m3 there (from memory, as also listed in the NIST WebBook)
    fp = make_fluid_pair("nitrogen", 77.355)
    assert fp.pressure == pytest.approx(ATM, rel=1e-4)  # definition of the normal boiling point
    assert fp.rho_l == pytest.approx(806.08, rel=1e-3)
    assert fp.liquid == "Nitrogen" and fp.gas == "Nitrogen"


def test_ideal_gas_air_20C_1atm():
    # Closed form rho = p M / (R T), M = 28.9647 g/mol, R = 8.314462618 J/(mol K): 1.2041 kg/m3
    expected = ATM * 28.9647e-3 / (8.314462618 * 293.15)
    assert expected == pytest.approx(1.204, abs=0.001)
    fp = make_fluid_pair("silicone-oil-5cst", 293.15)  # default gas: air, ideal-gas density, 1 atm
    assert fp.gas == "Air" and "ideal gas" in fp.gas_source
    # CoolProp's air molar mass 28.96546 g/mol differs from 28.9647 by 3e-5 relative
    assert fp.rho_g == pytest.approx(expected, rel=1e-4)
    # The real-gas value at 1 atm differs by < 0.1 % (Z of air near 0.9996 at 20 degC; from memory)
    real = make_fluid_pair("silicone-oil-5cst", 293.15, gas="air", gas_model="real")
    assert real.rho_g == pytest.approx(fp.rho_g, rel=1e-3)
    assert any("air" in n for n in fp.notes)


@pytest.mark.parametrize("name, coolprop_name", [
    ("water", "Water"), ("WATER", "Water"), ("nitrogen", "Nitrogen"), ("Oxygen", "Oxygen"),
    ("ammonia", "Ammonia"), ("ethanol", "Ethanol"), ("methane", "Methane"), ("R134a", "R134a"),
    ("r-134a", "R134a"), ("R1234yf", "R1234yf"), ("carbon dioxide", "CarbonDioxide"), ("CO2", "CarbonDioxide"),
    ("helium", "Helium"), ("argon", "Argon"), ("n-heptane", "n-Heptane"),
    ("heptane", "n-Heptane"), ("propane", "n-Propane"), ("hydrogen", "ParaHydrogen"),
    ("normal-hydrogen", "Hydrogen"), ("LOX", "Oxygen"),
])
def test_friendly_names_resolve(name, coolprop_name):
    import CoolProp.CoolProp as CP
    T = 0.5 * (CP.PropsSI("Ttriple", coolprop_name) + CP.PropsSI("Tcrit", coolprop_name))
    fp = make_fluid_pair(name, T)
    assert fp.liquid == coolprop_name
    assert fp.rho_l > fp.rho_g > 0 and fp.sigma > 0
    assert fp.pressure == pytest.approx(CP.PropsSI("P", "T", T, "Q", 0, coolprop_name), rel=1e-9)


def test_acetone_needs_a_viscosity_override():
    # CoolProp 8 has an equation of state and a surface tension for acetone but no viscosity model
    with pytest.raises(ValueError, match="mu_l: CoolProp has no liquid viscosity for 'Acetone'"):
        make_fluid_pair("acetone", 298.15)
    fp = make_fluid_pair("acetone", 298.15, overrides={"mu_l": 0.31e-3, "mu_g": 8e-6})
    assert fp.liquid == "Acetone" and fp.mu_l == 0.31e-3


def test_hydrogen_choice_is_noted():
    fp = make_fluid_pair("hydrogen", 20.0)
    assert any("parahydrogen" in n for n in fp.notes)


def test_given_pressure_compressed_liquid_and_saturation_consistent():
    sat = make_fluid_pair("water", 323.15)
    comp = make_fluid_pair("water", 323.15, 2 * sat.pressure)
    # Liquid water compressibility ~4.5e-10 1/Pa (from memory): doubling p from ~12 kPa changes rho by < 1e-5
    assert comp.rho_l == pytest.approx(sat.rho_l, rel=1e-5)
    assert comp.pressure == 2 * sat.pressure
    assert comp.rho_g == pytest.approx(sat.rho_g, rel=1e-12)  # own vapour stays saturated at T
    assert any("saturated at T" in n for n in comp.notes)


def test_foreign_gas_without_pressure_assumes_one_atmosphere():
    fp = make_fluid_pair("nitrogen", 70.0, gas="helium")
    assert fp.pressure == ATM and fp.gas == "Helium"
    assert any("101325 Pa (1 atm) assumed" in n for n in fp.notes)


def test_pseudo_pure_note():
    fp = make_fluid_pair("air", 80.0, overrides={"sigma": 8.9e-3})
    assert any("pseudo-pure" in n for n in fp.notes)


# ---------------------------------------------------------------------------------------------
# Table liquids
# ---------------------------------------------------------------------------------------------
def _rows():
    with open(TABLE_PATH, newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(ln for ln in fh if not ln.startswith("#")))


def test_table_rows_state_their_source():
    rows = _rows()
    assert len(rows) >= 11
    for row in rows:
        src = row["source"]
        assert src.strip()
        assert "typical value, from memory" in src or "doi:" in src or "supplier property table" in src


def test_table_names_do_not_clash_with_coolprop():
    from lowgmap.physics.properties.fluids import _coolprop_lookup, _table_lookup
    assert not set(_coolprop_lookup()) & set(_table_lookup())
    # the pure n-isomer stays reachable through CoolProp
    assert make_fluid_pair("perfluorohexane", 298.15).liquid == "perfluorohexane"
    assert make_fluid_pair("n-perfluorohexane", 298.15, overrides={"mu_l": 6e-4, "sigma": 0.011,
                                                                   "mu_g": 1e-5}).liquid == "n-Perfluorohexane"


def test_table_values_at_reference_temperature():
    # transcription checks of the CSV against the values its source column quotes
    # methoxy-nonafluorobutane at 25 degC: supplier property table (density 1.51 g/cm3, 0.58 mPa s, 13.6 mN/m)
    fp = make_fluid_pair("Methoxy-Nonafluorobutane", 298.15)
    assert (fp.rho_l, fp.mu_l, fp.sigma) == pytest.approx((1510.0, 0.58e-3, 13.6e-3), rel=1e-12)
    # silicone oil 5 cSt at 25 degC: 0.913 specific gravity and 5 cSt (typical value, from memory)
    fp = make_fluid_pair("silicone oil 5 cSt", 298.15)
    assert fp.nu_l == pytest.approx(5.0e-6, rel=1e-12)
    assert fp.rho_l == pytest.approx(913.0, rel=1e-12)


def test_glycerol_water_against_cheng_2008():
    # Cheng (2008), Ind. Eng. Chem. Res. 47, 3285: mu of glycerol/water; formula recalled from memory,
    # it reproduces the value 6.00 mPa s for 50 wt% at 20 degC of the 1963 table 'Physical properties of
    # glycerine and its solutions' (from memory).
    def cheng(cm, t):
        a = 0.705 - 0.0017 * t
        b = (4.9 + 0.036 * t) * a ** 2.5
        alpha = 1 - cm + a * b * cm * (1 - cm) / (a * cm + b * (1 - cm))
        mu_w = 1.790 * math.exp((-1230 - t) * t / (36100 + 360 * t))
        mu_g = 12100 * math.exp((-1233 + t) * t / (9900 + 70 * t))
        return mu_w ** alpha * mu_g ** (1 - alpha) * 1e-3

    assert cheng(0.5, 20.0) == pytest.approx(6.00e-3, rel=2e-3)
    for t in (10.0, 20.0, 30.0, 45.0):
        fp = make_fluid_pair("glycerol/water 50%", t + 273.15)
        assert fp.mu_l == pytest.approx(cheng(0.5, t), rel=0.04)  # Andrade fit stated as within 4 %


def test_isopropanol_viscosity_against_handbook():
    # CRC Handbook of Chemistry and Physics, 2-propanol viscosity: 4.6 mPa s at 0 degC, 1.03 at 50 degC
    # (from memory). The row's Andrade B was fitted to these values: this checks the transcription.
    assert make_fluid_pair("IPA", 273.15).mu_l == pytest.approx(4.6e-3, rel=0.03)
    assert make_fluid_pair("2-propanol", 323.15).mu_l == pytest.approx(1.03e-3, rel=0.03)


def test_light_silicone_oils_against_siloxane_equations_of_state():
    # The 0.65 cSt grade is hexamethyldisiloxane (MM), the 1 cSt grade mostly octamethyltrisiloxane (MDM).
    # Independent check: Thol et al. (2016/2017) equations of state and Mulero & Cachadina (2014) surface
    # tension in CoolProp. Tolerances: 1 % density (commercial grade vs pure compound, linear law over
    # 50 K) and 6 % surface tension (data-sheet value vs correlation); common practice, no source.
    import CoolProp.CoolProp as CP
    for grade, cp_name in (("silicone-oil-0.65cst", "MM"), ("silicone-oil-1cst", "MDM")):
        for T in (273.15, 298.15, 323.15):
            fp = make_fluid_pair(grade, T)
            assert fp.rho_l == pytest.approx(CP.PropsSI("D", "T", T, "P", ATM, cp_name), rel=0.01)
            assert fp.sigma == pytest.approx(CP.PropsSI("I", "T", T, "Q", 0, cp_name), rel=0.06)


def test_perfluorohexane_density_against_n_isomer_equation_of_state():
    # The table row is an isomer mixture; the CoolProp n-perfluorohexane EOS is an independent check
    # of the density level and slope (isomers differ by about 1 %; common practice, no source)
    import CoolProp.CoolProp as CP
    for T in (253.15, 298.15, 318.15):
        fp = make_fluid_pair("perfluorohexane", T)
        assert fp.rho_l == pytest.approx(CP.PropsSI("D", "T", T, "P", ATM, "n-Perfluorohexane"), rel=0.01)


def test_table_trends_and_range_edges():
    for name in fluid_names()["table"]:
        info = table_liquid_info(name)
        lo = make_fluid_pair(name, info["T_min_K"])
        hi = make_fluid_pair(name, info["T_max_K"])
        assert lo.mu_l > hi.mu_l and lo.rho_l > hi.rho_l and lo.sigma > hi.sigma
        ref = make_fluid_pair(name, info["T_ref_K"])
        assert ref.rho_l == info["rho_kg_m3"] and ref.sigma == info["sigma_N_m"]


@settings(max_examples=40, deadline=None)
@given(st.sampled_from(sorted(fluid_names()["table"])), st.floats(0.0, 1.0))
def test_table_liquids_valid_everywhere_in_range(name, frac):
    info = table_liquid_info(name)
    T = info["T_min_K"] + frac * (info["T_max_K"] - info["T_min_K"])
    fp = make_fluid_pair(name, T)
    assert fp.rho_l > 100 * fp.rho_g and fp.mu_l > fp.mu_g and 0 < fp.sigma < 0.1


def test_table_outside_range_error_gives_range():
    with pytest.raises(ValueError, match=r"temperature must be within \[263\.15, 373\.15\] K "
                                         r"\(\[-10, 100\] degC\).*silicone-oil-5cst.*got 400 K"):
        make_fluid_pair("silicone-oil-5cst", 400.0)


def test_table_liquid_info_and_names():
    names = fluid_names()
    assert set(names) == {"coolprop", "table"}
    assert "Water" in names["coolprop"] and "perfluorohexane" in names["table"]
    info = table_liquid_info("ISOPROPANOL")
    assert info["T_min_degC"] == 0.0 and info["T_max_degC"] == 60.0
    assert "Jasper" in info["source"]
    with pytest.raises(ValueError, match="unknown table liquid 'water'"):
        table_liquid_info("water")


# ---------------------------------------------------------------------------------------------
# User values and overrides
# ---------------------------------------------------------------------------------------------
def test_user_defined_pair():
    ov = {"rho_l": 1200.0, "mu_l": 0.05, "sigma": 0.03, "rho_g": 2.0, "mu_g": 2.0e-5}
    fp = make_fluid_pair("my test liquid", 300.0, 2e5, liquid_source="user", overrides=ov)
    assert (fp.rho_l, fp.mu_l, fp.sigma, fp.rho_g, fp.mu_g) == (1200.0, 0.05, 0.03, 2.0, 2.0e-5)
    assert fp.liquid == "my test liquid" and fp.pressure == 2e5
    assert fp.liquid_source == "user values" and fp.gas_source == "user values"


def test_user_liquid_with_named_gas():
    fp = make_fluid_pair("oil", 293.15, ATM, liquid_source="user", gas="air",
                         overrides={"rho_l": 900.0, "mu_l": 0.01, "sigma": 0.02})
    assert fp.gas == "Air" and fp.rho_g == pytest.approx(1.2046, rel=1e-3)  # [calc] CoolProp real air


def test_overrides_replace_and_are_recorded():
    fp = make_fluid_pair("water", 293.15, ATM, gas="air", overrides={"sigma": 0.05, "mu_g": 1.9e-5})
    assert fp.sigma == 0.05 and fp.mu_g == 1.9e-5
    assert "user override: sigma = 0.05 N/m" in fp.liquid_source
    assert "user override: mu_g = 1.9e-05 Pa s" in fp.gas_source


def test_override_fills_missing_coolprop_property():
    with pytest.raises(ValueError, match="mu_l: CoolProp has no liquid viscosity for 'MM'"):
        make_fluid_pair("MM", 298.15)
    fp = make_fluid_pair("hexamethyldisiloxane", 298.15, overrides={"mu_l": 4.9e-4, "mu_g": 7e-6})
    assert fp.liquid == "MM" and fp.mu_l == 4.9e-4


# ---------------------------------------------------------------------------------------------
# FluidPair
# ---------------------------------------------------------------------------------------------
def _pair(**kw):
    args = dict(liquid="l", gas="g", temperature=300.0, pressure=ATM, rho_l=1000.0, mu_l=1e-3, sigma=0.07,
                rho_g=1.2, mu_g=1.8e-5, liquid_source="user", gas_source="user")
    args.update(kw)
    return FluidPair(**args)


@pytest.mark.parametrize("field", ["temperature", "pressure", "rho_l", "mu_l", "sigma", "rho_g", "mu_g"])
def test_fluidpair_rejects_non_positive(field):
    with pytest.raises(ValueError, match=f"{field} must be > 0"):
        _pair(**{field: -1.0})
    with pytest.raises(ValueError, match=f"{field} must be a finite number"):
        _pair(**{field: math.inf})


def test_fluidpair_gas_denser_than_liquid_rejected():
    with pytest.raises(ValueError, match="rho_g must be < rho_l"):
        _pair(rho_g=1500.0)


def test_fluidpair_describe_is_json_and_hashable():
    fp = make_fluid_pair("water", 293.15, ATM, gas="air")
    d = json.loads(json.dumps(fp.describe()))
    for key in ("rho_l_kg_m3", "mu_l_Pa_s", "sigma_N_m", "rho_g_kg_m3", "mu_g_Pa_s", "temperature_K",
                "pressure_Pa", "liquid_source", "gas_source", "notes"):
        assert key in d
    assert d["temperature_degC"] == pytest.approx(20.0)
    assert d["nu_l_m2_s"] == pytest.approx(fp.mu_l / fp.rho_l)
    assert hash(fp) == hash(make_fluid_pair("water", 293.15, ATM, gas="air"))


# ---------------------------------------------------------------------------------------------
# Error messages
# ---------------------------------------------------------------------------------------------
def test_unknown_name_lists_close_matches():
    with pytest.raises(ValueError, match=r"unknown liquid 'watr' \(close matches: Water.*fluid_names\(\)"):
        make_fluid_pair("watr", 293.15)
    with pytest.raises(ValueError, match=r"unknown gas 'heliun' \(close matches: Helium"):
        make_fluid_pair("water", 293.15, gas="heliun")


def test_negative_temperature():
    with pytest.raises(ValueError, match="temperature must be > 0"):
        make_fluid_pair("water", -5.0)


@pytest.mark.parametrize("T, text", [
    (250.0, r"\[273\.16, 647\.096\) K \(\[0\.01, 373\.946\) degC\) for liquid 'Water'.*got 250 K"),  # below triple pt
    (700.0, r"\[273\.16, 647\.096\) K .* for liquid 'Water'.*got 700 K \(426\.85 degC\)"),  # above critical
])
def test_coolprop_temperature_out_of_range(T, text):
    with pytest.raises(ValueError, match="temperature must be within " + text):
        make_fluid_pair("water", T)


def test_vapour_state_asked_as_liquid():
    with pytest.raises(ValueError, match=r"'Water' is not a liquid at temperature 393\.15 K \(120 degC\) "
                                         r"and pressure 101325 Pa: CoolProp finds gas"):
        make_fluid_pair("water", 393.15, ATM)
    # a named foreign gas with no pressure: 1 atm is assumed and nitrogen boils at 77.355 K
    with pytest.raises(ValueError, match="not a liquid at temperature 80 K.*101325 Pa was assumed"):
        make_fluid_pair("nitrogen", 80.0, gas="helium")


def test_gas_not_gaseous():
    # nitrogen at 70 K and 1 atm is below its boiling point (77.355 K), so it cannot be the gas
    with pytest.raises(ValueError, match="gas 'Nitrogen' is not a gas at temperature 70 K"):
        make_fluid_pair("oxygen", 70.0, ATM, gas="nitrogen")


def test_missing_user_properties_listed():
    with pytest.raises(ValueError, match="needs rho_l, mu_l and sigma in overrides; missing: mu_l, sigma"):
        make_fluid_pair("oil", 300.0, liquid_source="user", overrides={"rho_l": 900.0})
    with pytest.raises(ValueError, match="needs rho_g, mu_g in overrides, or a gas name"):
        make_fluid_pair("oil", 300.0, liquid_source="user",
                        overrides={"rho_l": 900.0, "mu_l": 0.01, "sigma": 0.02})


@pytest.mark.parametrize("kwargs, text", [
    (dict(overrides={"rho": 1.0}), "overrides: unknown property 'rho'"),
    (dict(overrides={"mu_l": -1.0}), "mu_l must be > 0"),
    (dict(gas_model="steam"), "gas_model must be one of"),
    (dict(liquid_source="book"), "liquid_source must be one of"),
    (dict(liquid_source="table"), "unknown table liquid 'water'.*is a CoolProp fluid"),
    (dict(gas="air", gas_model="vapour"), "gas_model='vapour' needs the gas to be the liquid's own vapour"),
    (dict(gas="silicone-oil-5cst"), "gas 'silicone-oil-5cst' is a table liquid"),
    (dict(pressure=0.0), "pressure must be > 0"),
    (dict(pressure=2e9), r"pressure must be <= 1e\+09 Pa for CoolProp 'Water'"),
])
def test_bad_arguments(kwargs, text):
    with pytest.raises(ValueError, match=text):
        make_fluid_pair("water", 300.0, **kwargs)


def test_vapour_model_for_table_liquid_rejected():
    with pytest.raises(ValueError, match="gas_model='vapour'.*'perfluorohexane' is a table liquid"):
        make_fluid_pair("perfluorohexane", 300.0, gas_model="vapour")


def test_a_pair_built_again_in_the_same_process_is_not_read_from_disk_and_is_the_same(monkeypatch):
    # Catches: the in-process memo of fluid pairs keyed too loosely (another temperature or gas returning the
    # first pair: wrong properties on every later chart) or not used at all (every dashboard frame reading the
    # persistent cache from disk).
    from lowgmap.physics import cache
    from lowgmap.physics.properties import fluids

    first = fluids.make_fluid_pair("water", 293.15, 101325.0, gas="air")

    def no_disk(*args, **kwargs):
        raise AssertionError("read from the persistent cache")
    monkeypatch.setattr(cache, "load", no_disk)
    again = fluids.make_fluid_pair("water", 293.15, 101325.0, gas="air")
    assert again == first
    monkeypatch.undo()
    warmer = fluids.make_fluid_pair("water", 313.15, 101325.0, gas="air")
    # IAPWS water: density falls from 998.2 to 992.2 kg/m^3 between 20 and 40 degC (from memory)
    assert warmer.rho_l < first.rho_l - 5.0
    helium = fluids.make_fluid_pair("water", 293.15, 101325.0, gas="helium")
    assert helium.rho_g < 0.2 * first.rho_g

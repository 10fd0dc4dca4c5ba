"""Units at the edges (lowgmap.app.files.units)."""
import math

import pytest
from hypothesis import given, strategies as st

from lowgmap.app.files.units import (STANDARD_PRESSURE, STANDARD_TEMPERATURE, UnitError, convert, format_quantity,
                       parse_flow, standard_to_actual_flow, to_si)


@pytest.mark.parametrize("text,kind,expected", [
    # SI definitions (BIPM SI Brochure, 9th ed.): 1 L = 1e-3 m^3, 1 min = 60 s
    ("120 mL/min", "flow", 2.0e-6),
    ("1 L/min", "flow", 1e-3 / 60),
    ("2 mm", "length", 2e-3),
    ("0.5 in", "length", 0.0127),           # 1 in = 25.4 mm exactly (international yard and pound, 1959)
    ("25 degC", "temperature", 298.15),     # ITS-90 / SI: T[K] = t[degC] + 273.15
    ("77 degF", "temperature", 298.15),     # t[degC] = (t[degF] - 32) * 5/9
    ("80 K", "temperature", 80.0),
    ("30 deg", "angle", math.pi / 6),
    ("1e-4 g0", "acceleration", 9.80665e-4),  # standard gravity 9.80665 m/s^2 (CGPM 1901)
    ("101.325 kPa", "pressure", 101325.0),
    ("1 atm", "pressure", 101325.0),        # standard atmosphere, exact by definition
    ("1 bar", "pressure", 1e5),
    ("1.0016 mPa*s", "viscosity", 1.0016e-3),
    ("1 cP", "viscosity", 1e-3),            # 1 centipoise = 1 mPa s
    ("72.74 mN/m", "surface_tension", 0.07274),
    ("5 cSt", "kinematic_viscosity", 5e-6),  # 1 cSt = 1 mm^2/s
    ("998.2 kg/m^3", "density", 998.2),
    ("5 %", "dimensionless", 0.05),
    ("0.45", "dimensionless", 0.45),
])
def test_to_si_known_conversions(text, kind, expected):
    assert to_si(text, kind, "x") == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize("text,kind,match", [
    ("2 s", "length", r"field\.a: '2 s' has units of time"),
    ("3 m", "angle", "not an angle"),
    ("120 mL/min", "temperature", "expected a temperature"),
    ("2", "length", "has no unit"),
    ("abc", "length", "cannot read"),
    ("2 furlongz", "length", "unknown unit"),
    ("5 sccm", "flow", "standard-volume flow"),
    ("nan mm", "length", "cannot read|finite"),
    ("1 m", "dimensionless", "plain number"),
])
def test_to_si_rejects_bad_text_with_field_name(text, kind, match):
    with pytest.raises(UnitError, match=match):
        to_si(text, kind, "field.a")


def test_bare_number_needs_default_unit():
    with pytest.raises(UnitError, match="no unit"):
        to_si(2.0, "length", "section.diameter")
    assert to_si(2.0, "length", "v", default_unit="mm") == pytest.approx(2e-3)


def test_booleans_are_not_numbers():
    with pytest.raises(UnitError):
        to_si(True, "length", "section.diameter", default_unit="mm")


def test_unknown_kind_is_a_programming_error():
    with pytest.raises(ValueError, match="kind must be one of"):
        to_si("1 m", "colour")


def test_sccm_at_standard_conditions_is_the_nominal_volume():
    # Definition of sccm: cm^3/min at the reference state (SEMI E12: 0 degC, 1 atm)
    q = parse_flow("100 sccm", "qg", gas=True, pressure=STANDARD_PRESSURE, temperature=STANDARD_TEMPERATURE)
    assert q == pytest.approx(100e-6 / 60, rel=1e-12)


def test_slpm_at_non_standard_pressure_and_temperature():
    # Ideal-gas law: Q = Q_std (p_std/p)(T/T_std). 1 slpm at 2 bar and 40 degC:
    # 1e-3/60 * (101325/200000) * (313.15/273.15) m^3/s (hand computation)
    expected = 1e-3 / 60 * (101325 / 200000) * (313.15 / 273.15)
    q = parse_flow("1 slpm", "qg", gas=True, pressure=2e5, temperature=313.15)
    assert q == pytest.approx(expected, rel=1e-12)
    assert q == pytest.approx(9.6803e-6, rel=1e-4)  # the same hand computation, rounded


def test_sccm_with_other_reference_conditions():
    # A meter referenced to 20 degC, 1 atm reads the volume at 20 degC: at 20 degC and 1 atm no change.
    q = standard_to_actual_flow(1e-6 / 60, 101325.0, 293.15, standard_conditions=(293.15, 101325.0))
    assert q == pytest.approx(1e-6 / 60)


def test_standard_units_rejected_for_liquid_and_without_conditions():
    with pytest.raises(UnitError, match="only valid for a gas"):
        parse_flow("5 sccm", "operating_point.liquid_flow", gas=False, pressure=1e5, temperature=300)
    with pytest.raises(UnitError, match="local pressure and temperature"):
        parse_flow("5 sccm", "operating_point.gas_flow", gas=True)
    with pytest.raises(ValueError, match="pressure must be > 0"):
        standard_to_actual_flow(1e-6, -1.0, 300.0)


def test_format_and_convert():
    assert format_quantity(2e-6, "flow", "mL/min") == "120 mL/min"
    assert convert(1e-3, "length", "mm") == pytest.approx(1.0)


@given(st.floats(min_value=1e-9, max_value=1e3, allow_nan=False), st.sampled_from(["mm", "m", "cm", "um", "in"]))
def test_length_round_trip(value, unit):
    si = to_si(f"{value!r} {unit}", "length")
    assert convert(si, "length", unit) == pytest.approx(value, rel=1e-12)


def test_a_long_text_is_refused_before_it_is_parsed():
    # issue 14: a value of 100,000 spaces made the number pattern backtrack for minutes; now the length
    # is checked first and the pattern has no trailing-space search (no timing asserted: it must not hang)
    from lowgmap.app.files.units import MAX_QUANTITY_CHARS

    with pytest.raises(UnitError, match=f"at most {MAX_QUANTITY_CHARS} characters"):
        to_si("1 " + " " * 100_000 + "x y", "length", "section.diameter")
    assert to_si("  12.7 mm  ", "length") == pytest.approx(0.0127)           # surrounding spaces still fine


def test_unit_errors_are_input_errors():
    from lowgmap.physics.validate import InputError

    with pytest.raises(InputError, match="section.diameter"):
        to_si("12.7 s", "length", "section.diameter")

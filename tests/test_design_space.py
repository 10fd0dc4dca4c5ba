"""Design space of sweeps (lowgmap.physics.studies.design_space): variable names, units, flow ranges, fluids, models.

Check values: published conditions and property data (Concus & Finn 1969 for corner flow; ideal-gas
density and IAPWS R1-76 surface tension for a fluid rebuilt by name), the unit written in
:data:`VARIABLES` itself, and the user values a fluid description carries. apply_changes, grid and
zipped are checked in tests/test_sweep.py.
"""
import math

import pytest

from lowgmap.physics.case import ModelChoice
from lowgmap.physics.models.boundary import resolve_model
from lowgmap.physics.examples import example_case, example_fluid
from lowgmap.physics.geometry.sections import Circle, WedgeChannel
from lowgmap.physics.studies.design_space import (FLUID_KEYS, VARIABLES, check_flow_range, check_key,
                                                  default_fluid_spec, fluid_from_spec, model_choices,
                                                  variable_unit)

USER_OIL = {"liquid": "oil", "temperature": 298.15, "pressure": 101325.0, "liquid_source": "user",
            "overrides": {"rho_l": 913.0, "mu_l": 4.6e-3, "sigma": 0.0197, "rho_g": 1.18, "mu_g": 1.8e-5}}


def wedge_case(contact_angle_deg=5.0, half_angle_deg=6.0):
    return example_case(WedgeChannel(math.radians(half_angle_deg), 0.04), contact_angle=math.radians(contact_angle_deg),
                        length=0.04, flow_range=(1e-8, 1e-5, 1e-9, 1e-5))


# ------------------------------------------------------------------------------------------------ check_key
def test_check_key_accepts_every_named_variable_and_the_three_patterns():
    # catches a name table and a checker that drift apart (a documented variable refused up front)
    wedge = wedge_case()
    for key in VARIABLES:
        assert check_key(key, wedge) is None
    for key in ("section.wall_length", "section.half_angle", "model.corner_separation.safety_factor",
                "constant.safety_factor"):
        assert check_key(key, wedge) is None


def test_check_key_refuses_malformed_patterns_and_foreign_fields():
    # catches a prefix-only test (``startswith("model.")``) that lets a name without its constant
    # through, so that every design of the sweep fails later instead of one error at the start
    tube = example_case()
    for bad in ("model.bubble_slug_dukler_1988", "model.a.b.c", "constant.a.b", "diameter"):
        with pytest.raises(ValueError, match="unknown sweep variable"):
            check_key(bad, tube)
    with pytest.raises(ValueError, match="no field 'wall_length'; its fields: diameter"):
        check_key("section.wall_length", tube)
    with pytest.raises(ValueError, match="half_angle can only be varied .* got a circle section"):
        check_key("half_angle", tube)
    with pytest.raises(TypeError, match="must be text"):
        check_key(3, tube)


# ------------------------------------------------------------------------------------------- variable_unit
def test_variable_unit_reads_the_unit_not_the_range():
    # catches a parser that takes the last bracket: contact_angle's text also holds "[0, 180] deg"
    assert variable_unit("contact_angle") == "rad"
    assert variable_unit("half_angle") == "rad"
    assert variable_unit("residual_acceleration") == "m/s^2"
    assert variable_unit("liquid_viscosity") == "Pa s"
    for key in ("liquid_flow", "gas_flow"):
        assert variable_unit(key) == "m^3/s"


def test_variable_unit_of_names_sections_and_constants():
    # catches a unit invented for inputs that have none (fluid names, model constants)
    assert variable_unit("liquid") == variable_unit("gas") == "-"
    assert variable_unit("model.corner_separation.safety_factor") == "-"
    assert variable_unit("constant.safety_factor") == "-"
    assert variable_unit("section.wall_length") == "m" and variable_unit("section.half_angle") == "rad"


# ----------------------------------------------------------------------------------------- check_flow_range
def test_check_flow_range_accepts_a_single_flow_and_returns_floats():
    # catches a check that refuses low == high: a degenerate envelope (one point) is documented as valid
    assert check_flow_range("ql_range", (2e-6, 2e-6)) == (2e-6, 2e-6)
    lo, hi = check_flow_range("ql_range", (1, 2))
    assert type(lo) is float and type(hi) is float


@pytest.mark.parametrize("rng, message", [
    ((2e-6, 1e-6), r"ql_range must be increasing \(low <= high\)"),
    ((0.0, 1e-6), r"ql_range\[0\] must be > 0"),
    ((1e-6, math.inf), r"ql_range\[1\] must be a finite number"),
    ((1e-6,), r"ql_range must be a pair \(low, high\) in m\^3/s"),
    (1e-6, r"ql_range must be a pair"),
])
def test_check_flow_range_errors_name_the_field(rng, message):
    # catches an error that does not say which range (Q_L or Q_G, point or envelope) is wrong
    with pytest.raises(ValueError, match=message):
        check_flow_range("ql_range", rng)


# ------------------------------------------------------------------------------------------ fluid_from_spec
def test_fluid_from_spec_caches_by_content():
    # catches a cache keyed on the dict's identity (no reuse across a grid) or on the key order
    a = fluid_from_spec(USER_OIL)
    b = fluid_from_spec(dict(reversed(list(USER_OIL.items()))))
    assert a is b
    assert a.sigma == 0.0197 and a.rho_l == 913.0 and a.temperature == 298.15      # the user values


def test_fluid_from_spec_tells_nested_overrides_apart():
    # catches a cache key that ignores the nested overrides (a second design would get the first's fluid)
    other = dict(USER_OIL, overrides=dict(USER_OIL["overrides"], sigma=0.025))
    assert fluid_from_spec(other).sigma == 0.025
    assert fluid_from_spec(USER_OIL).sigma == 0.0197


def test_default_fluid_spec_rebuilds_the_pair_by_name():
    # catches a description that drops the gas (water would come back with its own vapour) or the
    # pressure; the rebuilt pair is water and air at 20 degC, 1 atm from the property library
    spec = default_fluid_spec(example_fluid())
    assert set(spec) == set(FLUID_KEYS)
    fp = fluid_from_spec(spec)
    assert fp.gas.lower() == "air" and fp.pressure == 101325.0
    # ideal gas, rho = p M/(R T), M = 28.965 g/mol for dry air (from memory); real air differs < 0.1 %
    assert fp.rho_g == pytest.approx(101325.0 * 0.028965 / (8.314462618 * 293.15), rel=1e-3)
    # IAPWS R1-76(2014), table of values: 72.74 mN/m at 20 degC
    assert fp.sigma == pytest.approx(0.07274, abs=2e-5)


# -------------------------------------------------------------------------------------------- model_choices
def test_model_choices_keeps_the_listed_models_with_their_constants():
    # catches the defaults replacing an explicit choice, or the listed constants being lost
    case = example_case(models=[ModelChoice.of("bubble_slug_dukler_1988", {"alpha_c": 0.4})])
    got = model_choices(case)
    assert [c.name for c in got] == ["bubble_slug_dukler_1988"]
    assert dict(got[0].param_dict) == {"alpha_c": 0.4}


def test_model_choices_defaults_follow_the_concus_finn_condition():
    # Concus & Finn (1969), PNAS 63(2):292-299, doi:10.1073/pnas.63.2.292: liquid wicks along a
    # corner only when theta + alpha < 90 deg. Catches defaults returned whether or not they apply
    # (a ``constant.`` change would then reach a model that is not on the chart).
    inside = [c.name for c in model_choices(wedge_case(contact_angle_deg=83.5))]     # 83.5 + 6 < 90
    assert "corner_confinement" in inside and "corner_separation" in inside
    outside = model_choices(wedge_case(contact_angle_deg=84.5))                       # 84.5 + 6 > 90
    # no corner-flow model; what is left applies to the case (the open-channel ingestion model does apply
    # to a corner that cannot hold liquid: gas is drawn in at any flow)
    assert not any(c.name.startswith("corner_") for c in outside)
    assert all(resolve_model(c.name).applies_to(wedge_case(contact_angle_deg=84.5)) is None for c in outside)
    tube = [c.name for c in model_choices(example_case(Circle(0.01)))]
    assert tube and not any(n.startswith("corner_") for n in tube)


def test_grid_and_pairs_are_bounded_before_anything_is_built():
    # issue 14: 10**12 steps or a 10**7-design grid must fail at once with the limit named, not fill memory
    from lowgmap.physics.studies.design_space import MAX_DESIGNS, MAX_VALUES, grid, zipped
    from lowgmap.physics.validate import InputError

    big = range(MAX_VALUES)                                   # a range holds no list: nothing is allocated
    with pytest.raises(InputError, match="more than 100,000 designs"):
        grid({"length": big, "size": big})
    with pytest.raises(InputError, match="at most 10,000"):
        grid({"length": range(10 ** 12)})
    with pytest.raises(InputError, match="100,000"):
        zipped({"length": range(MAX_DESIGNS + 1)})
    assert len(grid({"length": range(400), "size": range(250)})) == MAX_DESIGNS     # the limit itself is allowed


# ------------------------------------------------------------------------------------------------ adaptive_map
def test_adaptive_map_value_at_the_current_design_equals_the_margin_table():
    """The map evaluates the current design itself (a node of the map), so its value equals the margin table's
    (point_margins on the case's chart, signed) within the sweep's margin error (5e-6, sweep module notes)
    and the surrogate error. Catches a map that only interpolates the current design between grid nodes
    (an 8x8 map once drew a design with a +-31.6 % margin on its 0 contour).
    """
    from lowgmap.physics.chart.composition import build_chart
    from lowgmap.physics.chart.margins import point_margins
    from lowgmap.physics.geometry.sections import Circle
    from lowgmap.physics.studies.design_space import adaptive_map

    case = example_case(Circle(0.01), length=1.0, g=1e-5, flow_range=(1e-7, 1e-3, 1e-7, 1e-3), point=(1e-5, 1e-5))
    pm = point_margins(build_chart(case), 1e-5, 1e-5)
    m = adaptive_map(case, "size", (0.004, 0.03), "liquid_flow", (2e-6, 5e-5), n_max=60, start=5,
                     log_x=True, log_y=True)
    assert m.current[:2] == (0.01, 1e-5)
    assert m.regime == pm.regime
    assert abs(m.current[2] - pm.symmetric_margin) < 1e-4
    assert len(m.x) <= 60


def test_adaptive_map_refines_only_cells_crossing_zero():
    """With a known zero contour (margin = length - 1), added designs lie in cells the contour crosses and
    the final cell next to the contour is smaller than the start spacing. Catches refinement of every cell
    (budget spent away from the line) or of none."""
    import numpy as np

    from lowgmap.physics.studies.design_space import adaptive_map

    case = example_case(point=(1e-5, 1e-6))
    m = adaptive_map(case, "length", (0.5, 1.7), "size", (0.005, 0.02), n_max=150, start=5,
                     evaluate=lambda ds: np.array([d["length"] - 1.1 for d in ds]))
    added = m.levels > 0
    assert added.any() and len(m.x) <= 150
    assert np.all(np.abs(m.x[added] - 1.1) <= 0.3 + 1e-12)         # within the start cells crossing 1.1
    gaps = np.abs(m.x[np.isclose(m.margin, m.x - 1.1)] - 1.1)
    assert gaps.min() < 0.3 / 4                                      # resolved below the start spacing


def test_adaptive_map_resolves_the_required_margin_contour_when_asked():
    """With margin = length - 1.1 and contours (0, 0.45), designs are added next to length 1.1 and next to 1.55
    (the required-margin contour), and only there. Catches a map that refines the zero contour only (the
    required-margin line then drawn across coarse cells, zigzagging by a start spacing) or that accepts a
    non-numeric contour."""
    import numpy as np

    from lowgmap.physics.studies.design_space import adaptive_map

    case = example_case(point=(1e-5, 1e-6))
    f = lambda ds: np.array([d["length"] - 1.1 for d in ds])       # noqa: E731
    m = adaptive_map(case, "length", (0.5, 1.7), "size", (0.005, 0.02), n_max=300, start=5, evaluate=f,
                     contours=(0.0, 0.45))
    added = m.x[m.levels > 0]
    near = np.minimum(np.abs(added - 1.1), np.abs(added - 1.55))
    assert np.all(near <= 0.3 + 1e-12)                               # within the start cells the lines cross
    for line in (1.1, 1.55):
        assert np.abs(m.x - line).min() < 0.3 / 4                      # resolved below the start spacing
    only_zero = adaptive_map(case, "length", (0.5, 1.7), "size", (0.005, 0.02), n_max=300, start=5, evaluate=f)
    assert np.abs(only_zero.x - 1.55).min() > 0.1                     # the default refines the zero contour only
    with pytest.raises(ValueError, match="contours"):
        adaptive_map(case, "length", (0.5, 1.7), "size", (0.005, 0.02), evaluate=f, contours=(float("nan"),))


def test_adaptive_map_errors():
    """Catches silent acceptance of an empty or reversed range and a bad budget."""
    from lowgmap.physics.studies.design_space import adaptive_map

    case = example_case(point=(1e-5, 1e-6))
    f = lambda ds: [0.0] * len(ds)        # noqa: E731
    with pytest.raises(ValueError, match="length"):
        adaptive_map(case, "length", (2.0, 1.0), "size", (0.005, 0.02), evaluate=f)
    with pytest.raises(ValueError, match="n_max"):
        adaptive_map(case, "length", (1.0, 2.0), "size", (0.005, 0.02), n_max=2, evaluate=f)

"""Example inputs for the docstring examples: one water/air fluid pair and one small tube case.

Written once here so that every example reads in two lines::

    >>> from lowgmap.physics.examples import example_case
    >>> case = example_case()                   # water/air, 10 mm tube, 1 m, 1e-5 m/s^2
    >>> case.section.hydraulic_diameter
    0.01

The property values are round figures for water and air near 20 °C given as user values (no
property library is called): they illustrate the API and are never used as check values.
"""
from __future__ import annotations

from lowgmap.physics.case import Case, FlowRange, ModelChoice, OperatingPoint
from lowgmap.physics.geometry.sections import Circle
from lowgmap.physics.properties.fluids import FluidPair
from lowgmap.physics.properties.wetting import Wetting

__all__ = ["example_fluid", "example_case"]


def example_fluid() -> FluidPair:
    """Water and air near 20 °C, 1 atm, as user values (ρ_L 998.2 kg/m³, μ_L 1.0 mPa s, σ 72.7 mN/m,
    ρ_G 1.2 kg/m³, μ_G 18 µPa s)."""
    return FluidPair("water", "air", 293.15, 101325.0, 998.2, 1.0e-3, 0.0727, 1.2, 1.8e-5, "user", "user")


def example_case(section=None, *, contact_angle: float = 0.0, length: float = 1.0, g: float = 1e-5,
                 flow_range: tuple[float, float, float, float] = (1e-7, 1e-3, 1e-7, 1e-3),
                 point: tuple[float, float] | None = None, models=(), **fields) -> Case:
    """A small example case (SI units).

    Parameters
    ----------
    section : Section, optional    default: a 10 mm circular tube
    contact_angle : float          static contact angle [rad]
    length : float                 conduit length [m]
    g : float                      residual acceleration [m/s^2]
    flow_range : 4 floats          chart range ql_min, ql_max, qg_min, qg_max [m^3/s]
    point : (ql, qg), optional     operating point [m^3/s]
    models : sequence of str or ModelChoice   boundary models (default: the section's defaults)
    **fields : further :class:`~lowgmap.physics.case.Case` fields (title, revision, ...)
    """
    choices = tuple(m if isinstance(m, ModelChoice) else ModelChoice.of(m) for m in models)
    return Case(example_fluid(), section if section is not None else Circle(0.01), Wetting(contact_angle),
                length, g, FlowRange(*flow_range), OperatingPoint(*point) if point else None, choices, **fields)

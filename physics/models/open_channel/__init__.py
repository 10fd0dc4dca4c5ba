r"""Flow-rate limit of open capillary channels (gas ingestion at the outlet).

An open capillary channel carries liquid along walls with one or more free surfaces held by
surface tension. Pulling more liquid through it lowers the liquid pressure, curves the free
surfaces further into the channel and narrows the flow area, which speeds the liquid up and lowers
the pressure further. Above a critical flow rate no steady surface exists: the surface collapses at
the outlet and gas is drawn into the outlet duct. This package computes that critical flow rate.

Steady one-dimensional model along the open length :math:`0 \le z \le l` (Rosendahl, Ohlhoff &
Dreyer 2004; Haake et al. 2010; Klatte et al. 2008):

.. math::

    Q = v A, \qquad
    \rho v \frac{\mathrm{d}v}{\mathrm{d}z} = -\frac{\mathrm{d}p}{\mathrm{d}z} - \frac{K \mu Q}{A^2},
    \qquad p - p_g = -\sigma\Bigl(\frac{1}{R_1} + \frac{1}{R_2}\Bigr), \qquad A = A(R_1),

(plus :math:`-\rho g_a` on the right with an axial residual acceleration ``g_axial``, see
:class:`~lowgmap.physics.models.open_channel.hydraulics.SteadyFlow`),
with the inlet fed from a reservoir at total pressure :math:`p_0`,
:math:`p(0) = p_0 - (1 + K_e)\,\rho v(0)^2/2`. :math:`K(R_1)` is the dimensionless viscous
resistance of the cross-section, from the fully developed Stokes problem solved by
:mod:`lowgmap.physics.geometry.stokes` (:math:`K = A/\bar w`, :math:`\bar w` the mean of :math:`-\nabla^2 w = 1`,
:math:`w = 0` on walls, :math:`\partial_n w = 0` on the free surfaces). Eliminating v,

.. math::

    \frac{\mathrm{d}p}{\mathrm{d}z} = -\frac{K \mu Q}{A^2 (1 - S^2)}, \qquad
    S = \frac{v}{v_c}, \quad v_c = \sqrt{\frac{A}{\rho\, \mathrm{d}A/\mathrm{d}p}},

(streamwise curvature :math:`1/R_2` neglected), so the pressure gradient is singular where the
speed index S reaches 1. The critical flow rate is the largest Q for which the surface exists
with S < 1 over the whole length; at that flow S = 1 at the outlet.

Solution: with the curvature :math:`\kappa = 1/R_1` as variable,
:math:`\mathrm{d}z/\mathrm{d}\kappa = \sigma A^2 (1 - S^2)/(K\mu Q)` integrates in closed form
over tables built once per channel (area, resistance and two cumulative integrals), so the search
for the critical flow does no mesh solve and no ODE step (see the theory manual,
physics/manual/open_channel.md). With ``streamwise_curvature=True`` the surface shape is a
boundary-value problem solved with :func:`scipy.integrate.solve_bvp` and continuation in Q.

Viscous resistance convention (also for a user-supplied ``resistance``): the viscous pressure
gradient is :math:`K \mu Q / A^2` with K dimensionless (K = 12 b/a for plates with flat surfaces).

Channels (surfaces are circular arcs in the section; pinned at the wall edges except in a corner):

* :class:`ParallelPlates` gap a, breadth b: two free surfaces spanning the gap;
* :class:`RectangularGroove` width w, depth d: one free surface across the top (a V-groove pinned
  at its top edges is a :class:`WedgeChannel`);
* :class:`WedgeChannel` half-angle α, plate length L, surface pinned at the plate edges until it
  meets the plates at the contact angle, then a free corner filament;
* :class:`CornerFilament` unbounded interior corner, free contact lines (needs an inlet radius or
  an inlet pressure below the gas pressure: it has no size of its own).

Conventions: SI units, angles in radians, pressures relative to the gas, :math:`R_1 > 0` for a
surface curved into the liquid (liquid pressure below the gas pressure). Functions of ``R1`` accept
arrays; an ``R1`` outside the channel's range gives NaN.

Modules of this package (each public name is also importable from the package itself):

=============  ==============================================================================
geometry       channel cross-sections and their flow area: :class:`OpenChannel`,
               :class:`ParallelPlates`, :class:`RectangularGroove`, :class:`WedgeChannel`,
               :class:`CornerFilament` (area, compliance, resistance as functions of R1)
tables         cross-section Stokes resistance tables and the per-channel tables of A, K and
               the cumulative integrals, with their caches
hydraulics     the steady 1-D model: entrance loss and inlet state, :func:`speed_index`,
               choking length, :func:`critical_flow_curve` (Q_crit over lengths), :data:`LIMITS`
surrogate      the wedge Stokes table over the half-angle and the critical-flow similarity curve
               (:func:`~lowgmap.physics.models.open_channel.surrogate.critical_flow_rates`), see
               :mod:`lowgmap.physics.surrogates` for the exact switch
profile        the free-surface shape along the channel: :func:`surface_profile`, and
               :func:`critical_flow_rate` (the critical flow with its surface; also with
               streamwise curvature); :func:`choking_mechanism` (speed index 1 or
               depinning of the free surface)
=============  ==============================================================================
"""
from __future__ import annotations

from lowgmap.physics.models.open_channel.geometry import (
    CornerFilament,
    OpenChannel,
    ParallelPlates,
    RectangularGroove,
    WedgeChannel,
)
from lowgmap.physics.models.open_channel.hydraulics import (
    LIMITS,
    TRANSVERSE_BOND_LIMIT,
    CriticalFlowCurve,
    critical_flow_curve,
    speed_index,
    transverse_bond_number,
)
from lowgmap.physics.models.open_channel.profile import (
    ChokingMechanism,
    CriticalFlow,
    Profile,
    choking_mechanism,
    critical_flow_rate,
    surface_profile,
)

__all__ = [
    "OpenChannel",
    "ParallelPlates",
    "RectangularGroove",
    "WedgeChannel",
    "CornerFilament",
    "Profile",
    "CriticalFlow",
    "ChokingMechanism",
    "CriticalFlowCurve",
    "speed_index",
    "surface_profile",
    "critical_flow_rate",
    "critical_flow_curve",
    "choking_mechanism",
    "LIMITS",
    "transverse_bond_number",
    "TRANSVERSE_BOND_LIMIT",
]

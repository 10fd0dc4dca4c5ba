"""Tests of lowgmap.physics.models.wicking: corner wicking fronts (Weislogel & Lichter 1998 lubrication model)."""
import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp
from scipy.sparse import diags

from lowgmap.physics.geometry.corner import flow_resistance, meniscus_area_factor
from lowgmap.physics.models.wicking import _similarity, time_to_wick, wicking_front, wicking_front_constant_inflow

A30 = math.radians(30.0)
SIGMA, MU, R0 = 0.02, 1.0e-3, 1.0e-3


def method_of_lines(case, t_eval, n=300, length=2.5):
    """Independent solve of du/dt = (1/3) d2(u^(3/2))/dz2, u = (R/R_ref)^2, by finite volumes.

    Dimensionless: sigma R_ref/(beta mu) = 1. "height": u = 1 at z = 0. "inflow": the flux
    -(1/3) d(u^(3/2))/dz = 1 at z = 0 (Q/(F R_ref^2) = 1 in these units). Dry corner at t = 0.
    """
    dz = length / n

    def rhs(_, u):
        p = np.maximum(u, 0.0) ** 1.5 / 3.0
        flux = np.zeros(n + 1)
        flux[1:n] = -(p[1:] - p[:-1]) / dz
        flux[0] = -(p[0] - 1.0 / 3.0) / (0.5 * dz) if case == "height" else 1.0
        return -(flux[1:] - flux[:-1]) / dz

    jac = diags([np.ones(n - 1), np.ones(n), np.ones(n - 1)], [-1, 0, 1])
    sol = solve_ivp(rhs, [0.0, max(t_eval)], np.zeros(n), method="BDF", t_eval=t_eval,
                    jac_sparsity=jac, rtol=1e-7, atol=1e-10)
    assert sol.success
    return (np.arange(n) + 0.5) * dz, np.sqrt(np.maximum(sol.y, 0.0))


def tip_by_extrapolation(z, H, H_in):
    """Front position: straight line through the profile where 0.05 < H/H_in < 0.25, at H = 0."""
    sel = (H > 0.05 * H_in) & (H < 0.25 * H_in)
    c = np.polyfit(z[sel], H[sel], 1)
    return -c[1] / c[0]


def test_similarity_constants_regression():
    # [calc] regression pins of our own shooting solutions (not published numbers)
    assert _similarity("height")[0] == pytest.approx(1.702110, abs=2e-6)
    assert _similarity("inflow")[0] == pytest.approx(1.632848, abs=2e-6)
    # the profiles meet their inlet conditions: f(0) = 1, and unit volume for the inflow case
    eta, f = _similarity("height")[1:]
    assert f[0] == pytest.approx(1.0, rel=1e-9) and f[-1] == pytest.approx(0.0, abs=1e-6)
    eta, f = _similarity("inflow")[1:]
    integral = np.sum(0.5 * (f[1:] ** 2 + f[:-1] ** 2) * np.diff(eta))
    assert integral == pytest.approx(1.0, rel=1e-4)   # int f^2 d(eta) = 1 (mass balance)


def test_constant_height_matches_method_of_lines():
    # similarity solution vs a direct PDE solve (method of lines), few-% requirement
    times = (0.25, 0.5, 1.0)
    z, H = method_of_lines("height", times)
    beta = flow_resistance(A30, 0.0)
    eta, f = _similarity("height")[1:]
    fs = (f > 0.05) & (f < 0.25)
    c = np.polyfit(eta[fs], f[fs], 1)
    tip_ext = -c[1] / c[0]                     # the similarity tip read the same way (~0.4 % beyond)
    for k, tau in enumerate(times):
        # physical time whose dimensionless time is tau on the length scale L = 1 m
        t_phys = tau * beta * MU / (SIGMA * R0)
        z_sim = wicking_front(t_phys, A30, 0.0, SIGMA, MU, R0)
        z_pde = tip_by_extrapolation(z, H[:, k], 1.0)
        assert z_pde == pytest.approx(z_sim, rel=0.01)
        assert z_pde == pytest.approx(tip_ext * math.sqrt(tau), rel=2e-3)
        # half-height point of the profile
        z_half = np.interp(-0.5, -H[:, k], z)
        assert z_half == pytest.approx(np.interp(-0.5, -f, eta) * math.sqrt(tau), rel=2e-3)
    # exponent of the PDE front, log-log fit over a factor 4 in time: 1/2
    zh = [np.interp(-0.5, -H[:, k], z) for k in range(3)]
    assert np.polyfit(np.log(times), np.log(zh), 1)[0] == pytest.approx(0.5, abs=5e-3)


def test_constant_inflow_matches_method_of_lines():
    times = (0.25, 0.5, 1.0)
    z, H = method_of_lines("inflow", times)
    eta, f = _similarity("inflow")[1:]
    beta = flow_resistance(A30, 0.0)
    F = meniscus_area_factor(A30, 0.0)
    for k, tau in enumerate(times):
        # dimensionless run has sigma R_ref/(beta mu) = 1 and Q/(F R_ref^2) = 1 with R_ref = L = 1:
        # pick mu and Q so that sigma/(beta mu) = 1 m/s and Q/F = 1 m^3/s, then t_phys = tau s
        mu = SIGMA / beta
        q = F * 1.0
        z_sim = wicking_front_constant_inflow(tau, A30, 0.0, SIGMA, mu, q)
        rs = tau ** 0.2                          # R_s(t) in these units
        z_pde = tip_by_extrapolation(z, H[:, k], rs * f[0])
        assert z_pde == pytest.approx(z_sim, rel=0.01)
        assert H[0, k] == pytest.approx(rs * f[0], rel=5e-3)          # inlet radius grows as t^(1/5)
    zh = [np.interp(-0.5 * rs_f0, -H[:, k], z) for k, rs_f0 in enumerate(np.array(times) ** 0.2 * f[0])]
    assert np.polyfit(np.log(times), np.log(zh), 1)[0] == pytest.approx(0.6, abs=5e-3)


def test_front_exponents_of_the_public_functions():
    t = np.logspace(-2, 2, 9)
    z = wicking_front(t, A30, 0.0, SIGMA, MU, R0)
    assert np.polyfit(np.log(t), np.log(z), 1)[0] == pytest.approx(0.5, abs=1e-12)
    zq = wicking_front_constant_inflow(t, A30, 0.0, SIGMA, MU, 1e-9)
    assert np.polyfit(np.log(t), np.log(zq), 1)[0] == pytest.approx(0.6, abs=1e-12)


def test_dimensional_scaling():
    # only sigma/mu enters; z ~ (R0 t)^(1/2); z ~ (sigma/mu)^(2/5) Q^(1/5) t^(3/5)
    z = wicking_front(2.0, A30, 0.0, SIGMA, MU, R0)
    assert wicking_front(2.0, A30, 0.0, 3 * SIGMA, 3 * MU, R0) == pytest.approx(z, rel=1e-12)
    assert wicking_front(8.0, A30, 0.0, SIGMA, MU, R0 / 4) == pytest.approx(z, rel=1e-12)
    zq = wicking_front_constant_inflow(2.0, A30, 0.0, SIGMA, MU, 1e-9)
    assert wicking_front_constant_inflow(2.0, A30, 0.0, 2 * SIGMA, 2 * MU, 1e-9) == pytest.approx(zq, rel=1e-12)
    assert wicking_front_constant_inflow(2.0, A30, 0.0, SIGMA, MU, 32e-9) == pytest.approx(2 * zq, rel=1e-12)
    # time_to_wick inverts wicking_front
    assert time_to_wick(z, A30, 0.0, SIGMA, MU, R0) == pytest.approx(2.0, rel=1e-12)


def test_trends_with_geometry():
    # a larger resistance (higher contact angle, wider corner, no-slip interface) wicks more slowly
    z0 = wicking_front(1.0, A30, 0.0, SIGMA, MU, R0)
    assert wicking_front(1.0, A30, math.radians(30), SIGMA, MU, R0) < z0
    assert wicking_front(1.0, math.radians(45), 0.0, SIGMA, MU, R0) < z0
    assert wicking_front(1.0, A30, 0.0, SIGMA, MU, R0, interface="noslip") < z0
    # arrays: a point beyond the Concus-Finn limit gives NaN
    z = wicking_front(1.0, A30, np.radians([0.0, 70.0]), SIGMA, MU, R0)
    assert np.isfinite(z[0]) and np.isnan(z[1])


def test_errors():
    with pytest.raises(ValueError, match="contact_angle"):
        wicking_front(1.0, A30, math.radians(65), SIGMA, MU, R0)
    with pytest.raises(ValueError, match="inlet_radius"):
        wicking_front(1.0, A30, 0.0, SIGMA, MU, -1e-3)
    with pytest.raises(ValueError, match="mu"):
        time_to_wick(0.1, A30, 0.0, SIGMA, 0.0, R0)
    with pytest.raises(ValueError, match="Q"):
        wicking_front_constant_inflow(1.0, A30, 0.0, SIGMA, MU, 0.0)
    with pytest.raises(ValueError, match="t must"):
        wicking_front(-1.0, A30, 0.0, SIGMA, MU, R0)
    with pytest.raises(ValueError, match="half_angle"):
        wicking_front(1.0, math.radians(95), 0.0, SIGMA, MU, R0)

"""Iverson (2000) storm response against published and independent solutions.

The model is that of docs/methods.md, "Storm response (Iverson 2000)".
"""

import math

import numpy as np
import pytest
from scipy import integrate, sparse, special
from scipy.sparse.linalg import splu

from slopescreen.hydrology import (
    iverson_response,
    storm_factor_of_safety,
    storm_minimum,
    storm_pressure_head,
)

GAMMA_W = 9.81

# R(t*) by the closed form of Iverson (2000), values computed with scipy
TABLE_R = [
    (0.1, 3.557e-7, 4e-11),
    (0.2, 1.346711e-4, 5e-11),
    (0.5, 0.0084907026, 5e-11),
    (1.0, 0.0502545417, 5e-11),
    (2.0, 0.1666309412, 5e-11),
    (5.0, 0.5057938381, 5e-11),
    (10.0, 0.9596214127, 5e-11),
    (100.0, 4.6982209500, 5e-11),
]


@pytest.mark.parametrize("t_star,expected,tol", TABLE_R)
def test_response_table(t_star, expected, tol):
    # the closed form of Iverson (2000) evaluated with scipy, to the digits of the table
    assert float(iverson_response(t_star)) == pytest.approx(expected, abs=tol)


def test_pulse_table():
    # Iverson (2000) superposition, evaluated with scipy: R(t*) - R(t* - 2) after a storm of T* = 2
    t = np.array([2.5, 3.0, 5.0, 10.0])
    got = iverson_response(t) - iverson_response(t - 2.0)
    np.testing.assert_allclose(got, [0.2183830, 0.2357273, 0.2198120, 0.1684352], atol=6e-8)


def test_response_against_quadrature():
    # R = sqrt(t*) ierfc(1/sqrt(t*)), ierfc(x) = integral_x^inf erfc(s) ds by scipy quadrature
    for t in (0.1, 0.3, 1.0, 3.0, 10.0, 50.0):
        x = 1 / math.sqrt(t)
        ierfc = integrate.quad(special.erfc, x, np.inf, epsabs=1e-15, epsrel=1e-13)[0]
        assert float(iverson_response(t)) == pytest.approx(math.sqrt(t) * ierfc, rel=1e-9, abs=1e-15)


def test_response_tiny_and_huge_times():
    assert float(iverson_response(0.0)) == 0.0
    assert float(iverson_response(1e-4)) == 0.0  # exp(-10000) underflows: the true value is < 1e-4000
    t = np.logspace(-3, 15, 400)
    r = iverson_response(t)
    assert np.isfinite(r).all() and (np.diff(r) >= 0).all()
    # large t*: R ~ sqrt(t/pi) - 1 + 1/sqrt(pi t) (series of exp and erfc, derived by hand)
    big = np.array([1e8, 1e12])
    np.testing.assert_allclose(iverson_response(big),
                               np.sqrt(big / np.pi) - 1 + 1 / np.sqrt(np.pi * big), rtol=1e-12)


def _crank_nicolson(flux_until, t_end, h=0.01, length=20.0, dt=2.5e-4):
    """u_t = u_zz on [0, L], u_z(0) = -1 while tau < flux_until, u(L) = 0 (nondimensional).

    Second-order ghost node at the flux boundary; returns a function of tau giving u(z = 1).
    """
    m = int(round(length / h))
    main = np.full(m, -2.0)
    upper = np.ones(m - 1)
    upper[0] = 2.0
    lower = np.ones(m - 1)
    a = sparse.diags([lower, main, upper], [-1, 0, 1], format="csc") / h**2
    eye = sparse.identity(m, format="csc")
    left = splu((eye - 0.5 * dt * a).tocsc())
    right = (eye + 0.5 * dt * a).tocsr()
    u = np.zeros(m)
    out = {}
    steps = int(round(t_end / dt))
    probe = int(round(1.0 / h))
    for n in range(steps):
        mid = (n + 0.5) * dt
        rhs = right @ u
        if mid < flux_until:
            rhs[0] += dt * 2.0 / h  # 0.5 dt (b^n + b^(n+1)), b = 2 g / h at the boundary node
        u = left.solve(rhs)
        out[round((n + 1) * dt, 10)] = u[probe]
    return out


def test_closed_form_against_crank_nicolson_continuous_storm():
    # independent finite-difference solution of the linear diffusion problem (Iverson 2000,
    # derivation check): t* = 4 tau with tau = D t / Z^2
    fd = _crank_nicolson(np.inf, 2.5)
    for t_star in (0.5, 1.0, 2.0, 5.0, 10.0):
        exact = float(iverson_response(t_star))
        num = fd[round(t_star / 4, 10)]
        assert abs(num - exact) < 1e-5
        if t_star >= 1:
            assert num == pytest.approx(exact, rel=5e-5)


def test_closed_form_against_crank_nicolson_pulse():
    # storm of T* = 2 (tau = 0.5), then no flux: superposition R(t*) - R(t* - T*)
    fd = _crank_nicolson(0.5, 2.5)
    for t_star in (1.0, 2.5, 3.0, 5.0, 10.0):
        exact = float(iverson_response(t_star) - iverson_response(max(t_star - 2.0, 0.0)))
        num = fd[round(t_star / 4, 10)]
        assert num == pytest.approx(exact, rel=5e-5, abs=1e-5)


def test_dimensional_example():
    # Iverson (2000) evaluated by hand: alpha 35, D0 1e-4, Z 1, I/K 0.5, t = 12 h
    alpha, d0, z, t = 35.0, 1e-4, 1.0, 12 * 3600.0
    d_hat = 4 * d0 * math.cos(math.radians(alpha)) ** 2
    assert d_hat == pytest.approx(2.6840e-4, rel=1e-4)
    assert z**2 / d_hat == pytest.approx(3725.7, abs=0.05)
    t_star = t / (z**2 / d_hat)
    assert t_star == pytest.approx(11.595, abs=5e-4)
    assert float(iverson_response(t_star)) == pytest.approx(1.08450, abs=5e-5)
    # the package's head, water table at Z so beta (Z - d) = 0: delta psi = 0.5422 m
    psi = storm_pressure_head(z, t, slope_deg=alpha, water_table_depth_m=z,
                              intensity_m_per_s=5e-6, conductivity_m_per_s=1e-5,
                              diffusivity_m2_per_s=d0, duration_s=2 * t)
    assert float(psi) == pytest.approx(0.5422, abs=5e-5)


STORM = dict(water_table_depth_m=1.5, intensity_m_per_s=8e-6, conductivity_m_per_s=1e-5,
             diffusivity_m2_per_s=5e-5, cohesion_kpa=3.0, root_cohesion_kpa=0.0,
             friction_deg=36.0, unit_weight_kn_m3=19.0)


def test_least_fs_comes_after_the_storm_at_the_head_peak():
    # docs/methods.md, "Storm response (Iverson 2000)": the peak comes after rainfall stops;
    # checked against a dense time grid
    slope, z, duration = 38.0, 1.5, 3 * 3600.0
    res = storm_minimum(slope, soil_depth_m=z, duration_s=duration, n_depths=1, **STORM)
    assert float(res.time_s) > duration
    times = np.linspace(0, 6 * float(res.time_s), 60001)
    storm = {k: v for k, v in STORM.items() if k not in ("cohesion_kpa", "root_cohesion_kpa",
                                                         "friction_deg", "unit_weight_kn_m3")}
    psi = storm_pressure_head(z, times, slope_deg=slope, duration_s=duration, **storm)
    assert float(res.time_s) == pytest.approx(times[np.argmax(psi)], abs=2 * (times[1] - times[0]))
    fs_grid = storm_factor_of_safety(z, times, slope_deg=slope, duration_s=duration, **STORM)
    assert float(res.fs) <= float(fs_grid.min()) + 1e-6
    assert float(res.fs) == pytest.approx(float(fs_grid.min()), abs=1e-6)


def test_cap_binds_for_a_long_storm():
    # docs/methods.md, "Storm response (Iverson 2000)": psi <= beta Z; a long storm on a
    # shallow water table reaches the cap
    slope, z = 35.0, 1.0
    res = storm_minimum(slope, soil_depth_m=z, duration_s=30 * 86400.0, n_depths=1,
                        **{**STORM, "water_table_depth_m": 0.3})
    assert bool(res.cap_bound)
    a, phi = math.radians(slope), math.radians(STORM["friction_deg"])
    beta = math.cos(a) ** 2
    # Iverson's (2000) FS with psi = beta Z, written out here
    fs_cap = (math.tan(phi) / math.tan(a) + (STORM["cohesion_kpa"] - beta * z * GAMMA_W * math.tan(phi))
              / (STORM["unit_weight_kn_m3"] * z * math.sin(a) * math.cos(a)))
    assert float(res.fs) == pytest.approx(fs_cap, rel=1e-6)
    # reported time: the first at which the head reaches the cap
    storm = {k: STORM[k] for k in ("intensity_m_per_s", "conductivity_m_per_s",
                                   "diffusivity_m2_per_s")}
    t = float(res.time_s)
    head = storm_pressure_head(z, np.array([0.999 * t, 1.001 * t]), slope_deg=slope,
                               water_table_depth_m=0.3, duration_s=30 * 86400.0, **storm)
    assert head[0] < beta * z and head[1] == pytest.approx(beta * z, rel=1e-12)


def test_peak_time_against_root_finding():
    # the post-storm peak of R(t*) - R(t* - T*) is where dR/dt* = exp(-1/t)/(2 sqrt(pi t)) is
    # equal at t* and t* - T* (derivative of the closed form); root found here with brentq
    from scipy.optimize import brentq

    from slopescreen._kernels.iverson import _peak_star

    def log_rate(t):
        return -1.0 / t - 0.5 * math.log(t)

    for storm in np.logspace(-2, 6, 33):
        lo = max(2.0 - storm, 0.0) + 1e-300
        s = brentq(lambda s: log_rate(s + storm) - log_rate(s), lo, 2.0, xtol=1e-300, rtol=1e-15)
        assert _peak_star(storm) == pytest.approx(storm + s, rel=1e-12)
    assert _peak_star(2.0) == pytest.approx(3.3016, abs=1e-4)  # near t* = 3 (Iverson 2000)

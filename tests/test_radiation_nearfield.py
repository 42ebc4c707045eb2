"""Near field on screens: uniform motion (exact), far-field limit, drift invariance, bad input."""

import numpy as np
import pytest
from scipy.special import k0, k1

from lwrad.constants import c, e, epsilon_0, m_e, omega_to_photon_energy
from lwrad.errors import InputError
from lwrad.ideal import planar_undulator, uniform_line
from lwrad.observers import AngularGrid, Screen
from lwrad.radiation import radiate
from lwrad.trajectory import Trajectory


@pytest.mark.parametrize("gamma", [10.0, 1000.0])
def test_uniform_motion_k1(gamma):
    """|Ẽx| = q/(4πε0) · 2/(b v) · a K1(a), |Ẽz| = q/(4πε0) · 2/(b v) · (a/γ) K0(a), a = ωb/(γv).

    The Fourier transform of a uniformly moving charge's field (Jackson 3rd ed. 11.152 /
    13.3 / 15.1, with e^{+iωt}). The segment handed over is only 0.5 m long and ends 0.5 m
    before the point of closest approach: the result is exact only because both ends
    are continued by their straight lines.
    """
    energy = gamma * m_e * c**2 / e
    v = np.sqrt(1 - 1 / gamma**2) * c
    seg = uniform_line(energy, [0, 0, -1.0], [0, 0, 1], 0.5 / v, n_samples=11)
    b = 1e-3
    a = np.array([0.1, 0.5, 1.0, 2.0])
    res = radiate(seg, Screen(0.0, b, 0.0), omega_to_photon_energy(a * gamma * v / b))
    unit = e / (4 * np.pi * epsilon_0) * 2 / (b * v)
    # measured ≤ 1e-5; tolerance 1e-4 (the sampling tolerance)
    np.testing.assert_allclose(np.abs(res.field[:, 0, 0, 0]), unit * a * k1(a), rtol=1e-4)
    np.testing.assert_allclose(np.abs(res.field[:, 0, 0, 2]), unit * a / gamma * k0(a), rtol=1e-4)
    assert np.abs(res.field[:, 0, 0, 1]).max() < 1e-12 * unit


def test_without_tails_the_cut_matters():
    gamma = 10.0
    energy = gamma * m_e * c**2 / e
    v = np.sqrt(1 - 1 / gamma**2) * c
    seg = uniform_line(energy, [0, 0, -1.0], [0, 0, 1], 0.5 / v, n_samples=11)
    b = 1e-3
    en = omega_to_photon_energy(gamma * v / b)
    with_t = radiate(seg, Screen(0.0, b, 0.0), en).field[0, 0, 0, 0]
    without = radiate(seg, Screen(0.0, b, 0.0), en, tails=False).field[0, 0, 0, 0]
    assert abs(with_t - without) > 0.5 * abs(with_t)


def _with_drifts(traj, length):
    """The trajectory continued by ``length`` m of field-free drift at both ends."""
    n = 200
    v0 = traj.beta[0] * c
    v1 = traj.beta[-1] * c
    tau = np.linspace(0, length / np.linalg.norm(v0), n + 1)[1:]
    t_pre = traj.t[0] - tau[::-1]
    t_post = traj.t[-1] + tau
    r_pre = traj.r[0] + (t_pre - traj.t[0])[:, None] * v0
    r_post = traj.r[-1] + (t_post - traj.t[-1])[:, None] * v1
    t = np.concatenate([t_pre, traj.t, t_post])
    r = np.concatenate([r_pre, traj.r, r_post])
    beta = np.concatenate(
        [np.repeat(traj.beta[:1], n, 0), traj.beta, np.repeat(traj.beta[-1:], n, 0)]
    )
    bdot = np.concatenate([np.zeros((n, 3)), traj.beta_dot, np.zeros((n, 3))])
    gamma = np.concatenate([np.full(n, traj.gamma[0]), traj.gamma, np.full(n, traj.gamma[-1])])
    return Trajectory(t, r, beta, bdot, traj.charge, traj.mass, gamma=gamma)


def test_drift_invariance_at_20m():
    """Adding 2 m of drift to both ends leaves a 20 m screen result unchanged (issue 5: 1e-3)."""
    und = planar_undulator(2.5e9, 0.025, 10, 1.4, samples_per_period=64)
    longer = _with_drifts(und, 2.0)
    g = und.gamma[0]
    x = np.array([-0.4, 0.3, 0.9]) * 20.0 / g
    screen = Screen(25.0, x, [0.2 * 20 / g])
    energies = np.linspace(900.0, 1300.0, 5)
    a = radiate(und, screen, energies).field
    b = radiate(longer, screen, energies).field
    peak = np.abs(a).max()
    assert np.abs(a - b).max() / peak < 1e-3  # measured ~1e-5


def test_near_field_at_long_distance_equals_far_field():
    """A short, low-γ source (Fresnel number L²/(λD) ≈ 1e-4 at 200 m): R·Ẽ → far field."""
    gamma = 20.0
    energy = gamma * m_e * c**2 / e
    und = planar_undulator(energy, 0.01, 2, 1.0, samples_per_period=64)
    distance = 200.0
    lam = 0.01 * 1.5 / (2 * gamma**2)
    en = omega_to_photon_energy(2 * np.pi * c / lam * np.array([0.9, 1.0, 1.1]))
    theta = np.array([0.3, 0.7]) / gamma
    far = radiate(und, AngularGrid(theta, 0.2 / gamma), en)
    z_c = 0.5 * (und.r[0, 2] + und.r[-1, 2])
    screen = Screen(z_c + distance, distance * theta, distance * 0.2 / gamma)
    near = radiate(und, screen, en)
    pts = screen.points() - np.array([0, 0, z_c])
    rr = np.linalg.norm(pts, axis=1).reshape(screen.shape)
    got = np.abs(near.field) * rr[None, :, :, None]
    ref = np.abs(far.field)
    # differences O(L/D, L²/(λD)) ≈ 1e-4; tolerance 1e-3 of the peak
    assert np.abs(got - ref).max() / ref.max() < 1e-3


def test_bad_input():
    und = planar_undulator(2.5e9, 0.025, 4, 1.4, samples_per_period=16)
    with pytest.raises(InputError):
        radiate(und, AngularGrid(0.0, 0.0), [0.0, 100.0])  # photon energy ≤ 0
    with pytest.raises(InputError):
        radiate(und, AngularGrid(0.0, 0.0), -5.0)
    with pytest.raises(InputError):
        radiate(und, Screen(0.05, 0.0, 0.0), 100.0)  # observer inside the path
    with pytest.raises(InputError):
        radiate(und, AngularGrid([], 0.0), 100.0)  # empty grid
    with pytest.raises(InputError):
        radiate(und, AngularGrid(0.0, 0.0), [])  # no energies
    with pytest.raises(InputError):
        radiate("not a path", AngularGrid(0.0, 0.0), 100.0)
    # a pixel on the straight continuation of the path: the field there is singular
    line = uniform_line(1e9, [0, 0, -1.0], [0, 0, 1], 1e-9, n_samples=5)
    with pytest.raises(InputError):
        radiate(line, Screen(5.0, 0.0, 0.0), 1.0)


def _thz_arc():
    """γ = 20 electron on a 1 m radius arc of ±0.3 rad; pixel 3 m downstream, 1 cm above."""
    from lwrad.ideal import circular_arc

    gamma = 20.0
    arc = circular_arc(gamma * m_e * c**2 / e, 1.0, 0.3, n_samples=2001)
    omega_c = 1.5 * gamma**3 * c / 1.0  # critical frequency (X-ray Data Booklet 2.1)
    return arc, omega_c, Screen(3.0, 0.0, 0.01)


def test_parseval_time_vs_frequency_domain():
    """∫|E|² dt = (1/π) ∫_0^∞ |Ẽ|² dω (Parseval, e^{+iωt} convention, real E).

    Time side: lwrad.timedomain.fields (Liénard–Wiechert, straight continuation) on a
    window of the pulse ±100 %; frequency side: the direct radiation integral with tails
    (path cut inside the field: edge radiation included on both sides), ω up to 20 ωc
    where the spectrum has fallen by e^-40. Measured agreement 2e-5; tolerance 2e-4
    (trapezoid in ω over the edge-radiation fringes, 20001 points).
    """
    from scipy.integrate import trapezoid

    from lwrad.timedomain import fields, observer_time_grid

    arc, omega_c, screen = _thz_arc()
    x = screen.points()[0]
    t = observer_time_grid(
        arc, x, float(omega_to_photon_energy(20 * omega_c)), oversampling=4, padding=1.0
    )
    field, _ = fields(arc, x[None, :], t)
    energy_time = trapezoid(np.sum(field[:, 0] ** 2, axis=1), t)
    omega = np.linspace(1e-4 * omega_c, 20 * omega_c, 20001)
    res = radiate(arc, screen, omega_to_photon_energy(omega))
    energy_freq = trapezoid(np.sum(np.abs(res.field[:, 0, 0]) ** 2, axis=1), omega) / np.pi
    assert energy_freq / energy_time - 1 == pytest.approx(0.0, abs=2e-4)


def test_fft_route_matches_direct_integral():
    """method="fft" (time-domain fields, Fourier transformed) against the direct integral.

    Above ω ≈ 1/window the two independent routes agree to ~1e-5 of the peak
    (tolerance 1e-4); below, the FFT window cuts the slowly decaying velocity field.
    """
    arc, omega_c, screen = _thz_arc()
    en = omega_to_photon_energy(np.array([0.3, 1.0, 2.0, 4.0]) * omega_c)
    direct = radiate(arc, screen, en).field
    via_fft = radiate(arc, screen, en, method="fft").field
    assert np.abs(via_fft - direct).max() / np.abs(direct).max() < 1e-4
    with pytest.raises(InputError):
        radiate(arc, AngularGrid(0.0, 0.0), en, method="fft")

"""Ideal analytic trajectories: exact paths for validation, benchmarks and demos.

These are the textbook idealisations the handbook formulas assume, built
kinematically (no tracking) so that a comparison tests the radiation engine
alone:

* :func:`planar_undulator` — β_x(z) = (K/γ) cos(k_u z), |β| constant, over
  ``n_periods`` whole periods; the field ∝ sin(k_u z) vanishes at both ends,
  so the path continues on straight lines (the mean direction is +z).
* :func:`helical_undulator` — β_x = (K/γ) cos(k_u z), β_y = ±(K/γ) sin(k_u z).
* :func:`circular_arc` — uniform circular motion in the x–z plane, tangent to
  +z at t = 0.
* :func:`uniform_line` — uniform motion.

Time along the planar undulator, t(z) = ∫ dz/(c β_z), and x(z) = ∫ β_x/β_z dz
have no elementary closed form; they are integrated with 8-point
Gauss–Legendre per sample interval, exact to rounding for these smooth
integrands at the default sampling.
"""

from __future__ import annotations

import numpy as np

from lwrad.constants import c, e, gamma_from_energy, m_e
from lwrad.errors import InputError
from lwrad.trajectory import Trajectory

__all__ = ["planar_undulator", "helical_undulator", "circular_arc", "uniform_line"]

_GL_NODES, _GL_WEIGHTS = np.polynomial.legendre.leggauss(8)


def _cumulative_gauss(func, z):
    """∫_{z[0]}^{z} func dz at every sample, 8-point Gauss–Legendre per interval."""
    a, b = z[:-1], z[1:]
    half = 0.5 * (b - a)
    mid = 0.5 * (b + a)
    nodes = mid[:, None] + half[:, None] * _GL_NODES[None, :]
    pieces = half * (func(nodes) @ _GL_WEIGHTS)
    return np.concatenate(([0.0], np.cumsum(pieces)))


def _gamma_beta(energy, mass):
    gamma = float(gamma_from_energy(energy, mass))
    if not np.isfinite(gamma) or gamma <= 1.0:
        raise InputError(f"energy {energy!r} eV is not above the rest energy", location="energy")
    inv_g2 = 1.0 / gamma**2
    return gamma, np.sqrt(1.0 - inv_g2)


def _check_positive(**values):
    for name, value in values.items():
        if not (np.isfinite(value) and value > 0):
            raise InputError(f"{name} must be positive and finite, got {value!r}", location=name)


def planar_undulator(
    energy: float,
    period: float,
    n_periods: int,
    K: float,
    *,
    samples_per_period: int = 64,
    charge: float = -e,
    mass: float = m_e,
) -> Trajectory:
    """Exact path through an ideal planar undulator (deflection in x).

    Parameters
    ----------
    energy : float
        Total particle energy, eV.
    period : float
        Undulator period λ_u, m.
    n_periods : int
        Number of whole periods.
    K : float
        Deflection parameter; the peak angle is K/γ (X-ray Data Booklet sec. 2.1).
    samples_per_period : int
        Samples per period (uniform in z).
    charge, mass : float
        C and kg (default: electron).

    Returns
    -------
    Trajectory
        z from 0 to ``n_periods * period``; t = 0 at z = 0.
    """
    _check_positive(period=period, K=K, n_periods=n_periods, samples_per_period=samples_per_period)
    gamma, beta = _gamma_beta(energy, mass)
    if K / gamma >= beta:
        raise InputError("K/γ must be below β", location="K")
    ku = 2 * np.pi / period
    n = int(n_periods) * int(samples_per_period) + 1
    z = np.linspace(0.0, n_periods * period, n)
    amp = K / gamma

    def beta_x(zz):
        return amp * np.cos(ku * zz)

    def beta_z(zz):
        bx = beta_x(zz)
        return np.sqrt((beta - bx) * (beta + bx))

    t = _cumulative_gauss(lambda zz: 1.0 / (c * beta_z(zz)), z)
    x = _cumulative_gauss(lambda zz: beta_x(zz) / beta_z(zz), z)
    bx, bz = beta_x(z), beta_z(z)
    bdx = -amp * ku * np.sin(ku * z) * c * bz
    bdz = -bx * bdx / bz
    r = np.stack([x, np.zeros(n), z], axis=1)
    b = np.stack([bx, np.zeros(n), bz], axis=1)
    bd = np.stack([bdx, np.zeros(n), bdz], axis=1)
    return Trajectory(
        t, r, b, bd, charge, mass, gamma=np.full(n, gamma), source="ideal planar undulator"
    )


def helical_undulator(
    energy: float,
    period: float,
    n_periods: int,
    K: float,
    *,
    handedness: int = +1,
    samples_per_period: int = 64,
    charge: float = -e,
    mass: float = m_e,
) -> Trajectory:
    """Exact path in an ideal helical undulator.

    The transverse velocity rotates as β_x = (K/γ) cos(k_u z),
    β_y = handedness·(K/γ) sin(k_u z): for ``handedness=+1`` it turns
    counter-clockwise from +x to +y, seen looking along +z (the direction of
    flight). Speed along z is constant, so t(z) is linear.
    """
    _check_positive(period=period, K=K, n_periods=n_periods, samples_per_period=samples_per_period)
    if handedness not in (+1, -1):
        raise InputError("handedness must be +1 or -1", location="handedness")
    gamma, beta = _gamma_beta(energy, mass)
    amp = K / gamma
    if amp >= beta:
        raise InputError("K/γ must be below β", location="K")
    ku = 2 * np.pi / period
    n = int(n_periods) * int(samples_per_period) + 1
    z = np.linspace(0.0, n_periods * period, n)
    bz = np.sqrt((beta - amp) * (beta + amp))
    t = z / (c * bz)
    ph = ku * z
    s = float(handedness)
    r = np.stack(
        [amp / (ku * bz) * np.sin(ph), -s * amp / (ku * bz) * (np.cos(ph) - 1.0), z], axis=1
    )
    b = np.stack([amp * np.cos(ph), s * amp * np.sin(ph), np.full(n, bz)], axis=1)
    w = ku * c * bz
    bd = np.stack([-amp * w * np.sin(ph), s * amp * w * np.cos(ph), np.zeros(n)], axis=1)
    return Trajectory(
        t, r, b, bd, charge, mass, gamma=np.full(n, gamma), source="ideal helical undulator"
    )


def circular_arc(
    energy: float,
    radius: float,
    half_angle: float,
    *,
    n_samples: int = 4001,
    bend_to: int = -1,
    charge: float = -e,
    mass: float = m_e,
) -> Trajectory:
    """Uniform circular motion in the x–z plane, tangent to +z at t = 0, through the origin.

    Parameters
    ----------
    energy : float
        Total energy, eV.
    radius : float
        Bending radius ρ, m.
    half_angle : float
        The arc spans deflection angles [−half_angle, +half_angle], rad.
    bend_to : {-1, +1}
        The centre of curvature lies at x = bend_to·ρ.
    """
    _check_positive(radius=radius, half_angle=half_angle)
    if bend_to not in (+1, -1):
        raise InputError("bend_to must be +1 or -1", location="bend_to")
    gamma, beta = _gamma_beta(energy, mass)
    omega = beta * c / radius
    t = np.linspace(-half_angle / omega, half_angle / omega, int(n_samples))
    ph = omega * t
    s = float(bend_to)
    r = np.stack([s * radius * (1.0 - np.cos(ph)), np.zeros_like(t), radius * np.sin(ph)], axis=1)
    b = beta * np.stack([s * np.sin(ph), np.zeros_like(t), np.cos(ph)], axis=1)
    bd = beta * omega * np.stack([s * np.cos(ph), np.zeros_like(t), -np.sin(ph)], axis=1)
    return Trajectory(
        t, r, b, bd, charge, mass, gamma=np.full(t.size, gamma), source="ideal circular arc"
    )


def uniform_line(
    energy: float,
    start,
    direction,
    duration: float,
    *,
    n_samples: int = 101,
    charge: float = -e,
    mass: float = m_e,
) -> Trajectory:
    """Uniform motion from ``start`` (m) along ``direction`` for ``duration`` s, starting at t = 0."""
    _check_positive(duration=duration)
    gamma, beta = _gamma_beta(energy, mass)
    d = np.asarray(direction, dtype=float)
    norm = np.linalg.norm(d)
    if d.shape != (3,) or not norm > 0:
        raise InputError("direction must be a non-zero 3-vector", location="direction")
    d = d / norm
    t = np.linspace(0.0, duration, int(n_samples))
    r = np.asarray(start, dtype=float)[None, :] + (beta * c * t)[:, None] * d[None, :]
    b = np.broadcast_to(beta * d, (t.size, 3))
    return Trajectory(
        t,
        r,
        b,
        np.zeros((t.size, 3)),
        charge,
        mass,
        gamma=np.full(t.size, gamma),
        source="ideal uniform line",
    )

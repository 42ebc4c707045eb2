"""Tracking: the path of a charged particle through static magnetic fields.

Equations
---------
In a static magnetic field the Lorentz force q v × B does no work, so γ and
|p| are constants of the motion (Jackson 3rd ed. sec. 12.1) and only the
direction u = β/|β| changes: du/ds = (q/p) u × B along the path length s.
lwrad integrates with z as the independent variable (so that hard edges,
map ends and the output grid are simply positions along z):

    dx/dz = u_x/u_z,   dy/dz = u_y/u_z,
    du_x/dz = (q/p) (u_y B_z − u_z B_y)/u_z,   du_y/dz = (q/p) (u_z B_x − u_x B_z)/u_z,
    d(cτ)/dz = (1 − β u_z)/(β u_z),   1 − β u_z = (1 − β) + β (u_x² + u_y²)/(1 + u_z),

with u_z = sqrt(1 − u_x² − u_y²). Norm preservation: u_z is computed from
u_x and u_y, so |u| = 1 and |p| = γ m c |β| holds to rounding at every step,
whatever the integrator's truncation error. The time is carried as the
slippage τ = t − z/c, which is tiny compared with t and is integrated without
the cancellation of 1 − β u_z, so the radiation phase ω(t − z/c) keeps its
digits even for γ ~ 1e5.

Integrator: the explicit Runge–Kutta method of order 8(5,3) of Dormand and
Prince (scipy.integrate DOP853) with error control; the relative tolerance
``rtol`` applies to every component, and the absolute tolerances are
``rtol`` times the natural scales (L/γ for x and y, 1/γ for angles, the total
slippage for cτ). The integration stops at every magnet breakpoint (hard
edges, map ends), so no step straddles a discontinuity: inside a hard-edge
dipole the integrator follows an exact circle to its tolerance.

Output
------
A :class:`~lwrad.trajectory.Trajectory` sampled on a uniform grid in z from
``z_start`` to ``z_end`` (both included). The default density is 64 samples
per undulator period for magnets with a period, else 16 γ samples per radian
of bend in the strongest field found along the axis (so that a bend's
characteristic angle 1/γ is resolved by 16 samples; at the critical frequency
the radiation phase then advances by 3/64 rad per sample). Both are
adjustable; given both, the finer wins. β is the tracked direction times the
exact β(γ); ``gamma`` is passed exactly; β̇ is the Lorentz force
q/(γ m) β × B at each sample (not a difference quotient); t is zero where a
particle moving at the same speed along z would pass z = 0.

A particle that the field turns through 90° (β_z → 0, precisely u_z < 1e-4)
would run backwards in z: :class:`~lwrad.errors.InputError`.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.integrate import solve_ivp

from lwrad.constants import c, e, one_minus_beta_from_gamma, particle_properties
from lwrad.errors import ConvergenceError, InputError
from lwrad.magnets.base import Magnet, check_finite, check_positive
from lwrad.trajectory import Trajectory

__all__ = [
    "track",
    "TrackingInfo",
    "DEFAULT_SAMPLES_PER_PERIOD",
    "DEFAULT_SAMPLES_PER_RADIAN_PER_GAMMA",
]

#: default output density for magnets with a period
DEFAULT_SAMPLES_PER_PERIOD = 64
#: default output density of bends: this many samples per radian, times γ
DEFAULT_SAMPLES_PER_RADIAN_PER_GAMMA = 16
#: default relative tolerance of the integrator
DEFAULT_RTOL = 1e-12
# below this u_z the particle is taken as turned back (89.994°)
_UZ_MIN = 1e-4
# axis probes used to find the strongest field for the default bend sampling
_N_FIELD_PROBES = 20001
# output samples of a field-free drift
_DRIFT_SAMPLES = 101


class TrackingInfo(dict):
    """Diagnostics of a tracking run: ``n_field_evaluations``, ``rtol``,
    ``n_samples``, ``dz`` (m), ``momentum`` (kg m/s), ``gamma``, ``segments``."""


class _TurnedBack(Exception):
    pass


def _field_peak_on_path(magnet, x0, y0, z0, z1):
    z = np.linspace(z0, z1, _N_FIELD_PROBES)
    extra = [b for b in magnet.breakpoints if z0 <= b <= z1]
    if extra:
        z = np.union1d(z, np.concatenate([extra, np.nextafter(extra, -np.inf)]))
    b = magnet.field(np.full_like(z, x0), np.full_like(z, y0), z)
    # the field transverse to the axis is what bends a forward-moving particle
    return float(np.max(np.hypot(b[:, 0], b[:, 1])))


def track(
    magnet: Magnet,
    energy: float,
    *,
    particle="electron",
    x0: float = 0.0,
    y0: float = 0.0,
    xp0: float = 0.0,
    yp0: float = 0.0,
    z_start: float | None = None,
    z_end: float | None = None,
    samples_per_period: float | None = None,
    samples_per_radian: float | None = None,
    n_samples: int | None = None,
    rtol: float = DEFAULT_RTOL,
    max_samples: int = 20_000_000,
    return_info: bool = False,
):
    """Track a particle through a static magnetic field.

    Parameters
    ----------
    magnet : Magnet
        The field (any model of :mod:`lwrad.magnets`).
    energy : float
        Total energy of the particle (rest energy included), eV.
    particle : str or (float, float), optional
        "electron", "positron", "proton", …, an ion "ion:Z:A", or
        (charge C, mass kg); see :func:`lwrad.constants.particle_properties`.
    x0, y0 : float, optional
        Transverse position at ``z_start``, m.
    xp0, yp0 : float, optional
        Initial slopes dx/dz and dy/dz, rad.
    z_start, z_end : float, optional
        Where to start and stop, m. Default: the magnet's ``z_range``.
    samples_per_period : float, optional
        Output samples per undulator period (default 64 for magnets with a period).
    samples_per_radian : float, optional
        Output samples per radian of bend in the strongest field on the axis
        (default 16 γ for magnets without a period).
    n_samples : int, optional
        Number of output samples from ``z_start`` to ``z_end``; overrides the
        two densities (used to compare runs on one grid).
    rtol : float, optional
        Relative tolerance of the integrator, in [1e-13, 1e-4]; default 1e-12.
    max_samples : int, optional
        Refuse to make more output samples than this.
    return_info : bool, optional
        Also return a :class:`TrackingInfo` with the integrator's figures.

    Returns
    -------
    Trajectory
        Sampled uniformly in z (see the module docstring), with exact γ and β̇.
    TrackingInfo
        Only with ``return_info=True``.

    Raises
    ------
    InputError
        Bad arguments; an energy at or below the rest energy; a particle that
        the field turns backwards; a particle that leaves a field map.
    ConvergenceError
        The integrator could not reach the tolerance.

    Notes
    -----
    Equations, tolerances and sampling: :mod:`lwrad.tracking`.
    """
    if not isinstance(magnet, Magnet):
        raise InputError(
            f"magnet must be an lwrad magnet, got {type(magnet).__name__}", location="magnet"
        )
    charge, mass = particle_properties(particle)
    energy = check_positive("energy", energy)
    rest = mass * c * c / e
    if energy <= rest:
        raise InputError(
            f"energy {energy:.6g} eV is the total energy and must exceed the rest energy {rest:.6g} eV",
            location="energy",
        )
    gamma = energy / rest
    one_minus_beta = float(one_minus_beta_from_gamma(gamma))
    beta = 1.0 - one_minus_beta
    momentum = gamma * mass * beta * c
    k = charge / momentum  # 1/(T m)
    x0, y0 = check_finite("x0", x0), check_finite("y0", y0)
    xp0, yp0 = check_finite("xp0", xp0), check_finite("yp0", yp0)
    lo, hi = magnet.z_range
    z0 = lo if z_start is None else check_finite("z_start", z_start)
    z1 = hi if z_end is None else check_finite("z_end", z_end)
    if not z1 > z0:
        raise InputError(
            f"z_end ({z1!r} m) must be greater than z_start ({z0!r} m)", location="z_end"
        )
    rtol = check_positive("rtol", rtol)
    if not 1e-13 <= rtol <= 1e-4:
        raise InputError(f"rtol must lie in [1e-13, 1e-4], got {rtol!r}", location="rtol")

    # -- output grid --------------------------------------------------------------
    length = z1 - z0
    steps = []
    if n_samples is None:
        if samples_per_period is not None:
            spp = check_positive("samples_per_period", samples_per_period)
            if magnet.period is None:
                raise InputError(
                    "samples_per_period needs a magnet with a period; use samples_per_radian",
                    location="samples_per_period",
                )
            steps.append(magnet.period / spp)
        elif magnet.period is not None and samples_per_radian is None:
            steps.append(magnet.period / DEFAULT_SAMPLES_PER_PERIOD)
        if samples_per_radian is not None or magnet.period is None:
            spr = (
                DEFAULT_SAMPLES_PER_RADIAN_PER_GAMMA * gamma
                if samples_per_radian is None
                else check_positive("samples_per_radian", samples_per_radian)
            )
            b_peak = _field_peak_on_path(magnet, x0, y0, z0, z1)
            if b_peak > 0:
                steps.append(momentum / (abs(charge) * b_peak) / spr)
    if n_samples is not None:
        try:
            requested = int(n_samples)
        except (TypeError, ValueError):
            raise InputError(
                f"n_samples must be an integer, got {n_samples!r}", location="n_samples"
            ) from None
        if requested != n_samples or requested < 2:
            raise InputError(
                f"n_samples must be an integer >= 2, got {n_samples!r}", location="n_samples"
            )
        n_samples = requested
    elif not steps:
        n_samples = _DRIFT_SAMPLES
    else:
        n_samples = max(int(math.ceil(length / min(steps))) + 1, 2)
    if n_samples > max_samples:
        raise InputError(
            f"the requested sampling needs {n_samples} samples (more than max_samples={max_samples}); "
            "lower samples_per_period / samples_per_radian or shorten [z_start, z_end]",
        )
    z_grid = np.linspace(z0, z1, n_samples)

    # -- integration ----------------------------------------------------------------
    theta_scale = min(1.0, 1.0 / gamma)
    slip_scale = length * (one_minus_beta / beta + 0.5 * theta_scale**2)
    atol = rtol * np.array(
        [length * theta_scale, length * theta_scale, slip_scale, theta_scale, theta_scale]
    )
    field_at = magnet.field_at
    counter = [0]

    def rhs(z, s):
        x, y, _, ux, uy = s
        t2 = ux * ux + uy * uy
        if t2 >= 1.0:
            raise _TurnedBack(z)
        uz = math.sqrt(1.0 - t2)
        bx, by, bz = field_at(x, y, z)
        counter[0] += 1
        inv = 1.0 / uz
        return [
            ux * inv,
            uy * inv,
            (one_minus_beta + beta * t2 / (1.0 + uz)) / (beta * uz),
            k * (uy * bz - uz * by) * inv,
            k * (uz * bx - ux * bz) * inv,
        ]

    def turned_back(z, s):
        return 1.0 - s[3] * s[3] - s[4] * s[4] - _UZ_MIN * _UZ_MIN

    turned_back.terminal = True
    turned_back.direction = -1

    norm = math.sqrt(1.0 + xp0 * xp0 + yp0 * yp0)
    state = np.array([x0, y0, z0 * one_minus_beta / beta, xp0 / norm, yp0 / norm])
    edges = [z0] + sorted(b for b in set(magnet.breakpoints) if z0 < b < z1) + [z1]
    out = np.empty((n_samples, 5))
    for i, (za, zb) in enumerate(zip(edges[:-1], edges[1:], strict=True)):
        last = i == len(edges) - 2
        sel = (z_grid >= za) & ((z_grid <= zb) if last else (z_grid < zb))
        # the segment's end is always evaluated: it is the next segment's start
        z_eval = z_grid[sel]
        if z_eval.size == 0 or z_eval[-1] != zb:
            z_eval = np.append(z_eval, zb)
        try:
            sol = solve_ivp(
                rhs,
                (za, zb),
                state,
                method="DOP853",
                t_eval=z_eval,
                rtol=rtol,
                atol=atol,
                events=turned_back,
            )
        except _TurnedBack as exc:
            raise InputError(_turned_back_message(float(exc.args[0]), energy, particle)) from None
        if sol.status == 1:
            raise InputError(_turned_back_message(float(sol.t_events[0][0]), energy, particle))
        if sol.status != 0:
            raise ConvergenceError(
                f"tracking failed between z = {za:.6g} m and {zb:.6g} m: {sol.message}"
            )
        out[sel] = sol.y[:, : int(np.count_nonzero(sel))].T
        state = sol.y[:, -1]
    if not np.all(np.isfinite(out)):
        raise ConvergenceError("tracking produced non-finite values")

    # -- assemble the trajectory ----------------------------------------------------
    x, y, ct, ux, uy = out.T
    uz = np.sqrt(1.0 - (ux * ux + uy * uy))
    r = np.column_stack([x, y, z_grid])
    beta_vec = beta * np.column_stack([ux, uy, uz])
    t = (ct + z_grid) / c
    b_field = magnet.field(x, y, z_grid)
    beta_dot = (charge / (gamma * mass)) * np.cross(beta_vec, b_field)
    traj = Trajectory(
        t, r, beta_vec, beta_dot, charge, mass, gamma=np.full(n_samples, gamma), source="tracking"
    )
    if not return_info:
        return traj
    info = TrackingInfo(
        n_field_evaluations=int(counter[0]),
        rtol=rtol,
        n_samples=n_samples,
        dz=float(z_grid[1] - z_grid[0]),
        momentum=momentum,
        gamma=gamma,
        segments=len(edges) - 1,
    )
    return traj, info


def _turned_back_message(z, energy, particle):
    return (
        f"the magnet turns the particle ({particle}, {energy:.6g} eV) through 90° near z = {z:.6g} m: "
        "β_z reaches 0 and the particle would run backwards, which tracking along z cannot follow "
        "(lower the field, raise the energy, or shorten the magnet)"
    )

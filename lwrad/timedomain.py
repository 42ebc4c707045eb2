"""Time-domain Liénard–Wiechert fields at observer points.

The electric and magnetic fields of one charged particle, as functions of
observer time at given points, from its sampled trajectory (SI throughout):

    E = q/(4π ε0) [ (n − β)/(γ² κ³ R²) + n × ((n − β) × β̇)/(c κ³ R) ]_ret,
    B = n × E / c,

with κ = 1 − n·β, n and R from the retarded position to the observer, all
evaluated at the retarded time t_r solving t_obs = t_r + |x − r(t_r)|/c
(Jackson, Classical Electrodynamics, 3rd ed., eqs. 14.13–14.14).

Between samples the trajectory is the cubic Hermite interpolant of
:meth:`lwrad.Trajectory.interpolate` (r with βc, β with β̇, γ with dγ/dt;
|β| rescaled to γ). Before the first and after the last sample the charge is
continued on the straight line of its end velocity (no acceleration, so only
the velocity field remains); ``outside="nan"`` returns NaN there instead.

Notes
-----
Accuracy: the retarded-time residual is evaluated in double-double
arithmetic and κ, n − β without cancellation, so the only limit is the input
data: for exactly representable uniform motion the fields agree with
Heaviside's closed form to ~5e-16 of the peak up to γ = 1e5 (tests). Float64
positions of size L carry rounding δr ≈ 1e-16 L, i.e. an arrival-time
uncertainty ≈ δr/c; for a pulse of length b/(γc) that is a relative field
error ≈ δr γ/b, and β stored in float64 fixes 1 − |β| only to ~1e-16 (γ is
used instead). These belong to the user's data, not to the solver.

Memory: the outputs (2 × n_t × n_points × 3 float64) plus per-chunk buffers of
16 points; the trajectory is shared by all threads.

A Parseval check against the frequency-domain radiation integral belongs
with the spectra (``lwrad.radiation``) and is not part of this module's tests.
"""

from __future__ import annotations

import warnings

import numpy as np

from lwrad.constants import e, hbar
from lwrad.engine import _td_kernels as K
from lwrad.engine import retarded
from lwrad.errors import ConvergenceWarning, InputError
from lwrad.trajectory import Trajectory

__all__ = ["fields", "observer_times", "observer_time_grid"]

_OUTSIDE = ("continue", "nan")


def _check_trajectory(traj):
    if not isinstance(traj, Trajectory):
        raise InputError(f"expected a Trajectory, got {type(traj).__name__}", location="traj")
    return traj


def _as_points(points, name="points"):
    """(n, 3) float64 array from an array or an observer with a ``points()`` method."""
    getter = getattr(points, "points", None)
    if callable(getter):
        points = getter()
    elif hasattr(points, "directions"):
        raise InputError(
            "time-domain fields need observer positions; an angular grid has directions only "
            "(use a Screen or Points)",
            location=name,
        )
    try:
        arr = np.array(points, dtype=np.float64)
    except (TypeError, ValueError):
        raise InputError(f"{name} must be numeric, shape (n, 3), m", location=name) from None
    if arr.ndim == 1 and arr.shape == (3,):
        arr = arr[None, :]
    if arr.ndim != 2 or arr.shape[1] != 3:
        raise InputError(f"{name} must have shape (n, 3) (m), got {arr.shape}", location=name)
    if arr.shape[0] == 0:
        raise InputError(f"{name} is empty", location=name)
    bad = ~np.isfinite(arr)
    if bad.any():
        raise InputError(
            f"{name} has a non-finite value at point {int(np.argwhere(bad)[0][0])}", location=name
        )
    return np.ascontiguousarray(arr)


def _as_times(t_obs):
    try:
        arr = np.array(t_obs, dtype=np.float64)
    except (TypeError, ValueError):
        raise InputError("t_obs must be numeric, shape (n_t,), s", location="t_obs") from None
    if arr.ndim == 0:
        arr = arr[None]
    if arr.ndim != 1:
        raise InputError(
            f"t_obs must be one-dimensional (n_t,), got shape {arr.shape}", location="t_obs"
        )
    if arr.shape[0] == 0:
        raise InputError("t_obs is empty", location="t_obs")
    bad = ~np.isfinite(arr)
    if bad.any():
        raise InputError(
            f"t_obs has a non-finite value at index {int(np.argmax(bad))}", location="t_obs"
        )
    return arr


def _check_n_jobs(n_jobs):
    try:
        n = int(n_jobs)
    except (TypeError, ValueError):
        raise InputError(
            f"n_jobs must be a positive integer, got {n_jobs!r}", location="n_jobs"
        ) from None
    if n < 1 or n != n_jobs:
        raise InputError(f"n_jobs must be a positive integer, got {n_jobs!r}", location="n_jobs")
    return n


def _refuse_points_on_path(prep, pts, use_rays, n_jobs=1):
    dist, where = retarded.path_distance(prep, pts, use_rays, n_jobs)
    bad = dist <= prep.r_min
    if bad.any():
        i = int(np.argmax(bad))
        n = prep.t.shape[0]
        place = (
            "the backward straight-line continuation"
            if where[i] < 0
            else "the forward straight-line continuation"
            if where[i] >= n - 1
            else f"the path between samples {where[i]} and {where[i] + 1}"
        )
        raise InputError(
            f"observer point {i} lies on {place} (distance {dist[i]:.3g} m ≤ {prep.r_min:.3g} m); "
            "the field is singular there",
            location=f"points[{i}]",
        )


def fields(traj, points, t_obs, *, n_jobs=1, outside="continue", return_info=False):
    """Electric and magnetic fields of a particle at observer points and times.

    Parameters
    ----------
    traj : Trajectory
        The particle's path (SI); its charge sets the field's sign and size.
    points : array_like, shape (n_points, 3), or an observer
        Observer positions, m. An object with a ``points()`` method (a
        ``Screen`` or ``Points``) is accepted; an angular grid is not (it
        has no positions).
    t_obs : array_like, shape (n_t,)
        Observer times, s, shared by all points, in any order (sorted
        internally so brackets are reused along the sweep).
    n_jobs : int, optional
        Threads working on chunks of points. Results are bit-identical for
        any value.
    outside : {"continue", "nan"}, optional
        Before the first and after the last sample: the field of the
        straight-line continuation with the end velocity (velocity field
        only, retarded time solved in closed form on the line), or NaN.
    return_info : bool, optional
        Also return a dict of diagnostics.

    Returns
    -------
    E : ndarray, shape (n_t, n_points, 3)
        Electric field, V/m (Jackson 3rd ed. eq. 14.14).
    B : ndarray, shape (n_t, n_points, 3)
        Magnetic field n × E / c, T (Jackson eq. 14.13).
    info : dict, only with ``return_info=True``
        ``retarded_time`` (n_t, n_points) s; ``iterations`` (n_t, n_points)
        solver iterations; ``status`` (n_t, n_points) int8 (0 inside,
        1 before, 2 after the samples, 3 NaN outside, 4 not converged);
        counts ``n_inside``, ``n_before``, ``n_after``, ``n_not_converged``;
        ``max_iterations``; ``on_path_threshold`` m.

    Raises
    ------
    InputError
        Not a Trajectory; points or t_obs empty, of the wrong shape or not
        finite; ``outside`` unknown; an observer on the path (closer than
        ``on_path_threshold``) or on its straight-line continuation (with
        ``outside="continue"``); sample observer times that do not increase
        (positions inconsistent with a speed below c).

    Warns
    -----
    ConvergenceWarning
        When the retarded time was not converged to a few ulp for some
        (time, point) pairs; the fields there come from the last iterate and
        are flagged in ``info["status"]`` (code 4).
    """
    traj = _check_trajectory(traj)
    pts = _as_points(points)
    times = _as_times(t_obs)
    n_jobs = _check_n_jobs(n_jobs)
    if outside not in _OUTSIDE:
        raise InputError(f"outside must be one of {_OUTSIDE}, got {outside!r}", location="outside")
    prep = retarded.prepare(traj)
    use_rays = outside == "continue"
    _refuse_points_on_path(prep, pts, use_rays, n_jobs)
    e_field, b_field, t_ret, status, iterations = retarded.compute_fields(
        prep, pts, times, continue_outside=use_rays, n_jobs=n_jobs
    )
    for code, what in (
        (K.STATUS_ON_PATH, "lies on the path at a retarded time"),
        (
            K.STATUS_NON_MONOTONE,
            "sees sample observer times t + R/c that do not increase "
            "(positions move faster than light towards it: r and beta are inconsistent)",
        ),
    ):
        hit = status == code
        if hit.any():
            i = int(np.argwhere(hit.any(axis=0))[0][0])
            raise InputError(f"observer point {i} {what}", location=f"points[{i}]")
    n_bad = int(np.count_nonzero(status == K.STATUS_NOT_CONVERGED))
    if n_bad:
        warnings.warn(
            f"retarded time not converged for {n_bad} of {status.size} (time, point) pairs; "
            "fields there use the last iterate (see fields(..., return_info=True)['status'] == 4)",
            ConvergenceWarning,
            stacklevel=2,
        )
    if not return_info:
        return e_field, b_field
    info = {
        "retarded_time": t_ret,
        "iterations": iterations,
        "status": status,
        "n_inside": int(np.count_nonzero(status == K.STATUS_INSIDE)),
        "n_before": int(np.count_nonzero(status == K.STATUS_BEFORE)),
        "n_after": int(np.count_nonzero(status == K.STATUS_AFTER)),
        "n_nan_outside": int(np.count_nonzero(status == K.STATUS_NAN)),
        "n_not_converged": n_bad,
        "max_iterations": int(iterations.max()),
        "on_path_threshold": prep.r_min,
    }
    return e_field, b_field, info


def observer_times(traj, point):
    """The observer time at which each trajectory sample is seen at ``point``.

    Parameters
    ----------
    traj : Trajectory
    point : array_like, shape (3,)
        Observer position, m.

    Returns
    -------
    ndarray, shape (N,)
        τ_k = t_k + |x − r_k|/c, s (the retarded-time relation, Jackson 3rd
        ed. eq. 14.2 ff.), computed in double-double and rounded once.
    """
    traj = _check_trajectory(traj)
    pts = _as_points(point, "point")
    if pts.shape[0] != 1:
        raise InputError(
            f"point must be a single position (3,), got {pts.shape[0]} points", location="point"
        )
    prep = retarded.prepare(traj)
    hi, lo = retarded.sample_observer_times(prep, pts)
    return hi[0] + lo[0]


def observer_time_grid(
    traj, point, max_photon_energy, *, oversampling=2.0, padding=0.1, max_points=10_000_000
):
    """A uniform observer-time grid covering the pulse seen at ``point``.

    Parameters
    ----------
    traj : Trajectory
    point : array_like, shape (3,)
        Observer position, m.
    max_photon_energy : float
        Highest photon energy to resolve, eV; ω_max = E e/ħ.
    oversampling : float, optional
        Factor (≥ 1) beyond the Nyquist rate: the step is
        Δt = π/(ω_max · oversampling). Default 2, a margin against the
        spectral leakage of a finite window (common practice, no source).
    padding : float, optional
        Extra time on each side, as a fraction of the pulse duration
        τ_{N−1} − τ_0 (at least 8 steps each side), so the window also holds
        the field's approach and decay, which come from the straight-line
        continuation. Default 0.1.
    max_points : int, optional
        Refuse grids longer than this (memory guard).

    Returns
    -------
    ndarray, shape (n_t,)
        Uniform observer times, s, from τ_0 − pad to τ_{N−1} + pad.

    Raises
    ------
    InputError
        Non-positive or non-finite photon energy, oversampling < 1,
        negative padding, or a grid longer than ``max_points``.
    """
    try:
        e_max = float(max_photon_energy)
        over = float(oversampling)
        pad_fraction = float(padding)
    except (TypeError, ValueError):
        raise InputError(
            "max_photon_energy (eV), oversampling and padding must be numbers"
        ) from None
    if not (np.isfinite(e_max) and e_max > 0):
        raise InputError(
            f"max_photon_energy must be > 0 eV, got {max_photon_energy!r}",
            location="max_photon_energy",
        )
    if not (np.isfinite(over) and over >= 1.0):
        raise InputError(
            f"oversampling must be >= 1, got {oversampling!r}", location="oversampling"
        )
    if not (np.isfinite(pad_fraction) and pad_fraction >= 0.0):
        raise InputError(f"padding must be >= 0, got {padding!r}", location="padding")
    tau = observer_times(traj, point)
    omega_max = e_max * e / hbar
    step = np.pi / (omega_max * over)
    duration = float(tau[-1] - tau[0])
    pad = max(pad_fraction * duration, 8 * step)
    n_steps = int(np.ceil((duration + 2 * pad) / step))
    if n_steps + 1 > max_points:
        raise InputError(
            f"the grid would need {n_steps + 1} times (step {step:.3g} s over {duration + 2 * pad:.3g} s); "
            f"lower max_photon_energy or raise max_points={max_points}",
            location="max_photon_energy",
        )
    return (tau[0] - pad) + step * np.arange(n_steps + 1)

"""Retarded-time driver: prepares a trajectory for the kernels and runs them in point chunks.

The public, validated entry points are in :mod:`lwrad.timedomain`; this
module takes already-checked float64 arrays. It owns the per-trajectory
preparation (Hermite segment coefficients, dγ/dt, the on-path threshold),
the chunking over observer points and the assembly of the results.

The chunk plan depends only on the number of points, and every point is
computed by the same kernel code independently of the others, so the
results are bit-identical for any number of workers.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from lwrad.constants import c, epsilon_0
from lwrad.engine import _td_kernels as K
from lwrad.parallel import plan_chunks, run_chunks

__all__ = [
    "PreparedTrajectory",
    "prepare",
    "on_path_threshold",
    "compute_fields",
    "sample_observer_times",
    "path_distance",
]

#: Points per work item; fixed so that results never depend on the number of workers.
CHUNK_POINTS = 16

#: An observer closer to the path than this fraction of the path's length scale
#: is "on the path" (the field there is singular). Common practice, no source:
#: far below any physically meaningful distance, far above rounding.
ON_PATH_RELATIVE = 1e-9


@dataclass(frozen=True)
class PreparedTrajectory:
    """Contiguous float64 arrays of a trajectory plus its Hermite segment coefficients."""

    t: np.ndarray
    r: np.ndarray
    v: np.ndarray
    beta: np.ndarray
    beta_dot: np.ndarray
    gamma: np.ndarray
    gamma_dot: np.ndarray
    ar: np.ndarray
    br: np.ndarray
    ab: np.ndarray
    bb: np.ndarray
    ag: np.ndarray
    bg: np.ndarray
    coef: float
    r_min: float


def on_path_threshold(r: np.ndarray) -> float:
    """Distance (m) below which an observer counts as on the path.

    ``ON_PATH_RELATIVE`` times the larger of the path length and the diagonal
    of the path's bounding box; zero for a charge at rest (then only an
    observer exactly at the charge is refused).
    """
    length = float(np.sum(np.linalg.norm(np.diff(r, axis=0), axis=1)))
    diag = float(np.linalg.norm(r.max(axis=0) - r.min(axis=0)))
    return ON_PATH_RELATIVE * max(length, diag)


def prepare(traj) -> PreparedTrajectory:
    """Arrays and cubic Hermite coefficients the kernels need, from a Trajectory.

    r uses βc as its derivative, β uses β̇ and γ uses dγ/dt (as
    :meth:`lwrad.Trajectory.interpolate` does), so positions, velocities and
    accelerations at a retarded time come from mutually consistent cubics.
    """
    t = np.ascontiguousarray(traj.t, dtype=np.float64)
    r = np.ascontiguousarray(traj.r, dtype=np.float64)
    beta = np.ascontiguousarray(traj.beta, dtype=np.float64)
    beta_dot = np.ascontiguousarray(traj.beta_dot, dtype=np.float64)
    gamma = np.ascontiguousarray(traj.gamma, dtype=np.float64)
    gamma_dot = np.ascontiguousarray(traj.gamma_dot(), dtype=np.float64)
    v = beta * c
    n = t.shape[0]
    ar = np.empty((n - 1, 3))
    br = np.empty((n - 1, 3))
    ab = np.empty((n - 1, 3))
    bb = np.empty((n - 1, 3))
    ag = np.empty((n - 1, 1))
    bg = np.empty((n - 1, 1))
    K.segment_coefficients(t, r, v, ar, br)
    K.segment_coefficients(t, beta, beta_dot, ab, bb)
    K.segment_coefficients(t, gamma[:, None].copy(), gamma_dot[:, None].copy(), ag, bg)
    coef = traj.charge / (4.0 * np.pi * epsilon_0)
    return PreparedTrajectory(
        t,
        r,
        v,
        beta,
        beta_dot,
        gamma,
        gamma_dot,
        ar,
        br,
        ab,
        bb,
        ag,
        bg,
        coef,
        on_path_threshold(r),
    )


def _direction(vec):
    norm = float(np.linalg.norm(vec))
    return np.zeros(3) if norm == 0.0 else np.asarray(vec, dtype=np.float64) / norm


def path_distance(prep: PreparedTrajectory, points: np.ndarray, use_rays: bool, n_jobs: int = 1):
    """Closest distance (m) of each point to the path and where it occurs.

    Returns ``(distance (P,), where (P,))``; ``where`` is a segment index, −1
    for the backward continuation ray and N − 1 for the forward one. With
    ``n_jobs`` > 1 chunks of points run in threads.
    """
    points = np.ascontiguousarray(points, dtype=np.float64)
    dist = np.empty(points.shape[0])
    where = np.empty(points.shape[0], dtype=np.int64)
    rays = (-_direction(prep.beta[0]), _direction(prep.beta[-1]), bool(use_rays))

    def work(sl):
        K.path_distance(points[sl], prep.r, *rays, dist[sl], where[sl])

    chunks = plan_chunks(points.shape[0], CHUNK_POINTS)
    run_chunks(work, chunks, workers=n_jobs, backend="threads" if n_jobs > 1 else "serial")
    return dist, where


def sample_observer_times(
    prep: PreparedTrajectory, points: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """t_k + R_k/c for every sample and point, as a double-double pair (hi, lo), each (P, N) s."""
    points = np.ascontiguousarray(points, dtype=np.float64)
    hi = np.empty((points.shape[0], prep.t.shape[0]))
    lo = np.empty_like(hi)
    K.sample_observer_times(prep.t, prep.r, points, c, hi, lo)
    return hi, lo


def compute_fields(
    prep: PreparedTrajectory,
    points: np.ndarray,
    t_obs: np.ndarray,
    *,
    continue_outside: bool,
    n_jobs: int = 1,
):
    """Run the field kernel over point chunks and assemble the full arrays.

    Parameters
    ----------
    prep : PreparedTrajectory
    points : (P, 3) float64, m, validated.
    t_obs : (M,) float64, s, validated (any order).
    continue_outside : bool
        Straight-line continuation outside the sampled times, else NaN.
    n_jobs : int
        Threads (the kernels release the GIL).

    Returns
    -------
    E, B : (M, P, 3) V/m, T. t_ret : (M, P) s. status : (M, P) int8.
    iterations : (M, P) int16.
    """
    points = np.ascontiguousarray(points, dtype=np.float64)
    t_obs = np.asarray(t_obs, dtype=np.float64)
    order = np.argsort(t_obs, kind="stable").astype(np.int64)
    t_sorted = np.ascontiguousarray(t_obs[order])
    m, p = t_obs.shape[0], points.shape[0]
    chunks = plan_chunks(p, CHUNK_POINTS)
    e = np.empty((m, p, 3))
    b = np.empty((m, p, 3))
    t_ret = np.empty((m, p))
    status = np.empty((m, p), dtype=np.int8)
    iterations = np.empty((m, p), dtype=np.int16)
    n = prep.t.shape[0]
    continue_outside = bool(continue_outside)

    def work(sl):
        # Each chunk writes its own columns of the shared outputs (threads only),
        # so no second copy of the results is ever held.
        pts = np.ascontiguousarray(points[sl])
        q = pts.shape[0]
        ec = np.empty((m, q, 3))
        bc = np.empty((m, q, 3))
        tc = np.empty((m, q))
        sc = np.empty((m, q), dtype=np.int8)
        ic = np.empty((m, q), dtype=np.int16)
        K.td_fields(
            prep.t,
            prep.r,
            prep.v,
            prep.beta,
            prep.beta_dot,
            prep.gamma,
            prep.gamma_dot,
            prep.ar,
            prep.br,
            prep.ab,
            prep.bb,
            prep.ag,
            prep.bg,
            pts,
            t_sorted,
            order,
            continue_outside,
            prep.coef,
            c,
            prep.r_min,
            ec,
            bc,
            tc,
            sc,
            ic,
            np.empty(n),
            np.empty(n),
        )
        e[:, sl], b[:, sl], t_ret[:, sl], status[:, sl], iterations[:, sl] = ec, bc, tc, sc, ic

    run_chunks(work, chunks, workers=n_jobs, backend="threads" if n_jobs > 1 else "serial")
    return e, b, t_ret, status, iterations

"""The retarded-time solver and its building blocks.

Sources: exact rational arithmetic (fractions) for the error-free
transformations; the cubic Hermite interpolant of lwrad.trajectory; the
defining relation t_obs = t_r + |x − r(t_r)|/c (Jackson 3rd ed. sec. 14.1)
evaluated independently in float64; a bracketing root finder (scipy) on the
light-cone condition of a straight line.
"""

from fractions import Fraction

import numpy as np
import pytest
from scipy.optimize import brentq

from lwrad import Trajectory
from lwrad.constants import c
from lwrad.engine import _td_kernels as K
from lwrad.engine import retarded
from lwrad.timedomain import fields
from lwrad.trajectory import hermite_interpolate

EPS = np.finfo(float).eps


def circle(gamma=20.0, rho=1.0, turns=(-0.15, 0.15), spp=400):
    beta = np.sqrt(1 - 1 / gamma**2)
    omega = beta * c / rho
    period = 2 * np.pi / omega
    t = np.linspace(turns[0] * period, turns[1] * period, int((turns[1] - turns[0]) * spp) + 1)
    ph = omega * t
    r = rho * np.stack([np.sin(ph), 1 - np.cos(ph), 0 * ph], axis=1)
    b = beta * np.stack([np.cos(ph), np.sin(ph), 0 * ph], axis=1)
    bd = beta * omega * np.stack([-np.sin(ph), np.cos(ph), 0 * ph], axis=1)
    return Trajectory(t, r, b, bd, gamma=np.full(t.size, gamma))


def test_error_free_transformations_are_exact(rng):
    # TwoSum (Knuth) and TwoProduct (Dekker, Numer. Math. 18 (1971) 224): a ∘ b = hi + lo exactly.
    a = rng.normal(size=2000) * 10.0 ** rng.integers(-30, 30, 2000)
    b = rng.normal(size=2000) * 10.0 ** rng.integers(-30, 30, 2000)
    for x, y in zip(a, b, strict=True):
        s, e = K._two_sum(x, y)
        assert Fraction(s) + Fraction(e) == Fraction(x) + Fraction(y)
        p, e = K._two_prod(x, y)
        assert Fraction(p) + Fraction(e) == Fraction(x) * Fraction(y)


def test_double_double_sqrt_and_division(rng):
    # relative error of the dd results ≲ 1e-30 (two float64 words: ~2^-104)
    for x in rng.uniform(1e-3, 1e3, 200):
        h, lo = K._dd_sqrt(x, 0.0)
        err = (Fraction(h) + Fraction(lo)) ** 2 / Fraction(x) - 1
        assert abs(float(err)) < 1e-30
        q, ql = K._dd_div_f(x, 0.0, c)
        err = (Fraction(q) + Fraction(ql)) * Fraction(c) / Fraction(x) - 1
        assert abs(float(err)) < 1e-30


def test_segment_form_matches_trajectory_hermite(rng):
    # The kernel's cubic y_k + u ẏ_k + a s² + b s³ is the same polynomial as
    # lwrad.trajectory.hermite_interpolate; agreement to rounding (1e-13 of the range).
    traj = circle(spp=50)
    prep = retarded.prepare(traj)
    t_new = np.sort(rng.uniform(traj.t[0], traj.t[-1], 300))
    ref, dref = hermite_interpolate(traj.t, traj.r, traj.beta * c, t_new)
    k = np.clip(np.searchsorted(traj.t, t_new, side="right") - 1, 0, len(traj) - 2)
    u = t_new - traj.t[k]
    s = u / (traj.t[k + 1] - traj.t[k])
    mine = (
        prep.r[k]
        + u[:, None] * prep.v[k]
        + prep.ar[k] * s[:, None] ** 2
        + prep.br[k] * s[:, None] ** 3
    )
    scale = np.abs(traj.r).max()
    assert np.max(np.abs(mine - ref)) < 1e-13 * scale
    # the straight line has zero curvature coefficients to the last bit
    t = np.arange(10) * 2.0**-30
    r = np.zeros((10, 3))
    r[:, 2] = 0.5 * c * t
    beta = np.zeros((10, 3))
    beta[:, 2] = 0.5
    line = retarded.prepare(Trajectory(t, r, beta, np.zeros((10, 3))))
    assert np.all(line.ar == 0.0) and np.all(line.br == 0.0)


@pytest.mark.parametrize("distance", [0.5, 10.0, 1e4])
def test_retarded_time_solves_the_light_cone_to_machine_precision(distance):
    # Independent check in float64: t_obs − t_r − |x − r(t_r)|/c with r from
    # lwrad.trajectory.hermite_interpolate. Its own rounding is ~ε·max(t_obs, R/c)
    # (the kernel works in double-double), so the tolerance is 8 ε max(|t_obs|, R/c).
    traj = circle()
    prep = retarded.prepare(traj)
    pts = distance * np.array([[1.0, 0.0, 0.0], [0.99, 0.1, 0.05], [0.9, -0.3, 0.2]])
    for x in pts:
        tau = retarded.sample_observer_times(prep, x[None])[0][0]
        t_obs = np.linspace(tau[0], tau[-1], 302)[1:-1]  # strictly inside the samples
        _, _, info = fields(traj, x[None], t_obs, outside="nan", return_info=True)
        assert np.all(info["status"] == K.STATUS_INSIDE)
        t_r = info["retarded_time"][:, 0]
        r_ret, _ = hermite_interpolate(traj.t, traj.r, traj.beta * c, t_r)
        dist = np.linalg.norm(x - r_ret, axis=1)
        residual = t_obs - t_r - dist / c
        scale = np.maximum(np.abs(t_obs), dist / c)
        assert np.all(np.abs(residual) <= 8 * EPS * scale)
        # Newton converges quadratically from the interpolated guess: a handful of steps.
        assert info["max_iterations"] <= 8
        assert info["n_not_converged"] == 0


def test_sweep_order_does_not_change_bits(rng):
    traj = circle()
    pts = np.array([[2.0, 0.3, 0.0], [3.0, -0.2, 0.1]])
    tau = retarded.sample_observer_times(retarded.prepare(traj), pts)[0]
    t_obs = np.linspace(tau.min(), tau.max(), 300)
    perm = rng.permutation(t_obs.size)
    e_sorted, b_sorted = fields(traj, pts, t_obs)
    e_perm, b_perm = fields(traj, pts, t_obs[perm])
    assert np.array_equal(e_perm, e_sorted[perm]) and np.array_equal(b_perm, b_sorted[perm])


@pytest.mark.parametrize("side", ["before", "after"])
def test_continuation_retarded_time_matches_a_root_finder(side):
    # Closed-form root against Brent's method on c(t_obs − t_r) − |x − r_line(t_r)| = 0,
    # γ = 3 (no cancellation issue for the float64 reference): agreement 1e-13 of the
    # time scale |t_obs − t_r|, the reference's own tolerance being set far below.
    gamma = 3.0
    beta = np.sqrt(1 - 1 / gamma**2)
    direction = np.array([0.6, 0.0, 0.8])
    t = np.linspace(0.0, 1e-9, 6)
    r = beta * c * t[:, None] * direction
    traj = Trajectory(
        t, r, np.tile(beta * direction, (6, 1)), np.zeros((6, 3)), gamma=np.full(6, gamma)
    )
    x = np.array([0.1, 0.4, 0.2])
    t_obs = np.array([-3e-9, -1e-9, 0.0]) if side == "before" else np.array([4e-9, 6e-9, 2e-8])
    _, _, info = fields(traj, x[None], t_obs, return_info=True)
    assert np.all(info["status"] == (K.STATUS_BEFORE if side == "before" else K.STATUS_AFTER))
    end = 0 if side == "before" else -1
    for j, to in enumerate(t_obs):

        def light_cone(tr, to=to):
            return c * (to - tr) - np.linalg.norm(
                x - (r[end] + beta * c * (tr - t[end]) * direction)
            )

        ref = brentq(light_cone, to - 1e-6, to, xtol=1e-30, rtol=4 * EPS)
        assert abs(info["retarded_time"][j, 0] - ref) <= 1e-13 * abs(to - ref)


def test_on_path_threshold_scales_with_path():
    t = np.linspace(0.0, 1e-9, 5)
    r = np.zeros((5, 3))
    r[:, 2] = 0.5 * c * t
    assert retarded.on_path_threshold(r) == pytest.approx(1e-9 * 0.5 * c * 1e-9)
    assert retarded.on_path_threshold(np.zeros((5, 3))) == 0.0

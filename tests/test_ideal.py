"""Ideal analytic trajectories are internally consistent and match the handbook kinematics."""

import numpy as np
import pytest

from lwrad import ideal
from lwrad.constants import c, gamma_from_energy


def test_planar_undulator_kinematics():
    # Peak angle K/γ and period-averaged β_z = 1 − (1 + K²/2)/(2γ²) (X-ray Data Booklet sec. 2.1);
    # the average formula drops O(1/γ⁴) terms, ~1e-14 here, so 1e-12 absolute on β_z is fair.
    E, lu, N, K = 2.5e9, 0.025, 20, 1.4
    tr = ideal.planar_undulator(E, lu, N, K)
    g = gamma_from_energy(E)
    assert np.max(np.abs(tr.beta[:, 0])) == pytest.approx(K / g, rel=1e-12)
    mean_bz = (tr.r[-1, 2] - tr.r[0, 2]) / (c * tr.duration)
    assert mean_bz == pytest.approx(1 - (1 + K**2 / 2) / (2 * g**2), abs=1e-12)
    # the net offset over whole periods vanishes (sin integrates to zero)
    assert abs(tr.r[-1, 0]) < 1e-12 * lu


def test_planar_positions_consistent_with_velocity():
    # dr/dt = βc: compare a Hermite midpoint with the Gauss-integrated samples at double density.
    tr = ideal.planar_undulator(1e9, 0.03, 4, 2.0, samples_per_period=48)
    fine = ideal.planar_undulator(1e9, 0.03, 4, 2.0, samples_per_period=64)
    mid = tr.interpolate(fine.t[1::2])
    assert np.max(np.abs(mid.r - fine.r[1::2])) < 1e-9 * 0.03


def test_helical_and_arc_shapes():
    tr = ideal.helical_undulator(3e9, 0.05, 5, 1.0, handedness=-1)
    speed_t = np.hypot(tr.beta[:, 0], tr.beta[:, 1])
    np.testing.assert_allclose(speed_t, 1.0 / gamma_from_energy(3e9), rtol=1e-12)
    arc = ideal.circular_arc(3e9, 10.0, 0.01, bend_to=+1)
    dist = np.hypot(arc.r[:, 0] - 10.0, arc.r[:, 2])
    np.testing.assert_allclose(dist, 10.0, rtol=1e-14)

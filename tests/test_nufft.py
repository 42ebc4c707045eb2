"""Type-1 NUFFT by Gaussian gridding, and the far field computed through it.

References: the transform is checked against its own definition, the direct
sum Σ_k c_k e^{imx_k} (exact), and the far field through the NUFFT against the
direct compiled sum of the same Filon-type rule (the path used before, itself
validated against the X-ray Data Booklet in test_radiation_undulator.py).
"""

import numpy as np
import pytest

from lwrad.constants import c, omega_to_photon_energy
from lwrad.engine import frequency as F
from lwrad.engine import nufft
from lwrad.ideal import planar_undulator
from lwrad.observers import AngularGrid


def _transform(x, strengths, n_modes, msp=nufft.MSP):
    gd = nufft.Gridding(n_modes, msp)
    scratch = gd.scratch(2 * strengths.shape[1])
    grids = gd.empty_grids(1, strengths.shape[1])
    nufft.spread(x, np.ascontiguousarray(strengths).view(float), scratch, gd.delta, gd.tau, gd.e3)
    nufft.fold(scratch, grids[0])
    spec = gd.transform(grids)[0]
    return spec[gd.index] * gd.scale[:, None], np.arange(gd.m_lo, gd.m_lo + n_modes)


@pytest.mark.parametrize("n_points, n_modes", [(50, 7), (400, 64), (1636, 400), (3000, 1001)])
def test_transform_equals_the_direct_sum(n_points, n_modes):
    """Against Σ c_k e^{imx_k} itself: error ≤ 1e-10 of Σ|c_k| (bound e^{−9π}e^{π} ≈ 1e-11, nufft docstring)."""
    rng = np.random.default_rng(n_points)
    # points far outside [0, 2π) and unsorted: the transform reduces them itself
    x = rng.uniform(-40.0, 90.0, n_points)
    cs = rng.normal(size=(n_points, 3)) + 1j * rng.normal(size=(n_points, 3))
    got, modes = _transform(x, cs, n_modes)
    ref = np.exp(1j * np.outer(modes, x)) @ cs
    assert np.max(np.abs(got - ref)) <= 1e-10 * np.max(np.sum(np.abs(cs), axis=0))


def test_wider_gaussian_changes_the_transform_below_its_error_bound():
    """Refinement: spreading width 12 → 16 grid points changes S(m) by ≤ 1e-10 of Σ|c| (bound 1e-11)."""
    rng = np.random.default_rng(7)
    x = np.sort(rng.uniform(0.0, 30.0, 800))
    cs = rng.normal(size=(800, 2)) + 1j * rng.normal(size=(800, 2))
    a, _ = _transform(x, cs, 256, msp=12)
    b, _ = _transform(x, cs, 256, msp=16)
    coarse, _ = _transform(x, cs, 256, msp=6)
    scale = np.max(np.sum(np.abs(cs), axis=0))
    assert np.max(np.abs(a - b)) <= 1e-10 * scale
    # and a narrow Gaussian is visibly worse: the check can fail
    assert np.max(np.abs(coarse - b)) > 1e-7 * scale


def _transform_poly(x, abc, n_modes, msp=nufft.MSP):
    gd = nufft.Gridding(n_modes, msp)
    n_c = abc.shape[2]
    scratch = gd.scratch(2 * n_c)
    grids = gd.empty_grids(1, n_c)
    nufft.spread_poly(x, np.ascontiguousarray(abc).view(float), scratch, gd.delta, gd.tau, gd.e3)
    nufft.fold(scratch, grids[0])
    spec = gd.transform(grids)[0]
    return spec[gd.index] * gd.scale[:, None], np.arange(gd.m_lo, gd.m_lo + n_modes)


def _poly_case(n_points, n_comp, seed):
    rng = np.random.default_rng(seed)
    x = rng.uniform(-40.0, 90.0, n_points)
    abc = rng.normal(size=(n_points, 3, n_comp)) + 1j * rng.normal(size=(n_points, 3, n_comp))
    return x, abc


def _poly_scale(abc, n_modes):
    # Σ|A| + (M/2)Σ|B| + (M/2)²Σ|C|: the size of the terms of T at the outermost mode
    h = n_modes / 2
    return np.max(np.sum(np.abs(abc[:, 0]) + h * np.abs(abc[:, 1]) + h * h * np.abs(abc[:, 2]), 0))


@pytest.mark.parametrize("n_points, n_modes, n_comp", [(50, 7, 1), (1636, 400, 2), (900, 257, 3)])
def test_poly_transform_equals_the_direct_sum(n_points, n_modes, n_comp):
    """Σ e^{imx_k}(A_k + (im)B_k + (im)²C_k) by derivative kernels, against the sum itself.

    Bound as for the plain transform (≈1e-11 of the terms' size); measured ~5e-12. A
    wrong sign of a derivative term or a misplaced factor 2τ gives O(1).
    """
    x, abc = _poly_case(n_points, n_comp, n_points)
    got, m = _transform_poly(x, abc, n_modes)
    e = np.exp(1j * np.outer(m, x))
    im = (1j * m)[:, None]
    ref = e @ abc[:, 0] + im * (e @ abc[:, 1]) + im**2 * (e @ abc[:, 2])
    assert np.max(np.abs(got - ref)) <= 1e-10 * _poly_scale(abc, n_modes)


def test_poly_transform_wider_gaussian_changes_below_its_error_bound():
    """Refinement: half-width 12 → 16 changes T by ≤ 1e-10 of the terms' size; 6 is visibly worse."""
    x, abc = _poly_case(800, 2, 11)
    a, _ = _transform_poly(x, abc, 256, msp=12)
    b, _ = _transform_poly(x, abc, 256, msp=16)
    coarse, _ = _transform_poly(x, abc, 256, msp=6)
    scale = _poly_scale(abc, 256)
    assert np.max(np.abs(a - b)) <= 1e-10 * scale
    assert np.max(np.abs(coarse - b)) > 1e-7 * scale


@pytest.fixture(scope="module")
def cube():
    traj = planar_undulator(2.5e9, 0.025, 12, 1.4, samples_per_period=48)
    gamma = float(traj.gamma[0])
    th = np.linspace(-1.5 / gamma, 1.5 / gamma, 6)
    w1 = 2 * np.pi / ((traj.t[-1] / 12) * (1 - traj.r[-1, 2] / (c * traj.t[-1])))
    return traj, AngularGrid(th, th), w1


def _far(traj, grid, omega, nufft_min):
    factor, _ = F.converged_sampling(traj, grid, omega, 1e-4)
    nodes = F.nodes_only(traj, F.sample_times(traj, grid, float(omega.max()), factor))
    old = F.NUFFT_MIN_ENERGIES
    F.NUFFT_MIN_ENERGIES = nufft_min
    try:
        return F.far_field(nodes, grid.directions(), omega, traj.charge)
    finally:
        F.NUFFT_MIN_ENERGIES = old


@pytest.mark.parametrize("n_energies", [64, 101])
def test_far_field_by_nufft_equals_the_direct_sum(cube, n_energies):
    """Same Filon-type rule, two evaluations: agree to 1e-7 of the peak.

    Bound: the NUFFT's ~1e-11 of Σ|J| is amplified by the node form's cancellation,
    at most 1/θ⁵ = 1e5 for steps θ ≥ THETA_NUFFT = 0.1 → 1e-6; measured ~8e-10 here.
    A wrong sign, mode or phase gives O(1).
    """
    traj, grid, w1 = cube
    omega = np.linspace(0.8 * w1, 3.2 * w1, n_energies)  # harmonics 1–3, even and odd counts
    direct = _far(traj, grid, omega, 10**9)
    fast = _far(traj, grid, omega, 2)
    assert np.max(np.abs(fast - direct)) <= 1e-7 * np.max(np.abs(direct))


def test_pixels_with_small_phase_steps_take_the_direct_sum(cube):
    """Down to ω → 0 the node form is unsafe; those pixels must come out as the direct sum's."""
    traj, grid, w1 = cube
    omega = np.linspace(1e-3 * w1, 1.2 * w1, 64)
    factor, _ = F.converged_sampling(traj, grid, omega, 1e-4)
    nodes = F.nodes_only(traj, F.sample_times(traj, grid, float(omega.max()), factor))
    out = np.empty((grid.n_pixels, omega.size, 3), dtype=complex)
    left = F._far_field_nufft(nodes, grid.directions(), omega, out)
    assert left.all()  # every step advances far less than THETA_NUFFT at 1e-3 ω1
    assert np.allclose(_far(traj, grid, omega, 2), _far(traj, grid, omega, 10**9), rtol=0, atol=0)


def test_radiate_uses_the_transform_for_many_energies(cube):
    """End to end: flux density through radiate() with 64 energies equals the direct path.

    Tolerance 2e-7 of the peak: twice the field bound of the test above (flux ∝ |E|²).
    """
    from lwrad.radiation import radiate

    traj, grid, w1 = cube
    energies = omega_to_photon_energy(np.linspace(0.9 * w1, 1.1 * w1, 64))
    fast = radiate(traj, grid, energies).flux_density(0.1)
    old = F.NUFFT_MIN_ENERGIES
    F.NUFFT_MIN_ENERGIES = 10**9
    try:
        direct = radiate(traj, grid, energies).flux_density(0.1)
    finally:
        F.NUFFT_MIN_ENERGIES = old
    assert np.max(np.abs(fast - direct)) <= 2e-7 * np.max(direct)


def _near(traj, screen, omega, nufft_min):
    factor, _ = F.converged_sampling(traj, screen, omega, 1e-4)
    nodes, gauss = F.gauss_split(traj, F.sample_times(traj, screen, float(omega.max()), factor))
    old = F.NUFFT_MIN_ENERGIES
    F.NUFFT_MIN_ENERGIES = nufft_min
    try:
        return F.near_field(nodes, gauss, screen.points(), omega, traj.charge, factor=factor)
    finally:
        F.NUFFT_MIN_ENERGIES = old


@pytest.mark.parametrize("gaussian", ["standard", "wide"])
def test_near_field_by_nufft_equals_the_direct_sum(cube, monkeypatch, gaussian):
    """Screen at 10 m with straight-line tails: NUFFT and direct node sums agree to 1e-7 of the peak.

    Same bound as the far field (the quadratic's loss ε_N/θ³ ≤ 1e5 ε_N); "wide" forces
    every pixel onto the 16-point Gaussian used for small steps (ε_N ~1e-14).
    """
    from lwrad.observers import Screen

    traj, grid, w1 = cube
    if gaussian == "wide":
        monkeypatch.setattr(F, "THETA_NUFFT", 1e9)
    gamma = float(traj.gamma[0])
    x = 10.0 * np.linspace(-1.2 / gamma, 1.2 / gamma, 4)
    screen = Screen(10.0, x, x)
    omega = np.linspace(0.85 * w1, 1.1 * w1, 64)
    direct = _near(traj, screen, omega, 10**9)
    fast = _near(traj, screen, omega, 2)
    assert np.max(np.abs(fast - direct)) <= 1e-7 * np.max(np.abs(direct))


def _type3(phi, strengths, omega, span):
    t3 = nufft.Type3(omega, span)
    g = t3.grid
    cs = np.ascontiguousarray(strengths * np.exp(1j * t3.omega_c * phi)[:, None])
    scratch = g.scratch(2 * cs.shape[1])
    grids = g.empty_grids(1, cs.shape[1])
    nufft.spread(t3.dnu * phi, cs.view(float), scratch, g.delta, g.tau, g.e3)
    nufft.fold(scratch, grids[0])
    return t3.values(g.transform(grids))[0]


@pytest.mark.parametrize(
    "n_points, n_energies, lo, hi", [(3000, 81, 5e3, 1e4), (500, 200, 1.0, 50.0)]
)
def test_type3_equals_the_direct_sum(n_points, n_energies, lo, hi):
    """Arbitrary (log-spaced) energies, against Σ c_k e^{iω_jφ_k}: ≤ 1e-10 of Σ|c| (measured ~1e-11)."""
    rng = np.random.default_rng(n_points)
    phi = np.sort(rng.uniform(0.0, 1.0, n_points))
    cs = rng.normal(size=(n_points, 3)) + 1j * rng.normal(size=(n_points, 3))
    omega = np.geomspace(lo, hi, n_energies)
    got = _type3(phi, cs, omega, 1.0)
    ref = np.exp(1j * np.outer(omega, phi)) @ cs
    assert np.max(np.abs(got - ref)) <= 1e-10 * np.max(np.sum(np.abs(cs), axis=0))


def test_type3_wider_interpolation_changes_below_its_error(monkeypatch):
    """Refinement: 24 → 30 interpolation samples per side change S by ≤ 1e-10 of Σ|c|; 8 are worse."""
    rng = np.random.default_rng(5)
    phi = np.sort(rng.uniform(0.0, 2.0, 1500))
    cs = rng.normal(size=(1500, 2)) + 1j * rng.normal(size=(1500, 2))
    omega = np.geomspace(100.0, 400.0, 120)
    base = _type3(phi, cs, omega, 2.0)
    monkeypatch.setattr(nufft, "SINC_HALF", 30)
    wide = _type3(phi, cs, omega, 2.0)
    monkeypatch.setattr(nufft, "SINC_HALF", 8)
    narrow = _type3(phi, cs, omega, 2.0)
    scale = np.max(np.sum(np.abs(cs), axis=0))
    assert np.max(np.abs(base - wide)) <= 1e-10 * scale
    assert np.max(np.abs(narrow - wide)) > 1e-7 * scale


def test_far_field_at_log_spaced_energies_by_nufft_equals_the_direct_sum(cube):
    """Harmonics 3–5 at log-spaced energies (Type3 path): agree to 1e-7 of the peak (as above).

    One octave, so that most pixels' steps pass THETA_NUFFT (the rest fall back).
    """
    traj, grid, w1 = cube
    omega = np.geomspace(2.7 * w1, 5.2 * w1, 120)
    assert not F.is_uniform(omega)
    factor, _ = F.converged_sampling(traj, grid, omega, 1e-4)
    nodes = F.nodes_only(traj, F.sample_times(traj, grid, float(omega.max()), factor))
    out = np.empty((grid.n_pixels, omega.size, 3), dtype=complex)
    left = F._far_field_nufft(nodes, grid.directions(), omega, out)
    assert left.sum() <= 0.2 * left.size
    direct = _far(traj, grid, omega, 10**9)
    fast = _far(traj, grid, omega, 2)
    assert np.max(np.abs(fast - direct)) <= 1e-7 * np.max(np.abs(direct))


def test_node_phasors_equal_euler_formula():
    """Recurrence phasors against e^{iwφ} (Euler's formula, numpy.exp): ≤ 1e-12.

    Steps of 0.01–0.5 rad (Taylor step) mixed with jumps above the 0.6 rad bound
    (cos/sin re-seed), 5000 nodes up to ~1400 rad: the rounding of wφ alone is
    ~1400 ε ≈ 3e-13 in the phase (measured 2.3e-13 here), so the bound is a few
    times that; a wrong Taylor coefficient or a missed re-seed shows as ≥ 1e-9.
    """
    from lwrad.engine import _fd_kernels as K

    rng = np.random.default_rng(3)
    steps = rng.uniform(0.01, 0.5, 5000)
    steps[rng.choice(5000, 40, replace=False)] = 2.5
    w = 3.0e17
    phi = np.cumsum(steps) / w
    cr, ci = np.empty(phi.size), np.empty(phi.size)
    K._node_phasors(phi, w, cr, ci)
    ref = np.exp(1j * w * phi)
    assert np.max(np.abs(cr + 1j * ci - ref)) <= 1e-12

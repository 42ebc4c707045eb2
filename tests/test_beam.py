"""Electron beams: Twiss sampling, job-file input, exact trajectory offsets, the Monte Carlo driver.

Sources: Courant and Snyder, Ann. Phys. 3 (1958) 1 (Twiss moments ⟨x²⟩ = εβ, ⟨xx'⟩ = −εα,
⟨x'²⟩ = εγ); X-ray Data Booklet sec. 2.1 (undulator kinematics, via lwrad.ideal); the Lorentz
force in a field depending on z only (Jackson 3rd ed. eq. 12.1) for the exact offsets; standard
errors of sample moments (normal theory: SE(var) = σ² sqrt(2/n)). Statistical tests use the seed
20261202 unless stated.
"""

import numpy as np
import pytest
from scipy import stats

from lwrad import ideal
from lwrad.beam import ElectronBeam, offset_in_longitudinal_field, rigid_offset
from lwrad.beam_radiation import monte_carlo
from lwrad.constants import c, gamma_from_energy
from lwrad.errors import ConvergenceWarning, InputError
from lwrad.observers import AngularGrid

SEED = 20261202
E_BEAM = 2.5e9  # eV; the invented "Saltmarsh" ring of the demo scenario
LU, K = 0.025, 1.4


def saltmarsh_like(**kw):
    """Invented demo beam (not a real facility): 2.5 GeV, 0.3 A."""
    args = dict(
        energy=E_BEAM,
        current=0.3,
        emittance_x=2e-9,
        emittance_y=2e-11,
        beta_x=8.0,
        beta_y=3.0,
        alpha_x=-0.7,
        alpha_y=0.3,
        energy_spread=1e-3,
        dispersion_x=0.05,
        dispersion_xp=0.01,
    )
    args.update(kw)
    return ElectronBeam(**args)


# ---------------------------------------------------------------------------- sampling
def test_twiss_moments_of_samples():
    # Courant–Snyder: ⟨x²⟩ = εβ + D²σδ², ⟨xx'⟩ = −εα + D D' σδ², ⟨x'²⟩ = εγ + D'²σδ², ⟨xδ⟩ = D σδ².
    b = saltmarsh_like()
    n = 200_000
    p = b.sample(n, seed=SEED)
    sd2 = b.energy_spread**2
    exx = b.emittance_x * b.beta_x + b.dispersion_x**2 * sd2
    expp = b.emittance_x * b.gamma_twiss_x + b.dispersion_xp**2 * sd2
    exxp = -b.emittance_x * b.alpha_x + b.dispersion_x * b.dispersion_xp * sd2
    # Tolerance: 4.5 standard errors of each sample moment (normal theory; a covariance's
    # SE is sqrt((⟨x²⟩⟨x'²⟩ + ⟨xx'⟩²)/n)).
    assert abs(np.mean(p.x**2) - exx) < 4.5 * exx * np.sqrt(2 / n)
    assert abs(np.mean(p.xp**2) - expp) < 4.5 * expp * np.sqrt(2 / n)
    assert abs(np.mean(p.x * p.xp) - exxp) < 4.5 * np.sqrt((exx * expp + exxp**2) / n)
    eyy = b.emittance_y * b.beta_y
    eyp = b.emittance_y * b.gamma_twiss_y
    assert abs(np.mean(p.y * p.yp) + b.emittance_y * b.alpha_y) < 4.5 * np.sqrt(
        (eyy * eyp + (b.emittance_y * b.alpha_y) ** 2) / n
    )
    assert abs(np.mean(p.x * p.delta) - b.dispersion_x * sd2) < 4.5 * np.sqrt(
        (exx * sd2 + (b.dispersion_x * sd2) ** 2) / n
    )
    # the derived rms values agree with the sample
    assert b.sigma_x == pytest.approx(np.sqrt(exx), rel=1e-15)
    assert b.sigma_xp == pytest.approx(np.sqrt(expp), rel=1e-15)
    assert np.std(p.x) == pytest.approx(b.sigma_x, rel=4.5 / np.sqrt(2 * n))


def test_sampling_reproducible_by_seed():
    b = saltmarsh_like(bunch_length=3e-3)
    p1, p2, p3 = b.sample(50, seed=7), b.sample(50, seed=7), b.sample(50, seed=8)
    assert np.array_equal(p1.x, p2.x) and np.array_equal(p1.t, p2.t)
    assert not np.array_equal(p1.x, p3.x)
    # rms arrival time from the bunch length: σ_t = σ_z/(βc); 4.5 SE of an rms, SE = σ/sqrt(2n)
    q = b.sample(100_000, seed=SEED)
    assert np.std(q.t) == pytest.approx(3e-3 / (b.beta * c), rel=4.5 / np.sqrt(2e5))


def test_profile_sampling_matches_its_cdf():
    # A triangular profile (piecewise linear, exact in the sampler): Kolmogorov–Smirnov against its
    # analytic CDF, seed 20261202; reject only below p = 1e-3.
    t = np.array([0.0, 1e-12, 3e-12])
    rho = np.array([0.0, 2.0, 0.0])
    b = ElectronBeam(E_BEAM, 0.3, 0, 0, 1, 1, longitudinal_profile=(t, rho))

    def cdf(x):
        x = np.asarray(x)
        left = x**2 / (1e-12 * 3e-12)
        right = 1.0 - (3e-12 - x) ** 2 / (2e-12 * 3e-12)
        return np.where(x < 1e-12, left, right)

    p = b.sample(20_000, seed=SEED)
    assert stats.kstest(p.t, cdf).pvalue > 1e-3
    # rms of the triangle (a, c, b) = (0, 1, 3) ps: sqrt((a²+b²+c²−ab−ac−bc)/18)
    assert b.sigma_t == pytest.approx(np.sqrt((0 + 9 + 1 - 0 - 0 - 3) / 18) * 1e-12, rel=1e-12)


def test_bunch_charge_sets_weights_and_rate():
    b = saltmarsh_like(bunch_charge=1e-9)
    p = b.sample(10, seed=1)
    n = 1e-9 / 1.602176634e-19
    assert np.allclose(p.weights, n / 10, rtol=1e-15)
    assert b.repetition_rate == pytest.approx(0.3 / 1e-9, rel=1e-15)


# ---------------------------------------------------------------------------- job-file input
def test_from_dict_with_units():
    b = ElectronBeam.from_dict(
        {
            "energy": "2.5 GeV",
            "current": "300 mA",
            "emittance_x": "2 nm*rad",
            "emittance_y": "20 pm*rad",
            "beta_x": "8 m",
            "beta_y": 3,
            "energy_spread": "0.1 %",
            "bunch_length": "10 ps",
            "dispersion_xp": "10 mrad",
        }
    )
    assert b.energy == pytest.approx(2.5e9, rel=1e-15)
    assert b.current == pytest.approx(0.3, rel=1e-15)
    assert b.emittance_y == pytest.approx(2e-11, rel=1e-15)
    assert b.energy_spread == pytest.approx(1e-3, rel=1e-15)
    assert b.dispersion_xp == pytest.approx(0.01, rel=1e-15)
    assert b.sigma_t == pytest.approx(10e-12, rel=1e-12)  # a time is converted with βc and back
    again = ElectronBeam.from_dict(b.to_dict())
    assert again.to_dict() == b.to_dict()


@pytest.mark.parametrize(
    ("data", "fragment"),
    [
        (
            {
                "energy": "2.5 GeV",
                "current": 0.3,
                "emittance_x": 1e-9,
                "emittance_y": 1e-11,
                "beta_x": 1,
                "betay": 2,
            },
            "beta_y",
        ),
        (
            {
                "energy": "2.5 GeV",
                "current": 0.3,
                "emittance_x": 1e-9,
                "emittance_y": 1e-11,
                "beta_x": 1,
            },
            "missing",
        ),
        (
            {
                "energy": "2.5 GeV",
                "current": "0.3 T",
                "emittance_x": 1e-9,
                "emittance_y": 1e-11,
                "beta_x": 1,
                "beta_y": 1,
            },
            "current",
        ),
        (
            {
                "energy": "2.5 GeV",
                "current": 0.3,
                "emittance_x": "-1 nm*rad",
                "emittance_y": 1e-11,
                "beta_x": 1,
                "beta_y": 1,
            },
            "negative",
        ),
        (
            {
                "energy": "2.5 GeV",
                "current": 0.3,
                "emittance_x": 1e-9,
                "emittance_y": 1e-11,
                "beta_x": 0,
                "beta_y": 1,
            },
            "beta_x",
        ),
    ],
)
def test_from_dict_errors_name_the_key(data, fragment):
    with pytest.raises(InputError, match=fragment) as err:
        ElectronBeam.from_dict(data, source="job.toml")
    assert "job.toml" in str(err.value)


@pytest.mark.parametrize(
    ("kwargs", "fragment"),
    [
        ({"emittance_x": -1e-9}, "emittance_x"),
        ({"beta_y": 0.0}, "beta_y"),
        ({"beta_x": -2.0}, "beta_x"),
        ({"current": 0.0}, "current"),
        ({"energy": 1e5}, "rest energy"),
        ({"energy_spread": -1e-3}, "energy_spread"),
        ({"energy_spread": 0.8}, "energy_spread"),
        ({"alpha_x": float("nan")}, "alpha_x"),
        ({"bunch_length": 0.0}, "bunch_length"),
        ({"bunch_length": 1e-3, "longitudinal_profile": ([0, 1e-12], [1, 1])}, "not both"),
        ({"longitudinal_profile": ([0, 1e-12], [0, 0])}, "positive integral"),
        ({"longitudinal_profile": ([1e-12, 0], [1, 1])}, "increase"),
    ],
)
def test_bad_beam_input(kwargs, fragment):
    with pytest.raises(InputError, match=fragment):
        saltmarsh_like(**kwargs)


def test_zero_particles_refused():
    with pytest.raises(InputError, match="n_particles"):
        saltmarsh_like().sample(0, seed=1)
    with pytest.raises(InputError, match="seed"):
        saltmarsh_like().sample(3, seed=-1)


# ---------------------------------------------------------------------------- trajectory offsets
def test_energy_offset_reproduces_the_exact_undulator_path():
    # In a field depending on z only, p_⊥(z) does not depend on the energy, so a particle of energy
    # E(1+δ) follows the ideal undulator path with the same K at that energy (XDB 2.1 kinematics).
    # Tolerance 1e-12 relative: both are integrated to rounding (spline O(h⁴) on the difference).
    ref = ideal.planar_undulator(E_BEAM, LU, 10, K)
    for delta in (-3e-3, 2e-3):
        off = offset_in_longitudinal_field(ref, delta=delta, z_ref=0.0)
        exact = ideal.planar_undulator(E_BEAM * (1 + delta), LU, 10, K)
        assert np.max(np.abs(off.t - exact.t)) * c < 1e-12 * 10 * LU
        assert np.max(np.abs(off.r - exact.r)) < 1e-12 * 10 * LU
        assert np.max(np.abs(off.beta - exact.beta)) < 1e-14
        assert np.max(np.abs(off.beta_dot - exact.beta_dot)) < 1e-11 * np.max(
            np.abs(exact.beta_dot)
        )


def test_offsets_in_field_free_space_are_a_straight_line():
    # Field-free: the particle moves on the line with momentum p(x', y', sqrt(1 − x'² − y'²))
    # through (x, y) at z_ref, with γ(1+δ) — exact kinematics.
    ref = ideal.uniform_line(E_BEAM, [0, 0, 0], [0, 0, 1], 4e-9, n_samples=41)
    x, xp, y, yp, d, t0 = 1e-4, 3e-5, -2e-4, -1e-5, 1e-3, 2e-12
    off = offset_in_longitudinal_field(ref, x=x, xp=xp, y=y, yp=yp, delta=d, t=t0, z_ref=0.3)
    g = gamma_from_energy(E_BEAM) * (1 + d)
    beta = np.sqrt(1 - 1 / g**2)
    direction = np.array([xp, yp, np.sqrt(1 - xp**2 - yp**2)])
    assert np.allclose(off.beta, beta * direction[None, :], rtol=0, atol=1e-15)
    z = off.r[:, 2]
    assert np.allclose(off.r[:, 0], x + xp / direction[2] * (z - 0.3), rtol=0, atol=1e-15)
    beta0 = np.sqrt(1 - 1 / gamma_from_energy(E_BEAM) ** 2)
    t_expect = 0.3 / (c * beta0) + t0 + (z - 0.3) / (c * beta * direction[2])
    assert np.max(np.abs(off.t - t_expect)) < 1e-21


def test_rigid_tilt_and_exact_offset_radiate_alike():
    # The far field of a rigidly tilted path equals that of the exact offset path up to
    # third-order terms (module notes of lwrad.beam, phase error ~ 4πN θ0²K²/(1+K²/2) ≈ 1e-6 rad here),
    # and equals the reference pattern shifted by the tilt. Tilt = 2 grid steps, so the shift is exact
    # on the grid. Tolerance 2e-3 of the peak: the two paths are sampled differently by radiate
    # at refinement 1 (its sampling error ~1.7e-3 of the peak, measured).
    ref = ideal.planar_undulator(E_BEAM, LU, 10, K, samples_per_period=48)
    g = gamma_from_energy(E_BEAM)
    step = 0.1 / g
    th = step * np.arange(-12, 13)
    obs = AngularGrid(th, [0.0])
    e1 = 1199.033  # eV, fundamental on axis for these parameters (XDB 2.1)
    pe = e1 * np.array([0.92, 0.97, 1.0])
    from lwrad.radiation import radiate

    opts = dict(refinement=1.0)
    tilt = 2 * step
    f_ref = radiate(ref, obs, pe, **opts).flux_density(0.3)[:, 0, :]
    f_rigid = radiate(rigid_offset(ref, xp=tilt, x=1e-4), obs, pe, **opts).flux_density(0.3)[
        :, 0, :
    ]
    f_exact = radiate(
        offset_in_longitudinal_field(ref, xp=tilt, x=1e-4), obs, pe, **opts
    ).flux_density(0.3)[:, 0, :]
    peak = f_ref.max()
    assert np.max(np.abs(f_rigid - f_exact)) < 2e-3 * peak
    assert np.max(np.abs(f_rigid[:, 2:] - f_ref[:, :-2])) < 2e-3 * peak


def test_offset_rejects_bad_input():
    ref = ideal.planar_undulator(E_BEAM, LU, 2, K)
    with pytest.raises(InputError, match="delta"):
        offset_in_longitudinal_field(ref, delta=-1.5)
    with pytest.raises(InputError, match="z_ref"):
        offset_in_longitudinal_field(ref, z_ref=5.0)
    arc = ideal.circular_arc(1e8, 0.3, 2.0)  # turns back in z
    with pytest.raises(InputError, match="forward"):
        offset_in_longitudinal_field(arc, xp=1e-5)


# ---------------------------------------------------------------------------- Monte Carlo driver
def _mc_setup():
    ref = ideal.planar_undulator(E_BEAM, LU, 10, K, samples_per_period=48)
    g = gamma_from_energy(E_BEAM)
    obs = AngularGrid(np.linspace(-0.6 / g, 0.6 / g, 13), [0.0])
    return ref, obs, np.array([1150.0, 1190.0])


def test_monte_carlo_converges_and_reports_uncertainty():
    ref, obs, pe = _mc_setup()
    beam = ElectronBeam(E_BEAM, 0.3, 5e-10, 0.0, 2.0, 2.0, energy_spread=1e-3)
    opts = dict(refinement=1.0)
    # pixels above 30 % of the peak must reach 10 % standard error (the wings of a 10-period
    # pattern vary strongly from particle to particle: ~12 % SE at 100 particles, measured)
    res = monte_carlo(
        beam,
        obs,
        pe,
        reference=ref,
        rel_tolerance=0.1,
        significance=0.3,
        batch_size=16,
        min_particles=32,
        max_particles=400,
        seed=SEED,
        radiate_options=opts,
    )
    d = res.diagnostics
    assert d["converged"] and d["relative_uncertainty"] <= 0.1
    assert d["n_particles_used"] % 16 == 0 and d["n_particles_used"] < 400
    assert res.relative_uncertainty(0.3) == pytest.approx(d["relative_uncertainty"], rel=1e-12)
    # the standard error shrinks like 1/sqrt(M): a run with 4× the particles has about half of it
    # (ratio of two SE estimates; ±25 % covers their own scatter at these M, seed stated)
    r32 = monte_carlo(
        beam,
        obs,
        pe,
        reference=ref,
        rel_tolerance=None,
        batch_size=32,
        max_particles=32,
        seed=SEED + 1,
        radiate_options=opts,
    )
    r128 = monte_carlo(
        beam,
        obs,
        pe,
        reference=ref,
        rel_tolerance=None,
        batch_size=64,
        max_particles=128,
        seed=SEED + 2,
        radiate_options=opts,
    )
    assert r128.diagnostics["n_particles_used"] == 128 and r128.diagnostics["converged"] is None
    ratio = r128.relative_uncertainty() / r32.relative_uncertainty()
    assert 0.5 * 0.75 < ratio < 0.5 * 1.25
    # uncertainty in flux units is the intensity SE converted pixel by pixel
    u = res.flux_density_uncertainty(0.3)
    f = res.flux_density(0.3)
    assert np.all(u >= 0)
    assert np.max(
        u / np.where(f >= 0.3 * f.max(axis=(1, 2), keepdims=True), f, np.inf)
    ) == pytest.approx(d["relative_uncertainty"], rel=1e-9)


def test_monte_carlo_never_silent_and_reproducible():
    ref, obs, pe = _mc_setup()
    beam = ElectronBeam(E_BEAM, 0.3, 5e-10, 0.0, 2.0, 2.0)
    opts = dict(refinement=1.0)
    with pytest.warns(ConvergenceWarning, match="max_particles"):
        a = monte_carlo(
            beam,
            obs,
            pe,
            reference=ref,
            rel_tolerance=1e-6,
            batch_size=8,
            min_particles=8,
            max_particles=16,
            seed=SEED,
            radiate_options=opts,
        )
    assert a.diagnostics["converged"] is False and a.diagnostics["relative_uncertainty"] > 1e-6
    with pytest.warns(ConvergenceWarning):
        b = monte_carlo(
            beam,
            obs,
            pe,
            reference=ref,
            rel_tolerance=1e-6,
            batch_size=8,
            min_particles=8,
            max_particles=16,
            seed=SEED,
            radiate_options=opts,
            n_jobs=2,
        )
    # same seed, 1 or 2 threads: bit-identical sums (fixed accumulation order)
    assert np.array_equal(a.incoherent.moments, b.incoherent.moments)
    assert np.array_equal(a.incoherent_se, b.incoherent_se)


def test_monte_carlo_bad_input():
    ref, obs, pe = _mc_setup()
    beam = ElectronBeam(E_BEAM, 0.3, 5e-10, 0.0, 2.0, 2.0, energy_spread=1e-3)
    with pytest.raises(InputError, match="energy spread"):
        monte_carlo(beam, obs, pe, reference=ref, offsets="rigid")
    with pytest.raises(InputError, match="bunch_charge"):
        monte_carlo(beam, obs, pe, reference=ref, coherent=True)
    with pytest.raises(InputError, match="exactly one"):
        monte_carlo(beam, obs, pe)
    with pytest.raises(InputError, match="max_particles"):
        monte_carlo(beam, obs, pe, reference=ref, max_particles=0)
    other = ElectronBeam(3.0e9, 0.3, 5e-10, 0.0, 2.0, 2.0)
    with pytest.raises(InputError, match="energy must match"):
        monte_carlo(other, obs, pe, reference=ref)


def test_offsets_equal_tracking_in_a_longitudinal_field():
    # A planar undulator model whose field depends on z only (no off-axis terms): the exact offsets of
    # the tracked on-axis path must reproduce tracking every particle (same seed → same particles).
    # Measured agreement 3e-10 of the peak; tolerance 1e-6 (tracking rtol and radiate sampling).
    from lwrad.magnets import PlanarUndulator
    from lwrad.tracking import track

    k_und = 0.5
    b0 = k_und / (
        0.9336 * LU * 100
    )  # K = 0.934 B0[T] λu[cm] (XDB 2.1); the exact factor is not needed here
    und = PlanarUndulator(LU, 10, b0)
    g = gamma_from_energy(E_BEAM)
    obs = AngularGrid(np.linspace(-2 / g, 2 / g, 21), [0.0])
    pe = np.array([3000.0, 3300.0])
    beam = ElectronBeam(E_BEAM, 0.3, 1.8e-9, 0.0, 2.0, 2.0, alpha_x=0.5, energy_spread=1e-3)
    opts = dict(refinement=1.0)
    tracked = monte_carlo(
        beam,
        obs,
        pe,
        magnet=und,
        rel_tolerance=None,
        max_particles=6,
        batch_size=6,
        seed=SEED,
        radiate_options=opts,
    )
    offset = monte_carlo(
        beam,
        obs,
        pe,
        reference=track(und, E_BEAM),
        rel_tolerance=None,
        max_particles=6,
        batch_size=6,
        seed=SEED,
        radiate_options=opts,
    )
    fa, fb = tracked.flux_density(0.3), offset.flux_density(0.3)
    assert np.max(np.abs(fa - fb)) < 1e-6 * fb.max()
    assert tracked.diagnostics["offsets"] == "tracking"

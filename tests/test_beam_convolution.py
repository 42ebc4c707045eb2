"""The far-field fast path: single-electron patterns smeared by beam divergence and energy spread.

Sources: convolution of Gaussians (variances add; elementary); conservation of the angle-integrated
flux under a convolution with a normalised kernel; undulator kinematics and harmonics from the
X-ray Data Booklet sec. 2.1 (via lwrad.ideal); the energy-spread universal function of T. Tanaka and
H. Kitamura, J. Synchrotron Rad. 16 (2009) 380, *cited from memory*: with x = 2π n N σ_δ the natural
divergence grows by Q_a(x) = [2x² / (−1 + e^{−2x²} + sqrt(2π) x erf(sqrt(2) x))]^{1/2}, so the on-axis
peak flux density of harmonic n drops by 1/Q_a(x)². Independently of memory, 1/Q_a² is the line-centre
value of sinc² convolved with a Gaussian of rms x, which the test checks with scipy.integrate.
Monte Carlo comparisons use seed 20261202 and state their tolerance.
"""

import math

import numpy as np
import pytest
from scipy import integrate, special

from lwrad import ideal
from lwrad.beam import ElectronBeam
from lwrad.beam_radiation import convolve_beam, monte_carlo
from lwrad.constants import gamma_from_energy, photon_energy_to_wavelength
from lwrad.engine.convolution import convolve_angles, energy_nodes, gaussian_kernel, smear_far_field
from lwrad.errors import InputError
from lwrad.observers import AngularGrid, CircularAperture, Screen
from lwrad.radiation import radiate
from lwrad.testing import scaled

SEED = 20261202
E_BEAM, LU, K = 2.5e9, 0.025, 1.4  # the invented "Saltmarsh" ring and its SM-U25 period and K
GAMMA = float(gamma_from_energy(E_BEAM))
# fundamental on axis, λ1 = λu (1 + K²/2)/(2γ²) (XDB 2.1)
E1 = float(photon_energy_to_wavelength(1.0) / (LU * (1 + K**2 / 2) / (2 * GAMMA**2)))


def q_a(x):
    """Tanaka–Kitamura universal function (from memory, see module docstring)."""
    return math.sqrt(
        2
        * x
        * x
        / (-1 + math.exp(-2 * x * x) + math.sqrt(2 * math.pi) * x * special.erf(math.sqrt(2) * x))
    )


# ---------------------------------------------------------------------------- kernels
def test_kernel_identity_shift_and_elements():
    axis = np.array([-1.0, -0.8, -0.5, -0.45, 0.0, 0.2, 0.7, 1.0])  # non-uniform on purpose
    assert np.array_equal(gaussian_kernel(axis, 0.0), np.eye(axis.size))
    m = gaussian_kernel(np.linspace(-1, 1, 21), 0.0, shift=0.1)  # a pure shift by one step
    assert np.allclose(m, np.eye(21, k=-1), atol=1e-12)
    # each element is ∫ hat_j(θ') G(x_i − θ') dθ' — checked against scipy.integrate.quad (1e-12)
    sig = 0.13
    m = gaussian_kernel(axis, sig, shift=0.05)
    ext = np.concatenate(
        ([axis[0] - (axis[1] - axis[0])], axis, [axis[-1] + (axis[-1] - axis[-2])])
    )
    for i in (0, 3, 6):
        for j in (0, 2, 3, 7):
            a, b, d = ext[j], ext[j + 1], ext[j + 2]

            def hat(t, a=a, b=b, d=d):
                return (t - a) / (b - a) if t < b else (d - t) / (d - b)

            def f(t, i=i, hat=hat):
                return (
                    hat(t)
                    * np.exp(-0.5 * ((axis[i] - 0.05 - t) / sig) ** 2)
                    / (np.sqrt(2 * np.pi) * sig)
                )

            ref = (
                integrate.quad(f, a, b, epsabs=1e-14)[0] + integrate.quad(f, b, d, epsabs=1e-14)[0]
            )
            assert m[i, j] == pytest.approx(ref, abs=1e-12)


def test_gaussian_pattern_convolution_converges():
    # Gaussian ⊛ Gaussian: the peak drops by s/sqrt(s² + σ²) per axis (variances add). Without
    # oversampling the hat representation errs by O(h²): halving h cuts the error ~4×; the default
    # spline oversampling is closer (< 5e-4 at h = s/5, measured 1.9e-4). Flux leaving ±8: < 1e-9.
    s, sig = 1.0, 0.7
    exact = (s / np.hypot(s, sig)) ** 2
    errs = []
    for n in (41, 81, 161):
        ax = np.linspace(-8.0, 8.0, n)
        pat = np.exp(-0.5 * (ax[None, :] ** 2 + ax[:, None] ** 2) / s**2)[None]
        out, change = convolve_angles(pat, ax, ax, sig, sig, oversample=1)
        errs.append(abs(out[0, n // 2, n // 2] - exact))
        assert abs(change[0]) < 1e-9
    assert 3.0 < errs[0] / errs[1] < 5.0 and 3.0 < errs[1] / errs[2] < 5.0
    ax = np.linspace(-8.0, 8.0, 81)
    pat = np.exp(-0.5 * (ax[None, :] ** 2 + ax[:, None] ** 2) / s**2)[None]
    out, _ = convolve_angles(pat, ax, ax, sig, sig)
    assert abs(out[0, 40, 40] - exact) < 5e-4 < errs[1]


def test_energy_nodes_are_a_normalised_gaussian():
    d, w = energy_nodes(1e-3, 1e-4, 6.0)
    assert w.sum() == pytest.approx(1.0, rel=1e-15)
    assert np.sum(w * d) == pytest.approx(0.0, abs=1e-18)
    # trapezoid rule on a uniform grid: the Gaussian's rms to rounding (Poisson summation error
    # ~exp(−2π²σ²/Δ²) ≈ 1e-86 at Δ = σ/10; the ±6σ cut changes it by ~1e-7)
    assert np.sqrt(np.sum(w * d**2)) == pytest.approx(1e-3, rel=1e-6)
    with pytest.raises(InputError, match="half the energy spread"):
        energy_nodes(1e-3, 6e-4)


# ---------------------------------------------------------------------------- undulator cases
# Angular tests use a weaker undulator, K = 0.5: with K = 1.4 the rings of higher harmonics reach
# beyond any small grid at every photon energy (1 % of the flux crosses ±3/γ), which would make
# "a wide aperture" expensive; with K = 0.5 less than 1e-7 does.
K_ANG = 0.5
E1_ANG = float(photon_energy_to_wavelength(1.0) / (LU * (1 + K_ANG**2 / 2) / (2 * GAMMA**2)))


def _undulator(n_periods, k=K):
    return ideal.planar_undulator(E_BEAM, LU, n_periods, k, samples_per_period=48)


def _single_2d(n_points=121, half=3.0, n_periods=10):
    th = np.linspace(-half / GAMMA, half / GAMMA, n_points)
    obs = AngularGrid(th, th)
    return radiate(
        _undulator(n_periods, K_ANG), obs, E1_ANG * np.array([0.95, 0.98, 1.0]), refinement=1.0
    )


def test_flux_conserved_while_on_axis_density_drops():
    # Angle-integrated flux of the harmonic through a wide aperture (the whole ±3/γ grid) does not
    # depend on the beam divergence (conservation): equal to the single electron's to 1e-6 (measured
    # 3e-8, what crosses the grid's edge). The on-axis flux density drops as the convolution predicts:
    # checked against an independent quadrature, ∫∫ I₁(θ) G(θ) d²θ with a bicubic spline of I₁ on a 3×
    # finer mesh (Simpson), tolerance 2e-3 (measured ≤ 8e-4; grid step 10 µrad = σ' of the first beam).
    from scipy.interpolate import RectBivariateSpline

    single = _single_2d()
    f1 = single.flux(0.3)
    th = single.observer.theta_x
    c = th.size // 2
    fine = np.linspace(th[0], th[-1], 3 * (th.size - 1) + 1)
    on_axis = []
    for emittance in (2e-10, 1.8e-9):  # σ' = sqrt(ε/β) = 10 and 30 µrad with β = 2 m
        beam = ElectronBeam(E_BEAM, 0.3, emittance, emittance, 2.0, 2.0)
        res = convolve_beam(single, beam)
        assert abs(res.diagnostics["flux_change"]) < 1e-6
        assert np.allclose(res.flux(0.3), f1, rtol=1e-6, atol=0)
        fd = res.flux_density(0.3)
        sig = math.sqrt(emittance / 2.0)
        g = np.exp(-0.5 * (fine / sig) ** 2) / (math.sqrt(2 * math.pi) * sig)
        for k in range(single.photon_energy.size):
            spl = RectBivariateSpline(th, th, single.flux_density(0.3)[k] * 1e6)  # per rad²
            vals = spl(fine, fine) * g[:, None] * g[None, :]
            pred = integrate.simpson(integrate.simpson(vals, x=fine, axis=1), x=fine)
            assert fd[k, c, c] == pytest.approx(pred * 1e-6, rel=2e-3)
        on_axis.append(fd[:, c, c])
    # the drop is real and ordered: more divergence, less on-axis flux density at the harmonic peak
    peak = 2  # photon energy E1: on-axis maximum of the filament pattern
    assert on_axis[1][peak] < on_axis[0][peak] < single.flux_density(0.3)[peak, c, c]
    # a circular aperture inside the grid: only the flux crossing its rim changes
    disc = CircularAperture(2.5 / GAMMA)
    wide = convolve_beam(single, ElectronBeam(E_BEAM, 0.3, 1.8e-9, 1.8e-9, 2.0, 2.0))
    assert np.allclose(wide.flux(0.3, disc), single.flux(0.3, disc), rtol=1e-4)


@pytest.mark.parametrize(("harmonic", "sigma_delta"), [(1, 1.0e-3), (3, 1.0e-3), (1, 2.5e-3)])
def test_energy_spread_reduces_peak_as_universal_function(harmonic, sigma_delta):
    # On-axis peak flux density of harmonic n, N = 80 periods (the invented SM-U25): reduction by
    # 1/Q_a(2π n N σ_δ)² (Tanaka & Kitamura 2009, from memory). Tolerance 1e-3: the universal function
    # assumes the large-N sinc² line and neglects the s² = (1+δ)² amplitude factor, both O(1e-4) here
    # (measured agreement 5e-6 to 3e-5).
    n_periods = 80
    x = 2 * math.pi * harmonic * n_periods * sigma_delta
    # the function itself: line centre of sinc²(u) ⊛ Gaussian(rms x), by scipy.integrate (1e-9)
    direct = integrate.quad(
        lambda s: (
            np.sinc(s / np.pi) ** 2 * np.exp(-0.5 * (s / x) ** 2) / (math.sqrt(2 * math.pi) * x)
        ),
        -12 * x - 60,
        12 * x + 60,
        limit=2000,
        epsabs=1e-12,
    )[0]
    assert 1 / q_a(x) ** 2 == pytest.approx(direct, abs=1e-9)
    half = 4 / (harmonic * n_periods) + 12 * sigma_delta
    pe = harmonic * E1 * np.linspace(1 - half, 1 + half, 401)
    single = radiate(_undulator(n_periods), AngularGrid(0.0, 0.0), pe, refinement=2.0)
    beam = ElectronBeam(E_BEAM, 0.3, 0.0, 0.0, 5.0, 5.0, energy_spread=sigma_delta)
    res = convolve_beam(single, beam)
    peak_single = single.flux_density(0.3).max()
    ratio = res.flux_density(0.3).max() / peak_single
    assert ratio == pytest.approx(1 / q_a(x) ** 2, rel=1e-3)
    # converged in the δ quadrature: halving its step changes the peak by < 1e-5
    finer = convolve_beam(single, beam, delta_step=res.diagnostics["delta_step"] / 2)
    assert finer.flux_density(0.3).max() / peak_single == pytest.approx(ratio, rel=1e-5)
    # the line moves with the 2δ shift symmetrically: the peak stays at the harmonic to a fraction
    # of the input step (1/(nN) line width ≫ the 1e-4 relative shift of the s² factor)
    e_peak = res.photon_energy[np.argmax(res.flux_density(0.3)[:, 0, 0])]
    e_peak1 = pe[np.argmax(single.flux_density(0.3)[:, 0, 0])]
    assert abs(e_peak - e_peak1) / e_peak1 < 3 * (pe[1] - pe[0]) / pe[0]


# ---------------------------------------------------------------------------- against Monte Carlo
@pytest.mark.validation
def test_monte_carlo_matches_fast_path_divergence():
    # Divergence (and, invisible in the far field, beam size): Monte Carlo of exact offset paths vs
    # the convolution. Per pixel |MC − fast| ≤ 4.5 SE + 3e-3 of the peak (fast-path cells and radiate
    # sampling at refinement 1, ~1.7e-3 measured). Seed 20261202. Also the flux through the whole grid:
    # every tilted particle carries the same flux (conservation) → MC flux equals the single's to 3e-3.
    th = np.linspace(-3.0 / GAMMA, 3.0 / GAMMA, 121)
    obs = AngularGrid(th, [0.0])
    pe = E1_ANG * np.array([0.95, 0.98, 1.0])
    ref = _undulator(10, K_ANG)
    beam = ElectronBeam(
        E_BEAM, 0.3, 1.8e-9, 0.0, 2.0, 2.0, alpha_x=0.5
    )  # σx' = 33.5 µrad, σx = 60 µm
    m = scaled(192, 2048)
    mc = monte_carlo(
        beam,
        obs,
        pe,
        reference=ref,
        rel_tolerance=None,
        batch_size=64,
        max_particles=m,
        seed=SEED,
        radiate_options=dict(refinement=1.0),
    )
    # the fast path on a single row needs σy' = 0, which the beam has (ε_y = 0)
    fast = convolve_beam(radiate(ref, obs, pe, refinement=1.0), beam)
    a = mc.flux_density(0.3)
    b = fast.flux_density(0.3)
    se = mc.flux_density_uncertainty(0.3)
    peak = b.max()
    assert np.all(np.abs(a - b) <= 4.5 * se + 3e-3 * peak)
    # the comparison has teeth: the single electron differs from the beam by many SE somewhere
    single = mc.flux_density(0.3, "single")
    assert np.max(np.abs(single - b) / (se + 1e-3 * peak)) > 10
    # 1-D row: the "flux" here is ∫ dθx at θy = 0, conserved by tilts in x
    assert np.allclose(mc.flux(0.3), fast.flux(0.3), rtol=3e-3)


@pytest.mark.validation
def test_monte_carlo_matches_fast_path_energy_spread():
    # Energy spread, on axis, N = 80: MC with exactly re-built paths of energy E(1+δ) vs the
    # s² I(ω/s²) rescaling. Per photon energy |MC − fast| ≤ 4.5 SE + 1e-3 of the peak. Seed 20261202.
    n_periods, sd = 80, 2e-3
    half = 4 / n_periods + 12 * sd
    pe_in = E1 * np.linspace(1 - half, 1 + half, 241)
    ref = _undulator(n_periods)
    obs = AngularGrid(0.0, 0.0)
    beam = ElectronBeam(E_BEAM, 0.3, 0.0, 0.0, 5.0, 5.0, energy_spread=sd)
    fast = convolve_beam(radiate(ref, obs, pe_in, refinement=1.0), beam)
    pe = fast.photon_energy[::6]
    m = scaled(160, 4096)
    mc = monte_carlo(
        beam,
        obs,
        pe,
        reference=ref,
        rel_tolerance=None,
        batch_size=80,
        max_particles=m,
        seed=SEED,
        radiate_options=dict(refinement=1.0),
    )
    a = mc.flux_density(0.3)[:, 0, 0]
    b = fast.flux_density(0.3)[::6, 0, 0]
    se = mc.flux_density_uncertainty(0.3)[:, 0, 0]
    assert np.all(np.abs(a - b) <= 4.5 * se + 1e-3 * b.max())
    # and the effect is resolved: the filament peak exceeds the beam's by many SE
    single = mc.flux_density(0.3, "single")[:, 0, 0]
    assert single.max() - a.max() > 10 * se[np.argmax(a)]


# ---------------------------------------------------------------------------- bad input
def test_fast_path_bad_input():
    beam = ElectronBeam(E_BEAM, 0.3, 1e-9, 1e-9, 2.0, 2.0)
    ref = _undulator(4)
    screen = radiate(ref, Screen(20.0, [0.0, 1e-3], [0.0]), [E1], refinement=1.0)
    with pytest.raises(InputError, match="AngularGrid"):
        convolve_beam(screen, beam)
    point = radiate(ref, AngularGrid(0.0, 0.0), [E1], refinement=1.0)
    with pytest.raises(InputError, match="single-point axis"):
        convolve_beam(point, beam)
    spread = ElectronBeam(E_BEAM, 0.3, 0.0, 0.0, 2.0, 2.0, energy_spread=1e-3)
    narrow = radiate(ref, AngularGrid(0.0, 0.0), E1 * np.linspace(0.999, 1.001, 5), refinement=1.0)
    with pytest.raises(InputError, match="extend the photon-energy"):
        convolve_beam(narrow, spread)
    with pytest.raises(InputError, match="at least 4"):
        convolve_beam(radiate(ref, AngularGrid(0.0, 0.0), [E1, 1.01 * E1], refinement=1.0), spread)
    with pytest.raises(InputError, match="shape"):
        smear_far_field(np.ones((2, 3, 3)), [1.0], [0.0, 1.0, 2.0], [0.0, 1.0, 2.0])

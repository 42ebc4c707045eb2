"""Coherent and incoherent sums over particles; longitudinal form factors.

Sources: superposition of fields (Jackson 3rd ed. ch. 14: fields add, intensities of uncorrelated
sources add); the delay theorem of the Fourier transform with the convention Ẽ(ω) = ∫E e^{+iωt} dt;
the Gaussian form factor exp(−ω²σ_t²) (elementary Fourier transform of a Gaussian; Nodvick and
Saxon, Phys. Rev. 96 (1954) 180 for the coherent-radiation formula); scipy.integrate as an
independent quadrature. Statistical tests state seed 20261202 and their tolerance.
"""

import numpy as np
import pytest
from scipy import integrate

from lwrad import ideal
from lwrad.beam import ElectronBeam
from lwrad.beam_radiation import monte_carlo, radiate_bunch
from lwrad.coherence import form_factor, gaussian_form_factor, profile_form_factor
from lwrad.constants import c, photon_energy_to_omega
from lwrad.engine.beam_sums import CoherentSum, IncoherentSum
from lwrad.errors import InputError
from lwrad.observers import AngularGrid
from lwrad.radiation import radiate
from lwrad.trajectory import Bunch

SEED = 20261202
OPTS = dict(refinement=2.0)


def thz_arc():
    """A short bending-magnet arc seen in the far field at THz photon energies (invented case)."""
    return ideal.circular_arc(50e6, 0.5, 0.05, n_samples=801)


THZ_OBS = AngularGrid([0.0, 0.01], [0.0, 0.02])
THZ_PE = np.array([2e-4, 5e-4, 1e-3, 2e-3])  # eV: 0.05–0.5 THz


# ---------------------------------------------------------------------------- N identical particles
@pytest.mark.parametrize("n", [1, 7, 40])
def test_identical_particles_n_squared_and_n(n):
    # N identical particles at one place: fields add to N Ẽ₁ → |Σ Ẽ|² = N² |Ẽ₁|² (coherent),
    # intensities add to N |Ẽ₁|² (incoherent). Exact up to rounding: tolerance 1e-12 relative.
    tr = thz_arc()
    one = radiate(tr, THZ_OBS, THZ_PE, **OPTS)
    single = one.moments[0] + one.moments[1] + one.moments[2]
    res = radiate_bunch(Bunch([tr] * n), THZ_OBS, THZ_PE, radiate_options=OPTS)
    coh = res.coherent_sum_moments
    assert np.allclose(coh[0] + coh[1] + coh[2], n**2 * single, rtol=1e-12, atol=0)
    assert np.allclose(res.coherent_field, n * one.field, rtol=1e-12, atol=0)
    inc = res.incoherent.moments
    assert np.allclose(res.n_particles * (inc[0] + inc[1] + inc[2]), n * single, rtol=1e-12, atol=0)
    # per second with current I: incoherent = single × I/|q|; total = N × single × I/|q| (the
    # whole bunch is one charge N q repeating I/(N|q|) times per second); coherent = (N − 1) × single.
    f1 = one.flux_density(0.1)
    assert np.allclose(res.flux_density(0.1, "incoherent"), f1, rtol=1e-12, atol=0)
    assert np.allclose(res.flux_density(0.1, "total"), n * f1, rtol=1e-12, atol=0)
    assert np.allclose(
        res.flux_density(0.1, "coherent"), (n - 1) * f1, rtol=1e-12, atol=1e-12 * f1.max()
    )
    # lwrad.radiate's own coherent bunch sum agrees with ours
    if n > 1:
        theirs = radiate(Bunch([tr] * n), THZ_OBS, THZ_PE, coherent=True, **OPTS)
        assert np.allclose(
            theirs.flux_density(0.1), res.flux_density(0.1, "total"), rtol=1e-12, atol=0
        )


def test_sums_with_weights_and_self_terms():
    # Weighted macro-particles: Σ w Ẽ and Σ w² |Ẽ|² follow from linearity (exact).
    rng = np.random.default_rng(SEED)
    fields = rng.standard_normal((3, 2, 2, 3, 3)) + 1j * rng.standard_normal((3, 2, 2, 3, 3))
    w = np.array([0.5, 2.0, 3.5])
    inc, coh = IncoherentSum(), CoherentSum()
    for f, wi in zip(fields, w, strict=True):
        inc.add(f, wi)
        coh.add(f, wi)
    total = np.tensordot(w, fields, axes=1)
    assert np.allclose(coh.intensity(), np.sum(np.abs(total) ** 2, axis=-1), rtol=1e-13)
    i = np.sum(np.abs(fields) ** 2, axis=-1)
    assert np.allclose(coh.self_terms(), np.tensordot(w**2, i, axes=1), rtol=1e-13)
    mean = np.tensordot(w, i, axes=1) / w.sum()
    assert np.allclose(inc.mean(), mean, rtol=1e-13)
    # SE of a weighted mean (Cochran 1977 sec. 6.4 with Kish's n_eff); for equal weights s/sqrt(M)
    n_eff = w.sum() ** 2 / np.sum(w**2)
    se = np.sqrt(n_eff / (n_eff - 1) * np.tensordot(w**2, (i - mean) ** 2, axes=1)) / w.sum()
    assert np.allclose(inc.standard_error(), se, rtol=1e-10)
    eq = IncoherentSum()
    for f in fields:
        eq.add(f, 1.0)
    assert np.allclose(eq.standard_error(), np.std(i, axis=0, ddof=1) / np.sqrt(3), rtol=1e-10)


def test_bad_weights_and_empty_sums():
    with pytest.raises(InputError, match="weights"):
        IncoherentSum().mean()  # zero particles
    s = CoherentSum()
    s.add(np.ones((1, 1, 1, 3)), 0.0)
    with pytest.raises(InputError, match="sum to zero"):
        s.intensity()
    with pytest.raises(InputError, match="weights"):
        IncoherentSum().add(np.ones((1, 1, 1, 3)), -1.0)
    with pytest.raises(InputError, match="weights"):
        Bunch([thz_arc()] * 2, weights=[0.0, 0.0])
    with pytest.raises(InputError, match="sum to zero"):
        form_factor(1e-3, [0.0, 1e-12], weights=[0.0, 0.0])
    with pytest.raises(InputError, match="at least one particle"):
        form_factor(1e-3, [])
    with pytest.raises(InputError, match="photon_energy"):
        gaussian_form_factor(-1.0, 1e-12)


# ---------------------------------------------------------------------------- form factors
def test_gaussian_form_factor_against_quadrature():
    # F = |∫ρ e^{iωt} dt|², ρ Gaussian of rms σ_t: exp(−ω²σ_t²); checked against scipy.integrate.quad
    # (independent numerics, tolerance 1e-10 absolute).
    sigma = 0.3e-12
    pe = np.array([1e-4, 1e-3, 3e-3])
    f = gaussian_form_factor(pe, sigma)
    for e_ph, val in zip(pe, f, strict=True):
        w = float(photon_energy_to_omega(e_ph))

        def rho(t):
            return np.exp(-0.5 * (t / sigma) ** 2) / (np.sqrt(2 * np.pi) * sigma)

        re = integrate.quad(
            lambda t, w=w: rho(t) * np.cos(w * t), -12 * sigma, 12 * sigma, limit=400
        )[0]
        im = integrate.quad(
            lambda t, w=w: rho(t) * np.sin(w * t), -12 * sigma, 12 * sigma, limit=400
        )[0]
        assert val == pytest.approx(re**2 + im**2, abs=1e-10)
    assert f[1] == pytest.approx(np.exp(-((photon_energy_to_omega(1e-3) * sigma) ** 2)), rel=1e-15)


def test_profile_form_factor_converges_to_gaussian():
    # A tabulated Gaussian (±8σ) converges to exp(−ω²σ²) as O(h²): the error falls ~4× per halving
    # of the step, and at 2001 samples it is below 1e-5 (measured 3.7e-6; converged, then shown).
    sigma = 0.5e-12
    pe = np.linspace(1e-4, 4e-3, 9)
    exact = gaussian_form_factor(pe, sigma)
    errs = []
    for n in (251, 501, 1001, 2001):
        t = np.linspace(-8 * sigma, 8 * sigma, n)
        errs.append(
            np.max(np.abs(profile_form_factor(pe, t, np.exp(-0.5 * (t / sigma) ** 2)) - exact))
        )
    assert errs[-1] < 1e-5
    assert 3.0 < errs[-2] / errs[-1] < 5.0
    # a shifted profile has the same form factor (|e^{iωt0}| = 1)
    t = np.linspace(-8 * sigma, 8 * sigma, 2001) + 7e-12
    shifted = profile_form_factor(pe, t, np.exp(-0.5 * ((t - 7e-12) / sigma) ** 2))
    assert np.max(np.abs(shifted - exact)) < 1e-5


def test_sampled_form_factor_within_statistical_error():
    # M equal-weight samples: E|Σe^{iωt}/M|² = F + (1 − F)/M (self terms). With a = e^{−ω²σ²/2},
    # Var(cos ωt) = (1 + a⁴)/2 − a², so the delta method gives SE(|mean|²) ≈ 2a sqrt(Var/M).
    # Seed 20261202; tolerance 4 SE at every photon energy.
    sigma = 0.4e-12
    m = 20_000
    b = ElectronBeam(
        50e6, 1e-3, 0, 0, 1, 1, bunch_length=sigma * c * np.sqrt(1 - (0.511e6 / 50e6) ** 2)
    )
    times = b.sample(m, seed=SEED).t
    pe = np.array([3e-4, 8e-4, 1.5e-3, 2.5e-3])
    est = form_factor(pe, times)
    f = gaussian_form_factor(pe, sigma)
    a = np.sqrt(f)
    var = (1 + a**4) / 2 - a**2
    se = 2 * a * np.sqrt(var / m) + 1.0 / m
    assert np.all(np.abs(est - (f + (1 - f) / m)) < 4 * se)


def test_time_shifted_copies_radiate_with_the_form_factor():
    # A bunch of delayed copies of one path: Ẽ_j = e^{iωt_j} Ẽ₁ (delay theorem, e^{+iωt}), so
    # |Σ Ẽ_j|² / (M² |Ẽ₁|²) equals the discrete form factor exactly (1e-9), which in turn estimates
    # exp(−ω²σ_t²) within its statistical error (previous test). Checks the sign convention end to end.
    tr = thz_arc()
    sigma = 0.4e-12
    rng = np.random.default_rng(SEED)
    t = sigma * rng.standard_normal(60)
    bunch = Bunch([tr.replace(t=tr.t + dt) for dt in t])
    res = radiate_bunch(bunch, THZ_OBS, THZ_PE, radiate_options=OPTS)
    one = radiate(tr, THZ_OBS, THZ_PE, **OPTS)
    single = (one.moments[0] + one.moments[1] + one.moments[2])[:, 0, 0]
    coh = res.coherent_sum_moments
    ratio = (coh[0] + coh[1] + coh[2])[:, 0, 0] / (60**2 * single)
    assert np.allclose(ratio, form_factor(THZ_PE, t), rtol=1e-9, atol=0)


def test_beam_monte_carlo_coherent_part():
    # A Gaussian bunch of N = Q/e electrons (no transverse spread): coherent power per bunch is
    # N(N−1)|⟨Ẽ⟩|² → N² F(ω)|Ẽ₁|² for N ≫ 1. The Monte Carlo estimate of the cross terms,
    # N²(|mean|² − mean(|Ẽ|²)/M), is unbiased for N² F |Ẽ₁|²; its SE is that of the sampled form
    # factor (delta method, previous tests). Seed 20261202, 4 SE.
    tr = thz_arc()
    sigma = 0.4e-12
    beam = ElectronBeam(
        50e6,
        1e-3,
        0,
        0,
        1,
        1,
        bunch_length=sigma * c * np.sqrt(1 - (0.511e6 / 50e6) ** 2),
        bunch_charge=1e-12,
    )
    m = 200
    res = monte_carlo(
        beam,
        THZ_OBS,
        THZ_PE,
        reference=tr,
        coherent=True,
        batch_size=m,
        max_particles=m,
        rel_tolerance=None,
        seed=SEED,
        radiate_options=OPTS,
    )
    n = beam.particles_per_bunch
    single = res.single.moments
    single = (single[0] + single[1] + single[2])[:, 0, 0]
    cross = res.coherent.moments
    est = (cross[0] + cross[1] + cross[2])[:, 0, 0] / (n**2 * single)
    f = gaussian_form_factor(THZ_PE, sigma)
    a = np.sqrt(f)
    se = 2 * a * np.sqrt(((1 + a**4) / 2 - a**2) / m) + 1.0 / m
    assert np.all(np.abs(est - f) < 4 * se)
    # the coherent flux per second is per particle × I/|q| × N × F (module notes of beam_radiation)
    fd = res.flux_density(1e-3, "coherent")[:, 0, 0]
    f1 = res.flux_density(1e-3, "single")[:, 0, 0]
    assert np.allclose(fd, n * est * f1, rtol=1e-12)

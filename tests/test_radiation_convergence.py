"""Convergence, chunk independence and the Result container."""

import numpy as np
import pytest

from lwrad.constants import c, omega_to_photon_energy
from lwrad.errors import InputError
from lwrad.ideal import planar_undulator
from lwrad.observers import AngularGrid, CircularAperture, RectangularAperture, Screen
from lwrad.parallel import plan_chunks
from lwrad.radiation import Result, radiate
from lwrad.trajectory import Bunch

N = 10


@pytest.fixture(scope="module")
def und():
    return planar_undulator(2.5e9, 0.025, N, 1.4, samples_per_period=64)


def _harmonic_energies(traj, n):
    period_time = traj.t[-1] / N
    w1 = 2 * np.pi / (period_time * (1 - traj.r[-1, 2] / (c * traj.t[-1])))
    return omega_to_photon_energy(n * w1 * np.linspace(0.97, 1.01, 9))


@pytest.mark.parametrize("kind", ["angular", "screen"])
def test_refinement_changes_less_than_tolerance(und, kind):
    """Doubling the chosen sampling changes the field by < 1e-4 of the peak (issue 5)."""
    g = und.gamma[0]
    ang = np.array([-0.5, 0.0, 0.7]) / g
    obs = (
        AngularGrid(ang, [0.0, 0.4 / g])
        if kind == "angular"
        else Screen(20.0, 20 * ang + 1e-6, [20 * 0.4 / g])
    )
    for harmonic in (1, 3):
        en = _harmonic_energies(und, harmonic)
        res = radiate(und, obs, en, tolerance=1e-4)
        factor = res.diagnostics["refinement_factor"]
        finer = radiate(und, obs, en, refinement=4 * factor)
        err = np.abs(res.field - finer.field).max() / np.abs(finer.field).max()
        assert err < 1e-4, (harmonic, err)


def test_chunks_and_workers_bit_identical(und):
    g = und.gamma[0]
    obs = AngularGrid(np.linspace(-1, 1, 7) / g, np.linspace(-1, 1, 5) / g)
    en = _harmonic_energies(und, 1)
    full = radiate(und, obs, en)
    two = radiate(und, obs, en, n_jobs=2)
    assert np.array_equal(full.field, two.field)
    parts = [
        radiate(und, obs.take(np.arange(s.start, s.stop)), en) for s in plan_chunks(obs.n_pixels, 8)
    ]
    joined = Result.concatenate_pixels(parts, obs)
    assert np.array_equal(joined.field, full.field)
    assert np.array_equal(joined.moments, full.moments)


def test_result_round_trip_and_flux(und):
    g = und.gamma[0]
    tx = np.linspace(-1, 1, 9) / g
    ty = np.linspace(-1, 1, 7) / g
    obs = AngularGrid(tx, ty)
    res = radiate(und, obs, _harmonic_energies(und, 1)[:3])
    back = Result.from_arrays(res.to_arrays(), res.attrs)
    assert np.array_equal(back.field, res.field)
    np.testing.assert_array_equal(back.flux_density(0.3), res.flux_density(0.3))
    # flux over the grid equals an aperture that covers it; a half-plane aperture gets
    # the half of a mirror-symmetric pattern (the planar undulator is symmetric in θy)
    total = res.flux(0.3)
    covering = res.flux(0.3, RectangularAperture(-1, 1, -1, 1))
    np.testing.assert_allclose(covering, total, rtol=1e-14)
    upper = res.flux(0.3, RectangularAperture(-1, 1, 0.0, 1))
    np.testing.assert_allclose(upper, total / 2, rtol=1e-4)
    disc = res.flux(0.3, CircularAperture(10.0))
    np.testing.assert_allclose(disc, total, rtol=1e-12)
    # trapezoid weights: the integral of a constant is the grid's area in mrad²
    area = (tx[-1] - tx[0]) * (ty[-1] - ty[0]) * 1e6
    assert res.pixel_weights().sum() == pytest.approx(area, rel=1e-12)
    # Stokes: S0² ≥ S1² + S2² + S3² with equality for one electron (fully polarized)
    s = res.stokes(0.3)
    np.testing.assert_allclose(s[0] ** 2, s[1] ** 2 + s[2] ** 2 + s[3] ** 2, rtol=1e-9, atol=1e-30)
    with pytest.raises(InputError):
        Result.concatenate_pixels([], obs)


def test_bunch_incoherent_and_coherent(und):
    obs = AngularGrid(0.0, 0.0)
    en = _harmonic_energies(und, 1)[:2]
    one = radiate(und, obs, en)
    bunch = Bunch([und, und], weights=[2.0, 3.0])
    inc = radiate(bunch, obs, en)
    coh = radiate(bunch, obs, en, coherent=True)
    assert inc.field is None
    # identical particles (weights 2 and 3): the incoherent result is the weighted mean
    # per particle (= one particle); the coherent field is 5 × one field and repeats
    # I/(5|q|) times per second, so the flux density is 25/5 = 5 × one particle's
    np.testing.assert_allclose(inc.flux_density(1.0), one.flux_density(1.0), rtol=1e-12)
    np.testing.assert_allclose(coh.flux_density(1.0), 5 * one.flux_density(1.0), rtol=1e-12)


@pytest.mark.parametrize("kind", ["angular", "screen"])
def test_refinement_chosen_once_reproduces_the_full_call(und, kind):
    """choose_refinement once per study, then refinement=F per chunk: bit-identical pixels.

    The probe sees only the observer's envelope, which chunks made with ``take`` keep, so the
    factor (and every sample time) equals the one ``radiate`` chooses on the whole grid.
    """
    from lwrad.engine.frequency import choose_refinement

    g = und.gamma[0]
    ang = np.linspace(-1, 1, 4) / g
    obs = AngularGrid(ang, ang[:3]) if kind == "angular" else Screen(20.0, 20 * ang, 20 * ang[:3])
    en = _harmonic_energies(und, 1)
    full = radiate(und, obs, en)
    factor, diag = choose_refinement(und, obs, en, 1e-4)
    assert factor == full.diagnostics["refinement_factor"]
    assert diag["converged"] is True and diag["estimated_relative_error"] <= 1e-4
    assert diag["input_phase_error"] == full.diagnostics["input_phase_error"]
    parts = [
        radiate(und, obs.take(np.arange(s.start, s.stop)), en, refinement=factor)
        for s in plan_chunks(obs.n_pixels, 5)
    ]
    assert np.array_equal(Result.concatenate_pixels(parts, obs).field, full.field)


@pytest.mark.parametrize(
    "observer",
    [AngularGrid(0.0, 0.0), AngularGrid([-2e-4, 0.0, 2e-4], [-1e-4, 0.0, 1e-4])],
    ids=["one direction", "3x3 on the probes"],
)
def test_probe_field_reused_when_the_pixels_are_the_probes(und, observer):
    """A spectrum at the probe pixels reuses the probes' field; it must equal a fresh run.

    The fresh run at the same refinement factor skips the probes (refinement=…) and
    computes the pixels itself: bit-identical fields, since both are the same code.
    """
    en = _harmonic_energies(und, 1)
    res = radiate(und, observer, en)
    assert res.diagnostics.get("probe_field_reused") is True
    fresh = radiate(und, observer, en, refinement=res.diagnostics["refinement_factor"])
    assert "probe_field_reused" not in fresh.diagnostics
    assert np.array_equal(res.field, fresh.field)
    assert np.array_equal(res.moments, fresh.moments)


def test_probe_field_not_reused_for_other_pixels(und):
    g = und.gamma[0]
    res = radiate(und, AngularGrid([0.0, 0.3 / g], 0.0), _harmonic_energies(und, 1))
    assert "probe_field_reused" not in res.diagnostics

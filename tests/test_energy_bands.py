"""Wide spectra in octave bands, each sampled for its own highest photon energy.

Reference: the synchrotron-radiation spectrum on the orbit plane, Schwinger /
Jackson 14.79 (``schwinger`` in test_radiation_bend.py, whose arc and ±40/γ cut
are reused: the cut's edge term is below 1e-4 for y ≥ 0.1 there).
"""

import numpy as np
import pytest
from test_radiation_bend import EC, ENERGY, GAMMA, RHO, per_mrad2, schwinger

from lwrad.engine import frequency as F
from lwrad.ideal import circular_arc
from lwrad.observers import AngularGrid
from lwrad.radiation import radiate


@pytest.fixture(scope="module")
def arc():
    return circular_arc(ENERGY, RHO, 40 / GAMMA, n_samples=4001)  # as in test_radiation_bend


def test_bands_partition_the_energies_highest_first():
    rng = np.random.default_rng(3)
    omega = rng.uniform(1.0, 1000.0, 300)  # unsorted on purpose
    bands = F.energy_bands(omega)
    joined = np.sort(np.concatenate(bands))
    assert np.array_equal(joined, np.arange(omega.size))  # every energy exactly once
    tops = [omega[idx].max() for idx in bands]
    assert tops == sorted(tops, reverse=True)
    for idx in bands:
        assert np.all(np.diff(idx) > 0)  # the order within a band is kept
        assert omega[idx].max() / omega[idx].min() <= F.BAND_RATIO
    assert F.energy_bands(np.array([5.0, 6.0, 7.0]))[0].tolist() == [0, 1, 2]


@pytest.fixture(scope="module")
def wide(arc):
    y = np.geomspace(0.1, 4.0, 40)  # ω/ω_c over 5.3 octaves
    res = radiate(arc, AngularGrid(0.0, 0.0), y * EC)
    return y, res


def test_wide_spectrum_in_bands_matches_schwinger(wide):
    """On the orbit plane, 0.1 ≤ y ≤ 4: flux density within 2e-4 of Schwinger at every energy.

    2e-4: the field tolerance 1e-4 doubles in |E|²; relative to each energy's own
    value, since the spectrum spans three decades.
    """
    y, res = wide
    assert res.diagnostics["energy_bands"] >= 6
    got = res.flux_density(1.0)[:, 0, 0]
    sigma, _ = schwinger(y, 0.0)
    ref = sigma * per_mrad2(1.0)
    assert np.max(np.abs(got / ref - 1.0)) < 2e-4


def test_bands_converge_like_one_band(wide, arc, monkeypatch):
    """Refinement: doubling the sampling, or one band sampled at the top energy, changes < 1e-4.

    Field relative to the peak over all energies, the engine's tolerance.
    """
    y, res = wide
    grid = AngularGrid(0.0, 0.0)
    finer = radiate(arc, grid, y * EC, refinement=2 * res.diagnostics["refinement_factor"])
    peak = np.max(np.abs(res.field))
    assert np.max(np.abs(finer.field - res.field)) < 1e-4 * peak
    monkeypatch.setattr(F, "BAND_RATIO", 1e9)
    one = radiate(arc, grid, y * EC)
    assert one.diagnostics["energy_bands"] == 1
    assert np.max(np.abs(one.field - res.field)) < 1e-4 * peak


def test_bands_in_threads_are_bit_identical(wide, arc):
    """A spectrum at one pixel runs its bands in threads with n_jobs > 1: same numbers exactly."""
    y, res = wide
    two = radiate(arc, AngularGrid(0.0, 0.0), y * EC, n_jobs=2)
    assert np.array_equal(two.field, res.field)
    assert two.diagnostics == res.diagnostics

"""Units parser and constants."""

import numpy as np
import pytest
import scipy.constants as sc

from lwrad import constants as C
from lwrad.errors import InputError
from lwrad.units import parse_quantity


@pytest.mark.parametrize(
    "text, dim, default, expected",
    [
        ("25 mm", "length", "m", 0.025),
        (2.5, "energy", "GeV", 2.5e9 * sc.e),
        ("0.3 A", "current", "A", 0.3),
        ("1.5 mrad", "angle", "rad", 1.5e-3),
        ("1e-3 T", "field", "T", 1e-3),
        ("8 keV", "energy", "eV", 8e3 * sc.e),
    ],
)
def test_parse(text, dim, default, expected):
    assert parse_quantity(text, dim, default_unit=default) == pytest.approx(expected, rel=1e-15)


@pytest.mark.parametrize("text", ["25 kg", "mm", "25 mm mm", "1e400 m", True, [1]])
def test_parse_rejects(text):
    with pytest.raises(InputError) as info:
        parse_quantity(text, "length", default_unit="m", location="observer.distance")
    assert "observer.distance" in str(info.value)


def test_photon_energy_conversions_roundtrip():
    # ω = E/ħ and λ = hc/E (definitions); 12.398 keV·Å is the handbook value (X-ray Data Booklet).
    assert C.photon_energy_to_wavelength(12398.42) == pytest.approx(1e-10, rel=1e-6)
    w = C.photon_energy_to_omega(np.array([1.0, 1e4]))
    np.testing.assert_allclose(C.omega_to_photon_energy(w), [1.0, 1e4], rtol=1e-15)


def test_gamma_and_one_minus_beta():
    # 2.5 GeV electron: γ = E/(m c²) ≈ 4892.4, against CODATA's tabulated electron rest energy
    # in MeV (scipy.constants); the table is rounded to 11 digits, hence rel=1e-9.
    mec2_mev = sc.physical_constants["electron mass energy equivalent in MeV"][0]
    assert C.gamma_from_energy(2.5e9) == pytest.approx(2.5e9 / (mec2_mev * 1e6), rel=1e-9)
    # 1 − β without cancellation agrees with the high-precision series 1/(2γ²) + 1/(8γ⁴).
    gam = 1e5
    assert C.one_minus_beta_from_gamma(gam) == pytest.approx(
        1 / (2 * gam**2) + 1 / (8 * gam**4), rel=1e-12
    )


def test_particles():
    assert C.particle_properties("positron") == (sc.e, sc.m_e)
    q, m = C.particle_properties("ion:6:12")
    assert q == 6 * sc.e and m == pytest.approx(12 * sc.atomic_mass)
    with pytest.raises(InputError):
        C.particle_properties("ion:6")
    with pytest.raises(InputError):
        C.particle_properties("gluon")

"""Magnet field models: periodic part, field integrals, Maxwell's equations, errors, sequences."""

import math

import numpy as np
import pytest

from lwrad import InputError
from lwrad.magnets import (
    Dipole,
    EllipticalUndulator,
    HelicalUndulator,
    MagnetSequence,
    PlanarUndulator,
)
from lwrad.summary import field_integrals

PERIOD, B0 = 0.025, 0.5996  # invented SM-U25 (K = 1.4)
KU = 2 * math.pi / PERIOD


def test_periodic_part_is_a_pure_cosine():
    und = PlanarUndulator(PERIOD, 20, B0)
    z = np.linspace(-5 * PERIOD, 5 * PERIOD, 1001)
    by = und.field(0, 0, z)[:, 1]
    # by construction the pole windows sum to one: B0 cos(ku (z − z0)), z0 at a pole centre
    z0 = -(2 * 20 + 1) * PERIOD / 4
    np.testing.assert_allclose(by, B0 * np.cos(KU * (z - z0)), rtol=0, atol=1e-13 * B0)
    assert np.max(np.abs(by)) == pytest.approx(B0, rel=1e-6)


def test_termination_cancels_field_integrals():
    und = PlanarUndulator(PERIOD, 80, B0)
    i1, i2 = field_integrals(und)
    scale1 = B0 / KU  # one lobe's integral scale, T m
    # exact cancellation by construction (module docstring); quadrature ~1e-15
    assert abs(i1[1]) < 1e-12 * scale1
    assert abs(i2[1]) < 1e-12 * scale1 * PERIOD
    # unterminated: first integral zero, second integral not
    bare = PlanarUndulator(PERIOD, 80, B0, terminations=False)
    j1, j2 = field_integrals(bare)
    assert abs(j1[1]) < 1e-12 * scale1
    assert abs(j2[1]) > 0.1 * scale1 * PERIOD
    # field integrals refine: 2× more quadrature pieces change nothing beyond 1e-12
    z = np.linspace(*und.z_range, 400001)
    by = und.field(0, 0, z)[:, 1]
    assert abs(np.trapezoid(by, z)) < 1e-9 * scale1


def _maxwell_residuals(magnet, pts, h=1e-6):
    def grad(i):
        d = np.zeros(3)
        d[i] = h
        plus = magnet.field(*(pts + d).T)
        minus = magnet.field(*(pts - d).T)
        return (plus - minus) / (2 * h)  # ∂B/∂x_i, (n, 3)

    gx, gy, gz = grad(0), grad(1), grad(2)
    div = gx[:, 0] + gy[:, 1] + gz[:, 2]
    curl = np.stack([gy[:, 2] - gz[:, 1], gz[:, 0] - gx[:, 2], gx[:, 1] - gy[:, 0]], axis=-1)
    return div, curl


def test_off_axis_field_satisfies_maxwell_everywhere(rng):
    # exact flat-pole field: By + i Bz = F(z + i y) (module docstring), in the terminations too
    for und in (
        PlanarUndulator(PERIOD, 6, B0, off_axis=True, pole_error_rms=0.01, seed=3),
        EllipticalUndulator(0.04, 5, 0.6, 0.4, 1.0, off_axis=True),
        Dipole(1.2, 0.5, fringe="soft", fringe_length=0.04, off_axis=True),
    ):
        lo, hi = und.z_range
        pts = rng.uniform([-3e-3, -3e-3, lo], [3e-3, 3e-3, hi], size=(400, 3))
        div, curl = _maxwell_residuals(und, pts)
        gradient_scale = KU * 0.6
        # central differences with h = 1 µm: truncation ~(ku h)² ~ 4e-8, rounding ~1e-16/h ~ 1e-10
        assert np.max(np.abs(div)) < 1e-6 * gradient_scale
        assert np.max(np.abs(curl)) < 1e-6 * gradient_scale
    # and the periodic-part formula By = B0 cosh(ku y) cos, Bz = −B0 sinh(ku y) sin
    und = PlanarUndulator(PERIOD, 20, B0, off_axis=True)
    z0 = -(2 * 20 + 1) * PERIOD / 4
    z = np.linspace(-0.05, 0.05, 51)
    y = 2e-3
    b = und.field(0.0, y, z)
    np.testing.assert_allclose(b[:, 1], B0 * math.cosh(KU * y) * np.cos(KU * (z - z0)), atol=1e-12)
    np.testing.assert_allclose(b[:, 2], -B0 * math.sinh(KU * y) * np.sin(KU * (z - z0)), atol=1e-12)


def test_on_axis_model_ignores_x_and_y():
    und = PlanarUndulator(PERIOD, 4, B0)
    np.testing.assert_array_equal(und.field(1e-3, 2e-3, 0.01), und.field(0, 0, 0.01))


def test_pole_errors_are_seeded_with_the_requested_rms():
    ideal = PlanarUndulator(PERIOD, 80, B0)
    a = PlanarUndulator(PERIOD, 80, B0, pole_error_rms=0.01, seed=7)
    b = PlanarUndulator(PERIOD, 80, B0, pole_error_rms=0.01, seed=7)
    np.testing.assert_array_equal(a.pole_amplitudes_y, b.pole_amplitudes_y)
    rel = a.pole_amplitudes_y / ideal.pole_amplitudes_y - 1
    # 162 normal deviates (seed 7): the sample rms is within ~3 × 1/sqrt(2·162) = 17 % of 0.01
    assert np.sqrt(np.mean(rel**2)) == pytest.approx(0.01, rel=0.17)
    # no seed given: one is drawn and recorded, so the device can be rebuilt
    c = PlanarUndulator(PERIOD, 10, B0, pole_error_rms=0.01)
    rebuilt = PlanarUndulator(**{k: v for k, v in c.to_dict().items() if k != "type"})
    np.testing.assert_array_equal(rebuilt.pole_amplitudes_y, c.pole_amplitudes_y)


def test_helical_is_elliptical_with_quarter_phase():
    hel = HelicalUndulator(0.05, 6, 0.5, handedness="left")
    ell = EllipticalUndulator(0.05, 6, 0.5, 0.5, -math.pi / 2)
    z = np.linspace(*ell.z_range, 777)
    np.testing.assert_array_equal(hel.field(0, 0, z), ell.field(0, 0, z))
    assert hel.to_dict()["handedness"] == "left"


def test_dipole_profiles():
    hard = Dipole(1.2, 0.9)  # invented SM-B1
    assert hard.breakpoints == (-0.45, 0.45)
    assert hard.field(0, 0, [-0.46, 0.0, 0.44])[:, 1].tolist() == [0.0, 1.2, 1.2]
    soft = Dipole(1.2, 0.9, fringe="soft", fringe_length=0.05)
    i1, _ = field_integrals(soft)
    # ∫By = B0 L exactly for the tanh profile (module docstring)
    assert i1[1] == pytest.approx(1.2 * 0.9, rel=1e-12)
    # fringe_length is the 10 %–90 % rise distance of one edge
    z = np.linspace(-0.6, -0.3, 300001)
    by = soft.field(0, 0, z)[:, 1] / 1.2
    rise = z[np.argmax(by >= 0.9)] - z[np.argmax(by >= 0.1)]
    assert rise == pytest.approx(0.05, abs=2e-6)
    with pytest.raises(InputError, match="valid only"):
        Dipole(1.0, 1.0, fringe="soft", fringe_length=0.01, off_axis=True).field(0, 0.01, 0.5)


def test_sequence_superposes_and_drifts():
    und = PlanarUndulator(PERIOD, 10, B0)
    dip = Dipole(1.0, 0.2, fringe="soft", fringe_length=0.02)
    seq = MagnetSequence([(dip, -1.0), (und, 0.0), (dip, 0.15)])
    z = np.linspace(-1.5, 1.0, 5001)
    expected = dip.field(0, 0, z + 1.0) + und.field(0, 0, z) + dip.field(0, 0, z - 0.15)
    np.testing.assert_allclose(seq.field(0, 0, z), expected, atol=1e-15)
    for zz in (-0.7, 0.0, 0.16):
        np.testing.assert_allclose(seq.field_at(0, 0, zz), seq.field(0, 0, zz), atol=1e-15)
    assert seq.field(0, 0, -0.5)[1] == 0.0  # the drift between the elements
    assert seq.z_range[0] == pytest.approx(dip.z_range[0] - 1.0)
    assert seq.period == PERIOD
    assert seq.to_dict()["elements"][1]["magnet"]["type"] == "PlanarUndulator"


def test_field_shapes_and_scalar_path_agree():
    und = EllipticalUndulator(0.04, 5, 0.6, 0.4, 1.0)
    assert und.field(0, 0, np.zeros((2, 3))).shape == (2, 3, 3)
    for z in np.linspace(*und.z_range, 37):
        np.testing.assert_allclose(und.field_at(0.0, 0.0, z), und.field(0, 0, z), atol=1e-15)


@pytest.mark.parametrize(
    "build",
    [
        lambda: PlanarUndulator(-0.02, 10, 1.0),
        lambda: PlanarUndulator(0.02, 2.5, 1.0),
        lambda: PlanarUndulator(0.02, 0, 1.0),
        lambda: PlanarUndulator(0.02, 10, float("nan")),
        lambda: PlanarUndulator(0.02, 10, 1.0, pole_error_rms=-0.1),
        lambda: PlanarUndulator(0.02, 10, 1.0, pole_error_rms=0.1, seed=-1),
        lambda: HelicalUndulator(0.02, 10, 1.0, handedness="up"),
        lambda: Dipole(1.0, 0.0),
        lambda: Dipole(1.0, 1.0, fringe="wavy"),
        lambda: Dipole(1.0, 1.0, fringe="soft"),
        lambda: MagnetSequence([]),
        lambda: MagnetSequence([("magnet", 0.0)]),
        lambda: PlanarUndulator(0.02, 10, 1.0).field(0, 0, float("nan")),
    ],
)
def test_bad_input(build):
    with pytest.raises(InputError):
        build()

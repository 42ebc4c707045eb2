"""Trajectory model: validation, interpolation consistency, immutability."""

import numpy as np
import pytest

import lwrad
from lwrad.constants import c, e, m_e
from lwrad.trajectory import Bunch, Trajectory


def circular(n=400, gamma=1000.0, radius=10.0, turns=0.01):
    """Exact uniform circular motion in the x–z plane (analytic, no source needed)."""
    beta = np.sqrt(1 - 1 / gamma**2)
    omega = beta * c / radius
    t = np.linspace(0, 2 * np.pi * turns / omega, n)
    ph = omega * t
    r = np.stack([radius * (np.cos(ph) - 1), 0 * t, radius * np.sin(ph)], axis=1)
    b = beta * np.stack([-np.sin(ph), 0 * t, np.cos(ph)], axis=1)
    bd = beta * omega * np.stack([-np.cos(ph), 0 * t, -np.sin(ph)], axis=1)
    return t, r, b, bd, np.full(n, gamma)


def test_defaults_are_an_electron():
    t, r, b, bd, g = circular()
    tr = Trajectory(t, r, b, bd, gamma=g)
    assert tr.charge == -e and tr.mass == m_e
    np.testing.assert_allclose(tr.energy, g * m_e * c**2, rtol=1e-15)


def test_immutable():
    t, r, b, bd, g = circular()
    tr = Trajectory(t, r, b, bd)
    with pytest.raises(ValueError):
        tr.r[0, 0] = 1.0
    with pytest.raises(AttributeError):
        tr.t = t


def test_derived_beta_dot_matches_analytic():
    # circular motion: β̇ analytic; spline derivative with 400 samples over 0.01 turn
    # converges as h^4 — 1e-6 relative is ample and still fails for a first-order difference.
    t, r, b, bd, g = circular()
    tr = Trajectory(t, r, b, gamma=g)
    err = np.max(np.abs(tr.beta_dot - bd)) / np.max(np.abs(bd))
    assert err < 1e-6


def test_hermite_interpolation_converges_fourth_order():
    # Cubic Hermite position error scales as h^4: halving the step divides it by ~16.
    errs = []
    for n in (50, 100):
        t, r, b, bd, g = circular(n=n, turns=0.05)
        tr = Trajectory(t, r, b, bd, gamma=g)
        tm = 0.5 * (t[1:] + t[:-1])
        ti, ri, bi, _, _ = circular(n=2 * n - 1, turns=0.05)
        exact_r = ri[1::2]
        errs.append(np.max(np.abs(tr.interpolate(tm).r - exact_r)))
    assert 12 < errs[0] / errs[1] < 20


def test_gamma_kept_exact_for_ultrarelativistic():
    gamma = 1e5
    t, r, b, bd, g = circular(gamma=gamma)
    tr = Trajectory(t, r, b, bd, gamma=g)
    sub = tr.interpolate(np.linspace(t[0], t[-1], 33))
    np.testing.assert_allclose(sub.inv_gamma_sq, 1 / gamma**2, rtol=1e-12)


@pytest.mark.parametrize(
    "mutate, fragment",
    [
        (lambda d: d.update(t=d["t"][::-1].copy()), "strictly increasing"),
        (lambda d: d["r"].__setitem__((3, 1), np.nan), "non-finite"),
        (lambda d: d["beta"].__setitem__((5, 2), 1.0), "|beta| must be < 1"),
        (lambda d: d.update(r=d["r"][:, :2]), "shape"),
        (lambda d: d.update(t=d["t"][:1], r=d["r"][:1], beta=d["beta"][:1]), "at least 2"),
        (lambda d: d.update(gamma=np.full(len(d["t"]), 3.0)), "inconsistent"),
    ],
)
def test_bad_input_raises_input_error(mutate, fragment):
    t, r, b, bd, g = circular(n=20)
    d = dict(t=t.copy(), r=r.copy(), beta=b.copy())
    mutate(d)
    with pytest.raises(lwrad.InputError, match=fragment.replace("|", r"\|")):
        Trajectory(**d)


def test_slice_keeps_ends_exact():
    t, r, b, bd, g = circular()
    tr = Trajectory(t, r, b, bd, gamma=g)
    t0, t1 = t[10] + 0.3 * (t[11] - t[10]), t[200]
    s = tr.slice(t0, t1)
    assert s.t[0] == t0 and s.t[-1] == t1
    with pytest.raises(lwrad.InputError):
        tr.slice(t1, t0)


def test_bunch_weights_validated():
    t, r, b, bd, g = circular(n=20)
    tr = Trajectory(t, r, b, bd)
    bunch = Bunch([tr, tr], weights=[1.0, 3.0])
    assert len(bunch) == 2 and bunch.total_weight == 4.0
    np.testing.assert_allclose(bunch.total_charge, -4 * e)
    with pytest.raises(lwrad.InputError):
        Bunch([tr, tr], weights=[0.0, 0.0])
    with pytest.raises(lwrad.InputError):
        Bunch([])
    with pytest.raises(lwrad.InputError):
        Bunch([tr], weights=[-1.0])

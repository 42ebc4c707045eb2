"""NumPy .npz trajectories: round trip, no pickle, strict names, damaged archives."""

import math
import os
from pathlib import Path

import numpy as np
import pytest

import lwrad
from lwrad.constants import c, e, m_e, m_p
from lwrad.io import detect_format, read_trajectory, write_trajectory


def arc(n=41, rho=7.0, gamma=4892.0):
    """Uniform circular motion (exact)."""
    beta = math.sqrt((gamma - 1) * (gamma + 1)) / gamma
    t = np.linspace(0.0, 0.9 / (beta * c), n)
    phi = beta * c * t / rho
    zero = np.zeros(n)
    r = np.column_stack([rho * (1 - np.cos(phi)), zero, rho * np.sin(phi)])
    b = beta * np.column_stack([np.sin(phi), zero, np.cos(phi)])
    bd = beta * beta * c / rho * np.column_stack([np.cos(phi), zero, -np.sin(phi)])
    return lwrad.Trajectory(t, r, b, bd, gamma=np.full(n, gamma))


def test_round_trip_is_exact(tmp_path):
    tr = arc()
    path = write_trajectory(tr, tmp_path / "a.npz")
    assert detect_format(path) == "npz"
    assert read_trajectory(path) == tr
    with np.load(path, allow_pickle=False) as archive:
        assert str(archive["format"]) == "lwrad-trajectory-npz 1"


def test_minimal_archive_and_particle_option(tmp_path):
    tr = arc()
    path = tmp_path / "min.npz"
    np.savez(path, t=tr.t, r=tr.r, beta=tr.beta)
    back = read_trajectory(path)
    assert back.charge == -e and back.mass == m_e
    np.testing.assert_array_equal(back.r, tr.r)
    # γ from β alone at γ ≈ 4892: 1 − β ≈ 2e-8 keeps ~8 digits, so γ agrees to ~1e-8 relative
    np.testing.assert_allclose(back.gamma, tr.gamma, rtol=1e-7)
    assert read_trajectory(path, particle="proton").mass == m_p


def _save(tmp_path, **arrays):
    path = tmp_path / "bad.npz"
    np.savez(path, **arrays)
    return path


@pytest.mark.parametrize(
    ("change", "fragments"),
    [
        ({"t": None}, ["array t", "missing"]),
        ({"beta_dots": np.zeros((41, 3))}, ["unknown array", "beta_dots"]),
        ({"r": np.zeros((41, 2))}, ["array r", "shape"]),
        ({"t": np.array(["a"] * 41)}, ["array t", "real numbers"]),
        ({"gamma": np.r_[np.full(40, 4892.0), np.inf]}, ["array gamma", "sample 40", "finite"]),
        ({"t": np.r_[np.linspace(0, 1e-9, 40), 0.0]}, ["array t", "sample 40", "increase"]),
        ({"beta": np.full((41, 3), 0.7)}, ["array beta", "not below 1"]),
        ({"charge": np.array([1.0, 2.0])}, ["array charge", "scalar"]),
        ({"mass": np.float64(-1.0)}, ["positive mass"]),
        ({"format": np.array("something else")}, ["array format"]),
    ],
)
def test_bad_archives_name_the_array(tmp_path, change, fragments):
    tr = arc()
    arrays = {"t": tr.t, "r": tr.r, "beta": tr.beta, "gamma": tr.gamma}
    for name, value in change.items():
        if value is None:
            arrays.pop(name)
        else:
            arrays[name] = value
    with pytest.raises(lwrad.InputError) as info:
        read_trajectory(_save(tmp_path, **arrays))
    message = str(info.value)
    assert "bad.npz" in message
    for fragment in fragments:
        assert fragment in message, (fragment, message)


def test_pickled_objects_are_never_loaded(tmp_path):
    tr = arc()
    path = tmp_path / "pickle.npz"
    np.savez(path, t=tr.t, r=tr.r, beta=tr.beta, gamma=np.array([{"evil": 1}] * 41, dtype=object))
    with pytest.raises(lwrad.InputError, match="pickle.npz"):
        read_trajectory(path)


@pytest.mark.parametrize("keep", [0.05, 0.5, 0.95])
def test_truncated_archive_is_an_input_error(tmp_path, keep):
    data = Path(write_trajectory(arc(), tmp_path / "full.npz")).read_bytes()
    cut = tmp_path / "cut.npz"
    cut.write_bytes(data[: int(len(data) * keep)])
    with pytest.raises(lwrad.InputError, match="cut.npz"):
        read_trajectory(cut)


def test_never_overwrites(tmp_path):
    path = write_trajectory(arc(), tmp_path / "a.npz")
    with pytest.raises(lwrad.InputError, match="exists"):
        write_trajectory(arc(n=5), path)
    write_trajectory(arc(n=5), path, overwrite=True)
    assert read_trajectory(path).n_samples == 5
    assert os.listdir(tmp_path) == ["a.npz"]
    bunch = lwrad.Bunch([arc(), arc()])
    with pytest.raises(lwrad.InputError, match="one trajectory"):
        write_trajectory(bunch, tmp_path / "b.npz")

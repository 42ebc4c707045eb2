"""lwrad's HDF5 trajectory layout: round trips, unit attributes, damaged files, atomic writes."""

import math
import os
from pathlib import Path

import h5py
import numpy as np
import pytest

import lwrad
from lwrad.constants import c, m_p
from lwrad.io import detect_format, read_bunch, read_trajectory, write_trajectory


def arc(n=41, rho=7.0, gamma=4892.0, x0=0.0, mass=None):
    """Uniform circular motion (exact)."""
    beta = math.sqrt((gamma - 1) * (gamma + 1)) / gamma
    t = np.linspace(0.0, 0.9 / (beta * c), n)
    phi = beta * c * t / rho
    zero = np.zeros(n)
    r = np.column_stack([rho * (1 - np.cos(phi)) + x0, zero, rho * np.sin(phi)])
    b = beta * np.column_stack([np.sin(phi), zero, np.cos(phi)])
    bd = beta * beta * c / rho * np.column_stack([np.cos(phi), zero, -np.sin(phi)])
    kw = {} if mass is None else {"mass": mass, "charge": 1.602176634e-19}
    return lwrad.Trajectory(t, r, b, bd, gamma=np.full(n, gamma), **kw)


@pytest.fixture
def single(tmp_path):
    tr = arc()
    return tr, write_trajectory(tr, tmp_path / "one.h5")


def test_round_trip_single_is_exact(single):
    tr, path = single
    back = read_trajectory(path)
    assert back == tr  # float64 stored as float64: bit-identical
    with h5py.File(path) as f:
        g = f["lwrad_trajectory"]
        assert g.attrs["format_version"] == 1
        assert {name: g[name].attrs["unit"] for name in g} == {
            "t": "s",
            "r": "m",
            "beta": "1",
            "beta_dot": "1/s",
            "gamma": "1",
        }


def test_round_trip_bunch_with_weights(tmp_path):
    members = [arc(x0=1e-4 * k, n=21 + k) for k in range(3)] + [arc(mass=m_p, gamma=3.0)]
    bunch = lwrad.Bunch(members, weights=[0.5, 1.0, 2.0, 0.25])
    path = write_trajectory(bunch, tmp_path / "bunch.hdf5")
    back = read_trajectory(path)
    assert isinstance(back, lwrad.Bunch)
    np.testing.assert_array_equal(back.weights, bunch.weights)
    assert all(a == b for a, b in zip(back, bunch, strict=True))
    assert read_trajectory(path, particle_id=3) == members[3]
    assert read_bunch(path).total_weight == 3.75
    with pytest.raises(lwrad.InputError, match="no particle 7"):
        read_trajectory(path, particle_id=7)


def test_read_bunch_wraps_a_single_trajectory(single):
    tr, path = single
    bunch = read_bunch(path)
    assert isinstance(bunch, lwrad.Bunch) and len(bunch) == 1 and bunch[0] == tr


def _edit(path, action):
    with h5py.File(path, "r+") as f:
        action(f["lwrad_trajectory"])


def _set_unit(g, name, unit):
    g[name].attrs["unit"] = unit


def _replace(g, name, data):
    del g[name]
    g.create_dataset(name, data=data).attrs["unit"] = {
        "t": "s",
        "r": "m",
        "beta": "1",
        "beta_dot": "1/s",
        "gamma": "1",
    }[name]


@pytest.mark.parametrize(
    ("action", "fragments"),
    [
        (
            lambda g: _set_unit(g, "t", "ms"),
            ["dataset /lwrad_trajectory/t", "unit attribute must be 's'", "'ms'"],
        ),
        (lambda g: g["r"].attrs.__delitem__("unit"), ["dataset /lwrad_trajectory/r", "None"]),
        (lambda g: g.__delitem__("beta"), ["dataset /lwrad_trajectory/beta", "missing"]),
        (lambda g: _replace(g, "r", np.zeros((41, 2))), ["dataset /lwrad_trajectory/r", "shape"]),
        (
            lambda g: _replace(g, "t", np.r_[np.linspace(0, 1e-9, 40), 0.5e-9]),
            ["dataset /lwrad_trajectory/t", "sample 40", "increase"],
        ),
        (
            lambda g: _replace(g, "beta", np.full((41, 3), 0.6)),
            ["dataset /lwrad_trajectory/beta", "not below 1"],
        ),
        (
            lambda g: _replace(g, "gamma", np.r_[np.full(40, 4892.0), np.nan]),
            ["dataset /lwrad_trajectory/gamma", "sample 40", "finite"],
        ),
        (lambda g: _replace(g, "t", np.linspace(0, 1e-9, 30)), ["samples but t has 30"]),
        (lambda g: g.attrs.__setitem__("format_version", 99), ["format_version 99"]),
        (lambda g: g.attrs.__delitem__("mass"), ["missing attribute 'mass'"]),
        (lambda g: g.attrs.__setitem__("charge", 0.0), ["charge must be finite and non-zero"]),
        (lambda g: g.attrs.__setitem__("kind", "soup"), ["kind must be"]),
    ],
)
def test_bad_content_names_the_dataset(single, action, fragments):
    _, path = single
    _edit(path, action)
    with pytest.raises(lwrad.InputError) as info:
        read_trajectory(path)
    message = str(info.value)
    assert "one.h5" in message
    for fragment in fragments:
        assert fragment in message, (fragment, message)


def test_string_dataset_is_refused(single):
    _, path = single

    def action(g):
        del g["gamma"]
        g.create_dataset("gamma", data=np.array([b"a"] * 41)).attrs["unit"] = "1"

    _edit(path, action)
    with pytest.raises(lwrad.InputError, match="real numbers"):
        read_trajectory(path)


@pytest.mark.parametrize("keep", [0.1, 0.5, 0.9])
def test_truncated_file_is_an_input_error(single, tmp_path, keep):
    _, path = single
    data = Path(path).read_bytes()
    cut = tmp_path / "cut.h5"
    cut.write_bytes(data[: int(len(data) * keep)])
    with pytest.raises(lwrad.InputError, match="cut.h5"):
        read_trajectory(cut)


def test_empty_wrong_extension_and_foreign_hdf5(single, tmp_path):
    tr, path = single
    empty = tmp_path / "empty.h5"
    empty.write_bytes(b"")
    with pytest.raises(lwrad.InputError, match="empty"):
        read_trajectory(empty)
    renamed = tmp_path / "renamed.csv"
    renamed.write_bytes(Path(path).read_bytes())
    assert detect_format(renamed) == "hdf5"  # content first
    assert read_trajectory(renamed) == tr
    foreign = tmp_path / "foreign.h5"
    with h5py.File(foreign, "w") as f:
        f["x"] = np.arange(3)
    with pytest.raises(lwrad.InputError, match="no /lwrad_trajectory group"):
        read_trajectory(foreign)
    with pytest.raises(lwrad.InputError, match="unknown option"):
        read_trajectory(path, species="e")


def test_writes_atomically_and_never_overwrites(single, tmp_path):
    tr, path = single
    before = Path(path).read_bytes()
    with pytest.raises(lwrad.InputError, match="exists"):
        write_trajectory(arc(n=5), path)
    assert Path(path).read_bytes() == before
    write_trajectory(arc(n=5), path, overwrite=True)
    assert read_trajectory(path).n_samples == 5
    assert sorted(os.listdir(tmp_path)) == ["one.h5"]  # no temporary file left


def test_failed_write_leaves_nothing(tmp_path):
    with pytest.raises(lwrad.InputError, match="unknown option"):
        write_trajectory(arc(), tmp_path / "x.h5", compression="gzip")
    assert os.listdir(tmp_path) == []

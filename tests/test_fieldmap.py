"""Field maps: accuracy against the analytic undulator, file formats, bad input."""

import h5py
import numpy as np
import pytest

from lwrad import InputError
from lwrad.magnets import FieldMap, FieldMapWarning, OnAxisFieldMap, PlanarUndulator
from lwrad.tracking import track

ENERGY = 2.5e9  # eV, invented Saltmarsh ring
PERIOD = 0.025


def _profile_map(und, points_per_period):
    lo, hi = und.z_range
    n = int(round((hi - lo) / PERIOD * points_per_period)) + 1
    z = np.linspace(lo, hi, n)
    return OnAxisFieldMap(z, und.field(0, 0, z)[:, 1])


def test_on_axis_map_reproduces_the_analytic_trajectory():
    und = PlanarUndulator(PERIOD, 10, 0.6)
    ref = track(und, ENERGY, rtol=1e-13)
    scale = np.abs(ref.beta[:, 0]).max()
    errors = []
    for ppp in (50, 100):
        traj = track(_profile_map(und, ppp), ENERGY, rtol=1e-13, n_samples=len(ref))
        np.testing.assert_array_equal(traj.r[:, 2], ref.r[:, 2])
        errors.append(np.max(np.abs(traj.beta[:, 0] - ref.beta[:, 0])) / scale)
    # issue requirement: angles to 1e-9 relative. 100 points per period achieves it
    # (measured ~6e-11); quintic splines converge as h⁶, so halving h must gain > 10×
    assert errors[1] < 1e-9
    assert errors[0] / errors[1] > 10


def test_3d_map_reproduces_the_off_axis_trajectory():
    und = PlanarUndulator(PERIOD, 3, 0.6, off_axis=True)
    lo, hi = und.z_range
    z = np.linspace(lo, hi, int(round((hi - lo) / PERIOD * 100)) + 1)
    x = np.linspace(-5e-4, 5e-4, 6)
    y = np.linspace(-5e-4, 5e-4, 11)
    X, Y, Z = np.meshgrid(x, y, z, indexing="ij")
    fmap = FieldMap(x, y, z, und.field(X, Y, Z))
    start = {"x0": 2e-4, "y0": 3e-4, "xp0": 1e-5}
    ref = track(und, ENERGY, **start)
    traj = track(fmap, ENERGY, n_samples=len(ref), **start)
    # 100 points per period in z and 0.1 mm across (k_u h = 0.025): measured ~1e-10
    for i in (0, 1):
        scale = np.abs(ref.beta[:, i]).max()
        assert np.max(np.abs(traj.beta[:, i] - ref.beta[:, i])) / scale < 1e-9
    # the vertical focusing of the flat-pole field is in the map: y' is not zero
    assert np.abs(ref.beta[:, 1]).max() > 1e-8


def test_map_interpolation_is_vectorised_and_exact_on_polynomials():
    x = np.linspace(-1, 1, 7)
    y = np.linspace(-2, 2, 8)
    z = np.linspace(0, 3, 9)
    X, Y, Z = np.meshgrid(x, y, z, indexing="ij")
    b = np.stack([X * Y**2, Z**3 - X, Y * Z], axis=-1)
    with pytest.warns(FieldMapWarning):
        fmap = FieldMap(x, y, z, b)
    rng = np.random.default_rng(20261202)
    pts = rng.uniform([-1, -2, 0], [1, 2, 3], size=(50, 2, 3))
    got = fmap.field(pts[..., 0], pts[..., 1], pts[..., 2])
    assert got.shape == (50, 2, 3)
    px, py, pz = pts[..., 0], pts[..., 1], pts[..., 2]
    want = np.stack([px * py**2, pz**3 - px, py * pz], axis=-1)
    # splines of degree 5 reproduce cubics exactly (to rounding)
    np.testing.assert_allclose(got, want, atol=1e-12)


def _write_text_map(path, x, y, z, b, units=("mm", "T")):
    X, Y, Z = np.meshgrid(x, y, z, indexing="ij")
    lu, bu = units
    rows = np.column_stack([X.ravel() * 1e3, Y.ravel() * 1e3, Z.ravel() * 1e3, b.reshape(-1, 3)])
    with open(path, "w") as fh:
        fh.write("# invented test map\n")
        fh.write(f"x[{lu}] y[{lu}] z[{lu}] Bx[{bu}] By[{bu}] Bz[{bu}]\n")
        for r in rows:
            fh.write(" ".join(repr(float(v)) for v in r) + "\n")


def _small_3d():
    x = np.linspace(-1e-3, 1e-3, 3)
    y = np.linspace(-1e-3, 1e-3, 4)
    z = np.linspace(-0.05, 0.05, 11)
    X, Y, Z = np.meshgrid(x, y, z, indexing="ij")
    env = np.exp(-((Z / 0.01) ** 2))
    b = np.stack([0.1 * env, 0.5 * env * (1 + X), 0.01 * Y * env], axis=-1)
    return x, y, z, b


def test_text_and_hdf5_round_trip(tmp_path):
    x, y, z, b = _small_3d()
    ref = FieldMap(x, y, z, b)
    text = tmp_path / "map.txt"
    _write_text_map(text, x, y, z, b)
    h5 = tmp_path / "map.h5"
    with h5py.File(h5, "w") as fh:
        for name, arr, unit in (("x", x * 1e3, "mm"), ("y", y * 1e3, "mm"), ("z", z, "m")):
            fh.create_dataset(name, data=arr).attrs["unit"] = unit
        for i, name in enumerate(("Bx", "By", "Bz")):
            fh.create_dataset(name, data=b[..., i] * 1e4).attrs["unit"] = "G"
    pts = np.array([[0.0, 0.0, 0.0], [3e-4, -2e-4, 0.013]])
    for path in (text, h5):
        fmap = FieldMap.from_file(path)
        np.testing.assert_allclose(
            fmap.field(pts[:, 0], pts[:, 1], pts[:, 2]),
            ref.field(pts[:, 0], pts[:, 1], pts[:, 2]),
            rtol=1e-12,
            atol=1e-15,
        )
        assert fmap.to_dict()["source"] == str(path)


def test_profile_text_and_hdf5(tmp_path):
    z = np.linspace(-0.1, 0.1, 41)
    by = 0.4 * np.exp(-((z / 0.02) ** 2))
    text = tmp_path / "profile.csv"
    text.write_text(
        "z[mm],By[mT],Bx[T]\n"
        + "".join(
            f"{float(a) * 1e3!r},{float(b) * 1e3!r},0.0\n" for a, b in zip(z, by, strict=True)
        )
    )
    h5 = tmp_path / "profile.hdf5"
    with h5py.File(h5, "w") as fh:
        fh.create_dataset("z", data=z).attrs["unit"] = "m"
        fh.create_dataset("By", data=by).attrs["unit"] = "T"
    for path in (text, h5):
        prof = OnAxisFieldMap.from_file(path)
        np.testing.assert_allclose(prof.field(0.01, 0.02, z)[:, 1], by, atol=1e-15)
        assert prof.field_at(0, 0, 0.2) == (0.0, 0.0, 0.0)  # outside: zero field


def test_nan_in_text_map_names_the_line(tmp_path):
    x, y, z, b = _small_3d()
    b[1, 2, 3, 1] = np.nan
    path = tmp_path / "nan.txt"
    _write_text_map(path, x, y, z, b)
    # row order of the writer: (ix, iy, iz) → line 3 + flat index
    line = 3 + np.ravel_multi_index((1, 2, 3), b.shape[:3])
    with pytest.raises(InputError, match=f"line {line}") as info:
        FieldMap.from_file(path)
    assert str(path) in str(info.value)


def test_nan_in_hdf5_names_the_dataset(tmp_path):
    path = tmp_path / "nan.h5"
    z = np.linspace(0, 1, 5)
    with h5py.File(path, "w") as fh:
        fh.create_dataset("z", data=z).attrs["unit"] = "m"
        fh.create_dataset("By", data=np.array([0, 1, np.nan, 1, 0.0])).attrs["unit"] = "T"
    with pytest.raises(InputError, match="dataset /By"):
        OnAxisFieldMap.from_file(path)


def test_missing_unit_attribute(tmp_path):
    path = tmp_path / "nounit.h5"
    with h5py.File(path, "w") as fh:
        fh.create_dataset("z", data=np.linspace(0, 1, 5))
        fh.create_dataset("By", data=np.zeros(5)).attrs["unit"] = "T"
    with pytest.raises(InputError, match="unit"):
        OnAxisFieldMap.from_file(path)


def test_non_uniform_grid_names_the_line(tmp_path):
    path = tmp_path / "bad.txt"
    z = [0.0, 1.0, 2.0, 3.5, 4.0]
    path.write_text("# comment\nz[mm] By[T]\n" + "".join(f"{v} 0.0\n" for v in z))
    with pytest.raises(InputError, match="line 6"):
        OnAxisFieldMap.from_file(path)
    x, y, zz, b = _small_3d()
    with pytest.raises(InputError, match="uniform"):
        FieldMap(x, y, zz**3, b)


def test_bad_text_files(tmp_path):
    cases = {
        "units": "z[parsec] By[T]\n0 0\n1 0\n",
        "columns": "z[m] Bq[T]\n0 0\n1 0\n",
        "count": "z[m] By[T]\n0 0\n1\n",
        "number": "z[m] By[T]\n0 0\n1 zero\n",
        "empty": "# nothing\n",
    }
    for name, text in cases.items():
        path = tmp_path / f"{name}.txt"
        path.write_text(text)
        with pytest.raises(InputError):
            OnAxisFieldMap.from_file(path)
    with pytest.raises(InputError):
        OnAxisFieldMap.from_file(tmp_path / "missing.txt")
    x, y, z, b = _small_3d()
    path = tmp_path / "hole.txt"
    _write_text_map(path, x, y, z, b)
    lines = path.read_text().splitlines(keepends=True)
    path.write_text("".join(lines[:10] + lines[11:]))
    with pytest.raises(InputError, match="incomplete"):
        FieldMap.from_file(path)


def test_leaving_the_map_is_an_input_error():
    x, y, z, b = _small_3d()
    fmap = FieldMap(x, y, z, b)
    with pytest.raises(InputError, match="leaves the field map"):
        fmap.field(2e-3, 0.0, 0.0)
    # outside the z span the field is zero, not an error
    np.testing.assert_array_equal(fmap.field(5.0, 5.0, 1.0), np.zeros(3))
    # a particle steered out of the map during tracking
    with pytest.raises(InputError, match="leaves the field map"):
        track(fmap, 1e9, x0=9e-4, xp0=0.02)


def test_truncated_map_warns():
    z = np.linspace(0, 1, 11)
    with pytest.warns(FieldMapWarning, match="taken as zero"):
        OnAxisFieldMap(z, np.ones_like(z))

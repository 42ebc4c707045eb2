"""Measured or computed magnetic field maps: a 3D regular grid and a 1D on-axis profile.

Interpolation
-------------
Both maps are interpolated with not-a-knot quintic splines (a tensor product
of them in 3D: the B-spline coefficients are found axis by axis, which is
exact for a tensor-product interpolant), so the field and its first four
derivatives are continuous and the interpolation error falls as h⁶. Quintic
rather than cubic because the tracker's 8th-order integrator loses accuracy
on the jumps of the third derivative at every knot of a cubic spline: a map
of an undulator at 100 points per period reproduces the analytic trajectory
to ~1e-10 with quintic splines and to only ~5e-8 with cubic ones (measured;
see tests/test_fieldmap.py). An axis with 4 or 5 points uses cubic, with 2
or 3 points linear interpolation.

Outside the map
---------------
A map describes a whole magnet: before its first and after its last z plane
the field is taken as zero (a warning is given at construction when the
field on an end plane exceeds 1e-3 of the map's peak, because the cut then
makes a jump). A point inside the map's z span but outside its x or y span
has no field to give: :class:`~lwrad.errors.InputError`, naming the map file
and the point. The on-axis profile applies its field at every x and y (the
usual one-dimensional model).

File formats (our own; every length and field carries a unit)
-------------------------------------------------------------
Text: ``#`` starts a comment line. The first other line names the columns,
separated by commas or blanks, each with an optional unit in brackets from
:data:`lwrad.units.UNITS` (no unit: m and T), e.g.::

    # SM-U25 measured on the bench (invented example)
    x[mm] y[mm] z[mm] Bx[T] By[T] Bz[T]
    -1.0 -1.0 -200.0 0.0 1.2e-4 0.0
    ...

A 3D map needs ``x y z Bx By Bz`` (rows in any order, every grid point once);
an on-axis profile ``z By`` and optionally ``Bx``. Column names ignore case.

HDF5: 1-D datasets ``x``, ``y``, ``z`` and 3-D datasets ``Bx``, ``By``, ``Bz``
of shape (nx, ny, nz) for a 3D map; 1-D ``z``, ``By`` and optional ``Bx`` for a
profile; every dataset with a string attribute ``unit`` (e.g. ``"mm"``, ``"T"``).
An optional ``group`` argument selects a group other than the root.

Grids must be uniform (equal steps to 1e-6 relative) and strictly increasing;
values must be finite. Anything else is an :class:`~lwrad.errors.InputError`
naming the file and the line or dataset.
"""

from __future__ import annotations

import math
import os
import re
import warnings

import numpy as np
from scipy.interpolate import NdBSpline, make_interp_spline

from lwrad.errors import InputError
from lwrad.magnets.base import Magnet
from lwrad.units import unit_factor

__all__ = ["FieldMap", "OnAxisFieldMap", "FieldMapWarning"]

_UNIFORM_RTOL = 1e-6
_END_FIELD_WARN = 1e-3
_HDF5_SIGNATURE = b"\x89HDF\r\n\x1a\n"
_COLUMN = re.compile(r"^\s*([A-Za-z_][A-Za-z0-9_]*)\s*(?:\[\s*([^\]]*?)\s*\])?\s*$")


class FieldMapWarning(UserWarning):
    """A field map does not fall to zero at its ends (the field outside is taken as zero)."""


# -- validation helpers ------------------------------------------------------------------
def _check_axis(name, values, source, location=None):
    arr = np.asarray(values, dtype=np.float64)
    loc = location or f"axis {name}"
    if arr.ndim != 1 or arr.size < 2:
        raise InputError(
            f"axis {name} needs at least 2 points, got shape {arr.shape}",
            source=source,
            location=loc,
        )
    if not np.all(np.isfinite(arr)):
        i = int(np.argmin(np.isfinite(arr)))
        raise InputError(
            f"axis {name} has a non-finite value at index {i}", source=source, location=loc
        )
    steps = np.diff(arr)
    if not np.all(steps > 0):
        i = int(np.argmin(steps > 0)) + 1
        raise InputError(
            f"axis {name} must be strictly increasing (index {i})", source=source, location=loc
        )
    h = (arr[-1] - arr[0]) / (arr.size - 1)
    off = np.abs(steps - h) > _UNIFORM_RTOL * h
    if np.any(off):
        i = int(np.argmax(off))
        raise InputError(
            f"axis {name} is not uniform: step {i} is {steps[i]!r}, the mean step is {h!r} "
            "(field maps must be on a regular grid)",
            source=source,
            location=loc,
        )
    return arr


def _spline_degree(n):
    return 5 if n >= 6 else (3 if n >= 4 else 1)


def _check_end_planes(b_first, b_last, b_all, source):
    peak = float(np.max(np.abs(b_all)))
    end = max(float(np.max(np.abs(b_first))), float(np.max(np.abs(b_last))))
    if peak > 0 and end > _END_FIELD_WARN * peak:
        warnings.warn(
            f"{source or 'field map'}: the field on an end plane is {end / peak:.3g} of the peak; "
            "outside the map the field is taken as zero, so the map's cut acts as a hard edge",
            FieldMapWarning,
            stacklevel=3,
        )


# -- reading ---------------------------------------------------------------------------
def _is_hdf5(path):
    if str(path).lower().endswith((".h5", ".hdf5", ".hdf")):
        return True
    try:
        with open(path, "rb") as fh:
            return fh.read(8) == _HDF5_SIGNATURE
    except OSError as exc:
        raise InputError(f"cannot open field map: {exc.strerror}", source=str(path)) from None


def _read_text(path, required, optional):
    """Columns of a text map → (dict name → SI array, dict name → line numbers)."""
    src = str(path)
    try:
        with open(path, encoding="utf-8") as fh:
            lines = fh.readlines()
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read field map as text: {exc}", source=src) from None
    header = None
    rows, line_numbers = [], []
    for number, raw in enumerate(lines, start=1):
        text = raw.strip()
        if not text or text.startswith("#"):
            continue
        fields = [f for f in re.split(r"[,\s]+", text) if f] if "," in text else text.split()
        if header is None:
            header = (number, fields)
            continue
        if len(fields) != len(header[1]):
            raise InputError(
                f"expected {len(header[1])} values, found {len(fields)}",
                source=src,
                location=f"line {number}",
            )
        try:
            rows.append([float(f) for f in fields])
        except ValueError:
            raise InputError(
                f"cannot read a number in {text!r}", source=src, location=f"line {number}"
            ) from None
        line_numbers.append(number)
    if header is None:
        raise InputError("the file has no header line naming its columns", source=src)
    names = {}
    for i, col in enumerate(header[1]):
        m = _COLUMN.match(col)
        if not m:
            raise InputError(
                f"cannot read column name {col!r}", source=src, location=f"line {header[0]}"
            )
        key = m.group(1).lower()
        if key in names:
            raise InputError(
                f"column {m.group(1)!r} appears twice", source=src, location=f"line {header[0]}"
            )
        names[key] = (i, m.group(2))
    for key in required:
        if key not in names:
            raise InputError(
                f"missing column {key!r}; a map needs {', '.join(required)}"
                + (f" (optional: {', '.join(optional)})" if optional else ""),
                source=src,
                location=f"line {header[0]}",
            )
    unknown = set(names) - set(required) - set(optional)
    if unknown:
        raise InputError(
            f"unexpected column(s) {sorted(unknown)}; expected {', '.join(required + optional)}",
            source=src,
            location=f"line {header[0]}",
        )
    if not rows:
        raise InputError("the file has a header but no data", source=src)
    data = np.array(rows)
    lines_arr = np.array(line_numbers)
    columns = {}
    for key, (i, unit) in names.items():
        dim = "field" if key.startswith("b") else "length"
        factor = unit_factor(
            unit or ("T" if dim == "field" else "m"), dim, source=src, location=f"column {key}"
        )
        col = data[:, i]
        bad = ~np.isfinite(col)
        if bad.any():
            j = int(np.argmax(bad))
            raise InputError(
                f"non-finite value {col[j]!r} in column {key}",
                source=src,
                location=f"line {lines_arr[j]}",
            )
        columns[key] = col * factor
    return columns, lines_arr


def _h5_dataset(group, name, dim, src, ndim, optional=False):
    import h5py

    if name not in group:
        if optional:
            return None
        raise InputError(
            f"missing dataset {name!r}",
            source=src,
            location=f"dataset {group.name.rstrip('/')}/{name}",
        )
    ds = group[name]
    where = f"dataset {ds.name}"
    if not isinstance(ds, h5py.Dataset):
        raise InputError("expected a dataset, found a group", source=src, location=where)
    unit = ds.attrs.get("unit")
    if unit is None:
        raise InputError("dataset has no 'unit' attribute", source=src, location=where)
    if isinstance(unit, bytes | np.bytes_):
        unit = unit.decode("utf-8", "replace")
    if not isinstance(unit, str):
        raise InputError(
            f"the 'unit' attribute must be a string, got {unit!r}", source=src, location=where
        )
    factor = unit_factor(unit, dim, source=src, location=where)
    try:
        arr = np.asarray(ds[()], dtype=np.float64)
    except (TypeError, ValueError) as exc:
        raise InputError(f"dataset is not numeric: {exc}", source=src, location=where) from None
    if arr.ndim != ndim:
        raise InputError(
            f"expected {ndim} dimension(s), found shape {arr.shape}", source=src, location=where
        )
    bad = ~np.isfinite(arr)
    if bad.any():
        idx = tuple(int(i) for i in np.argwhere(bad)[0])
        raise InputError(f"non-finite value at index {idx}", source=src, location=where)
    return arr * factor


def _open_h5(path, group, reader):
    import h5py

    src = str(path)
    try:
        fh = h5py.File(path, "r")
    except OSError as exc:
        raise InputError(f"cannot open as HDF5: {exc}", source=src) from None
    with fh:
        grp = fh
        if group is not None:
            if group not in fh or not isinstance(fh[group], h5py.Group):
                raise InputError(f"no group {group!r}", source=src, location=f"group {group}")
            grp = fh[group]
        return reader(grp, src)


# -- 3D map --------------------------------------------------------------------------
class FieldMap(Magnet):
    """A magnetic field on a regular 3D grid, interpolated by tensor-product quintic splines.

    Parameters
    ----------
    x, y, z : array_like, shapes (nx,), (ny,), (nz,)
        Uniform, strictly increasing grid axes, m; at least 2 points each.
    B : array_like, shape (nx, ny, nz, 3)
        (Bx, By, Bz) on the grid, T; finite.
    source : str, optional
        File the map came from, for messages.

    Notes
    -----
    Interpolation, behaviour outside the map and file formats: see
    :mod:`lwrad.magnets.fieldmap`.
    """

    def __init__(self, x, y, z, B, *, source: str | None = None):  # noqa: N803
        self._source = source
        axes = [_check_axis(n, a, source) for n, a in (("x", x), ("y", y), ("z", z))]
        b = np.asarray(B, dtype=np.float64)
        want = tuple(a.size for a in axes) + (3,)
        if b.shape != want:
            raise InputError(
                f"B must have shape {want}, got {b.shape}", source=source, location="B"
            )
        bad = ~np.isfinite(b)
        if bad.any():
            idx = tuple(int(i) for i in np.argwhere(bad)[0])
            raise InputError(
                f"B has a non-finite value at index {idx}", source=source, location="B"
            )
        _check_end_planes(b[:, :, 0], b[:, :, -1], b, source)
        self._axes = tuple(axes)
        coeffs = b
        knots, degrees = [], []
        for axis, coord in enumerate(axes):
            k = _spline_degree(coord.size)
            spline = make_interp_spline(coord, np.moveaxis(coeffs, axis, 0), k=k)
            coeffs = np.moveaxis(spline.c, 0, axis)
            knots.append(spline.t)
            degrees.append(k)
        self._spline = NdBSpline(tuple(knots), coeffs, tuple(degrees), extrapolate=False)
        self._lo = np.array([a[0] for a in axes])
        self._hi = np.array([a[-1] for a in axes])
        span = self._hi - self._lo
        self._slack = 1e-12 * span

    @classmethod
    def from_file(cls, path, *, group: str | None = None) -> FieldMap:
        """Read a 3D map from text or HDF5 (format in the module docstring).

        Parameters
        ----------
        path : str or os.PathLike
            The map file.
        group : str, optional
            HDF5 group holding the datasets (default: the root).
        """
        path = os.fspath(path)
        if _is_hdf5(path):

            def reader(grp, src):
                axes = [_h5_dataset(grp, n, "length", src, 1) for n in ("x", "y", "z")]
                for n, a in zip(("x", "y", "z"), axes, strict=True):
                    _check_axis(n, a, src, location=f"dataset {grp[n].name}")
                comps = []
                for n in ("Bx", "By", "Bz"):
                    arr = _h5_dataset(grp, n, "field", src, 3)
                    want = tuple(a.size for a in axes)
                    if arr.shape != want:
                        raise InputError(
                            f"shape {arr.shape} does not match the axes {want}",
                            source=src,
                            location=f"dataset {grp[n].name}",
                        )
                    comps.append(arr)
                return axes, np.stack(comps, axis=-1)

            axes, b = _open_h5(path, group, reader)
            return cls(*axes, b, source=path)
        cols, lines = _read_text(path, ["x", "y", "z", "bx", "by", "bz"], [])
        axes, idx = [], []
        for name in ("x", "y", "z"):
            values, inverse = np.unique(cols[name], return_inverse=True)
            if values.size < 2:
                raise InputError(f"axis {name} needs at least 2 distinct values", source=path)
            steps = np.diff(values)
            h = (values[-1] - values[0]) / (values.size - 1)
            off = np.abs(steps - h) > _UNIFORM_RTOL * h
            if np.any(off):
                bad_value = values[int(np.argmax(off)) + 1]
                line = int(lines[np.argmax(cols[name] == bad_value)])
                raise InputError(
                    f"{name} = {bad_value!r} is off the regular grid (step {h!r} expected); "
                    "field maps must be on a regular grid",
                    source=path,
                    location=f"line {line}",
                )
            axes.append(values)
            idx.append(inverse)
        shape = tuple(a.size for a in axes)
        flat = np.ravel_multi_index(tuple(idx), shape)
        order = np.argsort(flat, kind="stable")
        dup = np.nonzero(np.diff(flat[order]) == 0)[0]
        if dup.size:
            row = order[dup[0] + 1]
            raise InputError("grid point given twice", source=path, location=f"line {lines[row]}")
        if flat.size != np.prod(shape):
            missing = np.setdiff1d(np.arange(np.prod(shape)), flat)[0]
            ix, iy, iz = np.unravel_index(missing, shape)
            raise InputError(
                f"the grid is incomplete: {np.prod(shape) - flat.size} point(s) missing, first at "
                f"x={axes[0][ix]!r}, y={axes[1][iy]!r}, z={axes[2][iz]!r} m",
                source=path,
            )
        b = np.empty((flat.size, 3))
        b[flat] = np.column_stack([cols["bx"], cols["by"], cols["bz"]])
        return cls(*axes, b.reshape(shape + (3,)), source=path)

    @property
    def axes(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Grid axes (x, y, z), m."""
        return tuple(a.copy() for a in self._axes)

    @property
    def source(self) -> str | None:
        """The file the map came from."""
        return self._source

    @property
    def z_range(self) -> tuple[float, float]:
        return (float(self._axes[2][0]), float(self._axes[2][-1]))

    @property
    def breakpoints(self) -> tuple[float, ...]:
        return self.z_range

    def to_dict(self) -> dict:
        return {
            "type": "FieldMap",
            "source": self._source,
            "shape": [int(a.size) for a in self._axes],
            "x_range": [float(self._axes[0][0]), float(self._axes[0][-1])],
            "y_range": [float(self._axes[1][0]), float(self._axes[1][-1])],
            "z_range": list(self.z_range),
        }

    def _field(self, x, y, z):
        out = np.zeros(z.shape + (3,))
        zlo, zhi = self._lo[2] - self._slack[2], self._hi[2] + self._slack[2]
        inside = (z >= zlo) & (z <= zhi)
        if not np.any(inside):
            return out
        pts = np.column_stack([x[inside], y[inside], z[inside]])
        lo, hi = self._lo - self._slack, self._hi + self._slack
        off = np.any((pts < lo) | (pts > hi), axis=1)
        if np.any(off):
            p = pts[np.argmax(off)]
            raise InputError(
                f"the point (x, y, z) = ({p[0]:.6g}, {p[1]:.6g}, {p[2]:.6g}) m leaves the field map "
                f"(x in [{self._lo[0]:.6g}, {self._hi[0]:.6g}] m, y in [{self._lo[1]:.6g}, "
                f"{self._hi[1]:.6g}] m): enlarge the map or keep the particle inside it",
                source=self._source,
            )
        pts = np.clip(pts, self._lo, self._hi)
        out[inside] = self._spline(pts)
        return out


# -- 1D on-axis profile ------------------------------------------------------------------
class OnAxisFieldMap(Magnet):
    """An on-axis field profile By(z) (and optionally Bx(z)), interpolated by quintic splines.

    Parameters
    ----------
    z : array_like, shape (n,)
        Uniform, strictly increasing positions, m; n ≥ 2.
    by : array_like, shape (n,)
        Vertical field, T.
    bx : array_like, shape (n,), optional
        Horizontal field, T (default zero).
    source : str, optional
        File the profile came from, for messages.

    Notes
    -----
    The profile applies at every (x, y) and Bz = 0: the one-dimensional model
    of a magnet, as magnetic measurements along the axis give it. Outside the
    profile's z span the field is zero (see :mod:`lwrad.magnets.fieldmap`).
    """

    def __init__(self, z, by, bx=None, *, source: str | None = None):
        self._source = source
        zz = _check_axis("z", z, source)
        comps = []
        for name, arr in (("By", by), ("Bx", bx)):
            if arr is None:
                comps.append(np.zeros_like(zz))
                continue
            a = np.asarray(arr, dtype=np.float64)
            if a.shape != zz.shape:
                raise InputError(
                    f"{name} must have shape {zz.shape}, got {a.shape}",
                    source=source,
                    location=name,
                )
            bad = ~np.isfinite(a)
            if bad.any():
                raise InputError(
                    f"{name} has a non-finite value at index {int(np.argmax(bad))}",
                    source=source,
                    location=name,
                )
            comps.append(a)
        data = np.column_stack(comps)
        _check_end_planes(data[0], data[-1], data, source)
        self._z = zz
        self._has_bx = bx is not None
        self._data = data
        k = _spline_degree(zz.size)
        spline = make_interp_spline(zz, data, k=k)
        # Taylor coefficients on each cell (the spline is one polynomial there):
        # derivatives at a node are taken from the cell to its right.
        coef = np.zeros((6, zz.size - 1, 2))
        for m in range(k + 1):
            coef[5 - m] = spline(zz[:-1], nu=m) / math.factorial(m)
        self._coef = np.ascontiguousarray(coef)
        self._coef_list = [
            [self._coef[:, i, j].tolist() for j in range(2)] for i in range(zz.size - 1)
        ]
        self._h = (zz[-1] - zz[0]) / (zz.size - 1)

    @classmethod
    def from_file(cls, path, *, group: str | None = None) -> OnAxisFieldMap:
        """Read an on-axis profile (``z, By[, Bx]``) from text or HDF5 (module docstring)."""
        path = os.fspath(path)
        if _is_hdf5(path):

            def reader(grp, src):
                z = _h5_dataset(grp, "z", "length", src, 1)
                _check_axis("z", z, src, location=f"dataset {grp['z'].name}")
                by = _h5_dataset(grp, "By", "field", src, 1)
                bx = _h5_dataset(grp, "Bx", "field", src, 1, optional=True)
                for name, arr in (("By", by), ("Bx", bx)):
                    if arr is not None and arr.shape != z.shape:
                        raise InputError(
                            f"shape {arr.shape} does not match z {z.shape}",
                            source=src,
                            location=f"dataset {grp[name].name}",
                        )
                return z, by, bx

            z, by, bx = _open_h5(path, group, reader)
            return cls(z, by, bx, source=path)
        cols, lines = _read_text(path, ["z", "by"], ["bx"])
        z = cols["z"]
        steps = np.diff(z)
        if not np.all(steps > 0):
            i = int(np.argmin(steps > 0)) + 1
            raise InputError(
                "z must be strictly increasing", source=path, location=f"line {lines[i]}"
            )
        h = (z[-1] - z[0]) / (z.size - 1) if z.size > 1 else 0.0
        off = np.abs(steps - h) > _UNIFORM_RTOL * h
        if np.any(off):
            i = int(np.argmax(off)) + 1
            raise InputError(
                f"z = {z[i]!r} m is off the regular grid (step {h!r} m expected); "
                "field profiles must be uniformly spaced",
                source=path,
                location=f"line {lines[i]}",
            )
        return cls(z, cols["by"], cols.get("bx"), source=path)

    @property
    def source(self) -> str | None:
        """The file the profile came from."""
        return self._source

    @property
    def z(self) -> np.ndarray:
        """Sample positions, m."""
        return self._z.copy()

    @property
    def z_range(self) -> tuple[float, float]:
        return (float(self._z[0]), float(self._z[-1]))

    @property
    def breakpoints(self) -> tuple[float, ...]:
        return self.z_range

    def to_dict(self) -> dict:
        return {
            "type": "OnAxisFieldMap",
            "source": self._source,
            "n_points": int(self._z.size),
            "z_range": list(self.z_range),
            "has_bx": self._has_bx,
        }

    def _field(self, x, y, z):
        out = np.zeros(z.shape + (3,))
        z0, z1 = self._z[0], self._z[-1]
        inside = (z >= z0) & (z <= z1)
        zi = z[inside]
        i = np.clip(((zi - z0) / self._h).astype(np.int64), 0, self._z.size - 2)
        dz = (zi - self._z[i])[:, None]
        c = self._coef
        val = c[0, i]
        for m in range(1, 6):
            val = val * dz + c[m, i]
        out[inside, 1] = val[:, 0]
        out[inside, 0] = val[:, 1]
        return out

    def field_at(self, x, y, z):
        z0 = self._z[0]
        if z < z0 or z > self._z[-1]:
            return (0.0, 0.0, 0.0)
        i = min(max(int((z - z0) / self._h), 0), self._z.size - 2)
        dz = z - self._z[i]
        cy, cx = self._coef_list[i]
        by = ((((cy[0] * dz + cy[1]) * dz + cy[2]) * dz + cy[3]) * dz + cy[4]) * dz + cy[5]
        bx = ((((cx[0] * dz + cx[1]) * dz + cx[2]) * dz + cx[3]) * dz + cx[4]) * dz + cx[5]
        return (bx, by, 0.0)

"""Where the radiation is observed: angular grids (far field), screens and point sets.

Every observer is a plain description of pixel positions; it never holds
results. Pixels are numbered row-major over ``shape == (ny, nx)``.

=============  =====================================================  ==============
observer       pixel                                                  density per
=============  =====================================================  ==============
AngularGrid    direction n = (θx, θy, 1)/sqrt(1 + θx² + θy²), rad     dθx dθy (mrad²)
Screen         point (x, y, distance) on the plane z = distance, m    dx dy (mm²)
Points         arbitrary points (x, y, z), m                          —
=============  =====================================================  ==============

The angles of an :class:`AngularGrid` are tangent-plane coordinates: a far
screen at distance D shows pixel (θx, θy) at (D θx, D θy).

Chunks made with ``take`` remember the *envelope* (bounding box) of the full
observer, so that any sampling decision derived from the observer is the same
for every chunk — per-pixel results do not depend on the chunking.
"""

from __future__ import annotations

import numpy as np

from lwrad.errors import InputError

__all__ = [
    "AngularGrid",
    "Screen",
    "Points",
    "RectangularAperture",
    "CircularAperture",
    "observer_from_dict",
]


def _axis(name, value, unit):
    try:
        arr = np.atleast_1d(np.asarray(value, dtype=np.float64)).copy()
    except (TypeError, ValueError):
        raise InputError(f"{name} must be numeric ({unit})", location=name) from None
    if arr.ndim != 1:
        raise InputError(f"{name} must be a scalar or a 1-D array ({unit})", location=name)
    if arr.size == 0:
        raise InputError(f"{name} is empty: the observer needs at least one pixel", location=name)
    if not np.all(np.isfinite(arr)):
        raise InputError(f"{name} has non-finite values", location=name)
    arr.setflags(write=False)
    return arr


def _take_indices(flat_indices, n_pixels):
    try:
        idx = np.atleast_1d(np.asarray(flat_indices))
    except (TypeError, ValueError):
        raise InputError("pixel indices must be integers") from None
    if isinstance(flat_indices, slice):
        idx = np.arange(n_pixels)[flat_indices]
    if idx.size == 0:
        raise InputError("take() needs at least one pixel index")
    if idx.dtype.kind not in "iu":
        raise InputError("pixel indices must be integers")
    if idx.min() < 0 or idx.max() >= n_pixels:
        raise InputError(f"pixel indices must lie in [0, {n_pixels})")
    return idx.astype(np.int64)


class _GridObserver:
    """Shared machinery of the 2-D gridded observers (row-major pixels)."""

    kind = ""
    _unit = ""

    def __init__(self, x, y, *, pixels=None, envelope=None):
        self._x = x
        self._y = y
        # explicit (m,) pixel coordinates for a taken chunk; None for a full grid
        self._pixels = pixels
        if envelope is None:
            px, py = self.pixel_coordinates()
            envelope = (float(px.min()), float(px.max()), float(py.min()), float(py.max()))
        self.envelope = tuple(float(v) for v in envelope)

    @property
    def is_grid(self) -> bool:
        """True for a full rectangular grid, False for a chunk of pixels."""
        return self._pixels is None

    @property
    def shape(self) -> tuple[int, int]:
        """(ny, nx); a chunk of pixels has shape (1, m)."""
        if self._pixels is None:
            return (self._y.size, self._x.size)
        return (1, self._pixels[0].size)

    @property
    def n_pixels(self) -> int:
        """Number of pixels."""
        ny, nx = self.shape
        return ny * nx

    def pixel_coordinates(self) -> tuple[np.ndarray, np.ndarray]:
        """Flat (row-major) pixel coordinates (x, y), each shape (n_pixels,)."""
        if self._pixels is not None:
            return self._pixels
        xx, yy = np.meshgrid(self._x, self._y)
        return xx.ravel(), yy.ravel()

    def take(self, flat_indices):
        """An observer of the same kind holding only the given pixels (shape (1, m))."""
        idx = _take_indices(flat_indices, self.n_pixels)
        px, py = self.pixel_coordinates()
        new = object.__new__(type(self))
        new.__dict__.update(self.__dict__)
        pix = (px[idx].copy(), py[idx].copy())
        for a in pix:
            a.setflags(write=False)
        new._pixels = pix
        new._x, new._y = pix
        return new

    def _base_dict(self):
        d = {"kind": self.kind, "envelope": list(self.envelope)}
        if self._pixels is None:
            d.update(x=self._x.tolist(), y=self._y.tolist())
        else:
            d.update(pixels_x=self._pixels[0].tolist(), pixels_y=self._pixels[1].tolist())
        return d

    def axes(self) -> dict:
        """1-D axes with units: ``{"x": (array, unit), "y": (array, unit)}`` (full grids only)."""
        return {"x": (np.asarray(self._x), self._unit), "y": (np.asarray(self._y), self._unit)}

    def __eq__(self, other):
        if type(other) is not type(self):
            return NotImplemented
        return self.to_dict() == other.to_dict()

    __hash__ = None


class AngularGrid(_GridObserver):
    """Far-field observation directions on a grid of angles.

    Parameters
    ----------
    theta_x, theta_y : float or array_like
        Horizontal and vertical angles, rad (1-D). Pixel (iy, ix) looks in the
        direction n = (θx, θy, 1)/sqrt(1 + θx² + θy²).

    Notes
    -----
    Results on an angular grid are R·Ẽ (V·s) and densities per dθx dθy,
    reported per mrad².
    """

    kind = "angular"
    _unit = "rad"

    def __init__(self, theta_x, theta_y, *, _pixels=None, _envelope=None):
        super().__init__(
            _axis("theta_x", theta_x, "rad"),
            _axis("theta_y", theta_y, "rad"),
            pixels=_pixels,
            envelope=_envelope,
        )
        if np.any(np.abs(self._x) > 1.0) or np.any(np.abs(self._y) > 1.0):
            raise InputError(
                "angles beyond 1 rad from the z axis are not supported", location="theta"
            )

    theta_x = property(lambda self: self._x, doc="Horizontal angles, rad.")
    theta_y = property(lambda self: self._y, doc="Vertical angles, rad.")

    def directions(self) -> np.ndarray:
        """Unit vectors n, shape (n_pixels, 3)."""
        tx, ty = self.pixel_coordinates()
        norm = np.sqrt(1.0 + tx * tx + ty * ty)
        return np.stack([tx / norm, ty / norm, 1.0 / norm], axis=1)

    def axes(self) -> dict:
        return {"theta_x": (np.asarray(self._x), "rad"), "theta_y": (np.asarray(self._y), "rad")}

    def to_dict(self) -> dict:
        """Plain data (JSON-able) describing this observer."""
        return self._base_dict()

    def __repr__(self):
        return f"AngularGrid(shape={self.shape}, envelope={self.envelope} rad)"


class Screen(_GridObserver):
    """A plane z = ``distance`` with pixels on a grid of (x, y).

    Parameters
    ----------
    distance : float
        Position of the plane along z, m (the trajectory's z axis).
    x, y : float or array_like
        Pixel coordinates on the plane, m (1-D).

    Notes
    -----
    Results on a screen are Ẽ (V·s/m) and densities per dx dy, reported per mm².
    """

    kind = "screen"
    _unit = "m"

    def __init__(self, distance, x, y, *, _pixels=None, _envelope=None):
        try:
            distance = float(distance)
        except (TypeError, ValueError):
            raise InputError("screen distance must be a number (m)", location="distance") from None
        if not np.isfinite(distance):
            raise InputError("screen distance must be finite (m)", location="distance")
        self.distance = distance
        super().__init__(_axis("x", x, "m"), _axis("y", y, "m"), pixels=_pixels, envelope=_envelope)

    def points(self) -> np.ndarray:
        """Pixel positions, m, shape (n_pixels, 3)."""
        px, py = self.pixel_coordinates()
        return np.stack([px, py, np.full(px.shape, self.distance)], axis=1)

    def to_dict(self) -> dict:
        """Plain data (JSON-able) describing this observer."""
        d = self._base_dict()
        d["distance"] = self.distance
        return d

    def __repr__(self):
        return f"Screen(distance={self.distance} m, shape={self.shape}, envelope={self.envelope} m)"


class Points:
    """Arbitrary observer points (for time-domain fields).

    Parameters
    ----------
    xyz : array_like, shape (n, 3)
        Positions, m.
    """

    kind = "points"

    def __init__(self, xyz):
        try:
            arr = np.array(xyz, dtype=np.float64, ndmin=2)
        except (TypeError, ValueError):
            raise InputError("points must be numeric, shape (n, 3), m", location="points") from None
        if arr.ndim != 2 or arr.shape[1] != 3:
            raise InputError(f"points must have shape (n, 3), got {arr.shape}", location="points")
        if arr.shape[0] == 0:
            raise InputError("points is empty", location="points")
        if not np.all(np.isfinite(arr)):
            raise InputError("points has non-finite values", location="points")
        arr.setflags(write=False)
        self._xyz = arr

    @property
    def shape(self) -> tuple[int, int]:
        """(1, n)."""
        return (1, self._xyz.shape[0])

    @property
    def n_pixels(self) -> int:
        """Number of points."""
        return self._xyz.shape[0]

    def points(self) -> np.ndarray:
        """Positions, m, shape (n, 3)."""
        return self._xyz

    def axes(self) -> dict:
        """``{"x": ..., "y": ..., "z": ...}`` point coordinates, m."""
        return {k: (self._xyz[:, i].copy(), "m") for i, k in enumerate("xyz")}

    def take(self, flat_indices):
        """Only the given points."""
        return Points(self._xyz[_take_indices(flat_indices, self.n_pixels)])

    def to_dict(self) -> dict:
        """Plain data (JSON-able)."""
        return {"kind": self.kind, "xyz": self._xyz.tolist()}

    def __eq__(self, other):
        if not isinstance(other, Points):
            return NotImplemented
        return np.array_equal(self._xyz, other._xyz)

    __hash__ = None

    def __repr__(self):
        return f"Points(n={self.n_pixels})"


def observer_from_dict(d: dict):
    """Rebuild an observer from :meth:`to_dict` output."""
    try:
        kind = d["kind"]
        if kind == "points":
            return Points(d["xyz"])
        env = tuple(d["envelope"]) if "envelope" in d else None
        if "pixels_x" in d:
            pix = (np.asarray(d["pixels_x"], float), np.asarray(d["pixels_y"], float))
            for a in pix:
                a.setflags(write=False)
            xs, ys = pix
        else:
            pix, xs, ys = None, d["x"], d["y"]
        if kind == "angular":
            return AngularGrid(xs, ys, _pixels=pix, _envelope=env)
        if kind == "screen":
            return Screen(d["distance"], xs, ys, _pixels=pix, _envelope=env)
    except (KeyError, TypeError) as exc:
        raise InputError(f"malformed observer description: missing or bad {exc}") from None
    raise InputError(f"unknown observer kind {kind!r}; expected 'angular', 'screen' or 'points'")


for _cls in (AngularGrid, Screen, Points):
    _cls.from_dict = staticmethod(observer_from_dict)


class RectangularAperture:
    """An axis-aligned rectangle in the observer's units (rad for angles, m for screens).

    Parameters
    ----------
    x_min, x_max, y_min, y_max : float
        Edges, rad or m.
    """

    def __init__(self, x_min, x_max, y_min, y_max):
        vals = [float(v) for v in (x_min, x_max, y_min, y_max)]
        if not all(np.isfinite(vals)) or not (vals[0] < vals[1] and vals[2] < vals[3]):
            raise InputError(
                "a rectangular aperture needs finite edges with x_min < x_max, y_min < y_max"
            )
        self.x_min, self.x_max, self.y_min, self.y_max = vals

    def fraction(self, x0, x1, y0, y1):
        """Fraction of the cells [x0, x1] × [y0, y1] (arrays) inside the aperture."""
        fx = np.clip(
            (np.minimum(x1, self.x_max) - np.maximum(x0, self.x_min)) / (x1 - x0), 0.0, 1.0
        )
        fy = np.clip(
            (np.minimum(y1, self.y_max) - np.maximum(y0, self.y_min)) / (y1 - y0), 0.0, 1.0
        )
        return fx * fy

    def to_dict(self):
        """Plain data."""
        return {
            "kind": "rectangle",
            "x_min": self.x_min,
            "x_max": self.x_max,
            "y_min": self.y_min,
            "y_max": self.y_max,
        }


class CircularAperture:
    """A disc in the observer's units (rad for angles, m for screens).

    Parameters
    ----------
    radius : float
        Radius, rad or m.
    center : (float, float), optional
        Centre (x, y), rad or m.
    """

    _SUB = 16  # sub-cells per cell side for the partial-cell area fraction

    def __init__(self, radius, center=(0.0, 0.0)):
        self.radius = float(radius)
        self.center = (float(center[0]), float(center[1]))
        if not (np.isfinite(self.radius) and self.radius > 0 and np.all(np.isfinite(self.center))):
            raise InputError("a circular aperture needs a finite radius > 0 and a finite centre")

    def fraction(self, x0, x1, y0, y1):
        """Fraction of the cells [x0, x1] × [y0, y1] (arrays) inside the disc (sub-sampled)."""
        s = (np.arange(self._SUB) + 0.5) / self._SUB
        xs = x0[..., None, None] + (x1 - x0)[..., None, None] * s[None, :]
        ys = y0[..., None, None] + (y1 - y0)[..., None, None] * s[:, None]
        inside = (xs - self.center[0]) ** 2 + (ys - self.center[1]) ** 2 <= self.radius**2
        return inside.mean(axis=(-1, -2))

    def to_dict(self):
        """Plain data."""
        return {"kind": "circle", "radius": self.radius, "center": list(self.center)}

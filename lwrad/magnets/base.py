"""The magnet interface shared by every field model.

A magnet is a static magnetic field B(x, y, z) in tesla, in the laboratory
frame of :class:`~lwrad.trajectory.Trajectory` (z the main direction of
flight, y vertical). Every model provides

- :meth:`Magnet.field` — vectorised evaluation, shape ``(..., 3)``;
- :attr:`Magnet.z_range` — where the field is non-zero (outside it is zero);
- :attr:`Magnet.breakpoints` — z positions where the field or its first
  derivatives jump (hard edges, pole boundaries, map ends), so that the
  tracker can stop its steps there instead of stepping across a kink;
- :attr:`Magnet.period` — the undulator period (m) or ``None``;
- :meth:`Magnet.to_dict` — a plain, JSON-able description.

Subclasses implement ``_field(x, y, z)`` on broadcast float64 arrays and may
override :meth:`Magnet.field_at` with a scalar fast path for the tracker.
"""

from __future__ import annotations

import math

import numpy as np

from lwrad.errors import InputError

__all__ = ["Magnet", "check_positive", "check_finite"]


def check_positive(name: str, value, *, allow_zero: bool = False) -> float:
    """``value`` as a finite float > 0 (≥ 0 with ``allow_zero``), else :class:`InputError`."""
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{name} must be a number, got {value!r}", location=name) from None
    if not math.isfinite(v) or v < 0 or (v == 0 and not allow_zero):
        want = ">= 0" if allow_zero else "> 0"
        raise InputError(f"{name} must be finite and {want}, got {value!r}", location=name)
    return v


def check_finite(name: str, value) -> float:
    """``value`` as a finite float, else :class:`InputError`."""
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{name} must be a number, got {value!r}", location=name) from None
    if not math.isfinite(v):
        raise InputError(f"{name} must be finite, got {value!r}", location=name)
    return v


class Magnet:
    """Base class of all magnetic field models (static fields, SI units)."""

    #: undulator period (m) for periodic devices, else None
    period: float | None = None

    def field(self, x, y, z) -> np.ndarray:
        """Magnetic flux density at points (x, y, z).

        Parameters
        ----------
        x, y, z : array_like
            Coordinates, m; broadcast against each other.

        Returns
        -------
        ndarray, shape ``broadcast_shape + (3,)``
            (Bx, By, Bz), T. Zero outside :attr:`z_range`.

        Raises
        ------
        InputError
            Non-finite coordinates, or a point a field map cannot answer.
        """
        try:
            x, y, z = np.broadcast_arrays(
                np.asarray(x, dtype=np.float64),
                np.asarray(y, dtype=np.float64),
                np.asarray(z, dtype=np.float64),
            )
        except (TypeError, ValueError) as exc:
            raise InputError(
                f"field coordinates must be numeric and broadcastable: {exc}"
            ) from None
        if not (np.all(np.isfinite(x)) and np.all(np.isfinite(y)) and np.all(np.isfinite(z))):
            raise InputError("field coordinates must be finite")
        return self._field(x, y, z)

    def field_at(self, x: float, y: float, z: float) -> tuple[float, float, float]:
        """(Bx, By, Bz) in T at one point (m); the tracker's scalar entry point."""
        b = self._field(np.array([x]), np.array([y]), np.array([z]))[0]
        return float(b[0]), float(b[1]), float(b[2])

    def _field(self, x: np.ndarray, y: np.ndarray, z: np.ndarray) -> np.ndarray:
        raise NotImplementedError

    @property
    def z_range(self) -> tuple[float, float]:
        """(z_min, z_max), m: the field is zero outside."""
        raise NotImplementedError

    @property
    def breakpoints(self) -> tuple[float, ...]:
        """z positions (m) where the field or its first derivative is discontinuous."""
        return ()

    def to_dict(self) -> dict:
        """Plain description (type name and constructor arguments in SI)."""
        raise NotImplementedError

    def __repr__(self) -> str:
        args = ", ".join(f"{k}={v!r}" for k, v in self.to_dict().items() if k != "type")
        return f"{type(self).__name__}({args})"

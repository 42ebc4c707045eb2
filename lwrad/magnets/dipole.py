"""Dipole (bending magnet) field models: hard edge and soft fringe.

Hard edge: By = B0 for |z − z_c| < L/2, zero outside. The field jumps at the
edges; they are reported as :attr:`~lwrad.magnets.base.Magnet.breakpoints`
so the tracker stops there and integrates each piece (a circular arc inside,
a straight line outside) separately.

Soft fringe (``fringe="soft"``): a tanh profile

    By(z) = B0/2 [tanh((z − z_1)/a) − tanh((z − z_2)/a)],   z_{1,2} = z_c ∓ L/2,

whose integral over all z is exactly B0 L (the hard-edge field integral is
preserved: each tanh step adds (z_2 − z_1)). ``fringe_length`` is the 10 %–90 %
rise distance of one edge, 2 a artanh(0.8) ≈ 2.197 a. The field is kept out to
20 a beyond each edge (tails below 1e-17 of B0) and is zero further out.

Off axis: the hard-edge field is uniform (exact inside the magnet). With
``off_axis=True`` the soft profile is continued as the ideal flat-pole field
By + i Bz = F(z + i y) (F the on-axis profile), which satisfies Maxwell's
equations exactly; tanh has poles at Im = ±π a/2, so the model is refused for
|y| ≥ π a/4 (the gap is of the order of the fringe length).
"""

from __future__ import annotations

import math

import numpy as np

from lwrad.errors import InputError
from lwrad.magnets.base import Magnet, check_finite, check_positive

__all__ = ["Dipole"]

_TAIL_SCALES = 20.0
_RISE_PER_SCALE = 2.0 * math.atanh(0.8)


class Dipole(Magnet):
    """A dipole magnet with a vertical field.

    Parameters
    ----------
    field : float
        Central field B0 (By), T. A positive field bends electrons moving
        along +z towards +x (force q v × B with q < 0).
    length : float
        Magnetic length L, m (the field integral is B0 L in both models).
    fringe : {None, "hard", "soft"}, optional
        None or "hard": hard edges; "soft": tanh fringe fields (module docstring).
    fringe_length : float, optional
        10 %–90 % rise distance of each soft edge, m. Required with ``fringe="soft"``.
    off_axis : bool, optional
        Soft fringe only: the exact flat-pole field off axis (module docstring).
    z_center : float, optional
        Centre of the magnet, m.
    """

    def __init__(
        self,
        field,
        length,
        *,
        fringe: str | None = None,
        fringe_length: float | None = None,
        off_axis: bool = False,
        z_center: float = 0.0,
    ):
        self._b0 = check_finite("field", field)
        self._length = check_positive("length", length)
        self._z_center = check_finite("z_center", z_center)
        if fringe not in (None, "hard", "soft"):
            raise InputError(
                f"fringe must be None, 'hard' or 'soft', got {fringe!r}", location="fringe"
            )
        self._fringe = "soft" if fringe == "soft" else "hard"
        if self._fringe == "soft":
            if fringe_length is None:
                raise InputError("fringe='soft' needs fringe_length (m)", location="fringe_length")
            self._fringe_length = check_positive("fringe_length", fringe_length)
            self._scale = self._fringe_length / _RISE_PER_SCALE
        else:
            if fringe_length is not None:
                raise InputError(
                    "fringe_length applies only to fringe='soft'", location="fringe_length"
                )
            self._fringe_length = None
            self._scale = None
        self._off_axis = bool(off_axis)
        self._z1 = self._z_center - 0.5 * self._length
        self._z2 = self._z_center + 0.5 * self._length

    @property
    def peak_field(self) -> float:
        """Central field B0, T."""
        return self._b0

    @property
    def length(self) -> float:
        """Magnetic length L, m."""
        return self._length

    @property
    def field_integral(self) -> float:
        """∫By dz = B0 L, T m (both models)."""
        return self._b0 * self._length

    @property
    def z_range(self) -> tuple[float, float]:
        if self._fringe == "hard":
            return (self._z1, self._z2)
        pad = _TAIL_SCALES * self._scale
        return (self._z1 - pad, self._z2 + pad)

    @property
    def breakpoints(self) -> tuple[float, ...]:
        return (self._z1, self._z2) if self._fringe == "hard" else ()

    def to_dict(self) -> dict:
        return {
            "type": "Dipole",
            "field": self._b0,
            "length": self._length,
            "fringe": self._fringe,
            "fringe_length": self._fringe_length,
            "off_axis": self._off_axis,
            "z_center": self._z_center,
        }

    def _profile(self, w):
        a = self._scale
        return 0.5 * self._b0 * (np.tanh((w - self._z1) / a) - np.tanh((w - self._z2) / a))

    def _field(self, x, y, z):
        out = np.zeros(z.shape + (3,))
        lo, hi = self.z_range
        if self._fringe == "hard":
            out[..., 1] = np.where((z >= lo) & (z < hi), self._b0, 0.0)
            return out
        inside = (z >= lo) & (z <= hi)
        if self._off_axis:
            limit = 0.25 * math.pi * self._scale
            if np.any(np.abs(y[inside]) >= limit):
                raise InputError(
                    f"the soft-fringe flat-pole field is valid only for |y| < {limit:.6g} m "
                    "(π a/4, a the tanh scale); the particle is further off axis",
                    location="y",
                )
            f = self._profile(z + 1j * y)
            out[..., 1] = np.where(inside, f.real, 0.0)
            out[..., 2] = np.where(inside, f.imag, 0.0)
        else:
            out[..., 1] = np.where(inside, self._profile(z), 0.0)
        return out

    def field_at(self, x, y, z):
        lo, hi = self.z_range
        if self._fringe == "hard":
            return (0.0, self._b0 if lo <= z < hi else 0.0, 0.0)
        if self._off_axis and y != 0.0:
            return super().field_at(x, y, z)
        if z < lo or z > hi:
            return (0.0, 0.0, 0.0)
        a = self._scale
        return (
            0.0,
            0.5 * self._b0 * (math.tanh((z - self._z1) / a) - math.tanh((z - self._z2) / a)),
            0.0,
        )

"""A line of magnets placed along z, with drifts between them.

Each element is placed by shifting its own z coordinate: element ``m`` at
``z_position`` contributes ``m.field(x, y, z − z_position)``. Fields are
superposed where elements overlap (linear superposition, as for iron-free or
unsaturated magnets); gaps between elements are field-free drifts.
"""

from __future__ import annotations

import math

import numpy as np

from lwrad.errors import InputError
from lwrad.magnets.base import Magnet, check_finite

__all__ = ["MagnetSequence"]


class MagnetSequence(Magnet):
    """Magnets along z with drifts between them, fields superposed where they overlap.

    Parameters
    ----------
    elements : sequence of (Magnet, float)
        Each magnet with the z position (m) of its own origin in the line
        (for the built-in models, their ``z_center`` is measured from there).

    Notes
    -----
    :attr:`period` is the period of the periodic elements when they all share
    one, else the shortest of them (it sets the tracker's default sampling).
    """

    def __init__(self, elements):
        try:
            items = list(elements)
        except TypeError:
            raise InputError("elements must be a list of (magnet, z_position) pairs") from None
        if not items:
            raise InputError("a magnet sequence needs at least one element")
        placed = []
        for i, item in enumerate(items):
            try:
                magnet, z_pos = item
            except (TypeError, ValueError):
                raise InputError(
                    f"element {i} must be a (magnet, z_position) pair, got {item!r}",
                    location=f"element {i}",
                ) from None
            if not isinstance(magnet, Magnet):
                raise InputError(
                    f"element {i} is a {type(magnet).__name__}, not a magnet",
                    location=f"element {i}",
                )
            placed.append((magnet, check_finite(f"element {i} z_position", z_pos)))
        self._elements = tuple(placed)
        periods = [m.period for m, _ in placed if m.period is not None]
        self.period = min(periods) if periods else None

    @property
    def elements(self) -> tuple[tuple[Magnet, float], ...]:
        """The (magnet, z_position) pairs."""
        return self._elements

    @property
    def z_range(self) -> tuple[float, float]:
        lo = min(m.z_range[0] + z for m, z in self._elements)
        hi = max(m.z_range[1] + z for m, z in self._elements)
        return (lo, hi)

    @property
    def breakpoints(self) -> tuple[float, ...]:
        points = set()
        for m, z in self._elements:
            points.update(b + z for b in m.breakpoints)
            # an element's field may not vanish smoothly at its ends (maps)
            points.update(b + z for b in m.z_range)
        return tuple(sorted(p for p in points if math.isfinite(p)))

    def to_dict(self) -> dict:
        return {
            "type": "MagnetSequence",
            "elements": [{"z_position": z, "magnet": m.to_dict()} for m, z in self._elements],
        }

    def _field(self, x, y, z):
        out = np.zeros(z.shape + (3,))
        for m, z_pos in self._elements:
            zl = z - z_pos
            lo, hi = m.z_range
            near = (zl >= lo) & (zl <= hi)
            if not np.any(near):
                continue
            out[near] += m._field(x[near], y[near], zl[near])
        return out

    def field_at(self, x, y, z):
        bx = by = bz = 0.0
        for m, z_pos in self._elements:
            zl = z - z_pos
            lo, hi = m.z_range
            if lo <= zl <= hi:
                fx, fy, fz = m.field_at(x, y, zl)
                bx += fx
                by += fy
                bz += fz
        return bx, by, bz

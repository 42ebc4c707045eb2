"""Magnetic field models: undulators, dipoles, field maps and sequences of them.

Every model is a :class:`~lwrad.magnets.base.Magnet` with a vectorised
``field(x, y, z)`` (T, shape ``(..., 3)``), a ``z_range`` (m) outside which the
field is zero, and ``to_dict()``. :func:`lwrad.track` turns a magnet into a
:class:`~lwrad.trajectory.Trajectory`.
"""

from lwrad.magnets.base import Magnet
from lwrad.magnets.dipole import Dipole
from lwrad.magnets.fieldmap import FieldMap, FieldMapWarning, OnAxisFieldMap
from lwrad.magnets.sequence import MagnetSequence
from lwrad.magnets.undulator import (
    EllipticalUndulator,
    HelicalUndulator,
    PlanarUndulator,
    deflection_parameter,
)

__all__ = [
    "Magnet",
    "PlanarUndulator",
    "EllipticalUndulator",
    "HelicalUndulator",
    "deflection_parameter",
    "Dipole",
    "FieldMap",
    "OnAxisFieldMap",
    "FieldMapWarning",
    "MagnetSequence",
]

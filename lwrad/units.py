"""A strict parser for quantities with units, used by file headers and job files.

A quantity is a number (taken in the documented default unit) or a string
``"<number> <unit>"`` such as ``"25 mm"``, ``"2.5 GeV"``, ``"0.3 A"``. Only the
units listed in :data:`UNITS` are accepted, each for one dimension; anything
else is an :class:`~lwrad.errors.InputError` that names the key and the units
that would have been accepted. Nothing is evaluated.
"""

from __future__ import annotations

import math
import re

from lwrad.constants import c, e
from lwrad.errors import InputError

__all__ = [
    "UNITS",
    "DIMENSIONS",
    "unit_factor",
    "parse_quantity",
    "split_quantity",
    "format_quantity",
]

_EV = e

#: unit → (dimension, factor to SI). ``"mc"`` (momentum in units of the
#: particle's mass times c) is resolved with the particle mass.
UNITS: dict[str, tuple[str, float]] = {
    # length
    "m": ("length", 1.0),
    "cm": ("length", 1e-2),
    "mm": ("length", 1e-3),
    "um": ("length", 1e-6),
    "µm": ("length", 1e-6),
    "nm": ("length", 1e-9),
    "km": ("length", 1e3),
    # time
    "s": ("time", 1.0),
    "ms": ("time", 1e-3),
    "us": ("time", 1e-6),
    "µs": ("time", 1e-6),
    "ns": ("time", 1e-9),
    "ps": ("time", 1e-12),
    "fs": ("time", 1e-15),
    "as": ("time", 1e-18),
    # energy (beam or photon)
    "J": ("energy", 1.0),
    "eV": ("energy", _EV),
    "keV": ("energy", 1e3 * _EV),
    "MeV": ("energy", 1e6 * _EV),
    "GeV": ("energy", 1e9 * _EV),
    "TeV": ("energy", 1e12 * _EV),
    # angle
    "rad": ("angle", 1.0),
    "mrad": ("angle", 1e-3),
    "urad": ("angle", 1e-6),
    "µrad": ("angle", 1e-6),
    "deg": ("angle", math.pi / 180.0),
    # magnetic flux density
    "T": ("field", 1.0),
    "mT": ("field", 1e-3),
    "G": ("field", 1e-4),
    "kG": ("field", 1e-1),
    # current
    "A": ("current", 1.0),
    "mA": ("current", 1e-3),
    "uA": ("current", 1e-6),
    "µA": ("current", 1e-6),
    # charge
    "C": ("charge", 1.0),
    "nC": ("charge", 1e-9),
    "pC": ("charge", 1e-12),
    "fC": ("charge", 1e-15),
    # momentum
    "kg*m/s": ("momentum", 1.0),
    "eV/c": ("momentum", _EV / c),
    "keV/c": ("momentum", 1e3 * _EV / c),
    "MeV/c": ("momentum", 1e6 * _EV / c),
    "GeV/c": ("momentum", 1e9 * _EV / c),
    "mc": ("momentum", float("nan")),
    # velocity
    "c": ("velocity", c),
    "m/s": ("velocity", 1.0),
    # emittance (geometric)
    "m*rad": ("emittance", 1.0),
    "mm*mrad": ("emittance", 1e-6),
    "nm*rad": ("emittance", 1e-9),
    "pm*rad": ("emittance", 1e-12),
    "um*rad": ("emittance", 1e-6),
    # power
    "W": ("power", 1.0),
    "kW": ("power", 1e3),
    "mW": ("power", 1e-3),
    # dimensionless
    "1": ("dimensionless", 1.0),
    "%": ("dimensionless", 1e-2),
}

DIMENSIONS = sorted({dim for dim, _ in UNITS.values()})

_QUANTITY = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*([^\s].*?)?\s*$")


def _where(source, location):
    return {"source": source, "location": location}


def unit_factor(
    unit: str, dimension: str, *, mass: float | None = None, source=None, location=None
) -> float:
    """Factor that converts a value in ``unit`` to SI, checking its dimension.

    Parameters
    ----------
    unit : str
        A key of :data:`UNITS` (surrounding spaces ignored).
    dimension : str
        The dimension the caller expects (one of :data:`DIMENSIONS`).
    mass : float, optional
        Particle mass (kg), needed for the momentum unit ``"mc"``.

    Raises
    ------
    InputError
        Unknown unit, or a unit of another dimension.
    """
    u = unit.strip().replace(" ", "")
    if u not in UNITS:
        accepted = ", ".join(k for k, (d, _) in UNITS.items() if d == dimension)
        raise InputError(
            f"unknown unit {unit!r}; for {dimension} use one of: {accepted}",
            **_where(source, location),
        )
    dim, factor = UNITS[u]
    if dim != dimension:
        accepted = ", ".join(k for k, (d, _) in UNITS.items() if d == dimension)
        raise InputError(
            f"unit {unit!r} is a unit of {dim}, expected {dimension} ({accepted})",
            **_where(source, location),
        )
    if u == "mc":
        if mass is None:
            raise InputError(
                "momentum in units of mc needs the particle mass", **_where(source, location)
            )
        factor = mass * c
    return factor


def split_quantity(value, *, source=None, location=None) -> tuple[float, str | None]:
    """Split ``"25 mm"`` into ``(25.0, "mm")``; a bare number gives ``(value, None)``."""
    if isinstance(value, bool):
        raise InputError(
            f"expected a number with a unit, got {value!r}", **_where(source, location)
        )
    if isinstance(value, int | float):
        return float(value), None
    if not isinstance(value, str):
        raise InputError(
            f"expected a number or a string like '25 mm', got {type(value).__name__} {value!r}",
            **_where(source, location),
        )
    m = _QUANTITY.match(value)
    if not m:
        raise InputError(f"cannot read {value!r} as '<number> <unit>'", **_where(source, location))
    return float(m.group(1)), m.group(2)


def parse_quantity(
    value,
    dimension: str,
    *,
    default_unit: str,
    mass: float | None = None,
    source=None,
    location=None,
    allow_negative: bool = True,
    allow_zero: bool = True,
) -> float:
    """Parse a quantity into SI.

    Parameters
    ----------
    value : float or str
        A number (in ``default_unit``) or ``"<number> <unit>"``.
    dimension : str
        Expected dimension.
    default_unit : str
        Unit of a bare number.
    allow_negative, allow_zero : bool
        Range checks; a violation is an :class:`InputError`.

    Returns
    -------
    float
        The value in SI.
    """
    number, unit = split_quantity(value, source=source, location=location)
    factor = unit_factor(
        unit or default_unit, dimension, mass=mass, source=source, location=location
    )
    result = number * factor
    if not math.isfinite(result):
        raise InputError(f"{value!r} is not a finite {dimension}", **_where(source, location))
    if not allow_negative and result < 0:
        raise InputError(f"{value!r} must not be negative", **_where(source, location))
    if not allow_zero and result == 0:
        raise InputError(f"{value!r} must not be zero", **_where(source, location))
    return result


def format_quantity(value_si: float, unit: str, precision: int = 6) -> str:
    """Format an SI value in ``unit`` as ``"<number> <unit>"``."""
    dim, factor = UNITS[unit]
    return f"{value_si / factor:.{precision}g} {unit}"

"""Input handling shared by the estimates (private): quantities with units, beam optics.

Numbers are taken in the estimate's documented unit (total beam energy in eV, everything else
SI); strings such as ``"2.5 GeV"`` or ``"25 mm"`` go through :func:`lwrad.units.parse_quantity`.
Every problem is an :class:`~lwrad.errors.InputError` that names the argument.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from lwrad import constants as _k
from lwrad.errors import InputError
from lwrad.units import parse_quantity

__all__ = [
    "CAUTION",
    "energy_ev",
    "positive",
    "non_negative",
    "count",
    "gamma_of",
    "BeamOptics",
    "beam_optics",
]

#: Printed with every estimate that reports power or heat load.
CAUTION = (
    "Estimates only (ideal magnets, filament or Gaussian beam, handbook formulas). Shielding, "
    "radiation safety and thermal design follow local codes and licensed practice."
)


def energy_ev(value, name: str = "energy") -> float:
    """Total beam energy in eV from a number (eV) or a string with a unit."""
    joule = parse_quantity(
        value, "energy", default_unit="eV", location=name, allow_negative=False, allow_zero=False
    )
    return joule / _k.e


def positive(value, dimension: str, default_unit: str, name: str) -> float:
    """A strictly positive, finite quantity in SI."""
    return parse_quantity(
        value,
        dimension,
        default_unit=default_unit,
        location=name,
        allow_negative=False,
        allow_zero=False,
    )


def non_negative(value, dimension: str, default_unit: str, name: str) -> float:
    """A non-negative, finite quantity in SI."""
    return parse_quantity(
        value, dimension, default_unit=default_unit, location=name, allow_negative=False
    )


def count(value, name: str) -> int:
    """A positive whole number (a float with an integral value is accepted)."""
    if isinstance(value, bool) or not isinstance(value, int | float):
        raise InputError(f"{name} must be a positive whole number, got {value!r}", location=name)
    if not (math.isfinite(value) and value >= 1 and value == int(value)):
        raise InputError(f"{name} must be a positive whole number, got {value!r}", location=name)
    return int(value)


def gamma_of(energy: float) -> float:
    """Lorentz factor of an electron of total energy ``energy`` (eV); must exceed 1 clearly.

    The handbook formulas are ultrarelativistic; below γ = 10 they are meaningless, so such an
    energy is refused rather than answered with a wrong number.
    """
    gamma = float(_k.gamma_from_energy(energy))
    if gamma < 10.0:
        raise InputError(
            f"beam energy {energy:.6g} eV gives γ = {gamma:.3g}; the estimates need an "
            "ultrarelativistic beam (γ ≫ 1)",
            location="energy",
        )
    return gamma


@dataclass(frozen=True)
class BeamOptics:
    """Transverse beam parameters at the source point (SI).

    Attributes
    ----------
    emittance_x, emittance_y : float
        Geometric rms emittances, m·rad (0 = filament).
    beta_x, beta_y : float
        Twiss β-functions, m.
    alpha_x, alpha_y : float
        Twiss α (dimensionless).
    """

    emittance_x: float
    emittance_y: float
    beta_x: float
    beta_y: float
    alpha_x: float = 0.0
    alpha_y: float = 0.0

    def size(self, plane: str) -> float:
        """rms beam size √(ε β), m."""
        return math.sqrt(getattr(self, f"emittance_{plane}") * getattr(self, f"beta_{plane}"))

    def divergence(self, plane: str) -> float:
        """rms beam divergence √(ε (1 + α²)/β), rad (Twiss γ-function times ε)."""
        eps, beta, alpha = (getattr(self, f"{q}_{plane}") for q in ("emittance", "beta", "alpha"))
        return math.sqrt(eps * (1.0 + alpha * alpha) / beta)


_BEAM_KEYS = {
    "emittance_x": ("emittance", "m*rad", True),
    "emittance_y": ("emittance", "m*rad", True),
    "beta_x": ("length", "m", False),
    "beta_y": ("length", "m", False),
    "alpha_x": ("dimensionless", "1", None),
    "alpha_y": ("dimensionless", "1", None),
}


def beam_optics(beam) -> BeamOptics | None:
    """Read emittances and Twiss parameters from ``beam``.

    ``beam`` may be ``None`` (filament beam), a :class:`BeamOptics`, a mapping with the keys
    ``emittance_x, emittance_y, beta_x, beta_y`` (optionally ``alpha_x, alpha_y``), or any
    object with those attributes (for example :class:`lwrad.ElectronBeam`). Numbers are SI
    (m·rad, m); strings with units are accepted.
    """
    if beam is None or isinstance(beam, BeamOptics):
        return beam
    values = {}
    for key, (dimension, unit, allow_zero) in _BEAM_KEYS.items():
        raw = beam.get(key) if isinstance(beam, dict) else getattr(beam, key, None)
        if raw is None:
            if key.startswith("alpha"):
                raw = 0.0
            else:
                raise InputError(f"the beam needs {key}", location=f"beam.{key}")
        if allow_zero is None:
            values[key] = parse_quantity(raw, dimension, default_unit=unit, location=f"beam.{key}")
        else:
            values[key] = parse_quantity(
                raw,
                dimension,
                default_unit=unit,
                location=f"beam.{key}",
                allow_negative=False,
                allow_zero=allow_zero,
            )
    if isinstance(beam, dict):
        unknown = sorted(set(beam) - set(_BEAM_KEYS))
        if unknown:
            raise InputError(
                f"unknown beam keys {unknown}; expected {sorted(_BEAM_KEYS)}", location="beam"
            )
    return BeamOptics(**values)

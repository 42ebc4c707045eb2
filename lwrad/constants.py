"""Physical constants and unit conversions used throughout lwrad.

All constants come from :mod:`scipy.constants` (CODATA, the edition shipped
with the installed SciPy; see :data:`CODATA_EDITION`). Derived constants are
computed here, never copied as rounded numbers.

Conventions
-----------
SI inside: s, m, kg, J, T, V/m. Photon energies at the edges are in eV,
beam energies in eV (total energy, rest energy included).
"""

from __future__ import annotations

import numpy as np
import scipy.constants as _sc

__all__ = [
    "CODATA_EDITION",
    "c",
    "e",
    "epsilon_0",
    "mu_0",
    "hbar",
    "h",
    "m_e",
    "m_p",
    "m_u",
    "alpha",
    "r_e",
    "Z0",
    "PARTICLES",
    "particle_properties",
    "photon_energy_to_omega",
    "omega_to_photon_energy",
    "photon_energy_to_wavelength",
    "wavelength_to_photon_energy",
    "gamma_from_energy",
    "energy_from_gamma",
    "beta_from_gamma",
    "one_minus_beta_from_gamma",
]


#: CODATA edition of the installed SciPy's constants (recorded in provenance).
def _codata_edition() -> str:
    try:  # private attribute; fall back to a generic label if SciPy renames it
        from scipy.constants import _codata

        return str(_codata._current_codata)
    except (ImportError, AttributeError):
        return "CODATA (as shipped with scipy.constants)"


CODATA_EDITION: str = _codata_edition()

c: float = _sc.c  #: speed of light in vacuum, m/s
e: float = _sc.e  #: elementary charge, C
epsilon_0: float = _sc.epsilon_0  #: vacuum permittivity, F/m
mu_0: float = _sc.mu_0  #: vacuum permeability, H/m
hbar: float = _sc.hbar  #: reduced Planck constant, J s
h: float = _sc.h  #: Planck constant, J s
m_e: float = _sc.m_e  #: electron mass, kg
m_p: float = _sc.m_p  #: proton mass, kg
m_u: float = _sc.physical_constants["atomic mass constant"][0]  #: atomic mass constant, kg
alpha: float = _sc.fine_structure  #: fine-structure constant
r_e: float = _sc.physical_constants["classical electron radius"][0]  #: classical electron radius, m
Z0: float = mu_0 * c  #: impedance of free space, ohm

#: Named particles: charge (C) and rest mass (kg).
PARTICLES: dict[str, tuple[float, float]] = {
    "electron": (-e, m_e),
    "positron": (e, m_e),
    "proton": (e, m_p),
    "antiproton": (-e, m_p),
    "muon": (-e, _sc.physical_constants["muon mass"][0]),
}


def particle_properties(particle: str | tuple[float, float]) -> tuple[float, float]:
    """Charge (C) and mass (kg) of a named particle or of an ion.

    Parameters
    ----------
    particle : str or (float, float)
        A name from :data:`PARTICLES`, an ion as ``"ion:Z:A"`` (charge state Z,
        mass in atomic mass units A, electron binding neglected), or a pair
        ``(charge_C, mass_kg)``.

    Returns
    -------
    charge, mass : float
        Coulomb and kilogram.
    """
    from lwrad.errors import InputError

    if isinstance(particle, tuple | list) and len(particle) == 2:
        charge, mass = float(particle[0]), float(particle[1])
    elif isinstance(particle, str):
        key = particle.strip().lower()
        if key in PARTICLES:
            return PARTICLES[key]
        if key.startswith("ion:"):
            try:
                _, z, a = key.split(":")
                charge, mass = float(z) * e, float(a) * m_u
            except ValueError:
                raise InputError(
                    f"ion must be written 'ion:Z:A' (charge state, mass in u), got {particle!r}",
                    location="particle",
                ) from None
        else:
            raise InputError(
                f"unknown particle {particle!r}; expected one of {sorted(PARTICLES)} or 'ion:Z:A'",
                location="particle",
            )
    else:
        raise InputError(f"particle must be a name or (charge, mass), got {particle!r}")
    if not (np.isfinite(charge) and charge != 0.0 and np.isfinite(mass) and mass > 0.0):
        raise InputError(
            f"particle needs a non-zero finite charge and a positive mass, got {particle!r}"
        )
    return charge, mass


def photon_energy_to_omega(photon_energy_ev):
    """Angular frequency (rad/s) of photons of energy ``photon_energy_ev`` (eV): ω = E/ħ."""
    return np.asarray(photon_energy_ev, dtype=float) * e / hbar


def omega_to_photon_energy(omega):
    """Photon energy (eV) for angular frequency ``omega`` (rad/s)."""
    return np.asarray(omega, dtype=float) * hbar / e


def photon_energy_to_wavelength(photon_energy_ev):
    """Wavelength (m) of photons of energy ``photon_energy_ev`` (eV): λ = hc/E."""
    return h * c / (np.asarray(photon_energy_ev, dtype=float) * e)


def wavelength_to_photon_energy(wavelength_m):
    """Photon energy (eV) for wavelength ``wavelength_m`` (m)."""
    return h * c / (np.asarray(wavelength_m, dtype=float) * e)


def gamma_from_energy(energy_ev, mass=m_e):
    """Lorentz factor for total energy ``energy_ev`` (eV) of a particle of ``mass`` (kg)."""
    return np.asarray(energy_ev, dtype=float) * e / (mass * c**2)


def energy_from_gamma(gamma, mass=m_e):
    """Total energy (eV) of a particle of ``mass`` (kg) with Lorentz factor ``gamma``."""
    return np.asarray(gamma, dtype=float) * mass * c**2 / e


def one_minus_beta_from_gamma(gamma):
    """1 − β computed without cancellation: 1/(γ² (1 + β))."""
    g = np.asarray(gamma, dtype=float)
    inv_g2 = 1.0 / (g * g)
    beta = np.sqrt(1.0 - inv_g2)
    return inv_g2 / (1.0 + beta)


def beta_from_gamma(gamma):
    """Speed β = v/c for Lorentz factor ``gamma``."""
    g = np.asarray(gamma, dtype=float)
    return np.sqrt(1.0 - 1.0 / (g * g))

"""Bending-magnet estimates: radius, critical energy, flux (G1, H2), opening angle, power.

Formulas: X-ray Data Booklet sec. 2.1 (XDB) and Jackson, Classical Electrodynamics 3rd ed.,
ch. 14 (J14); coefficients exact from :mod:`lwrad.special`. Electrons or positrons, γ ≫ 1.
"""

from __future__ import annotations

import math

import numpy as np

from lwrad import constants as _k
from lwrad import special as _sf
from lwrad.errors import InputError
from lwrad.estimate._inputs import CAUTION, energy_ev, gamma_of, positive
from lwrad.estimate.table import EstimateTable, Row, array_entry

__all__ = ["Bend", "photon_energies"]

_FLUX_DENSITY_UNIT = "ph/s/mrad^2/0.1%BW"
_FLUX_PER_MRAD_UNIT = "ph/s/mrad/0.1%BW"


def photon_energies(value, name: str = "photon_energy") -> np.ndarray:
    """Photon energies in eV: a number (eV), a string with a unit, or a sequence of either.

    Returns a float array (eV); anything not finite and > 0 is an :class:`InputError`.
    """
    from lwrad.units import parse_quantity

    def one(v):
        if isinstance(v, str):
            return parse_quantity(v, "energy", default_unit="eV", location=name) / _k.e
        return v

    if isinstance(value, str):
        value = one(value)
    elif isinstance(value, list | tuple):
        value = [one(v) for v in value]
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        raise InputError(
            f"photon energies must be numbers in eV, got {value!r}", location=name
        ) from None
    if arr.size == 0 or not np.all(np.isfinite(arr)) or np.any(arr <= 0):
        raise InputError(f"photon energies must be finite and > 0 eV, got {value!r}", location=name)
    return arr


class Bend:
    """Quick estimate for a bending magnet (uniform field, electrons).

    Parameters
    ----------
    energy : float or str
        Total beam energy, eV (or ``"2.5 GeV"``).
    current : float or str
        Beam current, A (or ``"300 mA"``).
    field : float or str
        Magnetic flux density, T (or ``"1.2 T"``).

    Notes
    -----
    The horizontal distribution is uniform (fan), so flux is per mrad of horizontal angle;
    the vertical angle ψ is measured from the orbit plane. Power figures are estimates
    (see :data:`lwrad.estimate.CAUTION`).
    """

    kind = "bend"

    def __init__(self, energy, current, field):
        self.energy = energy_ev(energy)  # eV
        self.current = positive(current, "current", "A", "current")  # A
        self.field = positive(field, "field", "T", "field")  # T
        self.gamma = gamma_of(self.energy)

    @property
    def energy_gev(self) -> float:
        """Beam energy in GeV."""
        return self.energy * 1e-9

    @property
    def radius(self) -> float:
        """Bending radius ρ = p/(eB), m (exact momentum)."""
        momentum = self.gamma * float(_k.beta_from_gamma(self.gamma)) * _k.m_e * _k.c
        return momentum / (_k.e * self.field)

    @property
    def critical_energy(self) -> float:
        """Critical photon energy εc = ħ ωc, ωc = 3γ³c/(2ρ), eV (J14 14.81; XDB 2.1: 0.665 E² B keV)."""
        return 1.5 * _k.hbar * _k.c * self.gamma**3 / self.radius / _k.e

    @property
    def critical_wavelength(self) -> float:
        """λc = hc/εc, m."""
        return float(_k.photon_energy_to_wavelength(self.critical_energy))

    def _y(self, photon_energy) -> np.ndarray:
        return photon_energies(photon_energy) / self.critical_energy

    def flux_density(self, photon_energy):
        """On-plane (ψ = 0) photon flux density, ph/s/mrad²/0.1%BW.

        ``COEF_BEND_FLUX_DENSITY · E²[GeV] · I[A] · H2(ε/εc)`` (XDB 2.1: 1.327e13 E² I H2;
        J14 14.79 at ψ = 0).

        Parameters
        ----------
        photon_energy : float or array_like
            Photon energy, eV.
        """
        return (
            _sf.COEF_BEND_FLUX_DENSITY
            * self.energy_gev**2
            * self.current
            * _sf.bend_H2(self._y(photon_energy))
        )

    def flux_per_mrad(self, photon_energy):
        """Photon flux per mrad of horizontal angle, all vertical angles, ph/s/mrad/0.1%BW.

        ``COEF_BEND_FLUX_PER_MRAD · E[GeV] · I[A] · G1(ε/εc)`` (XDB 2.1: 2.457e13 E I G1).

        Parameters
        ----------
        photon_energy : float or array_like
            Photon energy, eV.
        """
        return (
            _sf.COEF_BEND_FLUX_PER_MRAD
            * self.energy_gev
            * self.current
            * _sf.bend_G1(self._y(photon_energy))
        )

    def vertical_opening_angle(self, photon_energy):
        """Effective rms vertical opening angle of the photon flux at ``photon_energy``, rad.

        Convention (stated, derived here): the σψ of the Gaussian that has the true on-plane
        flux density and the true vertically integrated flux,
        σψ = (flux per mrad) / (√(2π) · on-plane flux density), i.e.
        σψ = 2π G1(y) / (√3 · √(2π) · γ · H2(y)). It gives ≈ 0.65/γ at εc and grows as
        (εc/ε)^{1/3} at low energy; the shape itself is not Gaussian (J14 14.79).

        Parameters
        ----------
        photon_energy : float or array_like
            Photon energy, eV.
        """
        y = self._y(photon_energy)
        with np.errstate(invalid="ignore", divide="ignore"):
            ratio = (
                2.0
                * math.pi
                * _sf.bend_G1(y)
                / (math.sqrt(3.0) * math.sqrt(2.0 * math.pi) * _sf.bend_H2(y))
            )
        if not np.all(np.isfinite(ratio)):
            raise InputError(
                "photon energy too far above the critical energy: the flux underflows (ε/εc ≳ 700)",
                location="photon_energy",
            )
        return ratio / self.gamma

    @property
    def power_per_mrad(self) -> float:
        """Power per mrad of horizontal angle, W/mrad: e²γ³BI/(6π ε0 m c) (XDB 2.1: 4.22 B E³ I).

        An estimate: see :data:`lwrad.estimate.CAUTION`.
        """
        return _sf.COEF_BEND_POWER_PER_MRAD * self.field * self.energy_gev**3 * self.current

    @property
    def power_density_on_plane(self) -> float:
        """Peak power density on the orbit plane, W/mrad².

        The vertical power distribution (frequency-integrated J14 14.79) is
        dP/dθdψ = (21γ/32) (dP/dθ) (1+X²)^{-5/2} [1 + (5/7) X²/(1+X²)], X = γψ, whose integral
        over X is 1 (shown in the tests); at ψ = 0 this is 21γ/32 × :attr:`power_per_mrad` per
        rad, i.e. ≈ 5.42 E⁴ B I W/mrad² (from memory of the usual handbook figure).
        An estimate: see :data:`lwrad.estimate.CAUTION`.
        """
        return 21.0 * self.gamma / 32.0 * self.power_per_mrad * 1e-3

    @property
    def energy_loss_per_turn(self) -> float:
        """Energy radiated per electron in a full circle of this field, U0 = e²γ⁴/(3ε0ρ), eV (J14 14.26)."""
        return _k.e * self.gamma**4 / (3.0 * _k.epsilon_0 * self.radius)

    def spectrum(self, photon_energy=None) -> dict:
        """Flux per mrad, on-plane flux density and opening angle on a photon-energy grid.

        Parameters
        ----------
        photon_energy : array_like, optional
            Photon energies, eV. Default: 200 points from 1e-3 εc to 10 εc, log-spaced.

        Returns
        -------
        dict
            ``{name: (ndarray, unit)}``.
        """
        if photon_energy is None:
            photon_energy = np.geomspace(1e-3, 10.0, 200) * self.critical_energy
        eps = photon_energies(photon_energy)
        return {
            "photon_energy": array_entry(eps, "eV"),
            "flux_per_mrad": array_entry(self.flux_per_mrad(eps), _FLUX_PER_MRAD_UNIT),
            "flux_density": array_entry(self.flux_density(eps), _FLUX_DENSITY_UNIT),
            "vertical_opening_angle": array_entry(self.vertical_opening_angle(eps) * 1e3, "mrad"),
        }

    def inputs(self) -> dict:
        """Inputs as ``{name: (value, unit)}``."""
        return {
            "energy": (self.energy_gev, "GeV"),
            "current": (self.current, "A"),
            "field": (self.field, "T"),
        }

    def to_table(self, photon_energies_ev=None) -> EstimateTable:
        """The estimate as a table, with the spectrum as curves.

        Parameters
        ----------
        photon_energies_ev : array_like, optional
            Photon energies (eV) for the flux rows; default: the critical energy.
        """
        points = (
            [self.critical_energy]
            if photon_energies_ev is None
            else list(np.ravel(photon_energies(photon_energies_ev)))
        )
        rows = [
            Row("gamma", "Lorentz factor γ", self.gamma, "1"),
            Row("radius", "bending radius ρ", self.radius, "m", "p/(eB)"),
            Row(
                "critical_energy",
                "critical photon energy εc",
                self.critical_energy,
                "eV",
                "3ħcγ³/(2ρ)",
            ),
            Row(
                "critical_wavelength",
                "critical wavelength λc",
                self.critical_wavelength * 1e9,
                "nm",
            ),
        ]
        for eps in points:
            tag = f"{eps:.6g} eV"
            key = f"{eps:.6g}".replace(".", "p").replace("+", "")
            rows += [
                Row(
                    f"flux_per_mrad_{key}eV",
                    f"flux per mrad at {tag}",
                    float(self.flux_per_mrad(eps)),
                    _FLUX_PER_MRAD_UNIT,
                    "G1",
                ),
                Row(
                    f"flux_density_{key}eV",
                    f"on-plane flux density at {tag}",
                    float(self.flux_density(eps)),
                    _FLUX_DENSITY_UNIT,
                    "H2",
                ),
                Row(
                    f"vertical_opening_{key}eV",
                    f"vertical opening σψ at {tag}",
                    float(self.vertical_opening_angle(eps)) * 1e3,
                    "mrad",
                    "effective Gaussian",
                ),
            ]
        rows += [
            Row(
                "power_per_mrad",
                "power per mrad (horizontal)",
                self.power_per_mrad,
                "W/mrad",
                "estimate",
            ),
            Row(
                "power_density_on_plane",
                "peak power density (orbit plane)",
                self.power_density_on_plane,
                "W/mrad^2",
                "estimate",
            ),
        ]
        return EstimateTable(
            title=f"Bending magnet estimate ({self.field:.6g} T)",
            rows=tuple(rows),
            inputs=self.inputs(),
            arrays=self.spectrum(),
            caution=CAUTION,
        )

    def __str__(self) -> str:
        return str(self.to_table())

    def __repr__(self) -> str:
        return f"Bend(energy={self.energy!r}, current={self.current!r}, field={self.field!r})"

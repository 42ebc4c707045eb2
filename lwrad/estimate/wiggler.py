"""Planar-wiggler estimates (K ≫ 1): critical energy, flux as 2N bending-magnet poles, power.

In the wiggler limit the harmonics merge into a continuum and each of the 2N poles radiates
like a bending magnet of the local field toward the angles its orbit sweeps; the observer on
axis sees all 2N poles at the peak field (X-ray Data Booklet sec. 2.1, XDB). Interference
between poles is neglected — the reason the approximation needs K ≫ 1.

Off axis in the orbit plane, at horizontal angle θ (|θ| < K/γ), the orbit angle
x' = (K/γ) cos(ku z) equals θ where the field is B0 √(1 − (γθ/K)²) (derived from the
sinusoidal orbit), so the critical energy there is εc(0) √(1 − (γθ/K)²).
"""

from __future__ import annotations

import math

import numpy as np

from lwrad.errors import InputError
from lwrad.estimate._device import PeriodicDevice
from lwrad.estimate._inputs import CAUTION
from lwrad.estimate.bend import Bend, photon_energies
from lwrad.estimate.table import EstimateTable, Row

__all__ = ["Wiggler", "WIGGLER_MIN_K"]

#: Below this K the table warns that the wiggler picture is poor (common practice, no source).
WIGGLER_MIN_K = 5.0


class Wiggler(PeriodicDevice):
    """Quick estimate for a planar wiggler (K ≫ 1) on an electron beam.

    Parameters
    ----------
    energy : float or str
        Total beam energy, eV (or ``"6 GeV"``).
    current : float or str
        Beam current, A.
    period : float or str
        Period λu, m (or ``"150 mm"``).
    n_periods : int
        Number of periods N (2N poles).
    K : float, optional
        Deflection parameter. Give exactly one of ``K`` and ``peak_field``.
    peak_field : float or str, optional
        Peak field B0, T.

    Notes
    -----
    Power figures are estimates: see :data:`lwrad.estimate.CAUTION`.
    """

    kind = "wiggler"

    def __init__(self, energy, current, period, n_periods, K=None, peak_field=None):
        super().__init__(energy, current, period, n_periods, K=K, peak_field=peak_field)

    def _pole(self, theta_x=0.0) -> Bend:
        theta = float(theta_x)
        ratio = self.gamma * theta / self.K
        if not (math.isfinite(theta) and abs(ratio) < 1.0):
            raise InputError(
                f"theta_x = {theta!r} rad is outside the fan |θ| < K/γ = {self.max_angle:.6g} rad",
                location="theta_x",
            )
        return Bend(self.energy, self.current, self.peak_field * math.sqrt(1.0 - ratio * ratio))

    @property
    def n_poles(self) -> int:
        """Number of poles, 2N."""
        return 2 * self.n_periods

    @property
    def critical_energy(self) -> float:
        """Critical photon energy on axis (peak field), eV (XDB 2.1: 0.665 E² B0 keV)."""
        return self._pole().critical_energy

    def critical_energy_at(self, theta_x):
        """Critical energy at horizontal angle ``theta_x`` (rad) in the orbit plane, eV (module notes)."""
        return self._pole(theta_x).critical_energy

    @property
    def fan_half_angle(self) -> float:
        """Horizontal half-angle of the radiation fan, K/γ, rad."""
        return self.max_angle

    def flux_per_mrad(self, photon_energy, theta_x=0.0):
        """Flux per mrad of horizontal angle (all vertical angles), ph/s/mrad/0.1%BW.

        2N × the bending-magnet G1 flux at the local field (XDB 2.1).

        Parameters
        ----------
        photon_energy : float or array_like
            eV.
        theta_x : float
            Horizontal angle from the axis, rad (|θ| < K/γ).
        """
        return self.n_poles * self._pole(theta_x).flux_per_mrad(photon_energies(photon_energy))

    def flux_density(self, photon_energy, theta_x=0.0):
        """Flux density in the orbit plane, ph/s/mrad²/0.1%BW: 2N × bending-magnet H2 flux (XDB 2.1)."""
        return self.n_poles * self._pole(theta_x).flux_density(photon_energies(photon_energy))

    def vertical_opening_angle(self, photon_energy):
        """Effective rms vertical opening angle on axis, rad (as :meth:`Bend.vertical_opening_angle`)."""
        return self._pole().vertical_opening_angle(photon_energy)

    def to_table(self, photon_energies_ev=None) -> EstimateTable:
        """The estimate as a table, with the on-axis spectrum as curves."""
        pole = self._pole()
        points = (
            [pole.critical_energy]
            if photon_energies_ev is None
            else list(np.ravel(photon_energies(photon_energies_ev)))
        )
        k_note = (
            ""
            if self.K >= WIGGLER_MIN_K
            else f"K < {WIGGLER_MIN_K:g}: wiggler picture poor, see undulator"
        )
        rows = [
            Row("gamma", "Lorentz factor γ", self.gamma, "1"),
            Row("K", "deflection parameter K", self.K, "1", k_note),
            Row("peak_field", "peak field B0", self.peak_field, "T"),
            Row("length", "length L = N λu", self.length, "m"),
            Row(
                "fan_half_angle", "horizontal fan half-angle K/γ", self.fan_half_angle * 1e3, "mrad"
            ),
            Row("critical_energy", "critical photon energy εc (axis)", self.critical_energy, "eV"),
        ]
        for eps in points:
            tag = f"{eps:.6g} eV"
            key = f"{eps:.6g}".replace(".", "p").replace("+", "")
            rows += [
                Row(
                    f"flux_per_mrad_{key}eV",
                    f"flux per mrad at {tag}",
                    float(self.flux_per_mrad(eps)),
                    "ph/s/mrad/0.1%BW",
                    "2N poles, G1",
                ),
                Row(
                    f"flux_density_{key}eV",
                    f"on-axis flux density at {tag}",
                    float(self.flux_density(eps)),
                    "ph/s/mrad^2/0.1%BW",
                    "2N poles, H2",
                ),
            ]
        rows += [
            Row("total_power", "total power", self.total_power, "W", "estimate"),
            Row(
                "power_density_on_axis",
                "on-axis power density",
                self.power_density_on_axis,
                "W/mrad^2",
                "estimate",
            ),
        ]
        spectrum = pole.spectrum()
        arrays = {
            "photon_energy": spectrum["photon_energy"],
            "flux_per_mrad": (
                self.n_poles * spectrum["flux_per_mrad"][0],
                spectrum["flux_per_mrad"][1],
            ),
            "flux_density": (
                self.n_poles * spectrum["flux_density"][0],
                spectrum["flux_density"][1],
            ),
        }
        return EstimateTable(
            title=f"Planar wiggler estimate (λu = {self.period * 1e3:.6g} mm, N = {self.n_periods}, K = {self.K:.4g})",
            rows=tuple(rows),
            inputs=self.inputs(),
            arrays=arrays,
            caution=CAUTION,
        )

    def __str__(self) -> str:
        return str(self.to_table())

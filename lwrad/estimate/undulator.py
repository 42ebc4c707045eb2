"""Planar-undulator estimates: harmonics, flux, brightness, tuning curves, power.

Conventions and sources
-----------------------
* Resonance (X-ray Data Booklet sec. 2.1, XDB): λn = λu (1 + K²/2 + γ²θ²) / (2 n γ²),
  ultrarelativistic, θ from the undulator axis.
* On-axis peak flux density of harmonic n, filament beam (XDB 2.1):
  α N² γ² (Δω/ω) (I/e) Fn(K) per rad² (1.744e14 N² E² I Fn per mrad²).
* Central-cone flux (XDB 2.1): π α N (Δω/ω) (I/e) Qn(K) (1.431e14 N I Qn). Note: this equals
  2 × (peak flux density) × 2πσr'² with σr' below, i.e. twice the Gaussian integral of the
  on-axis peak. The exact angle-integrated flux at the on-axis resonance energy is half of it
  (∫ sinc² over the ring of detunings gives π/2 of π); it reaches the handbook value on the
  low-energy side of the line, where the whole sinc² lies inside the integral. Compare
  engine results with this in mind.
* Natural (single-electron) photon source of harmonic n, Gaussian approximation, from XDB 2.1
  (Kim's convention, quoted from memory): σr' = √(λn/(2L)), σr = √(2λn L)/(4π), so that
  σr σr' = λn/(4π).
* Brightness (XDB 2.1, Gaussian convolution of beam and natural source, quoted from memory):
  B = F / (4π² Σx Σx' Σy Σy'), Σ² = σ_beam² + σ_r² in each plane, F the central-cone flux,
  the beam's Twiss parameters taken at the undulator centre. With α ≠ 0 the phase-space
  correlation is kept: Σx Σx' → √det[[εβ + σr², −εα], [−εα, εγ_T + σr'²]]. Energy spread is
  not included (it lowers the brightness of high harmonics).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from lwrad import constants as _k
from lwrad import special as _sf
from lwrad.errors import InputError
from lwrad.estimate._device import PeriodicDevice
from lwrad.estimate._inputs import CAUTION, beam_optics
from lwrad.estimate.bend import photon_energies
from lwrad.estimate.table import EstimateTable, Row, array_entry

__all__ = ["Undulator", "TuningCurves", "FLUX_DENSITY_UNIT", "FLUX_UNIT", "BRIGHTNESS_UNIT"]

FLUX_DENSITY_UNIT = "ph/s/mrad^2/0.1%BW"
FLUX_UNIT = "ph/s/0.1%BW"
BRIGHTNESS_UNIT = "ph/s/mm^2/mrad^2/0.1%BW"


def _harmonics(n, *, odd_only=False):
    arr = np.asarray(n)
    if arr.dtype.kind not in "iuf" or arr.size == 0 or not np.all(np.isfinite(arr)):
        raise InputError(f"harmonics must be positive integers, got {n!r}", location="harmonic")
    if np.any(arr < 1) or np.any(arr != np.round(arr)):
        raise InputError(f"harmonics must be positive integers, got {n!r}", location="harmonic")
    arr = arr.astype(int)
    if odd_only and np.any(arr % 2 == 0):
        raise InputError(
            f"only odd harmonics radiate on axis of a planar undulator, got {n!r}",
            location="harmonic",
        )
    return arr


@dataclass(frozen=True)
class TuningCurves:
    """Odd-harmonic tuning curves over a K range (period fixed, field varied).

    Attributes
    ----------
    harmonics : ndarray of int, shape (n_h,)
    K : ndarray, shape (n_K,)
    photon_energy : ndarray, shape (n_h, n_K)
        On-axis harmonic photon energy, eV.
    peak_flux_density : ndarray, shape (n_h, n_K)
        ph/s/mrad²/0.1%BW (filament beam).
    central_cone_flux : ndarray, shape (n_h, n_K)
        ph/s/0.1%BW.
    brightness : ndarray, shape (n_h, n_K)
        ph/s/mm²/mrad²/0.1%BW (with the beam's emittance, or diffraction-limited for a filament).
    """

    harmonics: np.ndarray
    K: np.ndarray
    photon_energy: np.ndarray
    peak_flux_density: np.ndarray
    central_cone_flux: np.ndarray
    brightness: np.ndarray

    units = {
        "K": "1",
        "photon_energy": "eV",
        "peak_flux_density": FLUX_DENSITY_UNIT,
        "central_cone_flux": FLUX_UNIT,
        "brightness": BRIGHTNESS_UNIT,
    }

    def as_arrays(self) -> dict:
        """``{name: (ndarray, unit)}`` for export; harmonic axis first."""
        out = {"harmonics": array_entry(self.harmonics, "1")}
        for name, unit in self.units.items():
            out[f"tuning_{name}" if name != "K" else "tuning_K"] = array_entry(
                getattr(self, name), unit
            )
        return out

    def plot(self, quantity="brightness", ax=None):
        """Figure of ``quantity`` against photon energy; see :func:`lwrad.estimate.plot_tuning_curves`."""
        from lwrad.estimate.plots import plot_tuning_curves

        return plot_tuning_curves(self, quantity=quantity, ax=ax)


class Undulator(PeriodicDevice):
    """Quick estimate for a planar undulator on an electron beam.

    Parameters
    ----------
    energy : float or str
        Total beam energy, eV (or ``"2.5 GeV"``).
    current : float or str
        Beam current, A (or ``"0.3 A"``).
    period : float or str
        Period λu, m (or ``"25 mm"``).
    n_periods : int
        Number of periods N.
    K : float, optional
        Deflection parameter. Give exactly one of ``K`` and ``peak_field``.
    peak_field : float or str, optional
        Peak field B0, T.
    beam : BeamOptics, mapping or object, optional
        Emittances (m·rad) and Twiss β, α (m, 1) at the undulator centre, for brightness;
        ``None`` is a filament beam (zero emittance).

    Notes
    -----
    The conventions and their sources are in the module docstring. Power figures are
    estimates: see :data:`lwrad.estimate.CAUTION`.
    """

    kind = "undulator"

    def __init__(self, energy, current, period, n_periods, K=None, peak_field=None, beam=None):
        super().__init__(energy, current, period, n_periods, K=K, peak_field=peak_field)
        self.beam = beam_optics(beam)

    # ---------------------------------------------------------------- spectra
    def _wavelength(self, n, K, theta=0.0):
        return (
            self.period
            * (1.0 + 0.5 * K * K + (self.gamma * theta) ** 2)
            / (2.0 * n * self.gamma**2)
        )

    def wavelength(self, n=1, theta=0.0):
        """Wavelength of harmonic ``n`` at angle ``theta`` (rad) from the axis, m (XDB 2.1)."""
        theta = np.asarray(theta, dtype=float)
        if not np.all(np.isfinite(theta)):
            raise InputError("theta must be finite (rad)", location="theta")
        return self._wavelength(_harmonics(n), self.K, theta)

    def photon_energy(self, n=1, theta=0.0):
        """Photon energy of harmonic ``n`` at angle ``theta`` (rad), eV.

        ε = 2 n γ² h c / (λu (1 + K²/2 + γ²θ²)) (XDB 2.1: 0.950 n E² / (λu[cm] (1 + K²/2 + γ²θ²)) keV).
        """
        return _k.wavelength_to_photon_energy(self.wavelength(n, theta))

    def K_for_photon_energy(self, photon_energy, n=1):
        """K that puts harmonic ``n`` on axis at ``photon_energy`` (eV), from the resonance condition.

        Raises
        ------
        InputError
            The energy is above what harmonic n reaches at K → 0.
        """
        eps = photon_energies(photon_energy)
        nn = _harmonics(n)
        eps0 = nn * _k.wavelength_to_photon_energy(self.period / (2.0 * self.gamma**2))
        if np.any(eps >= eps0):
            raise InputError(
                f"harmonic {n} reaches at most {np.max(eps0):.6g} eV (K → 0); {photon_energy!r} eV is out of reach",
                location="photon_energy",
            )
        return np.sqrt(2.0 * (eps0 / eps - 1.0))

    def Fn(self, n):
        """Fn(K) of harmonic ``n`` (XDB 2.1); 0 for even n."""
        return _sf.undulator_F(_harmonics(n), self.K)

    def Qn(self, n):
        """Qn(K) = (1 + K²/2) Fn / n of harmonic ``n`` (XDB 2.1)."""
        return _sf.undulator_Q(_harmonics(n), self.K)

    def _peak_flux_density(self, n, K):
        return (
            _sf.COEF_UNDULATOR_FLUX_DENSITY
            * self.n_periods**2
            * self.energy_gev**2
            * self.current
            * _sf.undulator_F(n, K)
        )

    def peak_flux_density(self, n=1):
        """On-axis peak photon flux density of harmonic ``n``, filament beam, ph/s/mrad²/0.1%BW.

        α N² γ² (Δω/ω)(I/e) Fn(K) (XDB 2.1: 1.744e14 N² E² I Fn).
        """
        return self._peak_flux_density(_harmonics(n), self.K)

    def _central_cone_flux(self, n, K):
        return _sf.COEF_CENTRAL_CONE_FLUX * self.n_periods * self.current * _sf.undulator_Q(n, K)

    def central_cone_flux(self, n=1):
        """Photon flux in the central cone of harmonic ``n``, ph/s/0.1%BW.

        π α N (Δω/ω)(I/e) Qn(K) (XDB 2.1: 1.431e14 N I Qn); see the module notes on its relation
        to the on-axis flux density.
        """
        return self._central_cone_flux(_harmonics(n), self.K)

    # ---------------------------------------------------------------- photon source
    def natural_divergence(self, n=1):
        """Natural rms divergence σr' = √(λn/(2L)) of harmonic ``n``, rad (XDB 2.1, from memory)."""
        return np.sqrt(self.wavelength(n) / (2.0 * self.length))

    def natural_size(self, n=1):
        """Natural rms size σr = √(2 λn L)/(4π) of harmonic ``n``, m (XDB 2.1, from memory)."""
        return np.sqrt(2.0 * self.wavelength(n) * self.length) / (4.0 * math.pi)

    def _phase_space_det(self, lam, plane):
        # det of the 2x2 (x, x') covariance of beam ⊗ natural source, m²·rad²
        size2 = 2.0 * lam * self.length / (4.0 * math.pi) ** 2
        div2 = lam / (2.0 * self.length)
        if self.beam is None:
            return size2 * div2
        b = self.beam
        eps = getattr(b, f"emittance_{plane}")
        beta = getattr(b, f"beta_{plane}")
        alpha = getattr(b, f"alpha_{plane}")
        return (eps * beta + size2) * (eps * (1.0 + alpha * alpha) / beta + div2) - (
            eps * alpha
        ) ** 2

    def photon_source(self, n=1) -> dict:
        """rms photon-source size and divergence of harmonic ``n`` (beam ⊗ natural, Gaussian).

        Returns
        -------
        dict
            ``size_x, size_y`` (m) and ``divergence_x, divergence_y`` (rad):
            Σ = √(σ_beam² + σ_r²), Σ' = √(σ_beam'² + σ_r'²).
        """
        sr, srp = self.natural_size(n), self.natural_divergence(n)
        out = {}
        for plane in ("x", "y"):
            size_b = 0.0 if self.beam is None else self.beam.size(plane)
            div_b = 0.0 if self.beam is None else self.beam.divergence(plane)
            out[f"size_{plane}"] = np.sqrt(size_b**2 + sr**2)
            out[f"divergence_{plane}"] = np.sqrt(div_b**2 + srp**2)
        return out

    def _brightness(self, n, K):
        lam = self._wavelength(n, K)
        det = self._phase_space_det(lam, "x") * self._phase_space_det(lam, "y")
        # per m² rad² → per mm² mrad²
        return self._central_cone_flux(n, K) / (4.0 * math.pi**2 * np.sqrt(det)) * 1e-12

    def brightness(self, n=1):
        """Peak brightness of harmonic ``n``, ph/s/mm²/mrad²/0.1%BW.

        F / (4π² Σx Σx' Σy Σy') with F the central-cone flux (XDB 2.1 convention, module notes);
        diffraction-limited (filament) when no beam is given.
        """
        return self._brightness(_harmonics(n), self.K)

    def on_axis_flux_density_with_beam(self, n=1):
        """On-axis flux density of harmonic ``n`` with the beam divergence, ph/s/mrad²/0.1%BW.

        The filament peak scaled by σr'²/(Σx' Σy') (Gaussian convolution of the natural cone with
        the beam's angular spread, convention of the module notes); equals
        :meth:`peak_flux_density` for a filament beam.
        """
        src = self.photon_source(n)
        srp = self.natural_divergence(n)
        return self.peak_flux_density(n) * srp**2 / (src["divergence_x"] * src["divergence_y"])

    # ---------------------------------------------------------------- tuning
    def tuning_curves(
        self, harmonics=(1, 3, 5), K_range=None, n_points: int = 200, *, K_values=None
    ) -> TuningCurves:
        """Tuning curves of odd harmonics over a range of K (gap tuning, period fixed).

        Parameters
        ----------
        harmonics : sequence of int
            Odd harmonic numbers.
        K_range : (float, float), optional
            ``(K_min, K_max)``, sampled at ``n_points`` linearly spaced values. Default: from
            0.1 K to K.
        n_points : int
            Number of K values in ``K_range``.
        K_values : array_like, optional
            Explicit K values instead of ``K_range`` (at least two, all > 0).

        Returns
        -------
        TuningCurves
            Each point is the closed-form value at that K (no sampling error to converge).
        """
        nn = _harmonics(harmonics, odd_only=True).ravel()
        if K_values is not None:
            if K_range is not None:
                raise InputError("give K_range or K_values, not both", location="K_values")
            try:
                kk = np.asarray(K_values, dtype=float).ravel()
            except (TypeError, ValueError):
                raise InputError(
                    f"K_values must be numbers, got {K_values!r}", location="K_values"
                ) from None
            if kk.size < 2 or not np.all(np.isfinite(kk)) or np.any(kk <= 0):
                raise InputError(
                    "K_values must be finite, > 0 and at least two", location="K_values"
                )
        else:
            if K_range is None:
                K_range = (0.1 * self.K, self.K)
            try:
                kr = np.asarray(K_range, dtype=float).ravel()
            except (TypeError, ValueError):
                raise InputError(
                    f"K_range must be (K_min, K_max), got {K_range!r}", location="K_range"
                ) from None
            if kr.size != 2 or not (np.all(np.isfinite(kr)) and 0 < kr[0] < kr[1]):
                raise InputError(
                    f"K_range must be (K_min, K_max) with 0 < K_min < K_max, got {K_range!r}",
                    location="K_range",
                )
            if isinstance(n_points, bool) or not isinstance(n_points, int) or n_points < 2:
                raise InputError(
                    f"n_points must be an integer ≥ 2, got {n_points!r}", location="n_points"
                )
            kk = np.linspace(kr[0], kr[1], n_points)
        n2 = nn[:, None]
        k2 = kk[None, :]
        return TuningCurves(
            harmonics=nn,
            K=kk,
            photon_energy=np.asarray(_k.wavelength_to_photon_energy(self._wavelength(n2, k2))),
            peak_flux_density=np.asarray(self._peak_flux_density(n2, k2)),
            central_cone_flux=np.asarray(self._central_cone_flux(n2, k2)),
            brightness=np.asarray(self._brightness(n2, k2)),
        )

    # ---------------------------------------------------------------- reporting
    def to_table(
        self, harmonics=(1, 3, 5), K_range=None, target_photon_energy=None
    ) -> EstimateTable:
        """The estimate as a table, with tuning curves of the odd ``harmonics`` as curves.

        Parameters
        ----------
        harmonics : sequence of int
            Harmonics to tabulate.
        K_range : (float, float), optional
            K range of the tuning curves (see :meth:`tuning_curves`).
        target_photon_energy : float, optional
            A photon energy (eV): adds the K that tunes each odd harmonic to it (NaN where the
            harmonic cannot reach it).
        """
        nn = _harmonics(harmonics).ravel()
        rows = [
            Row("gamma", "Lorentz factor γ", self.gamma, "1"),
            Row("K", "deflection parameter K", self.K, "1", "e B0 λu/(2π m c)"),
            Row("peak_field", "peak field B0", self.peak_field, "T"),
            Row("length", "length L = N λu", self.length, "m"),
            Row("max_angle", "peak orbit angle K/γ", self.max_angle * 1e3, "mrad"),
        ]
        bright_note = "filament beam" if self.beam is None else "beam ⊗ natural, Gaussian"
        for n in nn:
            rows += [
                Row(
                    f"photon_energy_n{n}",
                    f"photon energy, harmonic {n}",
                    float(self.photon_energy(n)),
                    "eV",
                    "on axis",
                ),
                Row(f"Fn_n{n}", f"Fn(K), harmonic {n}", float(self.Fn(n)), "1"),
                Row(f"Qn_n{n}", f"Qn(K), harmonic {n}", float(self.Qn(n)), "1"),
                Row(
                    f"peak_flux_density_n{n}",
                    f"on-axis flux density, harmonic {n}",
                    float(self.peak_flux_density(n)),
                    FLUX_DENSITY_UNIT,
                    "filament beam",
                ),
                Row(
                    f"central_cone_flux_n{n}",
                    f"central-cone flux, harmonic {n}",
                    float(self.central_cone_flux(n)),
                    FLUX_UNIT,
                ),
                Row(
                    f"natural_size_n{n}",
                    f"natural size σr, harmonic {n}",
                    float(self.natural_size(n)) * 1e6,
                    "um",
                    "√(2λL)/(4π)",
                ),
                Row(
                    f"natural_divergence_n{n}",
                    f"natural divergence σr', harmonic {n}",
                    float(self.natural_divergence(n)) * 1e6,
                    "urad",
                    "√(λ/2L)",
                ),
                Row(
                    f"brightness_n{n}",
                    f"brightness, harmonic {n}",
                    float(self.brightness(n)),
                    BRIGHTNESS_UNIT,
                    bright_note,
                ),
            ]
        if target_photon_energy is not None:
            target = float(photon_energies(target_photon_energy))
            for n in nn[nn % 2 == 1]:
                try:
                    k_needed, note = float(self.K_for_photon_energy(target, n)), "same period"
                except InputError:
                    k_needed, note = math.nan, "out of reach"
                rows.append(
                    Row(
                        f"K_for_target_n{n}",
                        f"K for {target:.6g} eV on harmonic {n}",
                        k_needed,
                        "1",
                        note,
                    )
                )
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
        odd = nn[nn % 2 == 1]
        arrays = self.tuning_curves(odd, K_range).as_arrays() if odd.size else {}
        inputs = self.inputs()
        if self.beam is not None:
            for plane in ("x", "y"):
                inputs[f"emittance_{plane}"] = (
                    getattr(self.beam, f"emittance_{plane}") * 1e9,
                    "nm*rad",
                )
                inputs[f"beta_{plane}"] = (getattr(self.beam, f"beta_{plane}"), "m")
                inputs[f"alpha_{plane}"] = (getattr(self.beam, f"alpha_{plane}"), "1")
        return EstimateTable(
            title=f"Planar undulator estimate (λu = {self.period * 1e3:.6g} mm, N = {self.n_periods}, K = {self.K:.4g})",
            rows=tuple(rows),
            inputs=inputs,
            arrays=arrays,
            caution=CAUTION,
        )

    def ideal_trajectory(self, samples_per_period: int = 64):
        """The ideal sinusoidal path of this device (hook for estimate-vs-engine comparisons).

        Returns :func:`lwrad.ideal.planar_undulator` for this energy, period, N and K: the path
        the handbook formulas assume, so a full calculation on it should reproduce
        :meth:`photon_energy` and :meth:`peak_flux_density` up to finite-N effects (O(1/N)).
        """
        from lwrad.ideal import planar_undulator

        return planar_undulator(
            self.energy, self.period, self.n_periods, self.K, samples_per_period=samples_per_period
        )

    def __str__(self) -> str:
        return str(self.to_table())

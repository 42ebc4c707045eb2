"""What planar undulators and wigglers share (private): K ↔ field, power, power density.

Formulas: X-ray Data Booklet sec. 2.1 (XDB); coefficients exact from :mod:`lwrad.special`.
"""

from __future__ import annotations

import math

from lwrad import constants as _k
from lwrad import special as _sf
from lwrad.errors import InputError
from lwrad.estimate._inputs import count, energy_ev, gamma_of, non_negative, positive

__all__ = ["PeriodicDevice"]


class PeriodicDevice:
    """A planar periodic magnet (sinusoidal field of peak B0) on an electron beam.

    Parameters
    ----------
    energy : float or str
        Total beam energy, eV (or ``"2.5 GeV"``).
    current : float or str
        Beam current, A.
    period : float or str
        Period λu, m (or ``"25 mm"``).
    n_periods : int
        Number of periods N.
    K : float, optional
        Deflection parameter. Give exactly one of ``K`` and ``peak_field``.
    peak_field : float or str, optional
        Peak field B0, T.
    """

    def __init__(self, energy, current, period, n_periods, K=None, peak_field=None):
        self.energy = energy_ev(energy)  # eV
        self.current = positive(current, "current", "A", "current")  # A
        self.period = positive(period, "length", "m", "period")  # m
        self.n_periods = count(n_periods, "n_periods")
        self.gamma = gamma_of(self.energy)
        if (K is None) == (peak_field is None):
            raise InputError("give exactly one of K and peak_field", location="K")
        if K is not None:
            self.K = non_negative(K, "dimensionless", "1", "K")
            if self.K == 0.0:
                raise InputError("K must be > 0", location="K")
        else:
            b0 = positive(peak_field, "field", "T", "peak_field")
            # K = e B0 λu / (2π m c)  (XDB 2.1: 0.934 B0[T] λu[cm])
            self.K = _k.e * b0 * self.period / (2.0 * math.pi * _k.m_e * _k.c)

    @property
    def energy_gev(self) -> float:
        """Beam energy, GeV."""
        return self.energy * 1e-9

    @property
    def peak_field(self) -> float:
        """Peak field B0 = 2π m c K / (e λu), T (XDB 2.1)."""
        return 2.0 * math.pi * _k.m_e * _k.c * self.K / (_k.e * self.period)

    @property
    def length(self) -> float:
        """Magnetic length L = N λu, m."""
        return self.n_periods * self.period

    @property
    def max_angle(self) -> float:
        """Peak deflection angle of the orbit, K/γ, rad (XDB 2.1)."""
        return self.K / self.gamma

    @property
    def total_power(self) -> float:
        """Total radiated power, W: e³γ²B0²LI/(12π ε0 m² c²) (XDB 2.1: 0.633 E² B0² L I kW).

        An estimate: see :data:`lwrad.estimate.CAUTION`.
        """
        return (
            _sf.COEF_UNDULATOR_POWER_KW
            * 1e3
            * self.energy_gev**2
            * self.peak_field**2
            * self.length
            * self.current
        )

    @property
    def power_density_on_axis(self) -> float:
        """On-axis power density, W/mrad²: 7e²γ⁴B0NIG(K)/(32π ε0 m c) (XDB 2.1: 10.84 B0 E⁴ I N G(K)).

        An estimate: see :data:`lwrad.estimate.CAUTION`.
        """
        return (
            _sf.COEF_UNDULATOR_POWER_DENSITY
            * self.peak_field
            * self.energy_gev**4
            * self.current
            * self.n_periods
            * _sf.undulator_G(self.K)
        )

    def inputs(self) -> dict:
        """Inputs as ``{name: (value, unit)}``."""
        return {
            "energy": (self.energy_gev, "GeV"),
            "current": (self.current, "A"),
            "period": (self.period * 1e3, "mm"),
            "n_periods": (float(self.n_periods), "1"),
            "K": (self.K, "1"),
        }

    def __repr__(self) -> str:
        return (
            f"{type(self).__name__}(energy={self.energy!r}, current={self.current!r}, "
            f"period={self.period!r}, n_periods={self.n_periods!r}, K={self.K!r})"
        )

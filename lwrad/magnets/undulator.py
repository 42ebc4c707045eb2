"""Undulator field models: planar, elliptical and helical.

Field model
-----------
Each row of poles (vertical field By from poles above and below the beam,
horizontal field Bx from poles at the sides) is a sum of pole fields

    F(z) = Σ_j A_j cos(k_u (z − z_j)) w(z − z_j),      k_u = 2π/λ_u,

with pole centres z_j spaced by d = λ_u/2, signed amplitudes A_j (alternating
sign) and the pole window

    w(u) = ½ [erf((u + d/2)/σ) − erf((u − d/2)/σ)],      σ = λ_u/8,

a box of one pole width smoothed by a Gaussian. Because Σ_j w(u − j d) = 1
exactly (a box train convolved with a Gaussian), equal amplitudes give the
pure sinusoid B0 cos(k_u z) in the periodic part, while the ends fall off
smoothly; F is an entire function of z, so the tracker never steps across a
kink and a field map sampled from it is smooth. Each pole term is even in u,
so all poles have the same field integral and zero first moment: the first
and second field integrals are Σ_j A_j and Σ_j A_j z_j times the same
constant, and vanish exactly for the termination pattern below (up to the
truncation of the Gaussian tails at 7σ, ~1e-22 relative).

Terminations
------------
``terminations=True`` uses pole strengths 1/4, 3/4, 1, 1, …, 1, 3/4, 1/4 of
``peak_field`` with alternating signs (a common practice, no source): 2N − 2
full poles and two termination poles at each end, 2N + 2 poles in all, field
length ≈ (N + 1) λ_u. Σ A_j = 0 and Σ A_j z_j = 0, so an ideal device leaves
neither a net angle nor a net offset. ``terminations=False`` uses 2N full
poles: zero first integral, but a non-zero second integral (the trajectory
comes out displaced).

Off-axis field
--------------
``off_axis=False`` (default) gives the on-axis field at every (x, y): the usual
one-dimensional model, adequate for a filament beam on axis but not a
solution of Maxwell's equations off axis. ``off_axis=True`` gives the ideal
flat-pole field (poles infinitely wide): for the vertical-field row

    By + i Bz = F(z + i y),

the analytic continuation of the on-axis profile, which satisfies
∇·B = 0 and ∇×B = 0 exactly (real and imaginary parts of an analytic
function are harmonic conjugates). In the periodic part this is
By = B0 cosh(k_u y) cos(k_u z), Bz = −B0 sinh(k_u y) sin(k_u z). The
horizontal-field row likewise gives Bx + i Bz = F_x(z + i x).

Pole errors
-----------
``pole_error_rms`` multiplies every pole amplitude by (1 + ε_j) with ε_j
independent normal deviates of that rms, drawn from
``numpy.random.default_rng(seed)``. When ``seed`` is None a seed is drawn
and recorded in :meth:`to_dict`, so every device can be rebuilt.

Deflection parameter (X-ray Data Booklet sec. 2.1):
K = e B0 λ_u / (2π m c) ≈ 0.934 B0[T] λ_u[cm] for electrons.

Handedness (:class:`EllipticalUndulator`, :class:`HelicalUndulator`)
---------------------------------------------------------------------
In the periodic part By = B0y cos(k_u (z − z_0)) and
Bx = B0x cos(k_u (z − z_0) + phase). For ``phase`` in (0, π) the transverse
field vector turns in the positive sense about +z (from +x towards +y) as z
increases — a right-handed helix — and so does the transverse velocity of
the particle, whatever the sign of its charge. ``phase`` in (−π, 0) gives the
left-handed helix. ``HelicalUndulator(handedness="right")`` is phase = +π/2.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.special import erf

from lwrad.constants import c, e, m_e
from lwrad.errors import InputError
from lwrad.magnets.base import Magnet, check_finite, check_positive

__all__ = ["PlanarUndulator", "EllipticalUndulator", "HelicalUndulator", "deflection_parameter"]

# Gaussian smoothing of the pole window, in periods, and how far (in σ) its
# tails are kept: erfc(7) ≈ 4e-23, far below double precision of the field.
_SIGMA_PER_PERIOD = 1.0 / 8.0
_TAIL_SIGMAS = 7.0


def deflection_parameter(peak_field: float, period: float, mass: float = m_e, charge: float = e):
    """Undulator deflection parameter K = |q| B0 λ_u / (2π m c).

    Parameters
    ----------
    peak_field : float
        Peak field B0, T.
    period : float
        Period λ_u, m.
    mass, charge : float
        Particle rest mass (kg) and charge (C); default the electron.

    Returns
    -------
    float
        K (dimensionless). X-ray Data Booklet sec. 2.1: K = 0.934 B0[T] λ_u[cm].
    """
    return abs(charge) * peak_field * period / (2.0 * math.pi * mass * c)


def _pole_pattern(n_periods: int, terminations: bool) -> np.ndarray:
    if terminations:
        mags = np.concatenate(([0.25, 0.75], np.ones(2 * n_periods - 2), [0.75, 0.25]))
    else:
        mags = np.ones(2 * n_periods)
    signs = np.where(np.arange(mags.size) % 2 == 0, 1.0, -1.0)
    return mags * signs


class _PoleRow:
    """One row of poles (see the module docstring): signed amplitudes A_j (T)."""

    def __init__(self, period: float, amplitudes: np.ndarray, z_first: float):
        self.period = period
        self.d = period / 2.0
        self.k = 2.0 * math.pi / period
        self.sigma = _SIGMA_PER_PERIOD * period
        self.amplitudes = np.asarray(amplitudes, dtype=float)
        self.n = self.amplitudes.size
        self.z_first = z_first
        reach = self.d / 2.0 + _TAIL_SIGMAS * self.sigma
        self.n_side = int(math.ceil(reach / self.d))
        self.z_min = z_first - reach
        self.z_max = z_first + (self.n - 1) * self.d + reach
        # zero-padded so that neighbour indices past the ends need no masks
        self._padded = np.concatenate(
            (np.zeros(self.n_side), self.amplitudes, np.zeros(self.n_side))
        )
        self._padded_list = self._padded.tolist()

    def evaluate(self, w):
        """F(w) for real or complex w (m); zero outside [z_min, z_max] (real part)."""
        w = np.asarray(w)
        re = w.real
        inside = (re >= self.z_min) & (re <= self.z_max)
        centre = np.clip(
            np.rint((re - self.z_first) / self.d), -self.n_side, self.n - 1 + self.n_side
        )
        out = np.zeros(w.shape, dtype=w.dtype)
        half, inv_s = self.d / 2.0, 1.0 / self.sigma
        for m in range(-self.n_side, self.n_side + 1):
            j = centre.astype(np.int64) + m
            amp = self._padded[np.clip(j + self.n_side, 0, self._padded.size - 1)]
            u = w - (self.z_first + j * self.d)
            window = 0.5 * (erf((u + half) * inv_s) - erf((u - half) * inv_s))
            out = out + amp * np.cos(self.k * u) * window
        return np.where(inside, out, 0.0)

    def evaluate_real_scalar(self, z: float) -> float:
        if z < self.z_min or z > self.z_max:
            return 0.0
        centre = round((z - self.z_first) / self.d)
        half, inv_s, total = self.d / 2.0, 1.0 / self.sigma, 0.0
        for m in range(-self.n_side, self.n_side + 1):
            j = centre + m
            idx = j + self.n_side
            if idx < 0 or idx >= len(self._padded_list):
                continue
            amp = self._padded_list[idx]
            if amp == 0.0:
                continue
            u = z - (self.z_first + j * self.d)
            total += (
                amp
                * math.cos(self.k * u)
                * 0.5
                * (math.erf((u + half) * inv_s) - math.erf((u - half) * inv_s))
            )
        return total


def _check_n_periods(n_periods) -> int:
    try:
        n = int(n_periods)
    except (TypeError, ValueError):
        raise InputError(
            f"n_periods must be an integer, got {n_periods!r}", location="n_periods"
        ) from None
    if n != n_periods or n < 1:
        raise InputError(
            f"n_periods must be a positive integer, got {n_periods!r}", location="n_periods"
        )
    return n


def _resolve_seed(seed, pole_error_rms):
    if seed is None:
        if pole_error_rms == 0.0:
            return None
        return int(np.random.SeedSequence().entropy % (2**63))
    try:
        s = int(seed)
    except (TypeError, ValueError):
        raise InputError(f"seed must be an integer, got {seed!r}", location="seed") from None
    if s != seed or s < 0:
        raise InputError(f"seed must be a non-negative integer, got {seed!r}", location="seed")
    return s


class EllipticalUndulator(Magnet):
    """An undulator with a vertical and a horizontal field row and a phase between them.

    Parameters
    ----------
    period : float
        Period λ_u, m.
    n_periods : int
        Number of periods N (see the module docstring for the pole count).
    peak_field_y : float
        Peak vertical field B0y of the full poles, T (deflects in x).
    peak_field_x : float
        Peak horizontal field B0x of the full poles, T (deflects in y).
    phase : float
        Phase of Bx relative to By, rad: By ∝ cos(k_u z′), Bx ∝ cos(k_u z′ + phase).
        Positive phases give a right-handed helix (module docstring).
    terminations : bool, optional
        End poles 1/4, 3/4 that cancel the first and second field integrals.
    off_axis : bool, optional
        The exact flat-pole field off axis instead of the on-axis field everywhere.
    pole_error_rms : float, optional
        Relative rms of random pole-strength errors (e.g. 0.005 for 0.5 %).
    seed : int, optional
        Seed of the pole errors.
    z_center : float, optional
        Centre of the vertical-field row, m. The horizontal row is shifted by
        −phase/k_u so that the phase holds in the periodic part.

    Notes
    -----
    Field model, terminations, Maxwell-exact off-axis field and handedness:
    see :mod:`lwrad.magnets.undulator`.
    """

    def __init__(
        self,
        period,
        n_periods,
        peak_field_y,
        peak_field_x,
        phase,
        *,
        terminations: bool = True,
        off_axis: bool = False,
        pole_error_rms: float = 0.0,
        seed: int | None = None,
        z_center: float = 0.0,
    ):
        self._period = check_positive("period", period)
        self._n_periods = _check_n_periods(n_periods)
        self._b0y = check_finite("peak_field_y", peak_field_y)
        self._b0x = check_finite("peak_field_x", peak_field_x)
        self._phase = check_finite("phase", phase)
        self._terminations = bool(terminations)
        self._off_axis = bool(off_axis)
        self._pole_error_rms = check_positive("pole_error_rms", pole_error_rms, allow_zero=True)
        self._seed = _resolve_seed(seed, self._pole_error_rms)
        self._z_center = check_finite("z_center", z_center)
        pattern = _pole_pattern(self._n_periods, self._terminations)
        rng = np.random.default_rng(self._seed) if self._pole_error_rms > 0 else None

        def amplitudes(b0):
            amps = b0 * pattern
            if rng is not None:
                amps = amps * (1.0 + self._pole_error_rms * rng.standard_normal(pattern.size))
            return amps

        d = self._period / 2.0
        z_first = self._z_center - 0.5 * (pattern.size - 1) * d
        k = 2.0 * math.pi / self._period
        self._row_y = _PoleRow(self._period, amplitudes(self._b0y), z_first)
        self._row_x = (
            _PoleRow(self._period, amplitudes(self._b0x), z_first - self._phase / k)
            if self._b0x != 0.0
            else None
        )
        if self._b0y == 0.0:
            self._row_y = None
        self.period = self._period

    # -- descriptive ------------------------------------------------------------
    @property
    def n_periods(self) -> int:
        """Number of periods N."""
        return self._n_periods

    @property
    def pole_amplitudes_y(self) -> np.ndarray:
        """Signed amplitudes of the vertical-field poles, T (errors included)."""
        return np.zeros(0) if self._row_y is None else self._row_y.amplitudes.copy()

    @property
    def pole_amplitudes_x(self) -> np.ndarray:
        """Signed amplitudes of the horizontal-field poles, T (errors included)."""
        return np.zeros(0) if self._row_x is None else self._row_x.amplitudes.copy()

    def deflection_parameters(self, mass: float = m_e, charge: float = e) -> tuple[float, float]:
        """(K_y, K_x) of the full poles for a particle of ``mass``/``charge`` (default electron).

        K_y belongs to the vertical field B0y (horizontal deflection).
        """
        return (
            deflection_parameter(abs(self._b0y), self._period, mass, charge),
            deflection_parameter(abs(self._b0x), self._period, mass, charge),
        )

    @property
    def z_range(self) -> tuple[float, float]:
        rows = [r for r in (self._row_y, self._row_x) if r is not None]
        if not rows:
            return (self._z_center, self._z_center)
        return (min(r.z_min for r in rows), max(r.z_max for r in rows))

    def to_dict(self) -> dict:
        return {
            "type": type(self).__name__,
            "period": self._period,
            "n_periods": self._n_periods,
            "peak_field_y": self._b0y,
            "peak_field_x": self._b0x,
            "phase": self._phase,
            "terminations": self._terminations,
            "off_axis": self._off_axis,
            "pole_error_rms": self._pole_error_rms,
            "seed": self._seed,
            "z_center": self._z_center,
        }

    # -- field ------------------------------------------------------------------
    def _field(self, x, y, z):
        out = np.zeros(z.shape + (3,))
        if self._row_y is not None:
            if self._off_axis:
                f = self._row_y.evaluate(z + 1j * y)
                out[..., 1] += f.real
                out[..., 2] += f.imag
            else:
                out[..., 1] += self._row_y.evaluate(z)
        if self._row_x is not None:
            if self._off_axis:
                f = self._row_x.evaluate(z + 1j * x)
                out[..., 0] += f.real
                out[..., 2] += f.imag
            else:
                out[..., 0] += self._row_x.evaluate(z)
        return out

    def field_at(self, x, y, z):
        if self._off_axis and (x != 0.0 or y != 0.0):
            return super().field_at(x, y, z)
        by = 0.0 if self._row_y is None else self._row_y.evaluate_real_scalar(z)
        bx = 0.0 if self._row_x is None else self._row_x.evaluate_real_scalar(z)
        return bx, by, 0.0


def _one_peak_field(d: dict, peak_field: float) -> dict:
    """Replace the two fields and the phase of a description by one peak field.

    Parameters
    ----------
    d : dict
        :meth:`EllipticalUndulator.to_dict` of a planar or helical undulator (changed in place).
    peak_field : float
        The one peak field B0, T.

    Returns
    -------
    dict
        ``d``, with ``peak_field`` instead of ``peak_field_y``, ``peak_field_x`` and ``phase``.
    """
    for key in ("peak_field_y", "peak_field_x", "phase"):
        d.pop(key)
    d["peak_field"] = peak_field
    return d


class PlanarUndulator(EllipticalUndulator):
    """A planar undulator: vertical field By, horizontal deflection.

    Parameters
    ----------
    period : float
        Period λ_u, m.
    n_periods : int
        Number of periods N.
    peak_field : float
        Peak field B0 of the full poles, T. K = e B0 λ_u/(2π m c)
        (X-ray Data Booklet sec. 2.1).
    terminations, off_axis, pole_error_rms, seed, z_center
        As for :class:`EllipticalUndulator`.

    Notes
    -----
    See :mod:`lwrad.magnets.undulator` for the field model.
    """

    def __init__(
        self,
        period,
        n_periods,
        peak_field,
        *,
        terminations: bool = True,
        off_axis: bool = False,
        pole_error_rms: float = 0.0,
        seed: int | None = None,
        z_center: float = 0.0,
    ):
        super().__init__(
            period,
            n_periods,
            peak_field,
            0.0,
            0.0,
            terminations=terminations,
            off_axis=off_axis,
            pole_error_rms=pole_error_rms,
            seed=seed,
            z_center=z_center,
        )

    @property
    def peak_field(self) -> float:
        """Peak field B0, T."""
        return self._b0y

    @property
    def K(self) -> float:  # noqa: N802 - the trade's name
        """Deflection parameter for electrons, K = e B0 λ_u/(2π m_e c)."""
        return deflection_parameter(abs(self._b0y), self._period)

    @classmethod
    def from_K(cls, period, n_periods, K, **kwargs) -> PlanarUndulator:  # noqa: N803
        """Build from the electron deflection parameter K instead of the field."""
        k = check_positive("K", K, allow_zero=True)
        b0 = k * 2.0 * math.pi * m_e * c / (e * check_positive("period", period))
        return cls(period, n_periods, b0, **kwargs)

    def to_dict(self) -> dict:
        return _one_peak_field(super().to_dict(), self._b0y)


class HelicalUndulator(EllipticalUndulator):
    """A helical undulator: equal vertical and horizontal fields, phase ±π/2.

    Parameters
    ----------
    period : float
        Period λ_u, m.
    n_periods : int
        Number of periods N.
    peak_field : float
        Peak field of each row, T.
    handedness : {"right", "left"}, optional
        "right": phase +π/2 — field and path are right-handed helices, turning
        from +x towards +y as z increases (module docstring).
    terminations, off_axis, pole_error_rms, seed, z_center
        As for :class:`EllipticalUndulator`.
    """

    def __init__(
        self,
        period,
        n_periods,
        peak_field,
        *,
        handedness: str = "right",
        terminations: bool = True,
        off_axis: bool = False,
        pole_error_rms: float = 0.0,
        seed: int | None = None,
        z_center: float = 0.0,
    ):
        if handedness not in ("right", "left"):
            raise InputError(
                f"handedness must be 'right' or 'left', got {handedness!r}", location="handedness"
            )
        self._handedness = handedness
        phase = 0.5 * math.pi if handedness == "right" else -0.5 * math.pi
        super().__init__(
            period,
            n_periods,
            peak_field,
            peak_field,
            phase,
            terminations=terminations,
            off_axis=off_axis,
            pole_error_rms=pole_error_rms,
            seed=seed,
            z_center=z_center,
        )

    @property
    def handedness(self) -> str:
        """ "right" or "left"."""
        return self._handedness

    def to_dict(self) -> dict:
        d = _one_peak_field(super().to_dict(), self._b0y)
        d["handedness"] = self._handedness
        return d

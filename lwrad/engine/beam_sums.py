"""Running weighted sums of per-particle fields: incoherent and coherent parts.

Plain-array accumulators (no physics constants, no observers): the caller
adds one particle's complex field Ẽ_j, shape (n_e, ny, nx, 3), with its
weight w_j (real particles it stands for), in a fixed order, so the totals
are reproducible bit for bit.

Sums kept, per pixel
--------------------
* incoherent: Σ w_j J_j with the coherency (polarisation) matrix elements
  J = (|Ẽ_x|², |Ẽ_y|², |Ẽ_z|², Re Ẽ_xẼ_y*, Im Ẽ_xẼ_y*), and the moments
  needed for the standard error of the weighted mean of I = |Ẽ|²;
* coherent: Σ w_j Ẽ_j and the self terms Σ w_j² J_j (each macro-particle with itself).

Standard error of a weighted mean (the usual ratio-estimator form, e.g.
W. G. Cochran, Sampling Techniques, 3rd ed., Wiley 1977, sec. 6.4):
SE² = n_eff/(n_eff − 1) · Σ w_j² (I_j − Ī)² / (Σ w_j)², with Kish's
effective number n_eff = (Σ w)²/Σ w²; for equal weights it is s/√M.
Intensities are shifted by the first particle's before squaring so that the
variance does not cancel catastrophically.
"""

from __future__ import annotations

import numba as nb
import numpy as np

from lwrad.errors import InputError

__all__ = [
    "IncoherentSum",
    "CoherentSum",
    "COHERENCY_COMPONENTS",
    "coherency_moments",
    "coherency_moments_into",
]

#: Names of the coherency components accumulated by :class:`IncoherentSum`.
COHERENCY_COMPONENTS = ("xx", "yy", "zz", "re_xy", "im_xy")


def coherency_moments(field) -> np.ndarray:
    """(|Ẽ_x|², |Ẽ_y|², |Ẽ_z|², Re Ẽ_xẼ_y*, Im Ẽ_xẼ_y*), shape (5, n_e, ny, nx), of a field (n_e, ny, nx, 3)."""
    field = np.asarray(field)
    flat = np.ascontiguousarray(field, dtype=np.complex128).reshape(1, -1, 3)
    out = np.empty((5, 1, flat.shape[1]))
    coherency_moments_into(flat, out)
    return out.reshape((5,) + field.shape[:-1])


@nb.njit(nogil=True, cache=True)
def coherency_moments_into(field, out):
    """The moments of :func:`coherency_moments` of ``field`` (A, B, 3) into ``out`` (5, A, B).

    Any strides (views of larger arrays); one pass over the field instead of
    five strided numpy passes and a stack.
    """
    for a in range(field.shape[0]):
        for b in range(field.shape[1]):
            x = field[a, b, 0]
            y = field[a, b, 1]
            z = field[a, b, 2]
            out[0, a, b] = x.real * x.real + x.imag * x.imag
            out[1, a, b] = y.real * y.real + y.imag * y.imag
            out[2, a, b] = z.real * z.real + z.imag * z.imag
            out[3, a, b] = x.real * y.real + x.imag * y.imag
            out[4, a, b] = x.imag * y.real - x.real * y.imag


def _check_weight(weight):
    w = float(weight)
    if not np.isfinite(w) or w < 0:
        raise InputError(
            f"particle weights must be finite and >= 0, got {weight!r}", location="weights"
        )
    return w


def _check_field(field, shape):
    field = np.asarray(field)
    if field.ndim != 4 or field.shape[-1] != 3:
        raise InputError(f"a field must have shape (n_e, ny, nx, 3), got {field.shape}")
    if shape is not None and field.shape != shape:
        raise InputError(f"field shape {field.shape} differs from the first particle's {shape}")
    return field


class IncoherentSum:
    """Weighted mean of intensities over particles, with its standard error per pixel."""

    def __init__(self):
        self.shape = None
        self.count = 0
        self.sum_w = 0.0
        self.sum_w2 = 0.0
        self._coherency = None
        self._shift = None
        self._s1 = self._s2 = self._s11 = None

    def add(self, field, weight=1.0):
        """Add one particle's field Ẽ, shape (n_e, ny, nx, 3), with weight w (≥ 0)."""
        w = _check_weight(weight)
        field = _check_field(field, self.shape)
        comps = coherency_moments(field)
        intensity = comps[0] + comps[1] + comps[2]
        if self.shape is None:
            self.shape = field.shape
            self._coherency = np.zeros_like(comps)
            self._shift = intensity.copy()
            self._s1 = np.zeros_like(intensity)  # Σ w (I − K)
            self._s2 = np.zeros_like(intensity)  # Σ w² (I − K)
            self._s11 = np.zeros_like(intensity)  # Σ w² (I − K)²
        d = intensity - self._shift
        self._coherency += w * comps
        self._s1 += w * d
        self._s2 += (w * w) * d
        self._s11 += (w * w) * d * d
        self.sum_w += w
        self.sum_w2 += w * w
        self.count += 1

    def _require(self):
        if self.count == 0 or not self.sum_w > 0:
            raise InputError(
                "no particles with positive weight were added (weights sum to zero)",
                location="weights",
            )

    @property
    def effective_count(self) -> float:
        """Kish's effective number of particles (Σw)²/Σw²."""
        self._require()
        return self.sum_w**2 / self.sum_w2

    def coherency(self) -> np.ndarray:
        """Weighted mean coherency components, shape (5, n_e, ny, nx), see :data:`COHERENCY_COMPONENTS`."""
        self._require()
        return self._coherency / self.sum_w

    def mean(self) -> np.ndarray:
        """Weighted mean intensity Σw|Ẽ|²/Σw, shape (n_e, ny, nx)."""
        self._require()
        return (self._coherency[0] + self._coherency[1] + self._coherency[2]) / self.sum_w

    def total(self) -> np.ndarray:
        """Σ w |Ẽ|², shape (n_e, ny, nx)."""
        self._require()
        return self._coherency[0] + self._coherency[1] + self._coherency[2]

    def standard_error(self) -> np.ndarray:
        """Standard error of :meth:`mean` per pixel (NaN with fewer than two effective particles)."""
        self._require()
        n_eff = self.effective_count
        if self.count < 2 or not n_eff > 1.0 + 1e-12:
            return np.full(self.shape[:3], np.nan)
        dbar = self._s1 / self.sum_w
        ss = self._s11 - 2.0 * dbar * self._s2 + dbar * dbar * self.sum_w2
        ss = np.maximum(ss, 0.0)
        return np.sqrt(n_eff / (n_eff - 1.0) * ss) / self.sum_w


class CoherentSum:
    """Σ w_j Ẽ_j and the self terms Σ w_j² |Ẽ_j|² over particles."""

    def __init__(self):
        self.shape = None
        self.count = 0
        self.sum_w = 0.0
        self._field = None
        self._self = None

    def add(self, field, weight=1.0):
        """Add one particle's field Ẽ, shape (n_e, ny, nx, 3), with weight w (≥ 0)."""
        w = _check_weight(weight)
        field = _check_field(field, self.shape)
        if self.shape is None:
            self.shape = field.shape
            self._field = np.zeros(field.shape, dtype=complex)
            self._self = np.zeros((5,) + field.shape[:3])
        self._field += w * field
        self._self += (w * w) * coherency_moments(field)
        self.sum_w += w
        self.count += 1

    def _require(self):
        if self.count == 0 or not self.sum_w > 0:
            raise InputError(
                "no particles with positive weight were added (weights sum to zero)",
                location="weights",
            )

    def field(self) -> np.ndarray:
        """Σ w Ẽ, complex, shape (n_e, ny, nx, 3)."""
        self._require()
        return self._field

    def intensity(self) -> np.ndarray:
        """|Σ w Ẽ|², shape (n_e, ny, nx)."""
        self._require()
        return np.sum(np.abs(self._field) ** 2, axis=-1)

    def moments(self) -> np.ndarray:
        """Coherency moments of Σ w Ẽ, shape (5, n_e, ny, nx)."""
        self._require()
        return coherency_moments(self._field)

    def self_moments(self) -> np.ndarray:
        """Σ w² × coherency moments of each Ẽ, shape (5, n_e, ny, nx): what each macro-particle adds with itself."""
        self._require()
        return self._self

    def self_terms(self) -> np.ndarray:
        """Σ w² |Ẽ|², shape (n_e, ny, nx)."""
        self._require()
        return self._self[0] + self._self[1] + self._self[2]

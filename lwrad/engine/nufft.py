"""Type-1 non-uniform fast Fourier transform by Gaussian gridding (private).

Computes, for real points x_k and complex strengths c_k (several strength
vectors sharing the same points),

    S(m) = Σ_k c_k e^{i m x_k},   m = m_lo … m_lo + M − 1,  m_lo = −(M // 2),

in O(N·w + M log M) instead of the O(N·M) of the direct sum. The radiation
integral over equally spaced photon energies ω_j = ω_ref + m Δω is such a sum
with x_k = Δω φ_k and c_k = J_k e^{iω_ref φ_k} (see
:func:`lwrad.engine._fd_kernels.far_spread_pixels`).

Method (fast Gaussian gridding: L. Greengard and J.-Y. Lee, SIAM Rev. 46
(2004) 443; A. Dutt and V. Rokhlin, SIAM J. Sci. Comput. 14 (1993) 1368):
with the 2π-periodic Gaussian g(x) = Σ_l exp(−(x − 2πl)²/(4τ)), whose Fourier
coefficients are ĝ_m = √(τ/π) e^{−τm²}, the function h(x) = Σ_k c_k g(x + x_k)
has Fourier coefficients ĝ_m S(m). h is sampled on an R-times oversampled grid
of M_r = R·M points (spreading each point onto the 2·``MSP`` nearest grid
points), its coefficients come from one FFT, and S(m) = FFT(h)_m / (M_r ĝ_m).
With τ = π·MSP/(M²R(R − ½)) the Gaussian cut at MSP grid steps leaves
e^{−π MSP (R−½)/R} and the deconvolution amplifies by at most e^{π MSP/(4R(R−½))}:
for R = 2 and MSP = 12, e^{−9π}·e^{π} ≈ 1e-11 relative to Σ|c_k| (Greengard and
Lee give ≈1e-12 for these parameters — quoted from memory; measured here against the direct sum
in ``tests/test_nufft.py``).

The spreading evaluates the Gaussian at the 2·MSP grid points of one point
with two exponentials and a short product (e^{−(lΔ−ξ)²/4τ} = e^{−ξ²/4τ}
(e^{Δξ/2τ})^l e^{−l²Δ²/4τ}); the scratch holds one row per strength column, so
that a point's 2·MSP updates of a column are one contiguous, vectorised run
(the arithmetic, not the stores, bounds the spreading: rows of 12 interleaved
columns ran at about one scalar multiply-add per cycle, measured 2× slower).

Sums whose strengths are a quadratic polynomial in the mode,
Σ_k e^{imx_k}(A_k + (im)B_k + (im)²C_k), are spread in one pass with the
Gaussian and its first two derivatives (:func:`spread_poly`): the radiation
integral's node sums over three orders, weighted by powers of iω, then cost
one strength vector instead of three.
"""

from __future__ import annotations

import math

import numba as nb
import numpy as np

__all__ = [
    "MSP",
    "MSP_WIDE",
    "OVERSAMPLING",
    "Gridding",
    "Type3",
    "spread",
    "spread_poly",
    "fold",
    "interpolate",
]

MSP = 12  # half-width of the Gaussian in grid points (≈1e-11 relative, module docstring)
MSP_WIDE = 16  # e^{−12π}·e^{4π/3} ≈ 3e-15: at the level of double rounding
OVERSAMPLING = 2
SINC_OVERSAMPLING = 2.0  # ν-grid of Type3: σ times the Nyquist rate of the band-limited sum
SINC_HALF = 24  # Type3 interpolation half-width, samples: ≈1e-11 of Σ|c| at σ = 2 (tests)


class Gridding:
    """Parameters of one transform size: M modes on an oversampled grid."""

    def __init__(self, n_modes: int, msp: int = MSP):
        import scipy.fft

        m = int(n_modes)
        self.msp = msp = int(msp)
        self.n_modes = m
        self.m_lo = -(m // 2)
        # at least R·M points, of a size the FFT handles fast; τ for the actual ratio
        self.n_grid = scipy.fft.next_fast_len(OVERSAMPLING * m)
        ratio = self.n_grid / m
        self.delta = 2.0 * math.pi / self.n_grid
        self.tau = math.pi * msp / (m * m * ratio * (ratio - 0.5))
        ll = np.arange(-msp + 1, msp + 1, dtype=float)
        # e^{−l²Δ²/4τ}, l = −msp+1 … msp (index l + msp − 1); its length sets the spreading width
        self.e3 = np.exp(-((ll * self.delta) ** 2) / (4.0 * self.tau))
        modes = np.arange(self.m_lo, self.m_lo + m)
        self.index = np.mod(modes, self.n_grid)
        ghat = math.sqrt(self.tau / math.pi) * np.exp(-self.tau * modes.astype(float) ** 2)
        self.scale = 1.0 / (self.n_grid * ghat)

    def empty_grids(self, n_sets: int, n_complex: int) -> np.ndarray:
        """Folded grids (n_sets, n_grid, 2·n_complex), real, (re, im) pairs side by side."""
        return np.empty((n_sets, self.n_grid, 2 * n_complex))

    def scratch(self, n_real: int) -> np.ndarray:
        """Spreading scratch (n_real, n_grid + 2·msp) for :func:`spread` and :func:`spread_poly`."""
        return np.empty((n_real, self.n_grid + 2 * self.msp))

    def transform(self, grids: np.ndarray) -> np.ndarray:
        """FFT of folded grids along the grid axis: (n_sets, n_grid, C) complex.

        S(m) = out[:, index[m], c] · scale[m].
        """
        import scipy.fft

        return scipy.fft.fft(grids.view(np.complex128), axis=1, overwrite_x=True, workers=1)


@nb.njit(nogil=True, cache=True, inline="always", error_model="numpy")
def _gauss_weights(xk, n_grid, delta, inv_delta, inv4t, e3, w):
    """Gaussian at the 2·msp grid points around point x_k: w[q] = g((j0 + q − msp + 1)Δ − y).

    y = −x_k mod 2π, j0 = ⌊y/Δ⌋, g(d) = e^{−d²/4τ} = e^{−ξ²/4τ} e^{lc} e3[l] with
    ξ = y − j0Δ, c = 2Δξ/4τ and l = q − msp + 1. Returns (row of w[0] in the
    scratch, ξ). The powers e^{qc} come in four interleaved chains (blocks of
    four), not one: a single chain of 2·msp dependent multiplies was half the
    spreading's time.
    """
    two_pi = 2.0 * math.pi
    width = e3.shape[0]
    msp = width // 2
    y = -xk
    y -= two_pi * math.floor(y * (1.0 / two_pi))
    j0 = int(y * inv_delta)  # ξ may leave [0, Δ) by a rounding: the weights stay exact
    if j0 >= n_grid:  # y rounded up to 2π
        j0 = n_grid - 1
    if j0 < 0:
        j0 = 0
    xi = y - j0 * delta
    cc = 2.0 * delta * xi * inv4t
    start = math.exp(-xi * xi * inv4t - (msp - 1) * cc)  # q = 0
    e1 = math.exp(cc)
    e2 = e1 * e1
    e4 = e2 * e2
    p0 = start
    p1 = start * e1
    p2 = start * e2
    p3 = p1 * e2
    blocks = width // 4
    for m in range(blocks):
        q = 4 * m
        w[q] = p0 * e3[q]
        w[q + 1] = p1 * e3[q + 1]
        w[q + 2] = p2 * e3[q + 2]
        w[q + 3] = p3 * e3[q + 3]
        p0 *= e4
        p1 *= e4
        p2 *= e4
        p3 *= e4
    for q in range(4 * blocks, width):
        w[q] = start * e3[q] * math.exp(q * cc)
    # row of grid point j0 + l is j0 + l + msp; l = −msp+1 → j0 + 1
    return j0 + 1, xi


@nb.njit(nogil=True, cache=True, fastmath={"contract"}, error_model="numpy")
def spread(x, c, scratch, delta, tau, e3):
    """Spread strengths ``c`` (N, S) at points ``x`` (N,) onto ``scratch`` (S, n_grid + 2·msp).

    msp = len(e3)/2 (:class:`Gridding`). The scratch is zeroed first. A point
    enters as y = −x mod 2π (so that the FFT gives Σ c e^{+imx}); column j + msp
    holds grid point j, the columns outside [msp, msp + n_grid) are folded back
    by :func:`fold`. Each strength column's 2·msp updates are one contiguous,
    vectorised run.
    """
    width = e3.shape[0]
    n_grid = scratch.shape[1] - width
    inv4t = 1.0 / (4.0 * tau)
    inv_delta = 1.0 / delta
    scratch[:, :] = 0.0
    w = np.empty(width)
    for k in range(x.shape[0]):
        base, _ = _gauss_weights(x[k], n_grid, delta, inv_delta, inv4t, e3, w)
        for s in range(c.shape[1]):
            cs = c[k, s]
            row = scratch[s, base : base + width]
            for q in range(width):
                row[q] += w[q] * cs


@nb.njit(nogil=True, cache=True, fastmath={"contract"}, error_model="numpy")
def spread_poly(x, a, scratch, delta, tau, e3):
    """Spread for T(m) = Σ_k e^{imx_k} (A_k + (im) B_k + (im)² C_k) in one pass.

    ``a`` (N, 3, S): A, B, C of every point (S real columns, complex values as
    (re, im) pairs). The Gaussian's derivatives carry the powers of (im): spreading
    g^{(p)}(jΔ − y_k) gives (im)^p ĝ_m e^{imx_k} after the FFT (integration by
    parts), with g′(d) = −d/(2τ)·g and g″(d) = (d²/(4τ²) − 1/(2τ))·g. So a sum
    whose coefficients are a quadratic polynomial in the mode costs one strength
    vector instead of three. Scratch (S, n_grid + 2·msp) and folding as :func:`spread`.
    """
    width = e3.shape[0]
    msp = width // 2
    n_grid = scratch.shape[1] - width
    inv2t = 1.0 / (2.0 * tau)
    inv4t = 0.5 * inv2t
    inv_delta = 1.0 / delta
    scratch[:, :] = 0.0
    w = np.empty(width)
    u = np.empty(width)
    lq = np.empty(width)  # −d/(2τ) = lq[q] + ξ/(2τ), d = grid point − y
    for q in range(width):
        lq[q] = (msp - 1 - q) * delta * inv2t
    for k in range(x.shape[0]):
        base, xi = _gauss_weights(x[k], n_grid, delta, inv_delta, inv4t, e3, w)
        xs = xi * inv2t
        for q in range(width):
            u[q] = lq[q] + xs
        for s in range(a.shape[2]):
            # A g + B g′ + C g″ = g (A − C/(2τ) + u (B + u C)), u = −d/(2τ)
            cb = a[k, 1, s]
            cc = a[k, 2, s]
            ca = a[k, 0, s] - inv2t * cc
            row = scratch[s, base : base + width]
            for q in range(width):
                row[q] += w[q] * (ca + u[q] * (cb + u[q] * cc))


@nb.njit(nogil=True, cache=True)
def fold(scratch, out):
    """Fold the padding of ``scratch`` (S, n_grid + 2·msp) onto the periodic grid ``out`` (n_grid, S)."""
    n_grid = out.shape[0]
    msp = (scratch.shape[1] - n_grid) // 2
    for s in range(out.shape[1]):
        for j in range(n_grid):
            out[j, s] = scratch[s, msp + j]
        for j in range(msp):
            # padding below grid point 0 wraps to the top, above n_grid − 1 to the bottom
            out[n_grid - msp + j, s] += scratch[s, j]
            out[j, s] += scratch[s, msp + n_grid + j]


class Type3:
    """Sums at arbitrary frequencies: S(ω_j) = Σ_k c_k e^{iω_jφ_k}, φ_k ∈ [0, Φ], ω_j ∈ [ω_a, ω_b].

    With ω = ω_c + ν (ω_c the band's centre) and c'_k = c_k e^{iω_cφ_k},
    T(ν) = Σ_k c'_k e^{iνφ_k} is band-limited: e^{−iνΦ/2}T(ν) has its spectrum in
    [−Φ/2, Φ/2]. T is computed on the uniform grid ν_m = mΔν, Δν = 2π/(σΦ), by the
    type-1 transform (:class:`Gridding`, points Δν φ_k, strengths c'_k), and at
    each ω_j by Gaussian-regularised Shannon interpolation over 2·``SINC_HALF``
    samples, sinc(π d) e^{−d²/(2r²)} with r² = (K − 1)/(π − π/σ) (the regularised
    sampling formula, L. Qian, Proc. Amer. Math. Soc. 131 (2003) 1169 — reference
    and constant quoted from memory, so both are checked here by measurement:
    ≈1e-11 of Σ|c| for σ = 2, K = 24, ``tests/test_nufft.py``).
    """

    @staticmethod
    def n_modes(omega, phi_span: float) -> int:
        """Modes of the uniform ν grid for these energies and span (its FFT has ~2× as many points)."""
        dnu = 2.0 * math.pi / (SINC_OVERSAMPLING * float(phi_span))
        half = 0.5 * (float(np.max(omega)) - float(np.min(omega)))
        return 2 * (int(math.ceil(half / dnu)) + SINC_HALF + 1) + 1

    def __init__(self, omega, phi_span: float, msp: int = MSP):
        omega = np.asarray(omega, dtype=float)
        lo, hi = float(omega.min()), float(omega.max())
        self.omega_c = 0.5 * (lo + hi)
        self.phi_span = float(phi_span)
        self.dnu = 2.0 * math.pi / (SINC_OVERSAMPLING * self.phi_span)
        self.grid = Gridding(self.n_modes(omega, phi_span), msp)
        self.u = (omega - self.omega_c) / self.dnu
        self.r2 = (SINC_HALF - 1) / (math.pi - math.pi / SINC_OVERSAMPLING)
        self.shift = 0.5 * self.dnu * self.phi_span

    def values(self, spec):
        """S at the target frequencies from transformed grids: (n_sets, n_targets, C) complex."""
        out = np.empty((spec.shape[0], self.u.size, spec.shape[2]), dtype=np.complex128)
        g = self.grid
        interpolate(spec, g.index, g.scale, g.m_lo, self.u, SINC_HALF, self.r2, self.shift, out)
        return out


@nb.njit(nogil=True, cache=True)
def interpolate(spec, index, scale, m_lo, u, half, r2, shift, out):
    """Gaussian-regularised sinc interpolation of T_m = spec[:, index[m − m_lo]]·scale at ν = u·Δν.

    The samples are centred by e^{−i m·shift} (shift = ΔνΦ/2) and the result
    moved back by e^{i u·shift}; out : (n_sets, n_targets, C).
    """
    for j in range(u.shape[0]):
        m0 = int(math.floor(u[j]))
        back = complex(math.cos(u[j] * shift), math.sin(u[j] * shift))
        for p in range(spec.shape[0]):
            for c in range(spec.shape[2]):
                out[p, j, c] = 0.0
        for mm in range(m0 - half + 1, m0 + half + 1):
            d = u[j] - mm
            if d == 0.0:
                w = 1.0
            else:
                w = math.sin(math.pi * d) / (math.pi * d)
            w *= math.exp(-d * d / (2.0 * r2)) * scale[mm - m_lo]
            wc = w * complex(math.cos(mm * shift), -math.sin(mm * shift))
            col = index[mm - m_lo]
            for p in range(spec.shape[0]):
                for c in range(spec.shape[2]):
                    out[p, j, c] += wc * spec[p, col, c]
        for p in range(spec.shape[0]):
            for c in range(spec.shape[2]):
                out[p, j, c] *= back

"""Compiled kernels of the frequency-domain radiation integral (private).

All kernels take plain float64 arrays, write into arrays allocated by the
caller and release the GIL (``nogil=True``), so that pixel chunks can run in
threads. Orchestration (sampling, tails, chunking, units) lives in
:mod:`lwrad.engine.frequency`.

The quadrature
--------------
The radiation integral is written over the observer phase variable
φ = t − n·r/c (far field) or φ = t + R/c (near field), dφ/dt = κ = 1 − n·β:

    I(ω) = ∫ f(φ) e^{iωφ} dφ,   f = (integrand in t)/κ.

Over one step [φ_k, φ_{k+1}] (Δ = φ_{k+1} − φ_k, s = (φ − φ_k)/Δ) the phase is
exactly linear in φ and the amplitude is a polynomial q(s) = Σ c_m s^m:

* far field — a quartic with q = f and dq/dφ = f' at both ends and the exact
  step integral ∫ f dφ = ΔG (f = dG/dφ with G = (n − β)/κ, transverse part;
  f' from d²β/dt²): error O(Δ⁶) per unit length (measured: 16 → 32 samples
  per undulator period reduce the error ≈ 60×);
* near field — a quadratic with q = f at both ends and ∫ f dφ from two-point
  Gauss–Legendre quadrature in t (f is the Liénard–Wiechert field): O(Δ⁴).

The step integral Δ e^{iωφ_k} Σ_m c_m M_m(θ), θ = ωΔ, with the moments
M_m(θ) = ∫₀¹ s^m e^{iθs} ds (upward recurrence for θ ≥ 1, Taylor series
below) is exact for that amplitude (a Filon-type rule; L. N. G. Filon, Proc.
R. Soc. Edinburgh 49 (1928) 38). The error does not grow with the phase
advance per step, only with the amplitude's variation; at ω → 0 the rule
reproduces ∫ f dφ. When every step advances by θ ≥ 0.05 (quadratic: θ ≥ 0.05^(5/3),
its cancellation goes as ε/θ³ instead of ε/θ⁵) the same sum is
evaluated by repeated integration by parts as a node sum of the jumps of
q^(m) times e^{iωφ_k}/(iω)^{m+1}: a few multiply-adds per sample and energy
(phasors e^{iωφ_k} by recurrence over equally spaced energies), the fast path.

Phase accuracy: φ_k − φ_0 is accumulated from κ (computed without
cancellation from 1/γ² and the angle between n and β) rather than formed as
t − n·r/c, which for γ ~ 5000 loses ~8 significant digits.
"""

from __future__ import annotations

import math

import numba as nb
import numpy as np

from lwrad.engine.nufft import fold, spread_poly

__all__ = [
    "far_amplitudes",
    "near_amplitudes",
    "filon_sum",
    "quadratic_coefficients",
    "quartic_coefficients",
    "far_field_pixels",
    "far_spread_pixels",
    "far_nufft_ends",
    "node_spread",
    "nufft_node_sums",
    "far_power_pixels",
    "power_samples",
    "POWER_ROWS",
    "near_power_pixels",
    "lienard_energy",
    "tail_times",
    "near_pixel_setup",
]

_SERIES_THETA = 1.0  # below: Taylor series of the moments; above: upward recurrence (loss ≤ 4! ε)
_N_SERIES = 20  # 1/20! ≈ 4e-19: series truncation below double rounding
_THETA_JUMP = 0.05  # node-sum form when every step advances ≥ 0.05 rad (loss ≲ ε/θ⁵ ≈ 3e6 ε)
# A quadratic has jumps only up to q'' (rounding ε|f|/Δ², weighted 1/ω³): loss ≲ ε/θ³, the
# same 3e6 ε bound as the quartic's at θ = 0.05^(5/3) ≈ 0.0068.
_THETA_JUMP_QUAD = _THETA_JUMP ** (5.0 / 3.0)
_INV_FACT = np.array([1.0 / math.factorial(j) for j in range(_N_SERIES)])


@nb.njit(nogil=True, cache=True, inline="always")
def _kappa(nx, ny, nz, bx, by, bz, ig2):
    # κ = 1 − n·β = (1 − |β|) + |β| |n − β̂|²/2, with 1 − |β| = (1/γ²)/(1 + |β|)
    b = math.sqrt(bx * bx + by * by + bz * bz)
    if b == 0.0:
        return 1.0
    dx = nx - bx / b
    dy = ny - by / b
    dz = nz - bz / b
    return ig2 / (1.0 + b) + 0.5 * b * (dx * dx + dy * dy + dz * dz)


@nb.njit(nogil=True, cache=True)
def far_amplitudes(n, t, r, beta, bdot, bddot, ig2, c_light, phi, f, fp, dg):
    """Far-field phase, amplitude and step integrals for one direction.

    Parameters
    ----------
    n : (3,) unit direction. t : (N,) s. r : (N, 3) m. beta, bdot, bddot : (N, 3)
        β, dβ/dt (1/s), d²β/dt² (1/s²). ig2 : (N,) 1/γ². c_light : m/s.
    phi : (N,) out, s, φ_k − φ_0. f : (N, 2) out, (x, y) of n×((n−β)×β̇)/κ³ (1/s),
        the amplitude per dφ. fp : (N, 2) out, df/dφ (1/s²). dg : (N−1, 2) out,
        ΔG of G = (n − β)/κ (x, y), whose φ-derivative is f exactly.

    Returns
    -------
    float
        φ_0 = t_0 − n·r_0/c, s (absolute phase reference).
    """
    nx, ny, nz = n[0], n[1], n[2]
    npt = t.shape[0]
    gx_prev = 0.0
    gy_prev = 0.0
    kap_prev = 0.0
    kd_prev = 0.0
    kdd_prev = 0.0
    for k in range(npt):
        bx, by, bz = beta[k, 0], beta[k, 1], beta[k, 2]
        ax, ay, az = bdot[k, 0], bdot[k, 1], bdot[k, 2]
        kap = _kappa(nx, ny, nz, bx, by, bz, ig2[k])
        ndot = nx * ax + ny * ay + nz * az
        inv3 = 1.0 / (kap * kap * kap)
        vx = (nx - bx) * ndot - ax * kap
        vy = (ny - by) * ndot - ay * kap
        f[k, 0] = vx * inv3
        f[k, 1] = vy * inv3
        # d/dt of V = (n−β)(n·β̇) − β̇κ is (n−β)(n·β̈) − β̈κ (the β̇ terms cancel)
        jx, jy, jz = bddot[k, 0], bddot[k, 1], bddot[k, 2]
        ndd = nx * jx + ny * jy + nz * jz
        c4 = 3.0 * ndot * inv3 / kap
        fp[k, 0] = (((nx - bx) * ndd - jx * kap) * inv3 + vx * c4) / kap
        fp[k, 1] = (((ny - by) * ndd - jy * kap) * inv3 + vy * c4) / kap
        gx = (nx - bx) / kap
        gy = (ny - by) / kap
        kd = -ndot  # dκ/dt
        kdd = -ndd  # d²κ/dt²
        if k == 0:
            phi[0] = 0.0
        else:
            h = t[k] - t[k - 1]
            # integral of φ' = κ exact for the quintic Hermite interpolant of κ (κ, κ', κ'' at both ends)
            phi[k] = phi[k - 1] + h * (
                0.5 * (kap_prev + kap) + h * ((kd_prev - kd) / 10.0 + h * (kdd_prev + kdd) / 120.0)
            )
            dg[k - 1, 0] = gx - gx_prev
            dg[k - 1, 1] = gy - gy_prev
        gx_prev, gy_prev, kap_prev, kd_prev, kdd_prev = gx, gy, kap, kd, kdd
    return t[0] - (nx * r[0, 0] + ny * r[0, 1] + nz * r[0, 2]) / c_light


@nb.njit(nogil=True, cache=True, error_model="numpy")
def _lw_field(px, py, pz, rx, ry, rz, bx, by, bz, ax, ay, az, ig2, c_light, out):
    # Liénard–Wiechert field per q/(4πε0) and κ at the retarded point (Jackson 14.14);
    # κ as in _kappa, with |β|, β̂ and 1/R formed once (an observer on the path gives
    # non-finite values, which the callers refuse)
    dx = px - rx
    dy = py - ry
    dz = pz - rz
    rr = math.sqrt(dx * dx + dy * dy + dz * dz)
    inv_r = 1.0 / rr
    nx, ny, nz = dx * inv_r, dy * inv_r, dz * inv_r
    b = math.sqrt(bx * bx + by * by + bz * bz)
    # n − β = (n − β̂) + β̂ (1 − |β|): keeps the small z component accurate
    omb = ig2 / (1.0 + b)
    if b > 0.0:
        inv_b = 1.0 / b
        ux, uy, uz = bx * inv_b, by * inv_b, bz * inv_b
        ex, ey, ez = nx - ux, ny - uy, nz - uz
        kap = omb + 0.5 * b * (ex * ex + ey * ey + ez * ez)
        mx = ex + ux * omb
        my = ey + uy * omb
        mz = ez + uz * omb
    else:
        kap = 1.0
        mx, my, mz = nx, ny, nz
    ndot = nx * ax + ny * ay + nz * az
    inv3 = 1.0 / (kap * kap * kap)
    cv = ig2 * inv3 * inv_r * inv_r
    ca = inv3 * inv_r / c_light
    out[0] = mx * cv + (mx * ndot - ax * kap) * ca
    out[1] = my * cv + (my * ndot - ay * kap) * ca
    out[2] = mz * cv + (mz * ndot - az * kap) * ca
    return kap, rr


@nb.njit(nogil=True, cache=True, error_model="numpy")
def near_amplitudes(x, t, r, beta, bdot, ig2, rg, betag, bdotg, ig2g, c_light, phi, f, dg):
    """Near-field phase, amplitude (the time-domain field) and step integrals.

    Parameters
    ----------
    x : (3,) observer point, m. t, r, beta, bdot, ig2 : samples (N,…).
    rg, betag, bdotg : (N−1, 2, 3) and ig2g : (N−1, 2) the trajectory at the two
        Gauss–Legendre points of every step, t_k + h (1 ∓ 1/√3)/2.
    phi : (N,) out, φ_k − φ_0 with φ = t + R/c, s. f : (N, 3) out, E·4πε0/q at
        observer time φ (Liénard–Wiechert, V/m per (q/4πε0)). dg : (N−1, 3) out,
        ∫ f dφ over each step.

    Returns
    -------
    float
        φ_0 = t_0 + R_0/c, s.
    """
    npt = t.shape[0]
    e = np.empty(3)
    e2 = np.empty(3)
    kap0, r0 = _lw_field(
        x[0],
        x[1],
        x[2],
        r[0, 0],
        r[0, 1],
        r[0, 2],
        beta[0, 0],
        beta[0, 1],
        beta[0, 2],
        bdot[0, 0],
        bdot[0, 1],
        bdot[0, 2],
        ig2[0],
        c_light,
        e,
    )
    f[0, 0], f[0, 1], f[0, 2] = e[0], e[1], e[2]
    phi[0] = 0.0
    for k in range(npt - 1):
        h = t[k + 1] - t[k]
        ka, _ = _lw_field(
            x[0],
            x[1],
            x[2],
            rg[k, 0, 0],
            rg[k, 0, 1],
            rg[k, 0, 2],
            betag[k, 0, 0],
            betag[k, 0, 1],
            betag[k, 0, 2],
            bdotg[k, 0, 0],
            bdotg[k, 0, 1],
            bdotg[k, 0, 2],
            ig2g[k, 0],
            c_light,
            e,
        )
        kb, _ = _lw_field(
            x[0],
            x[1],
            x[2],
            rg[k, 1, 0],
            rg[k, 1, 1],
            rg[k, 1, 2],
            betag[k, 1, 0],
            betag[k, 1, 1],
            betag[k, 1, 2],
            bdotg[k, 1, 0],
            bdotg[k, 1, 1],
            bdotg[k, 1, 2],
            ig2g[k, 1],
            c_light,
            e2,
        )
        # ∫ f dφ = ∫ E κ dt, two-point Gauss–Legendre in t
        for i in range(3):
            dg[k, i] = 0.5 * h * (e[i] * ka + e2[i] * kb)
        phi[k + 1] = phi[k] + 0.5 * h * (ka + kb)
        _lw_field(
            x[0],
            x[1],
            x[2],
            r[k + 1, 0],
            r[k + 1, 1],
            r[k + 1, 2],
            beta[k + 1, 0],
            beta[k + 1, 1],
            beta[k + 1, 2],
            bdot[k + 1, 0],
            bdot[k + 1, 1],
            bdot[k + 1, 2],
            ig2[k + 1],
            c_light,
            e,
        )
        f[k + 1, 0], f[k + 1, 1], f[k + 1, 2] = e[0], e[1], e[2]
    return t[0] + r0 / c_light


@nb.njit(nogil=True, cache=True)
def quadratic_coefficients(phi, f, dg, coef):
    """Per-step amplitude polynomial q(s) = Σ c_m s^m from end values and step integrals.

    q(0) = f_k, q(1) = f_{k+1}, ∫₀¹ q ds = dg_k/Δ_k (a quadratic; c3 = c4 = 0).
    coef : (N−1, C, 5) out.
    """
    for k in range(phi.shape[0] - 1):
        d = phi[k + 1] - phi[k]
        for i in range(f.shape[1]):
            mean = dg[k, i] / d
            coef[k, i, 0] = f[k, i]
            coef[k, i, 1] = 6.0 * mean - 4.0 * f[k, i] - 2.0 * f[k + 1, i]
            coef[k, i, 2] = 3.0 * (f[k, i] + f[k + 1, i]) - 6.0 * mean
            coef[k, i, 3] = 0.0
            coef[k, i, 4] = 0.0


@nb.njit(nogil=True, cache=True)
def quartic_coefficients(phi, f, fp, dg, coef):
    """Per-step quartic q(s) from end values, end derivatives (d/dφ) and step integrals.

    q(0) = f_k, q(1) = f_{k+1}, q'(0) = Δ f'_k, q'(1) = Δ f'_{k+1}, ∫₀¹ q ds = dg_k/Δ.
    coef : (N−1, C, 5) out.
    """
    for k in range(phi.shape[0] - 1):
        d = phi[k + 1] - phi[k]
        for i in range(f.shape[1]):
            f0 = f[k, i]
            d0 = d * fp[k, i]
            r1 = f[k + 1, i] - f0 - d0
            r2 = d * fp[k + 1, i] - d0
            r3 = dg[k, i] / d - f0 - 0.5 * d0
            coef[k, i, 0] = f0
            coef[k, i, 1] = d0
            coef[k, i, 2] = -12.0 * r1 + 1.5 * r2 + 30.0 * r3
            coef[k, i, 3] = 28.0 * r1 - 4.0 * r2 - 60.0 * r3
            coef[k, i, 4] = -15.0 * r1 + 2.5 * r2 + 30.0 * r3


@nb.njit(nogil=True, cache=True)
def _jumps(phi, coef, tail_lo, tail_hi, jmp):
    # jmp[k, i, m] = q^(m)(φ_k⁻) − q^(m)(φ_k⁺) in φ units (derivatives of the
    # piecewise polynomial; zero outside the path). Returns the smallest step.
    npt = phi.shape[0]
    nc = coef.shape[1]
    dmin = np.inf
    for k in range(npt):
        for i in range(nc):
            for m in range(5):
                jmp[k, i, m] = 0.0
    for k in range(npt - 1):
        d = phi[k + 1] - phi[k]
        dmin = min(dmin, d)
        inv = 1.0 / d
        for i in range(nc):
            c0, c1, c2, c3, c4 = (
                coef[k, i, 0],
                coef[k, i, 1],
                coef[k, i, 2],
                coef[k, i, 3],
                coef[k, i, 4],
            )
            # derivatives at s = 0 and s = 1, divided by Δ^m
            s = 1.0
            jmp[k, i, 0] -= c0
            jmp[k + 1, i, 0] += c0 + c1 + c2 + c3 + c4
            s = inv
            jmp[k, i, 1] -= c1 * s
            jmp[k + 1, i, 1] += (c1 + 2.0 * c2 + 3.0 * c3 + 4.0 * c4) * s
            s *= inv
            jmp[k, i, 2] -= 2.0 * c2 * s
            jmp[k + 1, i, 2] += (2.0 * c2 + 6.0 * c3 + 12.0 * c4) * s
            s *= inv
            jmp[k, i, 3] -= 6.0 * c3 * s
            jmp[k + 1, i, 3] += (6.0 * c3 + 24.0 * c4) * s
            s *= inv
            jmp[k, i, 4] -= 24.0 * c4 * s
            jmp[k + 1, i, 4] += 24.0 * c4 * s
    # the asymptotic tails cancel the value and first-derivative end terms
    for i in range(nc):
        if tail_lo:
            jmp[0, i, 0] = 0.0
            jmp[0, i, 1] = 0.0
        if tail_hi:
            jmp[npt - 1, i, 0] = 0.0
            jmp[npt - 1, i, 1] = 0.0
    return dmin


@nb.njit(nogil=True, cache=True)
def _moments(theta, er, ei, mr, mi):
    # M_m(θ) = ∫₀¹ s^m e^{iθs} ds, m = 0..4
    if theta < _SERIES_THETA:
        t2 = theta * theta
        for m in range(5):
            # Σ_j (iθ)^j/(j!(j+m+1)): Horner over j in θ², even → real, odd → imaginary
            accr = 0.0
            acci = 0.0
            for jj in range(_N_SERIES - 1, -1, -1):
                cterm = _INV_FACT[jj] / (jj + m + 1)
                if jj % 2 == 0:
                    accr = accr * t2 + (cterm if (jj // 2) % 2 == 0 else -cterm)
                else:
                    acci = acci * t2 + (cterm if (jj // 2) % 2 == 0 else -cterm)
            mr[m] = accr
            mi[m] = acci * theta
    else:
        u = 1.0 / theta  # 1/(iθ) = −i u
        mr[0] = ei * u
        mi[0] = -(er - 1.0) * u
        for m in range(1, 5):
            # M_m = (e^{iθ} − m M_{m−1})/(iθ)
            xr = er - m * mr[m - 1]
            xi = ei - m * mi[m - 1]
            mr[m] = xi * u
            mi[m] = -xr * u


@nb.njit(nogil=True, cache=True)
def filon_sum(
    phi, coef, omega, uniform, reseed, tail_lo, tail_hi, quartic, phase0, pre, pim, out_re, out_im
):
    """Filon-type sum I(ω_j) = ∫ q e^{iωφ} dφ of a piecewise polynomial, all energies.

    Two evaluations of the same rule: per step with the moments M_m(θ) (used
    when some step has ωΔ < ``_THETA_JUMP``, quadratic: ``_THETA_JUMP_QUAD``), and, when
    every step advances by at least that, the equivalent node sum from repeated integration by
    parts, Σ_k e^{iωφ_k} Σ_m (−1)^m [q^(m)]_k/(iω)^{m+1} (jumps of q^(m) at
    the nodes), which costs a few multiply-adds per sample and loses at most
    ~ε/θ⁵ to cancellation.

    Parameters
    ----------
    phi : (N,) s, increasing. coef : (N−1, C, 5) amplitude polynomial per step.
    omega : (n_e,) rad/s. uniform : bool, ``omega`` equally spaced (phasor
        recurrence e^{iω_{j+1}φ} = e^{iω_jφ} e^{iΔωφ}, re-seeded every ``reseed``
        energies to bound round-off). tail_lo, tail_hi : bool, continue the
        amplitude to −∞ / +∞ asymptotically (two-term integration by parts).
    quartic : bool, q' is continuous (the node sum skips the first-derivative jumps).
    phase0 : s, absolute phase of φ = 0. pre, pim : (N,) scratch.
    out_re, out_im : (n_e, C) results.
    """
    npt = phi.shape[0]
    nc = coef.shape[1]
    ne = omega.shape[0]
    acc_r = np.zeros(nc)
    acc_i = np.zeros(nc)
    dre = np.empty(npt)
    dim = np.empty(npt)
    jmp = np.empty((npt, nc, 5))
    dmin = _jumps(phi, coef, tail_lo, tail_hi, jmp)
    # node-sum arrays, contiguous per order for the inner loop
    j0 = np.empty((nc, npt))
    j1 = np.empty((nc, npt))
    j2 = np.empty((nc, npt))
    j3 = np.empty((nc, npt))
    j4 = np.empty((nc, npt))
    for i in range(nc):
        for k in range(npt):
            j0[i, k] = jmp[k, i, 0]
            j1[i, k] = jmp[k, i, 1]
            j2[i, k] = jmp[k, i, 2]
            j3[i, k] = jmp[k, i, 3]
            j4[i, k] = jmp[k, i, 4]
        if quartic:
            # interior first-derivative jumps vanish (to rounding); keep only the ends
            for k in range(1, npt - 1):
                j1[i, k] = 0.0
    mr = np.empty(5)
    mi = np.empty(5)
    theta_jump = _THETA_JUMP if quartic else _THETA_JUMP_QUAD
    if uniform and ne > 1:
        dw = omega[1] - omega[0]
        for k in range(npt):
            dre[k] = math.cos(dw * phi[k])
            dim[k] = math.sin(dw * phi[k])
    for j in range(ne):
        w = omega[j]
        if (not uniform) or j % reseed == 0:
            for k in range(npt):
                pre[k] = math.cos(w * phi[k])
                pim[k] = math.sin(w * phi[k])
        else:
            for k in range(npt):
                a = pre[k] * dre[k] - pim[k] * dim[k]
                pim[k] = pre[k] * dim[k] + pim[k] * dre[k]
                pre[k] = a
        inv_w = 1.0 / w
        if w * dmin >= theta_jump:
            iw2 = inv_w * inv_w
            iw3 = iw2 * inv_w
            iw4 = iw3 * inv_w
            iw5 = iw4 * inv_w
            for i in range(nc):
                if quartic:
                    s2r, s2i, s3r, s3i, s4r, s4i = _node_sums(pre, pim, j2[i], j3[i], j4[i])
                else:
                    # a quadratic has no third or fourth derivatives
                    s2r, s2i, _, _ = _node_sums01(pre, pim, j2[i], j2[i])
                    s3r = s3i = s4r = s4i = 0.0
                s0r = 0.0
                s0i = 0.0
                s1r = 0.0
                s1i = 0.0
                if quartic:
                    # q and q' are continuous inside: values and slopes only at the ends
                    for k in (0, npt - 1):
                        s0r += j0[i, k] * pre[k]
                        s0i += j0[i, k] * pim[k]
                        s1r += j1[i, k] * pre[k]
                        s1i += j1[i, k] * pim[k]
                else:
                    # the quadratic rule may carry value jumps (a path cut inside a field
                    # joined to its straight tail), so all nodes enter
                    s0r, s0i, s1r, s1i = _node_sums01(pre, pim, j0[i], j1[i])
                # factors of orders 0..4: −i/ω, 1/ω², i/ω³, −1/ω⁴, −i/ω⁵
                acc_r[i] = s0i * inv_w + s1r * iw2 - s2i * iw3 - s3r * iw4 + s4i * iw5
                acc_i[i] = -s0r * inv_w + s1i * iw2 + s2r * iw3 - s3i * iw4 - s4r * iw5
        else:
            for i in range(nc):
                acc_r[i] = 0.0
                acc_i[i] = 0.0
            for k in range(npt - 1):
                delta = phi[k + 1] - phi[k]
                theta = w * delta
                er = pre[k + 1] * pre[k] + pim[k + 1] * pim[k]
                ei = pim[k + 1] * pre[k] - pre[k + 1] * pim[k]
                _moments(theta, er, ei, mr, mi)
                cr = pre[k] * delta
                ci = pim[k] * delta
                for i in range(nc):
                    sr = 0.0
                    si = 0.0
                    for m in range(5):
                        sr += coef[k, i, m] * mr[m]
                        si += coef[k, i, m] * mi[m]
                    acc_r[i] += sr * cr - si * ci
                    acc_i[i] += sr * ci + si * cr
            for i in range(nc):
                # asymptotic tails: −(value and slope end terms) of the node form
                for k, on in ((0, tail_lo), (npt - 1, tail_hi)):
                    if on:
                        sgn = -1.0 if k == 0 else 1.0
                        # end value and slope of q from the adjacent step
                        kk = 0 if k == 0 else npt - 2
                        d = phi[kk + 1] - phi[kk]
                        if k == 0:
                            val = coef[kk, i, 0]
                            slope = coef[kk, i, 1] / d
                        else:
                            val = 0.0
                            slope = 0.0
                            for m in range(5):
                                val += coef[kk, i, m]
                                slope += m * coef[kk, i, m]
                            slope /= d
                        # the node form's end terms are sgn·e^{iωφ}(−i val/ω + slope/ω²); add their negative
                        tr = -sgn * slope * inv_w * inv_w
                        ti = sgn * val * inv_w
                        acc_r[i] += tr * pre[k] - ti * pim[k]
                        acc_i[i] += tr * pim[k] + ti * pre[k]
        # absolute phase reference e^{iωφ_0}
        cr = math.cos(w * phase0)
        ci = math.sin(w * phase0)
        for i in range(nc):
            out_re[j, i] = acc_r[i] * cr - acc_i[i] * ci
            out_im[j, i] = acc_r[i] * ci + acc_i[i] * cr


@nb.njit(nogil=True, cache=True, fastmath={"contract", "reassoc"})
def _node_sums(pre, pim, a, b, d):
    s2r = 0.0
    s2i = 0.0
    s3r = 0.0
    s3i = 0.0
    s4r = 0.0
    s4i = 0.0
    for k in range(pre.shape[0]):
        p = pre[k]
        q = pim[k]
        s2r += a[k] * p
        s2i += a[k] * q
        s3r += b[k] * p
        s3i += b[k] * q
        s4r += d[k] * p
        s4i += d[k] * q
    return s2r, s2i, s3r, s3i, s4r, s4i


@nb.njit(nogil=True, cache=True, fastmath={"contract", "reassoc"})
def _node_sums01(pre, pim, a, b):
    s0r = 0.0
    s0i = 0.0
    s1r = 0.0
    s1i = 0.0
    for k in range(pre.shape[0]):
        s0r += a[k] * pre[k]
        s0i += a[k] * pim[k]
        s1r += b[k] * pre[k]
        s1i += b[k] * pim[k]
    return s0r, s0i, s1r, s1i


@nb.njit(nogil=True, cache=True)
def _far_work(npt):
    # work arrays of far_amplitudes and quartic_coefficients: φ, f, f', ΔG, coefficients
    return (
        np.empty(npt),
        np.empty((npt, 2)),
        np.empty((npt, 2)),
        np.empty((npt - 1, 2)),
        np.empty((npt - 1, 2, 5)),
    )


@nb.njit(nogil=True, cache=True)
def far_field_pixels(
    nvec, t, r, beta, bdot, bddot, ig2, c_light, omega, uniform, reseed, out_re, out_im
):
    """Far-field integral ∫ n×((n−β)×β̇)/κ² e^{iω(t − n·r/c)} dt for many directions.

    Parameters
    ----------
    nvec : (P, 3) unit directions. Trajectory samples t, r, beta, bdot, bddot, ig2.
    omega : (n_e,) rad/s. out_re, out_im : (P, n_e, 3) results (s⁰: the
        integral of an amplitude in 1/s over dt), z from transversality E·n = 0.
    """
    npt = t.shape[0]
    phi, f, fp, dg, coef = _far_work(npt)
    pre = np.empty(npt)
    pim = np.empty(npt)
    ne = omega.shape[0]
    ore = np.empty((ne, 2))
    oim = np.empty((ne, 2))
    for p in range(nvec.shape[0]):
        n = nvec[p]
        phase0 = far_amplitudes(n, t, r, beta, bdot, bddot, ig2, c_light, phi, f, fp, dg)
        quartic_coefficients(phi, f, fp, dg, coef)
        filon_sum(phi, coef, omega, uniform, reseed, False, False, True, phase0, pre, pim, ore, oim)
        for j in range(ne):
            out_re[p, j, 0] = ore[j, 0]
            out_re[p, j, 1] = ore[j, 1]
            out_im[p, j, 0] = oim[j, 0]
            out_im[p, j, 1] = oim[j, 1]
            # the far field is transverse: E·n = 0
            out_re[p, j, 2] = -(n[0] * ore[j, 0] + n[1] * ore[j, 1]) / n[2]
            out_im[p, j, 2] = -(n[0] * oim[j, 0] + n[1] * oim[j, 1]) / n[2]


#: node phasors e^{iωφ_k}: re-seeded by cos/sin every this many nodes (round-off ≲ 32 ε)
_PHASOR_RESEED = 32
#: the step e^{iωΔφ} by its Taylor series (to d^17: ≲ 1e-19 at the bound) below this phase
_PHASOR_SMALL_STEP = 0.6
_COS_TAYLOR = _INV_FACT[0:18:2] * (-1.0) ** np.arange(9)  # (−1)^j/(2j)!
_SIN_TAYLOR = _INV_FACT[1:18:2] * (-1.0) ** np.arange(9)  # (−1)^j/(2j+1)!


@nb.njit(nogil=True, cache=True, error_model="numpy")
def _node_phasors(phi, w, cr, ci):
    """cr + i·ci = e^{iwφ_k} for every node, by the recurrence e^{iwφ_k} = e^{iwφ_{k−1}} e^{iwΔφ}.

    The step's phasor comes from a short polynomial (two libm calls per node were
    a fifth of the far-field per-node time); cos/sin re-seed every
    ``_PHASOR_RESEED`` nodes and wherever a step exceeds ``_PHASOR_SMALL_STEP``.
    """
    for k in range(phi.shape[0]):
        d = w * (phi[k] - phi[k - 1]) if k > 0 else 0.0
        if k % _PHASOR_RESEED == 0 or abs(d) > _PHASOR_SMALL_STEP:
            cr[k] = math.cos(w * phi[k])
            ci[k] = math.sin(w * phi[k])
            continue
        d2 = d * d
        # cos d and sin d by Horner in d² (Taylor to d^16 and d^17)
        cd = _COS_TAYLOR[8]
        sd = _SIN_TAYLOR[8]
        for j in range(7, -1, -1):
            cd = cd * d2 + _COS_TAYLOR[j]
            sd = sd * d2 + _SIN_TAYLOR[j]
        sd *= d
        cr[k] = cr[k - 1] * cd - ci[k - 1] * sd
        ci[k] = cr[k - 1] * sd + ci[k - 1] * cd


@nb.njit(nogil=True, cache=True)
def _spread_jumps(phi, jmp, m_first, omega_ref, dw, delta, tau, e3, a, xs, scratch):
    # Three orders m_first … m_first + 2 (jumps J_a, J_b, J_c) of component i combine into
    # T_i(ω) = (iω)² S_a − (iω) S_b + S_c, S = Σ_k J_k e^{iωφ_k}; with iω = iω_ref + (im)Δω
    # and x_k = Δω φ_k, T is Σ_k e^{imx_k}(A + (im)B + (im)²C) with, times e^{iω_ref φ_k},
    #   A = (iω_ref)² J_a − iω_ref J_b + J_c,  B = Δω (2iω_ref J_a − J_b),  C = Δω² J_a:
    # one strength per component for nufft.spread_poly; a : (N, 3, 2·C) work array
    npt = phi.shape[0]
    nc = jmp.shape[1]
    w = omega_ref
    pr = np.empty(npt)
    pi = np.empty(npt)
    _node_phasors(phi, w, pr, pi)
    for k in range(npt):
        cr = pr[k]
        ci = pi[k]
        xs[k] = dw * phi[k]
        for i in range(nc):
            ja = jmp[k, i, m_first]
            jb = jmp[k, i, m_first + 1]
            jc = jmp[k, i, m_first + 2]
            ar = jc - w * w * ja  # A = ar + i·ai before the phase
            ai = -w * jb
            br = -dw * jb
            bi = 2.0 * dw * w * ja
            cc = dw * dw * ja
            a[k, 0, 2 * i] = ar * cr - ai * ci
            a[k, 0, 2 * i + 1] = ar * ci + ai * cr
            a[k, 1, 2 * i] = br * cr - bi * ci
            a[k, 1, 2 * i + 1] = br * ci + bi * cr
            a[k, 2, 2 * i] = cc * cr
            a[k, 2, 2 * i + 1] = cc * ci
    spread_poly(xs, a, scratch, delta, tau, e3)


@nb.njit(nogil=True, cache=True)
def node_spread(phi, coef, tail_lo, tail_hi, omega_ref, dw, delta, tau, e3, scratch, grid):
    """Node sums of a quadratic rule (orders 0–2, all nodes), spread for a type-1 NUFFT.

    The NUFFT form of :func:`filon_sum`'s node sum for ``quartic=False``: the
    orders combined per component (:func:`_spread_jumps`) at the points Δω φ_k,
    folded into ``grid`` (n_grid, 2·C) (:func:`lwrad.engine.nufft.spread_poly`,
    ``scratch`` (n_grid + 2·msp, 2·C)). Returns the smallest step in φ.
    """
    npt = phi.shape[0]
    nc = coef.shape[1]
    jmp = np.empty((npt, nc, 5))
    dmin = _jumps(phi, coef, tail_lo, tail_hi, jmp)
    a = np.empty((npt, 3, 2 * nc))
    xs = np.empty(npt)
    _spread_jumps(phi, jmp, 0, omega_ref, dw, delta, tau, e3, a, xs, scratch)
    fold(scratch, grid)
    return dmin


@nb.njit(nogil=True, cache=True)
def far_spread_pixels(
    nvec, t, r, beta, bdot, bddot, ig2, c_light, omega_ref, dw, delta, tau, e3, scratch, grids, ends
):
    """The far-field node sums of :func:`filon_sum`, spread for a type-1 NUFFT over energies.

    For each direction the quartic's jumps of orders 2–4 (x and y), combined per
    component (:func:`_spread_jumps`) at the points Δω φ_k, are spread and folded
    into ``grids[p]`` ((n_grid, 4): component i in columns 2i, 2i + 1;
    :func:`lwrad.engine.nufft.spread_poly`, ``scratch`` (n_grid + 2·msp, 4)). The
    value and slope jumps at the two ends, the last phase and the absolute phase
    go into ``ends[p]``: columns 0–7 = jump of order m ∈ {0, 1} at end
    e ∈ {first, last} of component i as ends[p, 4·e + 2·i + m], 8 = φ_{N−1} − φ_0,
    9 = φ_0 (absolute), 10 = smallest step in φ.
    """
    npt = t.shape[0]
    phi, f, fp, dg, coef = _far_work(npt)
    jmp = np.empty((npt, 2, 5))
    a = np.empty((npt, 3, 4))
    xs = np.empty(npt)
    for p in range(nvec.shape[0]):
        n = nvec[p]
        phase0 = far_amplitudes(n, t, r, beta, bdot, bddot, ig2, c_light, phi, f, fp, dg)
        quartic_coefficients(phi, f, fp, dg, coef)
        dmin = _jumps(phi, coef, False, False, jmp)
        _spread_jumps(phi, jmp, 2, omega_ref, dw, delta, tau, e3, a, xs, scratch)
        fold(scratch, grids[p])
        for e in range(2):
            k = 0 if e == 0 else npt - 1
            for i in range(2):
                for m in range(2):
                    ends[p, 4 * e + 2 * i + m] = jmp[k, i, m]
        ends[p, 8] = phi[npt - 1]
        ends[p, 9] = phase0
        ends[p, 10] = dmin


@nb.njit(nogil=True, cache=True)
def nufft_node_sums(spec, index, scale, m_first, phase0, omega, out):
    """Integrals from transformed node sums: out[p, j, i] = e^{iω_jφ0_p} (−1)^{m_first} T_i/(iω_j)^{m_first+3}.

    T_i(ω_j) = spec[p, index[j], i]·scale[j] is the combination (iω)² S_{m_first} −
    (iω) S_{m_first+1} + S_{m_first+2} of :func:`_spread_jumps`, so that the sum is
    Σ_m (−1)^m S_{i,m}/(iω)^{m+1} over the three orders; fills components 0 …
    spec.shape[2] − 1 of out (P, n_e, ≥ that).
    """
    sign = -1.0 if m_first % 2 else 1.0
    # energies outer: the pixels of one energy are neighbours in the caller's (n_e, pixels) field
    for j in range(omega.shape[0]):
        w = omega[j]
        fac = (1.0 / (1j * w)) ** (m_first + 3) * (scale[j] * sign)
        col = index[j]
        for p in range(spec.shape[0]):
            e_abs = complex(math.cos(w * phase0[p]), math.sin(w * phase0[p]))
            for i in range(spec.shape[2]):
                out[p, j, i] = spec[p, col, i] * fac * e_abs


@nb.njit(nogil=True, cache=True)
def far_nufft_ends(ends, omega, nvec, out):
    """Add the end terms of :func:`far_spread_pixels` (orders 0 and 1) and E_z from E·n = 0."""
    for j in range(omega.shape[0]):
        w = omega[j]
        iw = 1.0 / (1j * w)
        iw2 = iw * iw
        for p in range(out.shape[0]):
            n = nvec[p]
            e_last = complex(math.cos(w * ends[p, 8]), math.sin(w * ends[p, 8]))
            e_abs = complex(math.cos(w * ends[p, 9]), math.sin(w * ends[p, 9]))
            for i in range(2):
                acc = ends[p, 2 * i] * iw - ends[p, 2 * i + 1] * iw2
                acc += e_last * (ends[p, 4 + 2 * i] * iw - ends[p, 5 + 2 * i] * iw2)
                out[p, j, i] += acc * e_abs
            out[p, j, 2] = -(n[0] * out[p, j, 0] + n[1] * out[p, j, 1]) / n[2]


#: rows of the packed power-integral samples (:func:`power_samples`)
POWER_ROWS = 11
# Vectorisable: one packed array (one base pointer), no Python division checks
# (error_model="numpy"; inputs are finite, validated trajectories) and reassociation
# of the sum; no assumptions about NaN or infinities.
_VEC = {"nsz", "arcp", "contract", "reassoc"}


def power_samples(h, wg, r, beta, bdot, ig2):
    """Pack Gauss-point samples (M, G, …) into the (POWER_ROWS, M·G) array of the power kernels.

    Rows: weight h·wg, r (3), β (3), β̇ (3), 1/γ².
    """
    m, g = beta.shape[:2]
    out = np.empty((POWER_ROWS, m * g))
    out[0] = (h[:, None] * wg[None, :]).ravel()
    out[1:4] = r.reshape(-1, 3).T
    out[4:7] = beta.reshape(-1, 3).T
    out[7:10] = bdot.reshape(-1, 3).T
    out[10] = ig2.ravel()
    return out


@nb.njit(nogil=True, cache=True, inline="always")
def _kappa_branchless(nx, ny, nz, bx, by, bz, ig2):
    # _kappa for |β| > 0 (charged particles at the Gauss points move)
    b = math.sqrt(bx * bx + by * by + bz * bz)
    ib = 1.0 / b
    dx = nx - bx * ib
    dy = ny - by * ib
    dz = nz - bz * ib
    return ig2 / (1.0 + b) + 0.5 * b * (dx * dx + dy * dy + dz * dz)


@nb.njit(nogil=True, cache=True, fastmath=_VEC, error_model="numpy")
def far_power_pixels(nvec, data, out):
    """∫ |n×((n−β)×β̇)|²/κ⁵ dt per direction (Jackson 14.38 integrated over time).

    Parameters
    ----------
    nvec : (P, 3). data : (POWER_ROWS, M) packed samples (:func:`power_samples`).
    out : (P,) result, 1/s (the time integral of 1/s²).
    """
    w = data[0]
    bxs, bys, bzs = data[4], data[5], data[6]
    axs, ays, azs = data[7], data[8], data[9]
    ig2 = data[10]
    for p in range(nvec.shape[0]):
        nx, ny, nz = nvec[p, 0], nvec[p, 1], nvec[p, 2]
        acc = 0.0
        for j in range(w.shape[0]):
            bx, by, bz = bxs[j], bys[j], bzs[j]
            ax, ay, az = axs[j], ays[j], azs[j]
            kap = _kappa_branchless(nx, ny, nz, bx, by, bz, ig2[j])
            ndot = nx * ax + ny * ay + nz * az
            vx = (nx - bx) * ndot - ax * kap
            vy = (ny - by) * ndot - ay * kap
            vz = -(nx * vx + ny * vy) / nz  # V ⊥ n exactly
            k2 = kap * kap
            acc += w[j] * (vx * vx + vy * vy + vz * vz) / (k2 * k2 * kap)
        out[p] = acc


@nb.njit(nogil=True, cache=True, fastmath=_VEC, error_model="numpy")
def near_power_pixels(points, data, c_light, out):
    """∫ |E_rad|² n_z κ dt per point, E_rad per q/(4πε0) (acceleration field only).

    Parameters
    ----------
    points : (P, 3) m. data : (POWER_ROWS, M) packed samples (:func:`power_samples`).
    out : (P,) result.
    """
    w = data[0]
    rxs, rys, rzs = data[1], data[2], data[3]
    bxs, bys, bzs = data[4], data[5], data[6]
    axs, ays, azs = data[7], data[8], data[9]
    ig2 = data[10]
    for p in range(points.shape[0]):
        px, py, pz = points[p, 0], points[p, 1], points[p, 2]
        acc = 0.0
        for j in range(w.shape[0]):
            dx = px - rxs[j]
            dy = py - rys[j]
            dz = pz - rzs[j]
            inv_r = 1.0 / math.sqrt(dx * dx + dy * dy + dz * dz)
            nx, ny, nz = dx * inv_r, dy * inv_r, dz * inv_r
            bx, by, bz = bxs[j], bys[j], bzs[j]
            ax, ay, az = axs[j], ays[j], azs[j]
            kap = _kappa_branchless(nx, ny, nz, bx, by, bz, ig2[j])
            ndot = nx * ax + ny * ay + nz * az
            vx = (nx - bx) * ndot - ax * kap
            vy = (ny - by) * ndot - ay * kap
            vz = -(nx * vx + ny * vy) / nz
            k3 = kap * kap * kap
            acc += w[j] * (vx * vx + vy * vy + vz * vz) * (inv_r * inv_r) / (k3 * k3) * nz * kap
        out[p] = acc / (c_light * c_light)


@nb.njit(nogil=True, cache=True)
def tail_times(v, d, sgn, b, tau_c, ig2, omega_min, step_frac, tail_phase, c_light, out):
    """Times τ ≥ 0 of one straight-line tail, graded in the distance to closest approach.

    Steps of ``step_frac`` × (distance to the closest-approach point)/v, until
    ω_min κ (distance/v) ≥ ``tail_phase`` beyond 10 impact parameters past that
    point (κ of the line seen from the observer). v : (3,) velocity, m/s;
    d : (3,) observer − line end, m; sgn = +1 forward, −1 backward; b impact
    parameter, m; tau_c time of closest approach, s; ig2 = 1/γ². Writes ``out``
    (at most its length) and returns the count, or −1 when it did not close.
    """
    speed = math.sqrt(v[0] * v[0] + v[1] * v[1] + v[2] * v[2])
    ux, uy, uz = v[0] / speed, v[1] / speed, v[2] / speed
    b_abs = speed / c_light
    out[0] = 0.0
    tau = 0.0
    for i in range(1, out.shape[0]):
        dist = math.hypot(b, speed * (tau - tau_c))
        scale = dist / speed
        tau += step_frac * scale
        out[i] = tau
        if tau > tau_c:
            # from the observer to the charge; the charge moves along +v on both tails
            rx = sgn * v[0] * tau - d[0]
            ry = sgn * v[1] * tau - d[1]
            rz = sgn * v[2] * tau - d[2]
            rr = math.sqrt(rx * rx + ry * ry + rz * rz)
            ex = -rx / rr - ux
            ey = -ry / rr - uy
            ez = -rz / rr - uz
            kap = ig2 / (1.0 + b_abs) + 0.5 * b_abs * (ex * ex + ey * ey + ez * ez)
            if omega_min * kap * scale >= tail_phase and tau > tau_c + 10.0 * b / speed:
                return i + 1
    return -1


#: status codes of :func:`near_pixel_setup`
NEAR_OK = 0
NEAR_ON_LINE = 1  # the observer lies on a straight continuation of the path
NEAR_NOT_CLOSED = 2  # a tail mesh did not close within its step limit
NEAR_SINGULAR = 3  # the observer lies on the path: φ not increasing or the field not finite
GAUSS_OFFSET = 0.5 / math.sqrt(3.0)  # two-point Gauss–Legendre on [0, 1]: 1/2 ∓ this


@nb.njit(nogil=True, cache=True)
def _tail_mesh(p0, bvec, x, sgn, omega_min, step_frac, tail_phase, max_steps, c_light):
    # times τ ≥ 0 of one straight tail (away from the path end at p0, velocity βc);
    # returns (τ, status)
    v = bvec * c_light
    speed = math.sqrt(v[0] * v[0] + v[1] * v[1] + v[2] * v[2])
    d = x - p0
    du = (d[0] * v[0] + d[1] * v[1] + d[2] * v[2]) / speed
    # τ of closest approach along the tail direction (may be negative: behind the end)
    tau_c = sgn * du / speed
    px = d[0] - du * v[0] / speed
    py = d[1] - du * v[1] / speed
    pz = d[2] - du * v[2] / speed
    b = math.sqrt(px * px + py * py + pz * pz)
    dn = math.sqrt(d[0] * d[0] + d[1] * d[1] + d[2] * d[2])
    if b <= 1e-12 * dn and tau_c >= 0.0:
        return np.empty(0), NEAR_ON_LINE
    b = max(b, 1e-12 * dn)
    out = np.empty(max_steps + 1)
    ig2 = 1.0 - speed * speed / (c_light * c_light)
    n = tail_times(v, d, sgn, b, tau_c, ig2, omega_min, step_frac, tail_phase, c_light, out)
    if n < 0:
        return np.empty(0), NEAR_NOT_CLOSED
    return out[:n].copy(), NEAR_OK


@nb.njit(nogil=True, cache=True)
def _line_phase(p_end, bvec, ig2, x, tau, c_light, out):
    # exact φ(τ) − φ(0) along the straight line p_end + βcτ seen from x (φ = t + R/c):
    # with s = vτ, u = s_c − s and b the impact parameter, R = √(b² + u²) and
    # Δφ = (s/c)[(1−β)/β + (g(u, R) + g(u₀, R₀))/(R + R₀)], g = R − u written as
    # b²/(R + u) for u > 0, free of the cancellation that t + R/c suffers for γ ≫ 1
    beta = math.sqrt(bvec[0] * bvec[0] + bvec[1] * bvec[1] + bvec[2] * bvec[2])
    ux, uy, uz = bvec[0] / beta, bvec[1] / beta, bvec[2] / beta
    dx, dy, dz = x[0] - p_end[0], x[1] - p_end[1], x[2] - p_end[2]
    sc = dx * ux + dy * uy + dz * uz
    ex, ey, ez = dx - sc * ux, dy - sc * uy, dz - sc * uz
    b2 = ex * ex + ey * ey + ez * ez
    r0 = math.sqrt(b2 + sc * sc)
    g0 = b2 / (r0 + abs(sc)) if sc > 0.0 else r0 - sc
    one_minus = ig2 / (1.0 + beta) / beta
    for i in range(tau.shape[0]):
        s = beta * c_light * tau[i]
        u = sc - s
        rr = math.sqrt(b2 + u * u)
        g = b2 / (rr + abs(u)) if u > 0.0 else rr - u
        out[i] = (s / c_light) * (one_minus + (g + g0) / (rr + r0))


@nb.njit(nogil=True, cache=True)
def _line_samples(times, t_ref, p_ref, bvec, ig2, c_light, tt, rr, bb, gg2, rg, bg, gg, k0, s0):
    # a straight tail: nodes `times` written from row k0, their steps' Gauss points from
    # step s0 (positions p_ref + (t − t_ref)βc, β constant, β̇ = 0)
    for i in range(times.shape[0]):
        tt[k0 + i] = times[i]
        for q in range(3):
            rr[k0 + i, q] = p_ref[q] + (times[i] - t_ref) * bvec[q] * c_light
            bb[k0 + i, q] = bvec[q]
        gg2[k0 + i] = ig2
    for i in range(times.shape[0] - 1):
        h = times[i + 1] - times[i]
        for g in range(2):
            tg = times[i] + h * (0.5 - GAUSS_OFFSET if g == 0 else 0.5 + GAUSS_OFFSET)
            for q in range(3):
                rg[s0 + i, g, q] = p_ref[q] + (tg - t_ref) * bvec[q] * c_light
                bg[s0 + i, g, q] = bvec[q]
            gg[s0 + i, g] = ig2


@nb.njit(nogil=True, cache=True)
def _junction_fix(x, p_end, b_end, ig2_end, phi, f, dg, coef, node, forward, c_light):
    # a path cut inside a field: the field jumps where the straight tail (β̇ = 0) begins,
    # so the tail's first step starts from the tail-side (velocity-only) value at the
    # path end (p_end, b_end, ig2_end), which is node ``node``
    e = np.empty(3)
    _lw_field(
        x[0], x[1], x[2], p_end[0], p_end[1], p_end[2],
        b_end[0], b_end[1], b_end[2], 0.0, 0.0, 0.0, ig2_end, c_light, e,
    )  # fmt: skip
    step = node if forward else node - 1
    d = phi[step + 1] - phi[step]
    for i in range(3):
        f0 = e[i] if forward else f[step, i]
        f1 = f[step + 1, i] if forward else e[i]
        mean = dg[step, i] / d
        coef[step, i, 0] = f0
        coef[step, i, 1] = 6.0 * mean - 4.0 * f0 - 2.0 * f1
        coef[step, i, 2] = 3.0 * (f0 + f1) - 6.0 * mean


@nb.njit(nogil=True, cache=True)
def _tail_amplitudes(x, times, t_ref, p_ref, bvec, ig2, c_light, phi, f, dg):
    # near_amplitudes of one straight tail (β̇ = 0) on its mesh ``times``, into phi, f, dg
    m = times.shape[0]
    tt = np.empty(m)
    rr = np.empty((m, 3))
    bb = np.empty((m, 3))
    gg2 = np.empty(m)
    rg = np.empty((m - 1, 2, 3))
    bg = np.empty((m - 1, 2, 3))
    gg = np.empty((m - 1, 2))
    _line_samples(times, t_ref, p_ref, bvec, ig2, c_light, tt, rr, bb, gg2, rg, bg, gg, 0, 0)
    near_amplitudes(
        x, tt, rr, bb, np.zeros((m, 3)), gg2, rg, bg, np.zeros((m - 1, 2, 3)), gg, c_light,
        phi, f, dg,
    )  # fmt: skip


@nb.njit(nogil=True, cache=True)
def near_pixel_setup(
    x, t, r, beta, bdot, ig2, rg, bg, ag, gg, tails, omega_min, step_frac, tail_phase,
    max_steps, c_light,
):  # fmt: skip
    """Phase and quadratic amplitude pieces of the near-field integral at one point.

    With ``tails`` the path is continued at both ends by its straight lines on
    meshes from :func:`tail_times`; the tails' phases are the exact straight-line
    ones (accumulated κ would drift over km-long meshes), anchored at the first
    path sample. Returns (phi (M,), coef (M−1, 3, 5), φ_0, status): φ relative to
    φ_0 = t_0 + |x − r_0|/c, the status one of the ``NEAR_*`` codes.
    """
    n = t.shape[0]
    if tails:
        taus_b, st = _tail_mesh(
            r[0], beta[0], x, -1.0, omega_min, step_frac, tail_phase, max_steps, c_light
        )
        if st != NEAR_OK:
            return np.empty(0), np.empty((0, 3, 5)), 0.0, st
        taus_f, st = _tail_mesh(
            r[n - 1], beta[n - 1], x, 1.0, omega_min, step_frac, tail_phase, max_steps, c_light
        )
        if st != NEAR_OK:
            return np.empty(0), np.empty((0, 3, 5)), 0.0, st
        nb_ = taus_b.shape[0] - 1
        nf = taus_f.shape[0] - 1
    else:
        nb_ = 0
        nf = 0
    npt = nb_ + n + nf
    phi = np.empty(npt)
    f = np.empty((npt, 3))
    dg = np.empty((npt - 1, 3))
    last = nb_ + n - 1
    if tails:
        # the tails first: the path's own values at the two junction nodes overwrite theirs
        tb = np.empty(nb_ + 1)
        for i in range(nb_ + 1):
            tb[i] = t[0] - taus_b[nb_ - i]
        _tail_amplitudes(
            x, tb, t[0], r[0], beta[0], ig2[0], c_light, phi[: nb_ + 1], f[: nb_ + 1], dg[:nb_]
        )
        tf = np.empty(nf + 1)
        for i in range(nf + 1):
            tf[i] = t[n - 1] + taus_f[i]
        _tail_amplitudes(
            x, tf, t[n - 1], r[n - 1], beta[n - 1], ig2[n - 1], c_light,
            phi[last:], f[last:], dg[last:],
        )  # fmt: skip
    # the path in place (no copy of its samples): φ from 0 at its first sample
    phase0 = near_amplitudes(
        x, t, r, beta, bdot, ig2, rg, bg, ag, gg, c_light,
        phi[nb_ : last + 1], f[nb_ : last + 1], dg[nb_:last],
    )  # fmt: skip
    if tails:
        lp = np.empty(max(nb_, nf) + 1)
        tau = np.empty(nb_ + 1)
        for k in range(nb_ + 1):
            tau[k] = tb[k] - t[0]
        _line_phase(r[0], beta[0], ig2[0], x, tau, c_light, lp)
        for k in range(nb_ + 1):
            phi[k] = lp[k]
        base = phi[last]
        tau = np.empty(nf + 1)
        for k in range(nf + 1):
            tau[k] = tf[k] - t[n - 1]
        _line_phase(r[n - 1], beta[n - 1], ig2[n - 1], x, tau, c_light, lp)
        for k in range(nf + 1):
            phi[last + k] = base + lp[k]
    for k in range(npt - 1):
        if not phi[k + 1] - phi[k] > 0.0:
            return phi, np.empty((0, 3, 5)), phase0, NEAR_SINGULAR
    for k in range(npt):
        for i in range(3):
            if not math.isfinite(f[k, i]):
                return phi, np.empty((0, 3, 5)), phase0, NEAR_SINGULAR
    coef = np.empty((npt - 1, 3, 5))
    quadratic_coefficients(phi, f, dg, coef)
    if tails:
        _junction_fix(x, r[0], beta[0], ig2[0], phi, f, dg, coef, nb_, False, c_light)
        _junction_fix(x, r[n - 1], beta[n - 1], ig2[n - 1], phi, f, dg, coef, last, True, c_light)
    return phi, coef, phase0, NEAR_OK


@nb.njit(nogil=True, cache=True)
def lienard_energy(h, wg, gammag, betag, bdotg):
    """∫ γ⁶(|β̇|² − |β×β̇|²) dt = ∫ γ⁴|β̇|² + γ⁶(β·β̇)² dt (Jackson 14.26), 1/s."""
    acc = 0.0
    for k in range(h.shape[0]):
        s = 0.0
        for g in range(2):
            gm = gammag[k, g]
            bx, by, bz = betag[k, g, 0], betag[k, g, 1], betag[k, g, 2]
            ax, ay, az = bdotg[k, g, 0], bdotg[k, g, 1], bdotg[k, g, 2]
            bb = bx * ax + by * ay + bz * az
            g2 = gm * gm
            s += wg[g] * (g2 * g2 * (ax * ax + ay * ay + az * az) + g2 * g2 * g2 * bb * bb)
        acc += h[k] * s
    return acc

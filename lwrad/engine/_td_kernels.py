"""Numba kernels for time-domain Liénard–Wiechert fields (private).

Everything here takes plain float64 arrays and writes into arrays allocated
by the caller; orchestration (validation, chunking, warnings) lives in
:mod:`lwrad.engine.retarded` and :mod:`lwrad.timedomain`.

Why double-double arithmetic
----------------------------
The retarded-time equation ``t_obs = t_r + |x − r(t_r)|/c`` balances two
large numbers, ``t_r`` and ``R/c``, whose sum must be known to a small
fraction of the pulse length. For an ultrarelativistic charge the pulse at an
impact parameter b lasts ~b/(γc) while R ~ γb, so plain float64 would lose a
factor ~γ² (4e-6 relative at γ = 1e5). The residual is therefore evaluated in
double-double arithmetic (pairs hi + lo; error-free transformations of
Knuth's TwoSum and Dekker's TwoProduct, see Dekker, Numer. Math. 18 (1971)
224), which keeps the error at the level of the input data. The fields
themselves are well conditioned once t_r is known and use plain float64,
with κ = 1 − n·β formed without cancellation from 1/γ² and |n − β̂|².

Status codes written per (time, point)
--------------------------------------
0 inside the sampled trajectory, converged; 1 before the first sample
(straight-line continuation); 2 after the last sample (continuation);
3 outside, set to NaN on request; 4 inside, not converged; 5 the observer
lies on the path (R below the threshold at the retarded time); 6 the sample
observer times of this point are not increasing (positions inconsistent
with a speed below c, or the point is on the path).
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

__all__ = [
    "STATUS_INSIDE",
    "STATUS_BEFORE",
    "STATUS_AFTER",
    "STATUS_NAN",
    "STATUS_NOT_CONVERGED",
    "STATUS_ON_PATH",
    "STATUS_NON_MONOTONE",
    "MAX_ITERATIONS",
    "segment_coefficients",
    "sample_observer_times",
    "path_distance",
    "td_fields",
]

STATUS_INSIDE = 0
STATUS_BEFORE = 1
STATUS_AFTER = 2
STATUS_NAN = 3
STATUS_NOT_CONVERGED = 4
STATUS_ON_PATH = 5
STATUS_NON_MONOTONE = 6

#: Newton/bisection iterations per retarded time before it counts as not converged
#: (bisection alone halves the bracket 64 times, beyond float64 resolution).
MAX_ITERATIONS = 100

_EPS = 2.220446049250313e-16
_SPLIT = 134217729.0  # 2**27 + 1, Dekker's splitting constant for float64


# -- double-double building blocks (error-free transformations) ---------------
@njit(nogil=True, cache=True)
def _two_sum(a, b):
    s = a + b
    bb = s - a
    return s, (a - (s - bb)) + (b - bb)


@njit(nogil=True, cache=True)
def _fast_two_sum(a, b):
    s = a + b
    return s, b - (s - a)


@njit(nogil=True, cache=True)
def _two_prod(a, b):
    p = a * b
    t = _SPLIT * a
    ah = t - (t - a)
    al = a - ah
    t = _SPLIT * b
    bh = t - (t - b)
    bl = b - bh
    return p, ((ah * bh - p) + ah * bl + al * bh) + al * bl


@njit(nogil=True, cache=True)
def _dd_add(ah, al, bh, bl):
    s, e = _two_sum(ah, bh)
    e += al + bl
    return _fast_two_sum(s, e)


@njit(nogil=True, cache=True)
def _dd_sq(ah, al):
    p, e = _two_prod(ah, ah)
    e += 2.0 * ah * al
    return _fast_two_sum(p, e)


@njit(nogil=True, cache=True)
def _dd_sqrt(ah, al):
    if ah <= 0.0:
        return 0.0, 0.0
    s = math.sqrt(ah)
    p, e = _two_prod(s, s)
    rem = ((ah - p) - e) + al
    return _fast_two_sum(s, rem / (2.0 * s))


@njit(nogil=True, cache=True)
def _dd_div_f(ah, al, b):
    q1 = ah / b
    p, e = _two_prod(q1, b)
    rem = ((ah - p) - e) + al
    return _fast_two_sum(q1, rem / b)


@njit(nogil=True, cache=True)
def _diff_dd(t, hi, lo):
    """t − (hi + lo) rounded to float64, accurate even when the two nearly cancel."""
    s, e = _two_sum(t, -hi)
    return s + (e - lo)


# -- trajectory preparation ---------------------------------------------------
@njit(nogil=True, cache=True)
def segment_coefficients(t, y, dydt, a_out, b_out):
    """Cubic Hermite coefficients per segment in the form y_k + u·ẏ_k + a s² + b s³.

    With s = u/h the cubic through (y_k, ẏ_k) and (y_{k+1}, ẏ_{k+1}) is
    y_k + s h ẏ_k + a s² + b s³ with A = Δy − h ẏ_k, B = h (ẏ_{k+1} − ẏ_k),
    a = 3A − B, b = B − 2A. A is formed with an exact product so that a
    straight path gives a = b = 0 to the last bit (the linear part is added
    later in double-double).

    Parameters
    ----------
    t : (N,) float64, s.
    y, dydt : (N, m) float64, values and time derivatives.
    a_out, b_out : (N − 1, m) float64, written.
    """
    n, m = y.shape
    for k in range(n - 1):
        h = t[k + 1] - t[k]
        for j in range(m):
            dy, dy_lo = _two_sum(y[k + 1, j], -y[k, j])
            p, p_lo = _two_prod(h, dydt[k, j])
            big = ((dy - p) + dy_lo) - p_lo
            bb = h * (dydt[k + 1, j] - dydt[k, j])
            a_out[k, j] = 3.0 * big - bb
            b_out[k, j] = bb - 2.0 * big


@njit(nogil=True, cache=True)
def _observer_times_dd(t, r, x0, x1, x2, c, tau_hi, tau_lo):
    """τ_k = t_k + |x − r_k|/c in double-double; returns min R_k (m)."""
    r_min = np.inf
    for k in range(t.shape[0]):
        d0h, d0l = _two_sum(x0, -r[k, 0])
        d1h, d1l = _two_sum(x1, -r[k, 1])
        d2h, d2l = _two_sum(x2, -r[k, 2])
        sh, sl = _dd_sq(d0h, d0l)
        qh, ql = _dd_sq(d1h, d1l)
        sh, sl = _dd_add(sh, sl, qh, ql)
        qh, ql = _dd_sq(d2h, d2l)
        sh, sl = _dd_add(sh, sl, qh, ql)
        rh, rl = _dd_sqrt(sh, sl)
        if rh < r_min:
            r_min = rh
        qh, ql = _dd_div_f(rh, rl, c)
        s, e = _two_sum(t[k], qh)
        tau_hi[k], tau_lo[k] = _fast_two_sum(s, e + ql)
    return r_min


@njit(nogil=True, cache=True)
def sample_observer_times(t, r, points, c, tau_hi, tau_lo):
    """Observer time t_k + R_k/c of every sample for every point (double-double).

    Parameters
    ----------
    t : (N,) s; r : (N, 3) m; points : (P, 3) m; c : m/s.
    tau_hi, tau_lo : (P, N) float64, written; τ = hi + lo, s.
    """
    for i in range(points.shape[0]):
        _observer_times_dd(t, r, points[i, 0], points[i, 1], points[i, 2], c, tau_hi[i], tau_lo[i])


@njit(nogil=True, cache=True)
def path_distance(points, r, dir_start, dir_end, use_rays, out_dist, out_where):
    """Smallest distance from each point to the path (chords between samples).

    With ``use_rays`` the straight-line continuations are included: the ray
    from r_0 along ``dir_start`` (pointing backwards in time) and from
    r_{N−1} along ``dir_end`` (unit vectors, or zero for a charge at rest).

    Parameters
    ----------
    points : (P, 3) m; r : (N, 3) m; dir_start, dir_end : (3,).
    out_dist : (P,) m, written. out_where : (P,) int64, written: the segment
        index of the closest approach, −1 for the start ray, N − 1 for the end ray.
    """
    n = r.shape[0]
    for i in range(points.shape[0]):
        best = np.inf
        where = 0
        for k in range(max(n - 1, 1)):
            k1 = min(k + 1, n - 1)
            s0 = r[k1, 0] - r[k, 0]
            s1 = r[k1, 1] - r[k, 1]
            s2 = r[k1, 2] - r[k, 2]
            w0 = points[i, 0] - r[k, 0]
            w1 = points[i, 1] - r[k, 1]
            w2 = points[i, 2] - r[k, 2]
            ss = s0 * s0 + s1 * s1 + s2 * s2
            f = 0.0
            if ss > 0.0:
                f = min(max((w0 * s0 + w1 * s1 + w2 * s2) / ss, 0.0), 1.0)
            e0 = w0 - f * s0
            e1 = w1 - f * s1
            e2 = w2 - f * s2
            dist = math.sqrt(e0 * e0 + e1 * e1 + e2 * e2)
            if dist < best:
                best = dist
                where = k
        if use_rays:
            for end in range(2):
                kk = 0 if end == 0 else n - 1
                u0 = dir_start[0] if end == 0 else dir_end[0]
                u1 = dir_start[1] if end == 0 else dir_end[1]
                u2 = dir_start[2] if end == 0 else dir_end[2]
                w0 = points[i, 0] - r[kk, 0]
                w1 = points[i, 1] - r[kk, 1]
                w2 = points[i, 2] - r[kk, 2]
                f = max(w0 * u0 + w1 * u1 + w2 * u2, 0.0)
                e0 = w0 - f * u0
                e1 = w1 - f * u1
                e2 = w2 - f * u2
                dist = math.sqrt(e0 * e0 + e1 * e1 + e2 * e2)
                if dist < best:
                    best = dist
                    where = -1 if end == 0 else n - 1
        out_dist[i] = best
        out_where[i] = where


# -- fields -------------------------------------------------------------------
@njit(nogil=True, cache=True)
def _n_minus_bhat(d0, d1, d2, rr, bh0, bh1, bh2, speed, inv_g2):
    """n − β̂ and κ = 1 − n·β without cancellation, from the separation d = R n.

    Split d along β̂: d = d∥ β̂ + d⊥. Then n − β̂ = d⊥/R + β̂ (d∥ − R)/R with
    d∥ − R = −|d⊥|²/(R + d∥) when d∥ > 0 (no difference of nearly equal
    numbers even when n ≈ β̂), and
    κ = (1 − |β|) + |β| |n − β̂|²/2, 1 − |β| = (1/γ²)/(1 + |β|).
    """
    dpar = d0 * bh0 + d1 * bh1 + d2 * bh2
    p0 = d0 - dpar * bh0
    p1 = d1 - dpar * bh1
    p2 = d2 - dpar * bh2
    perp2 = p0 * p0 + p1 * p1 + p2 * p2
    dmr = -perp2 / (rr + dpar) if dpar > 0.0 else dpar - rr
    w0 = (p0 + bh0 * dmr) / rr
    w1 = (p1 + bh1 * dmr) / rr
    w2 = (p2 + bh2 * dmr) / rr
    kappa = inv_g2 / (1.0 + speed) + 0.5 * speed * (perp2 + dmr * dmr) / (rr * rr)
    return w0, w1, w2, kappa


@njit(nogil=True, cache=True)
def _lw_field(
    d0, d1, d2, rr, bh0, bh1, bh2, speed, inv_g2, a0, a1, a2, coef, c, e_out, b_out, j, i
):
    """Liénard–Wiechert E and B at one retarded point (Jackson 3rd ed. eq. 14.14).

    d: separation observer − retarded position, m, R = |d|; β = speed·β̂ with
    β̂ a unit vector (or zero at rest); inv_g2 = 1/γ² (authoritative for
    1 − |β|); a = β̇, 1/s; coef = q/(4π ε0).
    """
    n0 = d0 / rr
    n1 = d1 / rr
    n2 = d2 / rr
    w0, w1, w2, kappa = _n_minus_bhat(d0, d1, d2, rr, bh0, bh1, bh2, speed, inv_g2)
    omb = inv_g2 / (1.0 + speed)  # 1 − |β|
    # n − β = (n − β̂) + β̂ (1 − |β|)
    m0 = w0 + bh0 * omb
    m1 = w1 + bh1 * omb
    m2 = w2 + bh2 * omb
    k3 = kappa * kappa * kappa
    fv = inv_g2 / (k3 * rr * rr)
    fa = 1.0 / (c * k3 * rr)
    # (n − β) × β̇
    p0 = m1 * a2 - m2 * a1
    p1 = m2 * a0 - m0 * a2
    p2 = m0 * a1 - m1 * a0
    # n × ((n − β) × β̇)
    q0 = n1 * p2 - n2 * p1
    q1 = n2 * p0 - n0 * p2
    q2 = n0 * p1 - n1 * p0
    e0 = coef * (fv * m0 + fa * q0)
    e1 = coef * (fv * m1 + fa * q1)
    e2 = coef * (fv * m2 + fa * q2)
    e_out[j, i, 0] = e0
    e_out[j, i, 1] = e1
    e_out[j, i, 2] = e2
    b_out[j, i, 0] = (n1 * e2 - n2 * e1) / c
    b_out[j, i, 1] = (n2 * e0 - n0 * e2) / c
    b_out[j, i, 2] = (n0 * e1 - n1 * e0) / c


@njit(nogil=True, cache=True)
def _unit_and_speed(b0, b1, b2, gam):
    """β̂ from the interpolated β, |β| and 1/γ² from γ (γ is authoritative)."""
    norm = math.sqrt(b0 * b0 + b1 * b1 + b2 * b2)
    if norm == 0.0:
        return 0.0, 0.0, 0.0, 0.0, 1.0
    inv_g2 = 1.0 / (gam * gam)
    speed = math.sqrt(1.0 - inv_g2)
    return b0 / norm, b1 / norm, b2 / norm, speed, inv_g2


@njit(nogil=True, cache=True)
def _separation_1(xj, rkj, vkj, arj, brj, u, s2, s3):
    dh, dl = _two_sum(xj, -rkj)
    ph, pl = _two_prod(u, vkj)
    dh, dl = _dd_add(dh, dl, -ph, -pl)
    return _dd_add(dh, dl, -(arj * s2 + brj * s3), 0.0)


@njit(nogil=True, cache=True)
def _separation(x0, x1, x2, r, v, ar, br, k, u, s):
    """x − r(t_k + u) in double-double from the Hermite cubic of r with ṙ = βc.

    The linear part u·ṙ_k is an exact product; only the small curvature part
    a s² + b s³ is rounded, so a straight path keeps full precision.
    """
    s2 = s * s
    s3 = s2 * s
    d0h, d0l = _separation_1(x0, r[k, 0], v[k, 0], ar[k, 0], br[k, 0], u, s2, s3)
    d1h, d1l = _separation_1(x1, r[k, 1], v[k, 1], ar[k, 1], br[k, 1], u, s2, s3)
    d2h, d2l = _separation_1(x2, r[k, 2], v[k, 2], ar[k, 2], br[k, 2], u, s2, s3)
    return d0h, d0l, d1h, d1l, d2h, d2l


@njit(nogil=True, cache=True)
def td_fields(
    t,
    r,
    v,
    beta,
    beta_dot,
    gamma,
    gamma_dot,
    ar,
    br,
    ab,
    bb,
    ag,
    bg,
    points,
    t_obs,
    order,
    continue_outside,
    coef,
    c,
    r_min,
    e_out,
    b_out,
    t_ret,
    status,
    iterations,
    tau_hi,
    tau_lo,
):
    """Liénard–Wiechert fields of a sampled trajectory at points and observer times.

    Parameters
    ----------
    t : (N,) s. r : (N, 3) m. v : (N, 3) m/s, equal to βc (the derivative
        used for r). beta : (N, 3). beta_dot : (N, 3) 1/s. gamma, gamma_dot :
        (N,) and (N,) 1/s.
    ar, br, ab, bb : (N − 1, 3); ag, bg : (N − 1, 1)
        Segment coefficients from :func:`segment_coefficients` for r, β, γ.
    points : (P, 3) m.
    t_obs : (M,) s, sorted ascending; order : (M,) int64, output row of
        each sorted time.
    continue_outside : bool
        Straight-line continuation outside the samples, else NaN.
    coef : float
        q/(4π ε0), V m.
    c : float
        Speed of light, m/s.
    r_min : float
        Distance (m) at or below which an observer counts as on the path.
    e_out, b_out : (M, P, 3) float64, written, V/m and T.
    t_ret : (M, P) float64, written, retarded time, s.
    status : (M, P) int8, written (codes in the module docstring).
    iterations : (M, P) int16, written: solver iterations used.
    tau_hi, tau_lo : (N,) float64 scratch.
    """
    n = t.shape[0]
    m = t_obs.shape[0]
    nan = np.nan
    for i in range(points.shape[0]):
        x0 = points[i, 0]
        x1 = points[i, 1]
        x2 = points[i, 2]
        rk_min = _observer_times_dd(t, r, x0, x1, x2, c, tau_hi, tau_lo)
        bad = STATUS_ON_PATH if rk_min <= r_min else -1
        if bad < 0:
            for k in range(n - 1):
                if _diff_dd(tau_hi[k + 1], tau_hi[k], tau_lo[k]) + tau_lo[k + 1] <= 0.0:
                    bad = STATUS_NON_MONOTONE
                    break
        if bad >= 0:
            for jj in range(m):
                j = order[jj]
                status[j, i] = bad
                t_ret[j, i] = nan
                iterations[j, i] = 0
                for q in range(3):
                    e_out[j, i, q] = nan
                    b_out[j, i, q] = nan
            continue
        k = 0
        for jj in range(m):
            j = order[jj]
            to = t_obs[jj]
            iterations[j, i] = 0
            g_first = _diff_dd(to, tau_hi[0], tau_lo[0])
            g_last = _diff_dd(to, tau_hi[n - 1], tau_lo[n - 1])
            if g_first < 0.0 or g_last > 0.0:
                if not continue_outside:
                    status[j, i] = STATUS_NAN
                    t_ret[j, i] = nan
                    for q in range(3):
                        e_out[j, i, q] = nan
                        b_out[j, i, q] = nan
                    continue
                _continuation(
                    g_first < 0.0,
                    to,
                    t,
                    r,
                    beta,
                    gamma,
                    x0,
                    x1,
                    x2,
                    c,
                    coef,
                    r_min,
                    e_out,
                    b_out,
                    t_ret,
                    status,
                    j,
                    i,
                )
                continue
            # bracket: τ_k ≤ t_obs < τ_{k+1}; times are swept in order so k only grows
            if k < n - 2 and _diff_dd(to, tau_hi[k + 1], tau_lo[k + 1]) >= 0.0:
                lo_k = k + 1
                hi_k = n - 1
                while hi_k - lo_k > 1:
                    mid = (lo_k + hi_k) // 2
                    if _diff_dd(to, tau_hi[mid], tau_lo[mid]) >= 0.0:
                        lo_k = mid
                    else:
                        hi_k = mid
                k = min(lo_k, n - 2)
            h = t[k + 1] - t[k]
            g0 = _diff_dd(to, tau_hi[k], tau_lo[k])  # ≥ 0
            span = _diff_dd(tau_hi[k + 1], tau_hi[k], tau_lo[k]) + tau_lo[k + 1]
            u = h * min(max(g0 / span, 0.0), 1.0)
            lo = 0.0
            hi = h
            # "a few ulp of t": the solver's target resolution in the retarded time
            tol = 4.0 * _EPS * max(abs(t[k]), abs(t[k + 1]))
            converged = False
            it = 0
            g_prev = np.inf
            while it < MAX_ITERATIONS:
                it += 1
                s = u / h
                d = _separation(x0, x1, x2, r, v, ar, br, k, u, s)
                rh, rl = _dd_sq(d[0], d[1])
                qh, ql = _dd_sq(d[2], d[3])
                rh, rl = _dd_add(rh, rl, qh, ql)
                qh, ql = _dd_sq(d[4], d[5])
                rh, rl = _dd_add(rh, rl, qh, ql)
                rh, rl = _dd_sqrt(rh, rl)
                qh, ql = _dd_div_f(rh, rl, c)
                # g = t_k + u + R/c − t_obs, in double-double
                gh, gl = _two_sum(t[k], -to)
                gh, gl = _dd_add(gh, gl, u, 0.0)
                gh, gl = _dd_add(gh, gl, qh, ql)
                g = gh + gl
                if g == 0.0:
                    converged = True
                    break
                if g < 0.0:
                    lo = u
                else:
                    hi = u
                # dg/du = κ of the interpolant, formed without cancellation
                dv0 = v[k, 0] + (2.0 * s * ar[k, 0] + 3.0 * s * s * br[k, 0]) / h
                dv1 = v[k, 1] + (2.0 * s * ar[k, 1] + 3.0 * s * s * br[k, 1]) / h
                dv2 = v[k, 2] + (2.0 * s * ar[k, 2] + 3.0 * s * s * br[k, 2]) / h
                gam = gamma[k] + (gamma[k + 1] - gamma[k]) * s
                bh0, bh1, bh2, speed, inv_g2 = _unit_and_speed(dv0, dv1, dv2, gam)
                dg = _n_minus_bhat(
                    d[0] + d[1], d[2] + d[3], d[4] + d[5], rh + rl, bh0, bh1, bh2, speed, inv_g2
                )[3]
                un = u - g / dg
                if abs(un - u) <= tol and lo <= un <= hi:
                    u = un
                    converged = True
                    break
                # Safeguard: bisect when Newton leaves the bracket or stops reducing |g|
                # (an inaccurate slope, e.g. from r and β that disagree, can make it cycle).
                if not (lo < un < hi) or abs(g) > 0.5 * g_prev:
                    un = 0.5 * (lo + hi)
                g_prev = abs(g)
                u = un
                if hi - lo <= tol:
                    converged = True
                    break
            iterations[j, i] = it
            # fields at the converged retarded time
            s = u / h
            s2 = s * s
            s3 = s2 * s
            d = _separation(x0, x1, x2, r, v, ar, br, k, u, s)
            d0 = d[0] + d[1]
            d1 = d[2] + d[3]
            d2 = d[4] + d[5]
            rr = math.sqrt(d0 * d0 + d1 * d1 + d2 * d2)
            t_ret[j, i] = t[k] + u
            if rr <= r_min:
                status[j, i] = STATUS_ON_PATH
                for q in range(3):
                    e_out[j, i, q] = nan
                    b_out[j, i, q] = nan
                continue
            status[j, i] = STATUS_INSIDE if converged else STATUS_NOT_CONVERGED
            b0 = beta[k, 0] + u * beta_dot[k, 0] + ab[k, 0] * s2 + bb[k, 0] * s3
            b1 = beta[k, 1] + u * beta_dot[k, 1] + ab[k, 1] * s2 + bb[k, 1] * s3
            b2 = beta[k, 2] + u * beta_dot[k, 2] + ab[k, 2] * s2 + bb[k, 2] * s3
            a0 = beta_dot[k, 0] + (2.0 * s * ab[k, 0] + 3.0 * s2 * bb[k, 0]) / h
            a1 = beta_dot[k, 1] + (2.0 * s * ab[k, 1] + 3.0 * s2 * bb[k, 1]) / h
            a2 = beta_dot[k, 2] + (2.0 * s * ab[k, 2] + 3.0 * s2 * bb[k, 2]) / h
            gam = gamma[k] + u * gamma_dot[k] + ag[k, 0] * s2 + bg[k, 0] * s3
            bh0, bh1, bh2, speed, inv_g2 = _unit_and_speed(b0, b1, b2, gam)
            _lw_field(
                d0,
                d1,
                d2,
                rr,
                bh0,
                bh1,
                bh2,
                speed,
                inv_g2,
                a0,
                a1,
                a2,
                coef,
                c,
                e_out,
                b_out,
                j,
                i,
            )


@njit(nogil=True, cache=True)
def _continuation(
    before, to, t, r, beta, gamma, x0, x1, x2, c, coef, r_min, e_out, b_out, t_ret, status, j, i
):
    """Velocity field of the straight-line continuation, retarded time in closed form.

    Before the first sample the charge moves on r_0 + β c (t − t_0), after the
    last on r_{N−1} + β c (t − t_{N−1}), with β̇ = 0 (Jackson 3rd ed. eq. 14.14,
    velocity term only); β = |β| β̂ with |β| from γ. With T = t_obs − t_end,
    d = x − r_end, A = cT − d·β and B = c²T² − |d|² (both formed in
    double-double: they are small differences of large numbers whenever the
    end sample is far from the retarded point), the light-cone condition
    |d ± β W| = cT ± W is a quadratic in W = c |t_r − t_end|:
    before: W²/γ² + 2 A W + B = 0, larger root;
    after:  W²/γ² − 2 A W + B = 0, smaller root;
    each root taken in the form free of cancellation.
    """
    kk = 0 if before else t.shape[0] - 1
    bh0, bh1, bh2, speed, inv_g2 = _unit_and_speed(beta[kk, 0], beta[kk, 1], beta[kk, 2], gamma[kk])
    omb = inv_g2 / (1.0 + speed)
    d0h, d0l = _two_sum(x0, -r[kk, 0])
    d1h, d1l = _two_sum(x1, -r[kk, 1])
    d2h, d2l = _two_sum(x2, -r[kk, 2])
    th, tl = _two_sum(to, -t[kk])
    cth, ctl = _two_prod(c, th)
    cth, ctl = _fast_two_sum(cth, ctl + c * tl)
    # d·β̂ in double-double
    ph, pl = _two_prod(d0h, bh0)
    qh, ql = _two_prod(d1h, bh1)
    ph, pl = _dd_add(ph, pl, qh, ql)
    qh, ql = _two_prod(d2h, bh2)
    ph, pl = _dd_add(ph, pl, qh, ql)
    ph, pl = _dd_add(ph, pl, d0l * bh0 + d1l * bh1 + d2l * bh2, 0.0)
    # A = cT − d·β̂ + (1 − |β|) d·β̂
    ah, al = _dd_add(cth, ctl, -ph, -pl)
    big_a = (ah + al) + omb * ph
    # B = (cT)² − |d|²
    bh_, bl_ = _dd_sq(cth, ctl)
    qh, ql = _dd_sq(d0h, d0l)
    bh_, bl_ = _dd_add(bh_, bl_, -qh, -ql)
    qh, ql = _dd_sq(d1h, d1l)
    bh_, bl_ = _dd_add(bh_, bl_, -qh, -ql)
    qh, ql = _dd_sq(d2h, d2l)
    bh_, bl_ = _dd_add(bh_, bl_, -qh, -ql)
    big_b = bh_ + bl_
    root = math.sqrt(max(big_a * big_a - big_b * inv_g2, 0.0))
    if before:
        if big_a < 0.0:
            w = (root - big_a) / inv_g2
        else:
            w = -big_b / (big_a + root) if big_a + root > 0.0 else 0.0
        sign = 1.0  # d_ret = d + β W
        t_ret[j, i] = t[kk] - w / c
        status[j, i] = STATUS_BEFORE
    else:
        w = big_b / (big_a + root) if big_a + root > 0.0 else 0.0
        sign = -1.0  # d_ret = d − β W
        t_ret[j, i] = t[kk] + w / c
        status[j, i] = STATUS_AFTER
    sw = sign * speed * w
    d0 = (d0h + d0l) + bh0 * sw
    d1 = (d1h + d1l) + bh1 * sw
    d2 = (d2h + d2l) + bh2 * sw
    rr = math.sqrt(d0 * d0 + d1 * d1 + d2 * d2)
    if rr <= r_min:
        status[j, i] = STATUS_ON_PATH
        for q3 in range(3):
            e_out[j, i, q3] = np.nan
            b_out[j, i, q3] = np.nan
        return
    _lw_field(
        d0, d1, d2, rr, bh0, bh1, bh2, speed, inv_g2, 0.0, 0.0, 0.0, coef, c, e_out, b_out, j, i
    )

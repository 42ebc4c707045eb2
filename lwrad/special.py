"""Synchrotron-radiation special functions and the exact coefficients of the handbook formulas.

Functions (all vectorised, NumPy broadcasting, float64):

* undulator on-axis harmonic functions :func:`undulator_F` (Fn), :func:`undulator_Q` (Qn)
  and the on-axis power-density function :func:`undulator_G` (G(K));
* bending-magnet functions :func:`bend_G1` (y ∫_y^∞ K_{5/3}), :func:`bend_H2`
  (y² K_{2/3}(y/2)²) and the normalised power spectrum :func:`bend_S`.

Coefficients: each handbook formula ``X = c · E[GeV]^a · ...`` has its coefficient ``c``
computed here from :mod:`scipy.constants` (via :mod:`lwrad.constants`), never copied as a
rounded number. :data:`HANDBOOK_COEFFICIENTS` lists, for each, the exact value, the rounded
value printed in the X-ray Data Booklet sec. 2.1 and the units of the formula, so tests can
compare them at the handbook's precision.

References
----------
.. [XDB] X-ray Data Booklet, sec. 2.1 "Characteristics of synchrotron radiation"
   (bending magnets: εc, G1, H2; undulators: K, λn, Fn(K), Qn, total power, G(K)).
.. [J14] J. D. Jackson, Classical Electrodynamics, 3rd ed., ch. 14 (14.26 Liénard power,
   14.79 the synchrotron angular-spectral distribution with K_{2/3} and K_{1/3}).
.. [S49] J. Schwinger, Phys. Rev. 75 (1949) 1912.

All derivations below take the ultrarelativistic limit (β → 1) that the handbook formulas
assume; a relative error of order 1/γ² (< 1e-7 for γ > 3000) is neglected.
"""

from __future__ import annotations

import math

import numpy as np
from scipy import special as _sp

from lwrad import constants as _k
from lwrad.errors import InputError

__all__ = [
    "undulator_F",
    "undulator_Q",
    "undulator_G",
    "bend_G1",
    "bend_H2",
    "bend_S",
    "BEND_S_NORM",
    "GAMMA_PER_GEV",
    "BANDWIDTH",
    "COEF_UNDULATOR_FLUX_DENSITY",
    "COEF_CENTRAL_CONE_FLUX",
    "COEF_BEND_FLUX_PER_MRAD",
    "COEF_BEND_FLUX_DENSITY",
    "COEF_CRITICAL_ENERGY_KEV",
    "COEF_UNDULATOR_PHOTON_ENERGY_KEV",
    "COEF_UNDULATOR_POWER_KW",
    "COEF_UNDULATOR_POWER_DENSITY",
    "COEF_BEND_POWER_PER_MRAD",
    "COEF_K_PARAMETER",
    "HANDBOOK_COEFFICIENTS",
]


# --------------------------------------------------------------------------------------------
# undulator functions
# --------------------------------------------------------------------------------------------
def _float_array(value):
    """``value`` as a float array, or None if it is not numeric."""
    if isinstance(value, str | bytes):
        return None
    try:
        return np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        return None


def _harmonic_and_k(n, K, *, name="n"):
    try:
        n_arr = np.asarray(n)
    except (TypeError, ValueError):
        raise InputError(
            f"harmonic {name} must be a positive integer, got {n!r}", location=name
        ) from None
    if n_arr.dtype.kind not in "iuf" or not np.all(np.isfinite(n_arr)):
        raise InputError(f"harmonic {name} must be a positive integer, got {n!r}", location=name)
    if np.any(n_arr < 1) or np.any(n_arr != np.round(n_arr)):
        raise InputError(f"harmonic {name} must be a positive integer, got {n!r}", location=name)
    k_arr = _float_array(K)
    if k_arr is None or not np.all(np.isfinite(k_arr)) or np.any(k_arr < 0):
        raise InputError(f"K must be finite and non-negative, got {K!r}", location="K")
    return n_arr.astype(float), k_arr


def undulator_F(n, K):
    r"""On-axis harmonic function Fn(K) of a planar undulator.

    .. math::

        F_n(K) = \frac{n^2 K^2}{(1+K^2/2)^2}
                 \left[J_{(n-1)/2}(x) - J_{(n+1)/2}(x)\right]^2,\qquad
        x = \frac{n K^2}{4 (1 + K^2/2)}

    for odd n; on axis the even harmonics vanish, so Fn = 0 for even n. The on-axis peak
    photon flux density of harmonic n is α N² γ² (Δω/ω) (I/e) Fn(K) per rad² (see
    :data:`COEF_UNDULATOR_FLUX_DENSITY`). Reference: X-ray Data Booklet sec. 2.1.

    Parameters
    ----------
    n : int or array_like of int
        Harmonic number(s), ≥ 1.
    K : float or array_like
        Deflection parameter (dimensionless), ≥ 0. Broadcast against ``n``.

    Returns
    -------
    ndarray or float
        Fn(K), dimensionless.
    """
    nf, k = _harmonic_and_k(n, K)
    k2 = k * k
    x = nf * k2 / (4.0 + 2.0 * k2)
    odd = np.mod(nf, 2.0) == 1.0
    bessel = _sp.jv((nf - 1.0) / 2.0, x) - _sp.jv((nf + 1.0) / 2.0, x)
    f = (nf * k / (1.0 + 0.5 * k2)) ** 2 * bessel**2
    f = np.where(odd, f, 0.0)
    return f[()] if f.ndim == 0 else f


def undulator_Q(n, K):
    r"""Central-cone flux function Qn(K) = (1 + K²/2) Fn(K) / n of a planar undulator.

    The flux in the central cone of harmonic n is π α N (Δω/ω) (I/e) Qn(K)
    (see :data:`COEF_CENTRAL_CONE_FLUX`). Reference: X-ray Data Booklet sec. 2.1.

    Parameters
    ----------
    n : int or array_like of int
        Harmonic number(s), ≥ 1.
    K : float or array_like
        Deflection parameter, ≥ 0.

    Returns
    -------
    ndarray or float
        Qn(K), dimensionless (0 for even n).
    """
    nf, k = _harmonic_and_k(n, K)
    q = (1.0 + 0.5 * k * k) * np.asarray(undulator_F(nf.astype(int), k)) / nf
    return q[()] if q.ndim == 0 else q


def undulator_G(K):
    r"""On-axis power-density function G(K) of a planar undulator.

    .. math::

        G(K) = K \frac{K^6 + \tfrac{24}{7} K^4 + 4 K^2 + \tfrac{16}{7}}{(1 + K^2)^{7/2}},

    G → 1 for K ≫ 1 (wiggler limit). The on-axis power density is
    (21 γ² / (16 π K)) G(K) P_total per sr (see :data:`COEF_UNDULATOR_POWER_DENSITY`).
    Reference: X-ray Data Booklet sec. 2.1.

    Parameters
    ----------
    K : float or array_like
        Deflection parameter, ≥ 0.

    Returns
    -------
    ndarray or float
        G(K), dimensionless.
    """
    _, k = _harmonic_and_k(1, K)
    k2 = k * k
    g = k * (k2**3 + 24.0 / 7.0 * k2**2 + 4.0 * k2 + 16.0 / 7.0) / (1.0 + k2) ** 3.5
    return g[()] if g.ndim == 0 else g


# --------------------------------------------------------------------------------------------
# bending-magnet functions
# --------------------------------------------------------------------------------------------
def _photon_ratio(y):
    y_arr = _float_array(y)
    if y_arr is None or not np.all(np.isfinite(y_arr)) or np.any(y_arr < 0):
        raise InputError(f"y = ε/εc must be finite and non-negative, got {y!r}", location="y")
    return y_arr


# Trapezoidal rule on [0, ∞) for the even, entire integrand of the integral representation
# below converges geometrically in the step; with h = 1/32 the discretisation error is far
# below 1e-15 (checked in tests against adaptive quadrature of K_{5/3} and by halving h).
_T_STEP = 1.0 / 32.0
# (cosh t − 1) y > 40 makes the scaled integrand < e^-40 ≈ 4e-18 of its value at t = 0.
_T_CUTOFF_EXPONENT = 40.0
_CHUNK = 2048


def _int_k53_scaled(y, step=_T_STEP):
    """e^{y} ∫_y^∞ K_{5/3}(t) dt for y > 0 (1-D float array).

    Uses ∫_y^∞ K_ν(t) dt = ∫_0^∞ e^{−y cosh u} cosh(ν u) / cosh u du, which follows from
    K_ν(t) = ∫_0^∞ e^{−t cosh u} cosh(ν u) du (Watson; Abramowitz & Stegun 9.6.24) by
    exchanging the order of integration. Scaled by e^{y} so large y neither underflows nor
    loses relative precision.
    """
    out = np.empty_like(y)
    for start in range(0, y.size, _CHUNK):
        yy = y[start : start + _CHUNK]
        u_max = math.acosh(1.0 + _T_CUTOFF_EXPONENT / float(np.min(yy)))
        u = np.arange(0.0, u_max + step, step)
        weight = np.full(u.size, step)
        weight[0] = 0.5 * step
        # exp(−y (cosh u − 1)) with cosh u − 1 = 2 sinh²(u/2): no cancellation at small u
        cm1 = 2.0 * np.sinh(0.5 * u) ** 2
        shape = np.cosh(5.0 / 3.0 * u) / np.cosh(u) * weight
        out[start : start + _CHUNK] = np.exp(-np.outer(yy, cm1)) @ shape
    return out


def bend_G1(y):
    r"""Bending-magnet function G1(y) = y ∫_y^∞ K_{5/3}(y') dy'.

    The photon flux per mrad of horizontal angle (integrated over the vertical angle) is
    √3 α γ (Δω/ω) (I/e) G1(y) / (2π) per rad, y = ε/εc (see :data:`COEF_BEND_FLUX_PER_MRAD`).
    Reference: X-ray Data Booklet sec. 2.1; Jackson ch. 14; Schwinger (1949).

    Agrees with adaptive quadrature of K_{5/3} to 1e-10 relative (the reference's own limit) for
    1e-8 ≤ y ≤ 200, and halving the internal step changes it by < 1e-14 (see the tests);
    G1(0) = 0, G1 ≈ 2.1495 y^{1/3} for small y and √(π y/2) e^{−y} for large y. Values for
    y > ~740 underflow to 0.

    Parameters
    ----------
    y : float or array_like
        Photon energy over critical energy, ε/εc ≥ 0.

    Returns
    -------
    ndarray or float
        G1(y), dimensionless.
    """
    y_arr = _photon_ratio(y)
    flat = y_arr.ravel()
    out = np.zeros_like(flat)
    pos = flat > 0.0
    if np.any(pos):
        yp = flat[pos]
        order = np.argsort(yp)  # sorted chunks share similar integration ranges
        scaled = np.empty_like(yp)
        scaled[order] = _int_k53_scaled(yp[order])
        out[pos] = yp * scaled * np.exp(-yp)
    out = out.reshape(y_arr.shape)
    return out[()] if out.ndim == 0 else out


def bend_H2(y):
    r"""Bending-magnet function H2(y) = y² K_{2/3}(y/2)².

    The on-plane (ψ = 0) photon flux density is 3 α γ² (Δω/ω) (I/e) H2(y) / (4π²) per rad²,
    y = ε/εc (see :data:`COEF_BEND_FLUX_DENSITY`). Reference: X-ray Data Booklet sec. 2.1;
    Jackson eq. 14.79 at ψ = 0.

    Parameters
    ----------
    y : float or array_like
        Photon energy over critical energy, ε/εc ≥ 0.

    Returns
    -------
    ndarray or float
        H2(y), dimensionless (H2(0) = 0).
    """
    y_arr = _photon_ratio(y)
    with np.errstate(invalid="ignore", over="ignore"):
        # kve keeps precision at large y; K_{2/3}(y/2)² = kve² e^{−y}
        h = np.where(
            y_arr > 0.0, (y_arr * _sp.kve(2.0 / 3.0, 0.5 * y_arr)) ** 2 * np.exp(-y_arr), 0.0
        )
    return h[()] if h.ndim == 0 else h


#: 9√3/(8π): makes ∫_0^∞ S(y) dy = 1, since ∫_0^∞ y ∫_y^∞ K_{5/3} dy = ½ ∫_0^∞ t² K_{5/3}(t) dt
#: = Γ(7/3) Γ(2/3) = 8π/(9√3) (Gradshteyn & Ryzhik 6.561.16).
BEND_S_NORM: float = 9.0 * math.sqrt(3.0) / (8.0 * math.pi)


def bend_S(y):
    r"""Normalised synchrotron power spectrum S(y) = (9√3/(8π)) y ∫_y^∞ K_{5/3}(y') dy'.

    ∫_0^∞ S(y) dy = 1 and half of the power lies above y = 1 (ε > εc); the power radiated per
    unit y is P_total S(y). Reference: Jackson ch. 14 (the angle-integrated spectrum);
    X-ray Data Booklet sec. 2.1.

    Parameters
    ----------
    y : float or array_like
        Photon energy over critical energy, ε/εc ≥ 0.

    Returns
    -------
    ndarray or float
        S(y), dimensionless.
    """
    return BEND_S_NORM * bend_G1(y)


# --------------------------------------------------------------------------------------------
# exact coefficients of the handbook formulas (X-ray Data Booklet sec. 2.1)
# --------------------------------------------------------------------------------------------
#: Lorentz factor per GeV of electron total energy, γ/E[GeV] = 1e9 e / (m_e c²) (≈ 1956.95).
GAMMA_PER_GEV: float = 1e9 * _k.e / (_k.m_e * _k.c**2)

#: The handbook's relative bandwidth, Δω/ω = 0.1 %.
BANDWIDTH: float = 1e-3

_MRAD = 1e-3
_MRAD2 = 1e-6

#: Undulator on-axis peak flux density, ph/s/mrad²/0.1%BW = C N² E²[GeV] I[A] Fn(K).
#: From d²F/dΩ = α N² γ² (Δω/ω) (I/e) Fn(K) per sr (X-ray Data Booklet 2.1):
#: C = α γ_GeV² 1e-3 1e-6 / e (handbook 1.744e14).
COEF_UNDULATOR_FLUX_DENSITY: float = _k.alpha * GAMMA_PER_GEV**2 * BANDWIDTH * _MRAD2 / _k.e

#: Undulator central-cone flux, ph/s/0.1%BW = C N I[A] Qn(K).
#: From F = π α N (Δω/ω) (I/e) Qn(K) (X-ray Data Booklet 2.1): C = π α 1e-3 / e (handbook 1.431e14).
COEF_CENTRAL_CONE_FLUX: float = math.pi * _k.alpha * BANDWIDTH / _k.e

#: Bending-magnet flux per mrad of horizontal angle, ph/s/mrad/0.1%BW = C E[GeV] I[A] G1(y).
#: From d²F/dθ = (√3/(2π)) α γ (Δω/ω) (I/e) G1(y) per rad (X-ray Data Booklet 2.1; Jackson
#: 14.79 integrated over the vertical angle): C = √3 α γ_GeV 1e-3 1e-3 / (2π e) (handbook 2.457e13).
COEF_BEND_FLUX_PER_MRAD: float = (
    math.sqrt(3.0) / (2.0 * math.pi) * _k.alpha * GAMMA_PER_GEV * BANDWIDTH * _MRAD / _k.e
)

#: Bending-magnet on-plane flux density, ph/s/mrad²/0.1%BW = C E²[GeV] I[A] H2(y).
#: From d²F/dΩ|ψ=0 = (3/(4π²)) α γ² (Δω/ω) (I/e) H2(y) per sr (Jackson 14.79 at ψ = 0, divided
#: by ħ for photons): C = 3 α γ_GeV² 1e-3 1e-6 / (4π² e) (≈ 1.3255e13; handbook prints 1.327e13).
COEF_BEND_FLUX_DENSITY: float = (
    3.0 / (4.0 * math.pi**2) * _k.alpha * GAMMA_PER_GEV**2 * BANDWIDTH * _MRAD2 / _k.e
)

#: Critical photon energy, keV = C E²[GeV] B[T].
#: From εc = (3/2) ħ c γ³ / ρ with ρ = γ m c / (e B) (β → 1): εc = 3 ħ e B γ² / (2 m);
#: C = 3 ħ γ_GeV² / (2 m_e) / 1e3 (eV per keV; the e of J→eV cancels the e of eB) (handbook 0.665).
COEF_CRITICAL_ENERGY_KEV: float = 1.5 * _k.hbar * GAMMA_PER_GEV**2 / _k.m_e / 1e3

#: Undulator fundamental photon energy on axis, keV = C E²[GeV] / (λu[cm] (1 + K²/2)).
#: From λ1 = λu (1 + K²/2 + γ²θ²) / (2 γ²) (X-ray Data Booklet 2.1), ε = h c / λ:
#: C = 2 h c γ_GeV² / (1e-2 m · e · 1e3) (handbook 0.950).
COEF_UNDULATOR_PHOTON_ENERGY_KEV: float = 2.0 * _k.h * _k.c * GAMMA_PER_GEV**2 / (1e-2 * _k.e * 1e3)

#: Total power of a planar sinusoidal undulator, kW = C E²[GeV] B0²[T] L[m] I[A].
#: Liénard's power for transverse acceleration (Jackson 14.26, β → 1),
#: P = e⁴ B² γ² / (6π ε0 m² c), averaged over the period (⟨B²⟩ = B0²/2), times the time L/c
#: spent in the device, times I/e electrons per second:
#: P = e³ γ² B0² L I / (12π ε0 m² c²); C = e³ γ_GeV² / (12π ε0 m_e² c²) / 1e3 (handbook 0.633).
COEF_UNDULATOR_POWER_KW: float = (
    _k.e**3 * GAMMA_PER_GEV**2 / (12.0 * math.pi * _k.epsilon_0 * _k.m_e**2 * _k.c**2) / 1e3
)

#: Undulator on-axis power density, W/mrad² = C B0[T] E⁴[GeV] I[A] N G(K).
#: With d²P/dΩ = (21 γ² / (16π K)) G(K) P_total (X-ray Data Booklet 2.1), P_total as above and
#: L/K = 2π m c N / (e B0): d²P/dΩ = 7 e² γ⁴ B0 N I G(K) / (32π ε0 m c) per sr;
#: C = 7 e² γ_GeV⁴ 1e-6 / (32π ε0 m_e c) (handbook 10.84).
COEF_UNDULATOR_POWER_DENSITY: float = (
    7.0 * _k.e**2 * GAMMA_PER_GEV**4 * _MRAD2 / (32.0 * math.pi * _k.epsilon_0 * _k.m_e * _k.c)
)

#: Bending-magnet power per mrad of horizontal angle, W/mrad = C B[T] E³[GeV] I[A].
#: Energy lost per turn U0 = e² γ⁴ / (3 ε0 ρ) (Liénard, Jackson 14.26, over 2π ρ / c), power
#: U0 I / e spread over 2π rad, ρ = γ m c / (e B): dP/dθ = e² γ³ B I / (6π ε0 m c);
#: C = e² γ_GeV³ 1e-3 / (6π ε0 m_e c) (handbook 4.22).
COEF_BEND_POWER_PER_MRAD: float = (
    _k.e**2 * GAMMA_PER_GEV**3 * _MRAD / (6.0 * math.pi * _k.epsilon_0 * _k.m_e * _k.c)
)

#: Undulator deflection parameter, K = C B0[T] λu[cm].
#: From K = e B0 λu / (2π m c) (X-ray Data Booklet 2.1): C = e 1e-2 / (2π m_e c) (handbook 0.934).
COEF_K_PARAMETER: float = _k.e * 1e-2 / (2.0 * math.pi * _k.m_e * _k.c)

#: name → (exact value, value printed in the X-ray Data Booklet sec. 2.1, formula with units).
HANDBOOK_COEFFICIENTS: dict[str, tuple[float, float, str]] = {
    "undulator_flux_density": (
        COEF_UNDULATOR_FLUX_DENSITY,
        1.744e14,
        "ph/s/mrad²/0.1%BW = C N² E²[GeV] I[A] Fn(K)",
    ),
    "central_cone_flux": (COEF_CENTRAL_CONE_FLUX, 1.431e14, "ph/s/0.1%BW = C N I[A] Qn(K)"),
    "bend_flux_per_mrad": (
        COEF_BEND_FLUX_PER_MRAD,
        2.457e13,
        "ph/s/mrad/0.1%BW = C E[GeV] I[A] G1(y)",
    ),
    "bend_flux_density": (
        COEF_BEND_FLUX_DENSITY,
        1.327e13,
        "ph/s/mrad²/0.1%BW = C E²[GeV] I[A] H2(y)",
    ),
    "critical_energy": (COEF_CRITICAL_ENERGY_KEV, 0.665, "keV = C E²[GeV] B[T]"),
    "undulator_photon_energy": (
        COEF_UNDULATOR_PHOTON_ENERGY_KEV,
        0.950,
        "keV = C n E²[GeV] / (λu[cm] (1 + K²/2 + γ²θ²))",
    ),
    "undulator_power": (COEF_UNDULATOR_POWER_KW, 0.633, "kW = C E²[GeV] B0²[T] L[m] I[A]"),
    "undulator_power_density": (
        COEF_UNDULATOR_POWER_DENSITY,
        10.84,
        "W/mrad² = C B0[T] E⁴[GeV] I[A] N G(K)",
    ),
    "bend_power_per_mrad": (COEF_BEND_POWER_PER_MRAD, 4.22, "W/mrad = C B[T] E³[GeV] I[A]"),
    "K_parameter": (COEF_K_PARAMETER, 0.934, "K = C B0[T] λu[cm]"),
}

"""Fast beam smearing of a far-field single-electron pattern (plain arrays, no observers).

For far-field patterns of a beam whose particles differ from the reference
only by their direction and energy, the beam's angular spectral intensity is

    I_beam(ω, θ) = ∫ dδ g(δ) ∫ d²θ₀ G_β(θ₀) s² I₁(ω/s², s(θ − θ₀ − D'δ)),  s = 1 + δ,

with I₁ the single-electron pattern (any quantity proportional to
d²W/(dω dΩ), e.g. flux density per 0.1 % bandwidth), g the Gaussian
energy distribution (rms σ_δ), G_β the Gaussian betatron angular
distribution (σ_x'β, σ_y'β) and D' the dispersion slope.

Assumptions (stated in the public docstrings too):

* far field, zero-size source: a position offset x₀ moves the pattern by
  x₀/D on a screen at distance D, which vanishes on an angular grid
  (D → ∞); only the angles matter, their marginal distribution at the
  source, σ_x' = sqrt(ε γ_T);
* a tilt by θ₀ shifts the far-field pattern by θ₀ (exact for a rigid
  rotation; third order in the small angles for a fixed magnet, see
  :mod:`lwrad.beam`); the tangent-plane angles add linearly to second order;
* an energy deviation rescales the pattern as s² I₁(ω/s², sθ): in a static
  field depending on z only, all angles along the path scale as 1/s and the
  slippage 1/β_z − 1 ≈ (1 + γ²θ²)/(2γ²) as 1/s², so the photon energy of
  every feature scales as s² (δE/E → 2δ relative photon-energy shift at a
  harmonic) and the amplitude R|Ẽ| ∝ ω·angle as s (paraxial, leading order
  in 1/γ²).

Discretisation: the angular convolution carries the pattern between the
nodes by a cubic spline sampled on a 4× finer mesh, takes it linear between
those (zero one step beyond the grid) and integrates it against the
Gaussian exactly, evaluating the result at the original nodes; the error is
O(h⁴) from the spline plus O((h/4)²) from the fine mesh. The change of the grid-integrated flux (what
the blur carries across the grid's edge) is reported as ``flux_change``. Photon energies are interpolated with a not-a-knot
cubic spline; the energy distribution is integrated by the trapezoid rule
on a uniform δ grid (spectrally accurate for a Gaussian weight).
"""

from __future__ import annotations

import math

import numpy as np
from scipy.interpolate import CubicSpline
from scipy.special import ndtr

from lwrad.errors import InputError

__all__ = [
    "trapezoid_weights",
    "gaussian_kernel",
    "convolve_angles",
    "rescale_angles",
    "energy_nodes",
    "smear_far_field",
]

_INV_SQRT_2PI = 1.0 / math.sqrt(2.0 * math.pi)


def _axis(axis):
    a = np.asarray(axis, dtype=float)
    if a.ndim != 1 or a.size < 1 or not np.all(np.isfinite(a)):
        raise InputError("an axis must be a non-empty finite 1-D array")
    if a.size > 1 and not np.all(np.diff(a) > 0):
        raise InputError("axis values must increase strictly")
    return a


def trapezoid_weights(axis) -> np.ndarray:
    """Integration weights of the trapezoid rule on the nodes (half cells at the ends; 1 for one node)."""
    a = _axis(axis)
    if a.size == 1:
        return np.ones(1)
    h = np.diff(a)
    w = np.zeros(a.size)
    w[:-1] += 0.5 * h
    w[1:] += 0.5 * h
    return w


def _psi(u):
    """Ψ(u) = ∫_{-∞}^{u} Φ = u Φ(u) + φ(u), Φ the standard normal CDF."""
    return u * ndtr(u) + _INV_SQRT_2PI * np.exp(-0.5 * u * u)


def gaussian_kernel(axis, sigma: float, shift: float = 0.0, at=None) -> np.ndarray:
    """Matrix M with (M @ f)_i = (f ⊛ Gaussian(σ), moved by ``shift``)(x_i) for f linear between nodes.

    Parameters
    ----------
    axis : array_like, shape (n,)
        Strictly increasing nodes θ_j of f (rad, or any unit shared with sigma).
    sigma : float
        Gaussian rms (≥ 0; zero gives linear interpolation at x_i − shift).
    shift : float
        Mean of the Gaussian: f is moved by +shift.
    at : array_like, shape (m,), optional
        Where to evaluate, x_i; default the nodes themselves.

    Returns
    -------
    ndarray, shape (m, n)

    Notes
    -----
    f is represented by hat functions on the nodes and taken to vanish one
    step beyond each end. A hat with neighbours a < b < d is
    ramp(θ−a)/(b−a) − ramp(θ−b)(1/(b−a) + 1/(d−b)) + ramp(θ−d)/(d−b), and a
    ramp convolved with a normalised Gaussian is σΨ((x − a)/σ),
    Ψ(u) = uΦ(u) + φ(u) (integrate the normal CDF once), so each element is
    a three-term sum, exact for any σ.
    """
    a = _axis(axis)
    x_out = a if at is None else _axis(at)
    sigma = float(sigma)
    mu = float(shift)
    if not (math.isfinite(sigma) and sigma >= 0 and math.isfinite(mu)):
        raise InputError(
            f"sigma must be finite and >= 0 and shift finite, got {sigma!r}, {shift!r}"
        )
    if a.size == 1:
        if sigma > 0 or mu != 0:
            raise InputError(
                "a single-point axis cannot be convolved with an angular spread; give a grid that covers "
                "several rms divergences"
            )
        return np.ones((x_out.size, 1))
    h = np.diff(a)
    ext = np.concatenate(([a[0] - h[0]], a, [a[-1] + h[-1]]))  # f = 0 at these virtual nodes
    left, mid, right = ext[:-2], ext[1:-1], ext[2:]
    x = (x_out - mu)[:, None]
    if sigma < 1e-9 * float(h.min()):
        # linear interpolation at the shifted points (the Gaussian is narrower than rounding sees)
        up = (x - left[None, :]) / (mid - left)[None, :]
        down = (right[None, :] - x) / (right - mid)[None, :]
        return np.clip(np.minimum(up, down), 0.0, None)
    hl = (mid - left)[None, :]
    hr = (right - mid)[None, :]
    return sigma * (
        _psi((x - left[None, :]) / sigma) / hl
        - _psi((x - mid[None, :]) / sigma) * (1.0 / hl + 1.0 / hr)
        + _psi((x - right[None, :]) / sigma) / hr
    )


def _refine(axis, factor):
    """``axis`` with ``factor − 1`` equally spaced points inserted in every interval."""
    s = np.arange(factor) / factor
    inner = (axis[:-1, None] + np.diff(axis)[:, None] * s[None, :]).ravel()
    return np.concatenate((inner, axis[-1:]))


def _convolve_axis(data, axis, sigma, shift, along, oversample):
    """Gaussian blur of ``data`` along one array axis, evaluated at the original nodes."""
    if sigma == 0.0 and shift == 0.0:
        return data
    if oversample > 1 and axis.size >= 4:
        # a not-a-knot cubic spline carries the pattern between the nodes (interpolation error
        # O(h⁴)); the hat-function blur on the refined nodes then adds only O((h/oversample)²)
        fine = _refine(axis, oversample)
        data = CubicSpline(axis, data, axis=along, bc_type="not-a-knot")(fine)
    else:
        fine = axis
    m = gaussian_kernel(fine, sigma, shift, at=axis)
    return np.moveaxis(np.tensordot(m, data, axes=([1], [along])), 0, along)


def convolve_angles(
    intensity, theta_x, theta_y, sigma_x, sigma_y, shift_x=0.0, shift_y=0.0, *, oversample=4
):
    """Convolve (n_e, ny, nx) patterns with a separable 2-D Gaussian in angle.

    Parameters
    ----------
    intensity : array_like, shape (n_e, ny, nx)
    theta_x, theta_y : array_like
        Strictly increasing angles, rad.
    sigma_x, sigma_y : float
        rms of the Gaussian, rad.
    shift_x, shift_y : float
        Its mean, rad.
    oversample : int
        Spline refinement of each interval before the exact hat-function blur
        (1: linear interpolation between the given nodes, error O(h²)).

    Returns
    -------
    out : ndarray, shape (n_e, ny, nx)
    flux_change : ndarray, shape (n_e,)
        Relative change of the grid-integrated intensity (trapezoid rule):
        what the blur carries across the grid's edge, plus quadrature error.
    """
    intensity = np.asarray(intensity, dtype=float)
    tx, ty = _axis(theta_x), _axis(theta_y)
    out = _convolve_axis(intensity, tx, float(sigma_x), float(shift_x), 2, int(oversample))
    out = _convolve_axis(out, ty, float(sigma_y), float(shift_y), 1, int(oversample))
    area = trapezoid_weights(ty)[:, None] * trapezoid_weights(tx)[None, :]
    before = np.sum(intensity * area, axis=(1, 2))
    after = np.sum(out * area, axis=(1, 2))
    change = np.divide(after - before, before, out=np.zeros_like(before), where=before > 0)
    return out, change


def _linear_weights(axis, points):
    """Indices and weights of linear interpolation at ``points``; zero outside the axis."""
    n = axis.size
    if n == 1:
        inside = points == axis[0]
        return (
            np.zeros(points.size, dtype=int),
            np.zeros(points.size, dtype=int),
            inside * 1.0,
            np.zeros(points.size),
        )
    k = np.clip(np.searchsorted(axis, points, side="right") - 1, 0, n - 2)
    f = (points - axis[k]) / (axis[k + 1] - axis[k])
    inside = (points >= axis[0]) & (points <= axis[-1])
    return k, k + 1, np.where(inside, 1.0 - f, 0.0), np.where(inside, f, 0.0)


def _integral(frames, tx, ty):
    area = trapezoid_weights(ty)[:, None] * trapezoid_weights(tx)[None, :]
    return np.sum(frames * area, axis=(1, 2))


def rescale_angles(intensity, theta_x, theta_y, scale: float):
    """I(θ) → I(scale·θ) on the same grid, linear interpolation, zero beyond the grid."""
    tx = np.asarray(theta_x, dtype=float)
    ty = np.asarray(theta_y, dtype=float)
    if scale == 1.0:
        return np.asarray(intensity, dtype=float)
    if (tx.size == 1 and tx[0] != 0.0) or (ty.size == 1 and ty[0] != 0.0):
        raise InputError(
            "an energy deviation rescales angles; a single off-axis direction cannot be rescaled — "
            "give a grid around it"
        )
    ix0, ix1, wx0, wx1 = _linear_weights(tx, scale * tx)
    iy0, iy1, wy0, wy1 = _linear_weights(ty, scale * ty)
    a = np.asarray(intensity, dtype=float)
    a = a[:, :, ix0] * wx0 + a[:, :, ix1] * wx1
    return a[:, iy0, :] * wy0[:, None] + a[:, iy1, :] * wy1[:, None]


def energy_nodes(sigma_delta: float, step: float, n_sigma: float = 6.0):
    """Uniform δ nodes over ±n_sigma·σ_δ with normalised Gaussian weights (trapezoid rule).

    The trapezoid rule on a uniform grid integrates smooth functions against
    a Gaussian with an error ~exp(−2π²σ²/step²) (Poisson summation), so for
    step ≤ σ/2 the weights reproduce the Gaussian's moments to rounding; the
    step is bounded by σ_δ/4 by the caller.

    Returns
    -------
    delta, weight : ndarray
        Nodes and weights (sum 1); a single node δ = 0 when σ_δ = 0.
    """
    if sigma_delta == 0.0:
        return np.zeros(1), np.ones(1)
    if step > 0.5 * sigma_delta:
        raise InputError(
            f"the δ step {step!r} must not exceed half the energy spread {sigma_delta!r}"
        )
    half = max(1, math.ceil(n_sigma * sigma_delta / step))
    delta = step * np.arange(-half, half + 1)
    weight = np.exp(-0.5 * (delta / sigma_delta) ** 2)
    return delta, weight / weight.sum()


def smear_far_field(
    intensity,
    photon_energy,
    theta_x,
    theta_y,
    *,
    sigma_xp: float = 0.0,
    sigma_yp: float = 0.0,
    sigma_delta: float = 0.0,
    dispersion_xp: float = 0.0,
    dispersion_yp: float = 0.0,
    delta_step: float | None = None,
    n_sigma: float = 6.0,
    max_nodes: int = 4001,
):
    """Beam-smeared far-field pattern from a single-electron one (see the module notes).

    Parameters
    ----------
    intensity : array_like, shape (n_e, ny, nx)
        Single-electron pattern ∝ d²W/(dω dΩ) (any unit; the output has the same).
    photon_energy : array_like, shape (n_e,)
        Strictly increasing photon energies, eV (≥ 4 when σ_δ > 0, fine
        enough to resolve the spectral lines).
    theta_x, theta_y : array_like
        Strictly increasing angles, rad.
    sigma_xp, sigma_yp : float
        Betatron rms divergences, rad.
    sigma_delta : float
        rms relative energy spread.
    dispersion_xp, dispersion_yp : float
        Dispersion slopes D', rad (angle offset D'δ per energy deviation).
    delta_step : float, optional
        δ node spacing; default min(σ_δ/4, ¼ of the smallest relative
        photon-energy step), so the 2δ spectral shift is sampled at least
        twice per input step.
    n_sigma : float
        The energy distribution is cut at ±n_sigma σ_δ (weights renormalised;
        6σ leaves 2e-9).
    max_nodes : int
        Refuse (InputError) rather than use more δ nodes.

    Returns
    -------
    out : ndarray, shape (n_valid, ny, nx)
    photon_energy_out : ndarray, shape (n_valid,)
        The input energies whose shifted images ω/s² stay inside the input
        range for every δ node (the others cannot be computed without
        extrapolating and are dropped).
    diagnostics : dict
        ``n_delta_nodes``, ``delta_step``, ``flux_change`` (the largest relative
        change of the grid-integrated flux by the angular blur, signed) and
        ``flux_change_per_energy`` (n_valid,), ``dropped_energies``.
    """
    inten = np.asarray(intensity, dtype=float)
    e = np.asarray(photon_energy, dtype=float)
    tx = np.asarray(theta_x, dtype=float)
    ty = np.asarray(theta_y, dtype=float)
    if inten.ndim != 3 or inten.shape != (e.size, ty.size, tx.size):
        raise InputError(
            f"intensity must have shape (n_e, ny, nx) = ({e.size}, {ty.size}, {tx.size}), got {inten.shape}"
        )
    if not np.all(np.isfinite(inten)):
        raise InputError("the single-electron pattern has non-finite values")
    for name, v in (
        ("sigma_xp", sigma_xp),
        ("sigma_yp", sigma_yp),
        ("sigma_delta", sigma_delta),
    ):
        if not (math.isfinite(v) and v >= 0):
            raise InputError(f"{name} must be finite and >= 0, got {v!r}", location=name)
    if e.size > 1 and not np.all(np.diff(e) > 0):
        raise InputError("photon energies must increase strictly for the energy-spread convolution")
    if sigma_delta > 0:
        if e.size < 4:
            raise InputError(
                "an energy spread needs at least 4 photon energies across the line",
                location="photon_energy",
            )
        rel_step = float(np.min(np.diff(e) / e[1:]))
        step = min(sigma_delta / 4.0, rel_step / 4.0) if delta_step is None else float(delta_step)
        if not step > 0:
            raise InputError(
                f"delta_step must be positive, got {delta_step!r}", location="delta_step"
            )
        delta, weight = energy_nodes(sigma_delta, step, n_sigma)
        if delta.size > max_nodes:
            raise InputError(
                f"the energy spread needs {delta.size} quadrature nodes (> max_nodes={max_nodes}); "
                "use a coarser photon-energy grid or raise max_nodes"
            )
    else:
        step = 0.0
        delta, weight = np.zeros(1), np.ones(1)
    scale = 1.0 + delta
    lo, hi = e[0], e[-1]
    valid = (e / scale.max() ** 2 >= lo * (1 - 1e-14)) & (e / scale.min() ** 2 <= hi * (1 + 1e-14))
    if not np.any(valid):
        raise InputError(
            "no photon energy has its energy-spread images inside the computed range; extend the photon-energy "
            f"grid by about ±{2 * n_sigma * sigma_delta:.2g} relative on each side",
            location="photon_energy",
        )
    e_out = e[valid]
    spline = CubicSpline(e, inten, axis=0, bc_type="not-a-knot") if sigma_delta > 0 else None
    shifted_dispersion = dispersion_xp != 0.0 or dispersion_yp != 0.0
    acc = np.zeros((e_out.size, ty.size, tx.size))
    norm = np.zeros(e_out.size)
    change = np.zeros(e_out.size)
    for d, w in zip(delta, weight, strict=True):
        s = 1.0 + d
        frame = inten[valid] if spline is None else spline(np.clip(e_out / (s * s), lo, hi))
        frame = (s * s) * rescale_angles(frame, tx, ty, s)
        if shifted_dispersion:
            before = frame
            frame, _ = convolve_angles(
                frame, tx, ty, sigma_xp, sigma_yp, dispersion_xp * d, dispersion_yp * d
            )
            change += w * _integral(frame - before, tx, ty)
            norm += w * _integral(before, tx, ty)
        acc += w * frame
    if shifted_dispersion:
        change = np.divide(change, norm, out=np.zeros_like(change), where=norm > 0)
    else:
        acc, change = convolve_angles(acc, tx, ty, sigma_xp, sigma_yp)
    diagnostics = {
        "n_delta_nodes": int(delta.size),
        "delta_step": float(step),
        "flux_change": float(change[np.argmax(np.abs(change))]) if change.size else 0.0,
        "flux_change_per_energy": change,
        "dropped_energies": int(e.size - e_out.size),
    }
    return acc, e_out, diagnostics

"""The Fourier route to spectra: time-domain fields at a pixel, transformed to ω.

For each pixel of a :class:`~lwrad.observers.Screen`, the Liénard–Wiechert
field is computed on a uniform observer-time grid
(:func:`lwrad.timedomain.observer_time_grid`, which resolves the highest
requested photon energy, and :func:`lwrad.timedomain.fields` with the
straight-line continuation outside the samples) and transformed with the
convention Ẽ(ω) = ∫ E(t) e^{+iωt} dt by the trapezoid rule, evaluated at the
requested frequencies (a discrete Fourier sum at arbitrary ω; on the FFT's
own frequency grid it is the FFT). It serves full spectra at a point and, as
an independent route, a cross-check of the direct radiation integral.

Limits: the time window holds the pulse plus padding; field energy outside it
(the slowly decaying velocity field of the approaching and receding charge)
is cut off, which shows at the lowest frequencies, ω ≲ 1/window.
"""

from __future__ import annotations

import numpy as np

from lwrad.constants import omega_to_photon_energy
from lwrad.errors import InputError

__all__ = ["fft_field", "fourier_transform"]

_BLOCK = 256  # frequencies per block of the Fourier sum (bounds memory)


def fourier_transform(t, field, omega):
    """Ẽ(ω) = ∫ E(t) e^{+iωt} dt on a uniform grid, trapezoid rule.

    Parameters
    ----------
    t : (n_t,) s, uniformly spaced.
    field : (n_t, …) V/m.
    omega : (n_e,) rad/s.

    Returns
    -------
    ndarray (n_e, …) complex, V·s/m.
    """
    t = np.asarray(t, float)
    w = np.full(t.size, t[1] - t[0])
    w[0] *= 0.5
    w[-1] *= 0.5
    flat = field.reshape(t.size, -1) * w[:, None]
    out = np.empty((omega.size, flat.shape[1]), complex)
    # phases relative to the window centre keep ωt small where it matters for rounding
    t0 = 0.5 * (t[0] + t[-1])
    for s in range(0, omega.size, _BLOCK):
        om = omega[s : s + _BLOCK]
        out[s : s + _BLOCK] = np.exp(1j * np.outer(om, t - t0)) @ flat
        out[s : s + _BLOCK] *= np.exp(1j * om * t0)[:, None]
    return out.reshape((omega.size,) + field.shape[1:])


def fft_field(traj, observer, omega, *, n_jobs=1, oversampling=4.0, padding=0.5):
    """Ẽ (V·s/m) on a screen from time-domain fields, shape (n_e, ny, nx, 3), and diagnostics."""
    from lwrad.timedomain import fields, observer_time_grid

    if observer.kind != "screen":
        raise InputError("method='fft' needs a Screen (time-domain fields need positions)")
    pts = observer.points()
    e_max = float(omega_to_photon_energy(omega.max()))
    out = np.empty((omega.size, pts.shape[0], 3), complex)
    n_t = 0
    for ip, x in enumerate(pts):
        t = observer_time_grid(traj, x, e_max, oversampling=oversampling, padding=padding)
        field, _ = fields(traj, x[None, :], t, n_jobs=n_jobs, outside="continue")
        out[:, ip] = fourier_transform(t, field[:, 0, :], omega)
        n_t = max(n_t, t.size)
    ny, nx = observer.shape
    diag = {"method": "fft", "n_times": int(n_t), "oversampling": oversampling, "padding": padding}
    return out.reshape(omega.size, ny, nx, 3), diag

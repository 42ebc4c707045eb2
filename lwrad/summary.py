"""A designer's summary of a trajectory or a magnet: the usual quality figures.

Figures (all from the trajectory unless said otherwise)
-------------------------------------------------------
- γ and energy; the z span.
- Deflection: exit angle minus entry angle, θ = atan(β_x/β_z) (and y).
- Offset: exit position minus the straight continuation of the entry line.
- Maximum angle |θ| from the z axis, and the smallest bending radius
  ρ = β² c/|β̇| (the curvature of the path).
- For an oscillating path (at least 6 zero crossings of the dominant
  transverse angle about its mid value, counted between the first and last
  sample where the angle exceeds 1/4 of the oscillation amplitude; the first
  two and last two crossings, the terminations, are left out):
  * the period λ_u (twice the mean spacing of the crossings) and the number
    of periods seen;
  * K from the path: K = γ β sqrt(2 ⟨θ²⟩) over whole half periods, per plane
    (K_y from the horizontal motion, driven by B_y) and K_eff = sqrt(K_x² + K_y²),
    which enters the resonance condition λ_1 = λ_u (1 + K_eff²/2)/(2γ²)
    (X-ray Data Booklet sec. 2.1; for a sinusoidal path K = γ β θ_max exactly);
  * the rms phase error: the slippage phase 2π (t − z/c)/T_1 at the pole
    centres (the zero crossings of the angle), T_1 the mean slippage per
    period, minus its straight-line fit in z, rms in degrees — the usual
    figure of merit of magnetic measurement (definition: common practice,
    no source).
- Field integrals. For a magnet: I1 = ∫B dz (T m) and I2 = ∫∫B dz dz' =
  ∫ (z_end − z) B(z) dz (T m²) along the line x = x0, y = y0, by composite
  Gauss–Legendre quadrature between the magnet's breakpoints. For a
  trajectory: the equivalent integrals that produce the same exit angle and
  offset, I1_y = −(p/q) Δu_x and I2_y = −(p/q) Δx (small-angle, u the unit
  direction; x likewise with the opposite sign), labelled "from path".
"""

from __future__ import annotations

import math

import numpy as np

from lwrad.constants import c, e
from lwrad.errors import InputError
from lwrad.magnets.base import Magnet
from lwrad.trajectory import Trajectory

__all__ = ["Summary", "summarize", "field_integrals"]

_MIN_CROSSINGS = 6
_GL_NODES = 16
# a sign change counts as a pole only inside the part of the path whose
# angle exceeds this fraction of the oscillation amplitude somewhere
_OSCILLATION_FRACTION = 0.25


class Summary:
    """Named figures with units; ``str()`` is an aligned table, :meth:`as_dict` plain data.

    Parameters
    ----------
    title : str
        First line of the table.
    rows : list of (key, label, value, unit)
        ``value`` a float, int, str or None (shown as "—").
    """

    def __init__(self, title: str, rows):
        self.title = title
        self._rows = list(rows)

    def __getitem__(self, key):
        for k, _, v, _ in self._rows:
            if k == key:
                return v
        raise KeyError(key)

    def __contains__(self, key) -> bool:
        return any(k == key for k, *_ in self._rows)

    def keys(self):
        """Keys of the figures, in table order."""
        return [k for k, *_ in self._rows]

    def units(self) -> dict:
        """key → unit string."""
        return {k: u for k, _, _, u in self._rows}

    def as_dict(self) -> dict:
        """key → value (plain Python numbers, strings or None)."""
        out = {}
        for k, _, v, _ in self._rows:
            out[k] = (
                float(v)
                if isinstance(v, np.floating)
                else (int(v) if isinstance(v, np.integer) else v)
            )
        return out

    def __str__(self) -> str:
        def fmt(v):
            if v is None:
                return "—"
            if isinstance(v, bool | str):
                return str(v)
            if isinstance(v, int | np.integer):
                return f"{int(v)}"
            return f"{float(v):.6g}"

        labels = [lab for _, lab, _, _ in self._rows]
        values = [fmt(v) for _, _, v, _ in self._rows]
        wl = max(len(s) for s in labels)
        wv = max(len(s) for s in values)
        lines = [self.title, "-" * len(self.title)]
        for (_, lab, _, unit), val in zip(self._rows, values, strict=True):
            lines.append(f"{lab:<{wl}}  {val:>{wv}}  {unit}".rstrip())
        return "\n".join(lines)

    def __repr__(self) -> str:
        return f"Summary({self.title!r}, {len(self._rows)} figures)"


def field_integrals(magnet: Magnet, *, x0: float = 0.0, y0: float = 0.0, z_start=None, z_end=None):
    """First and second field integrals along the line x = x0, y = y0.

    Parameters
    ----------
    magnet : Magnet
        The field.
    x0, y0 : float, optional
        The line, m.
    z_start, z_end : float, optional
        Limits, m (default: the magnet's z_range).

    Returns
    -------
    I1 : ndarray, shape (3,)
        ∫ B dz, T m.
    I2 : ndarray, shape (3,)
        ∫_{z_start}^{z_end} (z_end − z) B(z) dz = ∫∫ B dz dz', T m².

    Notes
    -----
    Composite Gauss–Legendre quadrature (16 nodes per piece), pieces no longer
    than 1/8 of the period (or 1/2000 of the span) and split at breakpoints.
    """
    lo, hi = magnet.z_range
    z0 = lo if z_start is None else float(z_start)
    z1 = hi if z_end is None else float(z_end)
    span = z1 - z0
    piece = span / 2000.0
    if magnet.period is not None:
        piece = min(piece, magnet.period / 8.0)
    edges = [z0] + sorted(b for b in set(magnet.breakpoints) if z0 < b < z1) + [z1]
    nodes, weights = np.polynomial.legendre.leggauss(_GL_NODES)
    zs, ws = [], []
    for a, b in zip(edges[:-1], edges[1:], strict=True):
        n = max(1, int(math.ceil((b - a) / piece)))
        cuts = np.linspace(a, b, n + 1)
        mid = 0.5 * (cuts[:-1] + cuts[1:])[:, None]
        half = 0.5 * np.diff(cuts)[:, None]
        zs.append((mid + half * nodes).ravel())
        ws.append((half * weights).ravel())
    z = np.concatenate(zs)
    w = np.concatenate(ws)
    b = magnet.field(np.full_like(z, x0), np.full_like(z, y0), z)
    i1 = w @ b
    i2 = (w * (z1 - z)) @ b
    return i1, i2


def _angles(traj):
    b = traj.beta
    return np.arctan2(b[:, 0], b[:, 2]), np.arctan2(b[:, 1], b[:, 2])


def _crossings(z, v):
    """z positions where v changes sign (linear interpolation)."""
    s = np.signbit(v)
    idx = np.nonzero(s[:-1] != s[1:])[0]
    frac = v[idx] / (v[idx] - v[idx + 1])
    return z[idx] + frac * (z[idx + 1] - z[idx]), idx


def _periodic_figures(traj):
    z = traj.r[:, 2]
    speed = np.linalg.norm(traj.beta, axis=1)
    u = traj.beta / speed[:, None]
    n = len(z)
    core = slice(n // 4, max(n // 4 + 2, 3 * n // 4))
    spans = [np.ptp(u[core, i]) for i in (0, 1)]
    dom = 0 if spans[0] >= spans[1] else 1
    if spans[dom] == 0.0:
        return None
    centres = [0.5 * (u[core, i].max() + u[core, i].min()) for i in (0, 1)]
    v = u[:, dom] - centres[dom]
    # only where the path oscillates: rounding noise in field-free ends has
    # sign changes of its own
    big = np.nonzero(np.abs(v) > _OSCILLATION_FRACTION * 0.5 * spans[dom])[0]
    part = slice(big[0], big[-1] + 1)
    zc, _ = _crossings(z[part], v[part])
    if zc.size < _MIN_CROSSINGS:
        return None
    poles = zc[2:-2]
    half = float(np.mean(np.diff(poles)))
    period = 2.0 * half
    za, zb = poles[0], poles[-1]
    inner = (z > za) & (z < zb)

    def mean_square(v):
        zz = np.concatenate(([za], z[inner], [zb]))
        vv = np.concatenate(([np.interp(za, z, v)], v[inner], [np.interp(zb, z, v)]))
        return float(np.trapezoid(vv * vv, zz) / (zb - za))

    gb = float(traj.gamma[0]) * float(speed[0])
    k_y = gb * math.sqrt(2.0 * mean_square(u[:, 0] - centres[0]))
    k_x = gb * math.sqrt(2.0 * mean_square(u[:, 1] - centres[1]))
    slip = traj.t - z / c
    tau = np.interp(poles, z, slip)
    fit = np.polyfit(poles, tau, 1)
    t1 = fit[0] * period  # slippage per period, s
    phase = 2.0 * math.pi * (tau - np.polyval(fit, poles)) / t1
    return {
        "period": period,
        "n_periods_seen": (poles.size - 1) / 2.0,
        "K_y": k_y,
        "K_x": k_x,
        "K_eff": math.hypot(k_x, k_y),
        "phase_error_rms": math.degrees(float(np.sqrt(np.mean(phase * phase)))),
        "slippage_per_period": t1,
    }


def _trajectory_rows(traj):
    gamma = float(traj.gamma[0])
    energy = float(traj.energy_ev[0])
    ax, ay = _angles(traj)
    z = traj.r[:, 2]
    length = float(z[-1] - z[0])
    off_x = float(traj.r[-1, 0] - traj.r[0, 0] - math.tan(ax[0]) * length)
    off_y = float(traj.r[-1, 1] - traj.r[0, 1] - math.tan(ay[0]) * length)
    speed2 = np.einsum("ij,ij->i", traj.beta, traj.beta)
    accel = np.linalg.norm(traj.beta_dot, axis=1)
    with np.errstate(divide="ignore"):
        radius = np.where(accel > 0, speed2 * c / np.where(accel > 0, accel, 1.0), np.inf)
    rho_min = float(np.min(radius))
    rows = [
        ("particle_charge", "particle charge", traj.charge / e, "e"),
        ("energy", "energy", energy, "eV"),
        ("gamma", "gamma", gamma, ""),
        ("z_start", "z start", float(z[0]), "m"),
        ("z_end", "z end", float(z[-1]), "m"),
        ("deflection_x", "deflection x'", float(ax[-1] - ax[0]), "rad"),
        ("deflection_y", "deflection y'", float(ay[-1] - ay[0]), "rad"),
        ("offset_x", "exit offset x", off_x, "m"),
        ("offset_y", "exit offset y", off_y, "m"),
        ("max_angle_x", "max |x'|", float(np.max(np.abs(ax))), "rad"),
        ("max_angle_y", "max |y'|", float(np.max(np.abs(ay))), "rad"),
        ("min_bend_radius", "min bending radius", rho_min if math.isfinite(rho_min) else None, "m"),
    ]
    per = _periodic_figures(traj)
    rows += [
        ("period", "period (from path)", None if per is None else per["period"], "m"),
        ("n_periods_seen", "periods seen", None if per is None else per["n_periods_seen"], ""),
        ("K_y", "K_y (from path, By)", None if per is None else per["K_y"], ""),
        ("K_x", "K_x (from path, Bx)", None if per is None else per["K_x"], ""),
        ("K_eff", "K_eff (from path)", None if per is None else per["K_eff"], ""),
        (
            "phase_error_rms",
            "rms phase error",
            None if per is None else per["phase_error_rms"],
            "deg",
        ),
    ]
    return rows, ax, ay


def summarize(obj, energy: float | None = None, particle="electron", **track_options) -> Summary:
    """Designer's summary of a trajectory or of a magnet (tracked first).

    Parameters
    ----------
    obj : Trajectory or Magnet
        What to summarise.
    energy : float, optional
        Total particle energy, eV; required for a magnet, not allowed for a
        trajectory (which carries its own).
    particle : str or (float, float), optional
        The particle for a magnet (see :func:`lwrad.track`).
    **track_options
        Passed to :func:`lwrad.track` for a magnet (x0, xp0, rtol, …).

    Returns
    -------
    Summary
        Figures described in :mod:`lwrad.summary`.
    """
    if isinstance(obj, Magnet):
        if energy is None:
            raise InputError(
                "summarizing a magnet needs the particle energy (eV)", location="energy"
            )
        from lwrad.tracking import track

        traj = track(obj, energy, particle=particle, **track_options)
        rows, _, _ = _trajectory_rows(traj)
        i1, i2 = field_integrals(
            obj,
            x0=track_options.get("x0", 0.0),
            y0=track_options.get("y0", 0.0),
            z_start=track_options.get("z_start"),
            z_end=track_options.get("z_end"),
        )
        rows += [
            ("I1_x", "first field integral Bx", float(i1[0]), "T m"),
            ("I1_y", "first field integral By", float(i1[1]), "T m"),
            ("I2_x", "second field integral Bx", float(i2[0]), "T m^2"),
            ("I2_y", "second field integral By", float(i2[1]), "T m^2"),
        ]
        title = f"lwrad summary: {type(obj).__name__}, {particle} at {energy:.6g} eV"
        return Summary(title, [("magnet", "magnet", type(obj).__name__, "")] + rows)
    if isinstance(obj, Trajectory):
        if energy is not None:
            raise InputError(
                "a trajectory carries its own energy; pass energy only with a magnet",
                location="energy",
            )
        rows, _, _ = _trajectory_rows(obj)
        p_over_q = float(np.linalg.norm(obj.momentum[0])) / obj.charge
        speed = np.linalg.norm(obj.beta[[0, -1]], axis=1)
        u0, u1 = obj.beta[0] / speed[0], obj.beta[-1] / speed[1]
        rows += [
            ("I1_x", "first field integral Bx (from path)", p_over_q * float(u1[1] - u0[1]), "T m"),
            (
                "I1_y",
                "first field integral By (from path)",
                -p_over_q * float(u1[0] - u0[0]),
                "T m",
            ),
            ("I2_x", "second field integral Bx (from path)", p_over_q * rows[8][2], "T m^2"),
            ("I2_y", "second field integral By (from path)", -p_over_q * rows[7][2], "T m^2"),
        ]
        src = f" ({obj.source})" if obj.source else ""
        return Summary(f"lwrad summary: trajectory{src}", rows)
    raise InputError(f"cannot summarize a {type(obj).__name__}; give a Trajectory or a magnet")

"""Drivers of the frequency-domain radiation integral: sampling, refinement, tails.

The compiled quadrature lives in :mod:`lwrad.engine._fd_kernels`; this module
decides *where* to sample, extends near-field paths by their straight lines,
checks convergence and converts to SI.

Sampling rule
-------------
The trajectory is resampled (cubic Hermite, :meth:`Trajectory.interpolate`)
with a local density (samples per second)

    d(t) = F · max( ω_max κ_env(t) / θ_max ,  γ |β̇| / α_max ,  |κ̇/κ|_env / 0.2 ),

where κ_env is the largest κ = 1 − n·β over the corners and centre of the
observer's envelope (capped at 50 times its smallest value along the path:
where κ is larger the radiation is weak and its amplitude smooth in φ),
θ_max = 2 rad the phase advance per step at the highest
photon energy and α_max = 0.35 the deflection per step in units of 1/γ; F is
the refinement factor; the last term (screens only: there κ also changes
through the geometry, even on straight lines) keeps the relative change of κ
(the amplitudes go as κ⁻³) per step below 0.2 (0.1 before the near-field
speed work: 0.2 halves a 15 m screen's samples and still meets the tolerance,
0.3 left the result 8.5e-5 from the converged one at tolerance 1e-4, too near
the goal). Defaults measured on the
2.5 GeV, K = 1.4 undulator: ~20 samples per period give ~3e-5 of the peak. The Filon-type rule is exact in the phase, so these are
amplitude-resolution criteria, not Nyquist limits.

Energy bands and many energies
------------------------------
Photon energies are computed in octave bands (:func:`energy_bands`, ratio
``BAND_RATIO``), each resampled for its own highest energy, so a spectrum from
10 eV to 50 keV does not pay the top octave's density at every energy (the
bending-magnet benchmark: 7× faster). Within a band, ``NUFFT_MIN_ENERGIES`` or
more equally spaced energies go through the node-sum form of the Filon-type
rule evaluated by a type-1 non-uniform FFT (:mod:`lwrad.engine.nufft`), the
others through the direct compiled sum; both evaluate the same rule (equal to
~1e-9 of the peak, ``tests/test_nufft.py``).

Convergence check: on probe pixels (3 × 3 points spanning the envelope, so the
same for every chunk of an observer) the integral is computed with F and 2F;
F is doubled until max |E_F − E_2F| ≤ tolerance · max |E_2F| over probes and
energies. The achieved figure goes into the result's diagnostics; failure
gives a :class:`~lwrad.errors.ConvergenceWarning`.

Input resolution
----------------
The refinement above resamples the *interpolated* input path, so it cannot
see whether the input samples resolve the path itself. At the midpoint of
every input interval the cubic Hermite position used by
:meth:`Trajectory.interpolate`, (r0+r1)/2 + h(v0−v1)/8, is compared with the
quintic Hermite one, (r0+r1)/2 + 5h/32 (v0−v1) + h²/64 (a0+a1) (v = βc,
a = β̇c; the standard Hermite basis functions at s = 1/2). Their difference
Δr = h(v0−v1)/32 + h²(a0+a1)/64 estimates the cubic's error (its leading
O(h⁴ r⁗) term), and ω_max |n·Δr|/c (far field: the phase t − n·r/c; screen:
the change of t + R/c, n from the path to the probe point) over the envelope
probes is the phase error the input spacing leaves, ``input_phase_error``.
The relative field error it causes was measured at ``INPUT_ERROR_FACTOR``
(≤ 3) times this figure (ideal planar undulator, K = 1.4, harmonics 1–9,
8–64 samples per period, on axis and at 1/γ: ratio 1.6–3.0); when
``INPUT_ERROR_FACTOR × input_phase_error`` exceeds the tolerance the result
is flagged (``converged = False``, :class:`~lwrad.errors.ConvergenceWarning`
naming the input density that would suffice; the error goes as h⁴). lwrad
warns rather than refuses, so that a long job still delivers a result whose
file says how far it is from the goal. (Transition: with
``INPUT_GUARD_WARNS = False`` the figures and ``input_resolved`` are recorded
but neither the flag nor the warning is raised.)

Straight-line tails (near field)
--------------------------------
The velocity field of a charge does not vanish on the straight continuations
of its path, so a screen result depends on where the path was cut unless the
ends are continued to ±∞. Each end is continued by its straight line on a
per-pixel mesh graded geometrically in the distance from the point of closest
approach (steps of ``_TAIL_STEP``/F times the local distance over v), out to
where ω_min times the observer-time scale of the amplitude exceeds
``_TAIL_PHASE``; beyond, two terms of the integration-by-parts expansion
close the integral. In the far field the continuations contribute exactly
nothing (β̇ = 0 in the acceleration form), so no tails are needed; a path cut
inside a field has edge effects there.
"""

from __future__ import annotations

import math
import warnings

import numpy as np

from lwrad.constants import c, epsilon_0, omega_to_photon_energy
from lwrad.engine import _fd_kernels as K
from lwrad.errors import ConvergenceWarning, InputError

__all__ = [
    "THETA_MAX",
    "ALPHA_MAX",
    "sample_times",
    "gauss_split",
    "nodes_only",
    "far_field",
    "near_field",
    "converged_sampling",
    "input_resolution",
    "choose_refinement",
    "is_uniform",
    "energy_bands",
    "band_nodes",
    "band_field",
    "probe_targets",
]

THETA_MAX = 2.0  # rad of phase per step at ω_max (Filon rule: amplitude criterion)
ALPHA_MAX = 0.35  # deflection per step, units of 1/γ
KAPPA_CAP = 50.0  # phase criterion uses min(κ, 50 κ_min)
KAPPA_CHANGE = 0.2  # relative change of κ per step on screens (module docstring)
INPUT_ERROR_FACTOR = 3.0  # field error / input phase error, measured ≤ 3 (module docstring)
# Transition switch: True flags an unresolved input (converged=False + ConvergenceWarning).
# While False the figures are only recorded (``input_resolved`` False in the diagnostics),
# because several job/demo tests still use 16 points per period at tolerance 1e-4 (true
# error ~5e-4): raise their density to 64, then set this to True.
INPUT_GUARD_WARNS = True
_MAX_REFINE = 5  # F up to 2**5
NUFFT_MIN_ENERGIES = 48  # from this many equally spaced energies the far field goes by NUFFT
THETA_NUFFT = 0.1  # … for pixels whose every step advances by at least 0.1 rad at ω_min
BAND_RATIO = 2.0  # photon energies computed in octave bands, each sampled for its top
_SPAN_MARGIN = 0.01  # Type3 band limit: 1 % above the largest estimated φ span
_TYPE3_MAX_MODES_PER_NODE = 1.0  # Type3 only while its ν grid has at most 1 mode per node
_NUFFT_BATCH = 8  # far-field pixels per transform batch (workspace ∝ batch × energies)
_RESEED = 64  # phasor recurrence re-seeded every 64 energies (round-off ~64 ε)
_TAIL_STEP = 0.1  # tail step / (distance to closest-approach point / v), divided by F
_TAIL_PHASE = 200.0  # ω_min × amplitude time scale in φ where the tail mesh stops
_TAIL_MAX_STEPS = 50000
_GAUSS = K.GAUSS_OFFSET  # two-point Gauss–Legendre on [0, 1]: 1/2 ∓ 1/(2√3)
_NEAR_ERRORS = {
    K.NEAR_ON_LINE: "observer point {0} m lies on the straight continuation of the path: the "
    "charge would pass through it and the field there is singular; move the pixel off the beam "
    "line (e.g. an even number of pixels across a centred screen)",
    K.NEAR_NOT_CLOSED: "the straight-line continuation of the path could not be closed within "
    "{1} steps; is the lowest photon energy extremely small?",
    K.NEAR_SINGULAR: "observer point {0} m lies on (or numerically on) the path or its "
    "straight-line continuation: the field there is singular",
}


def is_uniform(omega: np.ndarray) -> bool:
    """True when the angular frequencies are equally spaced (to 1e-12 relative)."""
    if omega.size < 3:
        return True
    d = np.diff(omega)
    return bool(np.all(np.abs(d - d[0]) <= 1e-12 * np.abs(omega).max()))


def _envelope_probes(observer):
    # 3 × 3 points spanning the envelope (duplicates removed). On screens the middle
    # probe sits at 47 % of the span, not on the centre line, where the straight
    # continuation of an on-axis beam would make the field singular.
    x0, x1, y0, y1 = observer.envelope
    mid = 0.5 if observer.kind == "angular" else 0.47
    xs = np.unique([x0, x0 + mid * (x1 - x0), x1])
    ys = np.unique([y0, y0 + mid * (y1 - y0), y1])
    xx, yy = np.meshgrid(xs, ys)
    return xx.ravel(), yy.ravel()


def _directions(tx, ty):
    norm = np.sqrt(1.0 + tx * tx + ty * ty)
    return np.ascontiguousarray(np.stack([tx / norm, ty / norm, 1.0 / norm], axis=1))


def _kappa_np(n, beta, ig2):
    b = np.linalg.norm(beta, axis=-1)
    bh = beta / np.where(b > 0, b, 1.0)[..., None]
    return ig2 / (1.0 + b) + 0.5 * b * np.sum((n - bh) ** 2, axis=-1)


def _kappa_envelope(traj, observer):
    """max κ and max |dκ/dt|/κ (1/s) over the envelope probes, per sample, shape (N,) each."""
    px, py = _envelope_probes(observer)
    kmax = np.zeros(len(traj))
    rate = np.zeros(len(traj))
    beta, bdot, ig2 = traj.beta, traj.beta_dot, traj.inv_gamma_sq
    for x, y in zip(px, py, strict=True):
        if observer.kind == "angular":
            n = _directions(np.array([x]), np.array([y]))[0]
            n = np.broadcast_to(n, traj.r.shape)
            kdot = -np.sum(n * bdot, axis=1)
        else:
            d = np.array([x, y, observer.distance]) - traj.r
            rr = np.linalg.norm(d, axis=1)
            n = d / rr[:, None]
            nb = np.sum(n * beta, axis=1)
            # dκ/dt = −n·β̇ − β·dn/dt, dn/dt = c (n (n·β) − β)/R
            kdot = -np.sum(n * bdot, axis=1) + c * (np.sum(beta * beta, axis=1) - nb * nb) / rr
        kap = _kappa_np(n, beta, ig2)
        kmax = np.maximum(kmax, kap)
        rate = np.maximum(rate, np.abs(kdot) / kap)
    return kmax, rate


def sample_times(traj, observer, omega_max: float, factor: float) -> np.ndarray:
    """New sample times (s) following the density rule of this module.

    Parameters
    ----------
    traj : Trajectory
    observer : AngularGrid or Screen (its envelope is used)
    omega_max : float
        Highest angular frequency, rad/s.
    factor : float
        Refinement factor F ≥ 1.
    """
    t = traj.t
    acc = np.linalg.norm(traj.beta_dot, axis=1) * traj.gamma
    kap, rate = _kappa_envelope(traj, observer)
    # far from the direction of observation the amplitude is small and smooth in φ:
    # the phase criterion saturates at KAPPA_CAP times the smallest κ
    kap_eff = np.minimum(kap, KAPPA_CAP * kap.min())
    terms = [omega_max * kap_eff / THETA_MAX, acc / ALPHA_MAX]
    if observer.kind != "angular":
        # near field: κ also changes through the geometry (dn/dt), even on straight lines
        terms.append(rate / KAPPA_CHANGE)
    dens = factor * np.maximum.reduce(terms)
    cum = np.concatenate(([0.0], np.cumsum(0.5 * (dens[1:] + dens[:-1]) * np.diff(t))))
    n_steps = max(int(math.ceil(cum[-1])), 16)
    if n_steps > 50_000_000:
        raise InputError(
            f"the requested photon energies need {n_steps} trajectory samples; lower the highest "
            "photon energy or shorten the trajectory"
        )
    targets = np.linspace(0.0, cum[-1], n_steps + 1)
    # where the density vanishes (no field, far below ω_max) keep the original spacing available
    t_new = np.interp(targets, cum, t)
    t_new[0], t_new[-1] = t[0], t[-1]
    t_new = np.unique(t_new)
    return t_new


def gauss_split(traj, t_nodes):
    """The trajectory at nodes and at the two Gauss–Legendre points of every step.

    Returns
    -------
    nodes : Trajectory
    gauss : dict of arrays, shape (M−1, 2, …): ``r``, ``beta``, ``beta_dot``, ``ig2``,
        ``gamma``, and ``h`` (M−1,) step lengths, s.
    """
    h = np.diff(t_nodes)
    tg = np.stack([t_nodes[:-1] + h * (0.5 - _GAUSS), t_nodes[:-1] + h * (0.5 + _GAUSS)], axis=1)
    all_t = np.empty(t_nodes.size + tg.size)
    all_t[0::3] = t_nodes
    all_t[1::3] = tg[:, 0]
    all_t[2::3] = tg[:, 1]
    full = traj.interpolate(all_t)
    sel = np.zeros(all_t.size, bool)
    sel[0::3] = True

    def split(a):
        return np.ascontiguousarray(a[~sel].reshape((h.size, 2) + a.shape[1:]))

    nodes = {
        "t": np.ascontiguousarray(t_nodes),
        "r": np.ascontiguousarray(full.r[sel]),
        "beta": np.ascontiguousarray(full.beta[sel]),
        "beta_dot": np.ascontiguousarray(full.beta_dot[sel]),
        "ig2": np.ascontiguousarray(full.inv_gamma_sq[sel]),
    }
    gauss = {
        "h": h,
        "r": split(full.r),
        "beta": split(full.beta),
        "beta_dot": split(full.beta_dot),
        "ig2": split(full.inv_gamma_sq),
        "gamma": split(full.gamma),
    }
    return nodes, gauss


def far_field(nodes, nvec, omega, charge, out=None):
    """R·Ẽ (V·s) for unit directions ``nvec`` (P, 3), shape (P, n_e, 3), complex.

    Written into ``out`` (P, n_e, 3) complex, any strides, when given.

    R Ẽ = q/(4πε0 c) ∫ n×((n−β)×β̇)/κ² e^{iω(t − n·r/c)} dt (Jackson 14.65, e^{+iωt}).
    Many equally spaced energies go through the node sums by NUFFT
    (:func:`_far_field_nufft`), the others through the direct compiled sum.
    """
    p = nvec.shape[0]
    ne = omega.size
    nvec = np.ascontiguousarray(nvec)
    out = np.empty((p, ne, 3), dtype=complex) if out is None else out
    direct = np.ones(p, dtype=bool)
    if ne >= NUFFT_MIN_ENERGIES and p > 0:
        direct = _far_field_nufft(nodes, nvec, omega, out)
    if direct.any():
        out_re = np.empty((int(direct.sum()), ne, 3))
        out_im = np.empty_like(out_re)
        K.far_field_pixels(
            np.ascontiguousarray(nvec[direct]),
            *_far_path(nodes),
            omega,
            is_uniform(omega),
            _RESEED,
            out_re,
            out_im,
        )
        out[direct] = out_re + 1j * out_im
    out *= charge / (4.0 * math.pi * epsilon_0 * c)
    return out


def _far_path(nodes):
    # the trajectory arguments of the far-field kernels, in their order
    return (
        nodes["t"],
        nodes["r"],
        nodes["beta"],
        nodes["beta_dot"],
        nodes["beta_ddot"],
        nodes["ig2"],
        c,
    )


def _far_field_nufft(nodes, nvec, omega, out):
    """Far-field integrals over many energies by NUFFT of the node sums.

    The node-sum form of the Filon-type rule (:func:`lwrad.engine._fd_kernels.filon_sum`)
    is Σ_k e^{iωφ_k} Σ_m (−1)^m J_{m,k}/(iω)^{m+1}; times (iω)^5 the three orders form
    one non-uniform Fourier sum whose strengths are quadratic in the mode
    (:func:`lwrad.engine.nufft.spread_poly`): for ω_j = ω_ref + jΔω one
    type-1 transform, for any other set of energies a type-1 transform on a uniform
    grid in ω and interpolation (:class:`~lwrad.engine.nufft.Type3`), both accurate to
    ~1e-11 of Σ|J|. Used for a pixel when every step advances by ω_min Δφ ≥
    ``THETA_NUFFT`` (the node form's cancellation then amplifies that error by at most
    1/θ⁵ = 1e5). Fills ``out`` (without the charge factor) and returns the mask of
    pixels left for the direct sum.
    """
    from lwrad.engine.nufft import Gridding, Type3

    p, ne = nvec.shape[0], omega.size
    t3 = None
    if is_uniform(omega):
        gd = Gridding(ne)
        dw = float(omega[1] - omega[0])
        omega_ref = float(omega[0]) - gd.m_lo * dw
        # ω_j = ω_ref + (j + m_lo) Δω for j = 0 … n_e − 1: exactly the transform's modes
    else:
        # the φ span of every pixel, t_N − t_0 − n·(r_N − r_0)/c (rounding ~1e-16·2γ² of
        # it), bounds the band limit of the sums; pixels found longer go to the direct sum
        t, r = nodes["t"], nodes["r"]
        spans = (t[-1] - t[0]) - nvec @ (r[-1] - r[0]) / c
        span = float(spans.max()) * (1.0 + _SPAN_MARGIN)
        if not (span > 0.0) or Type3.n_modes(omega, span) > _TYPE3_MAX_MODES_PER_NODE * t.size:
            # the ν grid would outgrow the path (a wide φ span, e.g. an arc seen from the
            # tangent of its middle, whose ends have large κ): the direct sum is cheaper
            return np.ones(p, dtype=bool)
        t3 = Type3(omega, span)
        gd = t3.grid
        omega_ref, dw = t3.omega_c, t3.dnu
    batch = min(p, _NUFFT_BATCH)
    grids = gd.empty_grids(batch, 2)  # (x, y), orders 2, 3, 4 combined
    scratch = gd.scratch(4)
    ends = np.empty((p, 11))
    for lo in range(0, p, batch):
        sl = slice(lo, min(lo + batch, p))
        n = sl.stop - sl.start
        K.far_spread_pixels(
            nvec[sl],
            *_far_path(nodes),
            omega_ref,
            dw,
            gd.delta,
            gd.tau,
            gd.e3,
            scratch,
            grids[:n],
            ends[sl],
        )
        spec = gd.transform(grids[:n])
        phase0 = ends[sl, 9].copy()
        if t3 is None:
            K.nufft_node_sums(spec, gd.index, gd.scale, 2, phase0, omega, out[sl])
        else:
            values = t3.values(spec)  # (n, n_e, 2): the sums at the energies themselves
            K.nufft_node_sums(values, np.arange(ne), np.ones(ne), 2, phase0, omega, out[sl])
        K.far_nufft_ends(ends[sl], omega, nvec[sl], out[sl])
    left = ends[:, 10] * float(omega.min()) < THETA_NUFFT
    if t3 is not None:
        left |= ends[:, 8] > t3.phi_span
    return left


def near_field(nodes, gauss, points, omega, charge, *, tails=True, factor=1.0, out=None):
    """Ẽ (V·s/m) at points (P, 3), shape (P, n_e, 3), complex.

    Ẽ = q/(4πε0) ∫ [(n−β)/(γ²κ²R²) + n×((n−β)×β̇)/(cκ²R)] e^{iω(t + R/c)} dt, with
    the ends continued by their straight lines when ``tails`` is true. Written into
    ``out`` (P, n_e, 3) complex, any strides, when given.
    """
    p = points.shape[0]
    ne = omega.size
    out = np.empty((p, ne, 3), complex) if out is None else out
    ore = np.empty((ne, 3))
    oim = np.empty((ne, 3))
    uniform = is_uniform(omega)
    omega_min = float(omega.min())
    use_nufft = uniform and ne >= NUFFT_MIN_ENERGIES and p > 0
    if use_nufft:
        from lwrad.engine.nufft import MSP_WIDE, Gridding

        # standard Gaussian (ε_N ~1e-11) and wide one (~1e-14), one grid each (one pixel
        # at a time: the workspace does not grow with the chunk)
        griddings = [Gridding(ne), Gridding(ne, MSP_WIDE)]
        dw = float(omega[1] - omega[0])
        omega_ref = float(omega[0]) - griddings[0].m_lo * dw
        grids = [g.empty_grids(1, 3) for g in griddings]  # (x, y, z), orders combined
        scratches = [g.scratch(6) for g in griddings]
    t, r, beta, bdot, ig2 = nodes["t"], nodes["r"], nodes["beta"], nodes["beta_dot"], nodes["ig2"]
    rg, bg, ag, gg = gauss["r"], gauss["beta"], gauss["beta_dot"], gauss["ig2"]
    for ip in range(p):
        x = np.ascontiguousarray(points[ip], dtype=float)
        phi, coef, phase0, status = K.near_pixel_setup(
            x, t, r, beta, bdot, ig2, rg, bg, ag, gg, tails, omega_min, _TAIL_STEP / factor,
            _TAIL_PHASE, _TAIL_MAX_STEPS, c,
        )  # fmt: skip
        if status != K.NEAR_OK:
            raise InputError(_NEAR_ERRORS[status].format(x.tolist(), _TAIL_MAX_STEPS))
        theta = omega_min * float(np.min(np.diff(phi)))
        if use_nufft and theta >= K._THETA_JUMP_QUAD:
            # the quadratic node form loses ~ε_N/θ³ (ε_N the transform's error): the standard
            # Gaussian (ε_N ~1e-11) from THETA_NUFFT^(5/3), the wide one (~1e-14) below,
            # down to the direct node form's own threshold
            which = 0 if theta >= THETA_NUFFT ** (5.0 / 3.0) else 1
            g = griddings[which]
            K.node_spread(
                phi,
                coef,
                tails,
                tails,
                omega_ref,
                dw,
                g.delta,
                g.tau,
                g.e3,
                scratches[which],
                grids[which][0],
            )
            spec = g.transform(grids[which])
            K.nufft_node_sums(
                spec, g.index, g.scale, 0, np.array([phase0]), omega, out[ip : ip + 1]
            )
            continue
        pre = np.empty(phi.size)
        pim = np.empty(phi.size)
        K.filon_sum(
            phi, coef, omega, uniform, _RESEED, tails, tails, False, phase0, pre, pim, ore, oim
        )
        out[ip] = ore + 1j * oim
    out *= charge / (4.0 * math.pi * epsilon_0)
    return out


def band_nodes(traj, observer, omega, factor, workers=1) -> list:
    """Resampled nodes per energy band: [(indices, n_samples, nodes, gauss or None)].

    Each band of :func:`energy_bands` is sampled for its own highest energy;
    ``gauss`` (screens only) holds the two Gauss points of every step. With
    ``workers`` > 1 the bands are built in threads (the result does not depend on it).
    """
    from lwrad.parallel import run_chunks

    def build(idx):
        t_nodes = sample_times(traj, observer, float(omega[idx].max()), factor)
        if observer.kind == "angular":
            return (idx, t_nodes.size, nodes_only(traj, t_nodes), None)
        return (idx, t_nodes.size, *gauss_split(traj, t_nodes))

    return run_chunks(build, energy_bands(omega), workers=workers, backend="threads")


def band_field(bands, targets, omega, charge, *, tails=True, factor=1.0, workers=1, out=None):
    """The field at ``targets`` (P, 3) for every band of :func:`band_nodes`, shape (P, n_e, 3).

    Targets are unit directions (far field, the bands carry no Gauss points) or
    points on a screen, m. With ``workers`` > 1 the bands run in threads (for
    few pixels and many bands; the result does not depend on it). Written into
    ``out`` (P, n_e, 3) complex, any strides (e.g. a view of a larger field), when given.
    """

    def one(band, into=None):
        idx, _, nodes, gauss = band
        if gauss is None:
            return far_field(nodes, targets, omega[idx], charge, out=into)
        return near_field(
            nodes, gauss, targets, omega[idx], charge, tails=tails, factor=factor, out=into
        )

    if len(bands) == 1:  # one band: its field is the result
        return one(bands[0], out)
    if out is None:
        out = np.empty((targets.shape[0], omega.size, 3), dtype=complex)

    def place(i, part):
        out[:, bands[i][0]] = part

    from lwrad.parallel import run_chunks

    # bands come highest first: the top octave, about half the work, starts first
    run_chunks(one, bands, workers=workers, on_result=place, keep_results=False)
    return out


def probe_targets(observer) -> np.ndarray:
    """The probe pixels of :func:`converged_sampling`: unit directions or screen points, (P, 3)."""
    px, py = _envelope_probes(observer)
    if observer.kind == "angular":
        return _directions(px, py)
    return np.stack([px, py, np.full(px.shape, observer.distance)], axis=1)


def _probe_field(traj, observer, omega, factor, tails, workers=1):
    # the probe pixels' field, computed as radiate() computes the pixels
    bands = band_nodes(traj, observer, omega, factor, workers)
    field = band_field(
        bands, probe_targets(observer), omega, traj.charge, tails=tails, factor=factor,
        workers=workers,
    )  # fmt: skip
    return field, bands


def nodes_only(traj, t_nodes):
    """The trajectory at ``t_nodes`` as a dict of contiguous arrays (far-field kernel input).

    d²β/dt² comes from the derivative of a not-a-knot cubic spline through the
    original β̇ samples (it only shapes the amplitude between nodes).
    """
    from scipy.interpolate import CubicSpline

    s = traj.interpolate(t_nodes)
    if len(traj) >= 4:
        bdd = CubicSpline(traj.t, traj.beta_dot, axis=0)(t_nodes, 1)
    else:
        bdd = np.zeros((t_nodes.size, 3))
    return {
        "beta_ddot": np.ascontiguousarray(bdd),
        "t": np.ascontiguousarray(s.t),
        "r": np.ascontiguousarray(s.r),
        "beta": np.ascontiguousarray(s.beta),
        "beta_dot": np.ascontiguousarray(s.beta_dot),
        "ig2": np.ascontiguousarray(s.inv_gamma_sq),
    }


def input_resolution(traj, observer, omega_max: float, tolerance: float) -> dict:
    """Phase error left by the spacing of the input samples (module docstring, "Input resolution").

    Parameters
    ----------
    traj : Trajectory
    observer : AngularGrid or Screen (its envelope probes are used)
    omega_max : float
        Highest angular frequency, rad/s.
    tolerance : float
        Relative accuracy goal of the field.

    Returns
    -------
    dict
        ``input_phase_error`` (rad): max over input intervals and probes of
        ω_max |n·Δr|/c; ``input_error_estimate``: ``INPUT_ERROR_FACTOR`` times
        it (relative field error); ``input_resolved`` (bool);
        ``input_samples_per_m`` and ``needed_samples_per_m`` (1/m of path at
        the worst interval; the error goes as the spacing to the 4th power).
    """
    t = traj.t
    h = np.diff(t)[:, None]
    v = traj.beta * c
    a = traj.beta_dot * c
    # quintic minus cubic Hermite midpoint, formed without the (r0 + r1)/2 terms that
    # would cancel: no rounding from the metre-sized positions enters
    dr = h / 32.0 * (v[:-1] - v[1:]) + h * h / 64.0 * (a[:-1] + a[1:])
    px, py = _envelope_probes(observer)
    if observer.kind == "angular":
        proj = np.abs(dr @ _directions(px, py).T)  # (M, P)
    else:
        pts = np.stack([px, py, np.full(px.shape, observer.distance)], axis=1)
        mid = 0.5 * (traj.r[:-1] + traj.r[1:])
        d = pts[None, :, :] - mid[:, None, :]
        n = d / np.linalg.norm(d, axis=2, keepdims=True)
        proj = np.abs(np.einsum("mpi,mi->mp", n, dr))  # |ΔR| = |n·Δr| to first order
    per_interval = proj.max(axis=1) * (omega_max / c)
    k = int(np.argmax(per_interval))
    phase_err = float(per_interval[k])
    estimate = INPUT_ERROR_FACTOR * phase_err
    ds = float(np.linalg.norm(v[k]) * h[k, 0])  # path length of the worst interval, m
    density = 1.0 / ds if ds > 0 else math.inf
    scale = (estimate / tolerance) ** 0.25 if estimate > 0 else 0.0
    return {
        "input_phase_error": phase_err,
        "input_error_estimate": estimate,
        "input_resolved": bool(estimate <= tolerance),
        "input_samples_per_m": density,
        "needed_samples_per_m": density * max(scale, 1.0),
    }


def _check_input(traj, observer, omega, tolerance, diag):
    """Add the input-resolution figures to ``diag``; flag and warn when they miss the goal."""
    res = input_resolution(traj, observer, float(omega.max()), tolerance)
    diag["input_phase_error"] = res["input_phase_error"]
    diag["input_error_estimate"] = res["input_error_estimate"]
    diag["input_resolved"] = res["input_resolved"]
    if res["input_resolved"]:
        return diag
    diag["needed_samples_per_m"] = res["needed_samples_per_m"]
    if not INPUT_GUARD_WARNS:
        return diag
    diag["converged"] = False
    e_max = float(omega_to_photon_energy(omega.max()))
    warnings.warn(
        f"the input trajectory is sampled too coarsely for photon energies up to {e_max:.6g} eV: "
        "interpolation between its samples leaves a phase error of "
        f"{res['input_phase_error']:.2e} rad (estimated relative field error "
        f"{res['input_error_estimate']:.1e} > tolerance {tolerance:.1e}); resample the path "
        f"(track it again) with at least {res['needed_samples_per_m']:.4g} samples per metre "
        f"of path where it bends most (it has {res['input_samples_per_m']:.4g}; for an "
        "undulator multiply by the period in metres for samples per period). The result "
        "carries this figure",
        ConvergenceWarning,
        stacklevel=4,
    )
    return diag


def choose_refinement(source, observer, photon_energy, tolerance=1e-4, *, tails=True):
    """The sampling refinement factor F for a whole study, computed once.

    Run the convergence probe (and the input-resolution check) for a source,
    an observer envelope and photon energies, so that every pixel chunk of the
    study can be computed with ``radiate(..., refinement=F)`` without
    repeating the probe. Chunks made with ``observer.take`` keep the full
    envelope, so their sampling, and hence their per-pixel results, equal
    those of one call on the whole observer.

    Parameters
    ----------
    source : Trajectory or Bunch
        For a bunch the largest factor over its particles is returned.
    observer : AngularGrid or Screen
    photon_energy : float or array_like
        eV.
    tolerance : float
        Relative accuracy goal of the field.
    tails : bool
        Straight-line continuation (screens), as passed to ``radiate``.

    Returns
    -------
    factor : float
    diagnostics : dict
        As in :func:`converged_sampling` (for a bunch: the worst figures
        over its particles), to be stored with the assembled result.
    """
    from lwrad.constants import photon_energy_to_omega

    energies = np.atleast_1d(np.asarray(photon_energy, dtype=float))
    if energies.ndim != 1 or energies.size == 0 or not np.all(energies > 0):
        raise InputError("photon_energy must be positive (eV)", location="photon_energy")
    omega = photon_energy_to_omega(energies)
    trajs = list(source) if not hasattr(source, "beta") else [source]
    parts = [converged_sampling(tr, observer, omega, tolerance, tails=tails) for tr in trajs]
    best = max(f for f, _ in parts)
    worst = _worst(d for _, d in parts)
    return float(best), worst


def energy_bands(omega) -> list:
    """Index arrays of the photon-energy bands (ω_max/R^{k+1}, ω_max/R^k], R = ``BAND_RATIO``.

    Highest band first; the order of the energies within a band is kept. Each
    band is sampled for its own highest energy (:func:`sample_times`), so a wide
    spectrum does not pay the top band's density at every energy.
    """
    w = np.asarray(omega, dtype=float)
    k = np.floor(np.log(w.max() / w) / math.log(BAND_RATIO)).astype(int)
    return [np.flatnonzero(k == b) for b in np.unique(k)]


def _worst(diagnostics) -> dict:
    # the figures that bound every part: flags all-True, numbers the maximum
    worst = {}
    for d in diagnostics:
        for key, val in d.items():
            if key == "converged" or isinstance(val, bool):
                worst[key] = bool(worst.get(key, True)) and bool(val)
            elif isinstance(val, int | float) and key != "tolerance":
                worst[key] = max(worst.get(key, val), val)
            else:
                worst[key] = val
    return worst


def converged_sampling(
    traj, observer, omega, tolerance, *, tails=True, factor=None, workers=1, keep=None
):
    """Choose the refinement factor F by doubling until the probe pixels agree.

    The probes are computed as :func:`lwrad.radiation.radiate` computes the
    pixels, band by band (:func:`energy_bands`); the error is relative to the
    peak over all energies.

    Returns
    -------
    factor : float
    diagnostics : dict
        ``refinement_factor``, ``estimated_relative_error`` (probe max |E_F − E_2F| /
        max |E_2F|), ``n_samples``, ``converged``, ``tolerance``.

    With a dict ``keep`` the bands of :func:`band_nodes` for the returned factor
    are left in ``keep["bands"]`` and the probes' field (P, n_e, 3) at that factor in
    ``keep["probe_field"]`` (targets :func:`probe_targets`), when the probes ran, so
    that the caller need not compute them again.
    """
    if factor is not None:
        diag = {"refinement_factor": float(factor), "converged": None, "tolerance": tolerance}
        return float(factor), _check_input(traj, observer, omega, tolerance, diag)
    f_now = 1.0
    e_now, b_now = _probe_field(traj, observer, omega, f_now, tails, workers)
    err = math.inf
    for _ in range(_MAX_REFINE):
        e_fine, b_fine = _probe_field(traj, observer, omega, 2.0 * f_now, tails, workers)
        peak = float(np.max(np.abs(e_fine)))
        err = float(np.max(np.abs(e_now - e_fine))) / peak if peak > 0 else 0.0
        if err <= tolerance:
            break
        f_now, e_now, b_now = 2.0 * f_now, e_fine, b_fine
    else:
        warnings.warn(
            f"radiation integral did not reach the relative tolerance {tolerance:.1e} "
            f"(estimated error {err:.2e} with {_n_samples(b_now)} samples); the result "
            "carries this figure",
            ConvergenceWarning,
            stacklevel=3,
        )
    if keep is not None:
        keep["bands"] = b_now
        keep["probe_field"] = e_now
    diag = {
        "refinement_factor": f_now,
        "estimated_relative_error": err,
        "n_samples": _n_samples(b_now),
        "converged": err <= tolerance,
        "tolerance": tolerance,
    }
    return f_now, _check_input(traj, observer, omega, tolerance, diag)


def _n_samples(bands) -> int:
    # the sample count reported for a set of bands: the top band's
    return int(max(b[1] for b in bands))

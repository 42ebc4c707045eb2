"""Radiation of beams and bunches: Monte Carlo sums, the far-field fast path, coherent parts.

Three routes, one result type (:class:`BeamResult`):

* :func:`monte_carlo` — sample macro-electrons from an
  :class:`~lwrad.beam.ElectronBeam`, give each its own trajectory (exact
  offsets of a reference path in a field that depends on z only, a rigid
  tilt, or tracking through the magnets), compute each field with
  :func:`lwrad.radiate`, add intensities, and stop when the standard error
  of the mean reaches the requested relative level (or a particle limit,
  with a :class:`~lwrad.errors.ConvergenceWarning` — never silently);
* :func:`convolve_beam` — the fast path for far-field (angular-grid)
  results: the single-electron pattern convolved with the beam's angular
  distribution and energy spread (:mod:`lwrad.engine.convolution`);
* :func:`radiate_bunch` — a macro-particle :class:`~lwrad.trajectory.Bunch`
  (from a file): incoherent sum Σ w|Ẽ|² and coherent sum |Σ w Ẽ|².

How the current normalises a result
-----------------------------------
A beam of current I delivers I/|q| particles per second. With bunches of
N = Σ w_j particles (charge Q = N|q|) at repetition rate f, I = Q f = N|q| f.

* incoherent part (photons/s): the weighted mean per particle,
  Σ w|Ẽ|²/Σ w, times I/|q|;
* coherent part (photons/s): the cross terms of one bunch,
  |Σ w Ẽ|² − Σ w²|Ẽ|², times f = I/(|q| N) — that is, per particle times
  I/|q| *and times N* relative to the per-particle mean field, since
  |Σ w Ẽ|²/N = N |⟨Ẽ⟩|²;
* total = incoherent + coherent. For N identical real particles (w = 1) at
  one place the coherent sum is |Σ Ẽ|² = N²|Ẽ₁|², the incoherent N|Ẽ₁|², and
  the total per second is N·(I/|q|)·(single-particle flux).

The self terms Σ w²|Ẽ|² are subtracted because a macro-particle standing for
w real particles does not radiate as one charge w q; for real particles
(w = 1) they are exactly the incoherent sum, so total = |Σ Ẽ|².

Spectral quantities: d²W/(dω dΩ) = (ε0 c/π)|RẼ|² per particle (angular
grid) or d²W/(dω dA) = (ε0 c/π)|Ẽ|² (screen); photon flux density per
0.1 % bandwidth = that × 10⁻³/ħ × particles per second (Jackson 3rd ed.
eq. 14.67 with the e^{+iωt} convention of lwrad).
"""

from __future__ import annotations

import math
import warnings

import numpy as np

from lwrad.beam import ElectronBeam, make_rng, offset_in_longitudinal_field, rigid_offset
from lwrad.engine.beam_sums import CoherentSum, IncoherentSum, coherency_moments
from lwrad.engine.convolution import smear_far_field, trapezoid_weights
from lwrad.errors import ConvergenceWarning, InputError
from lwrad.trajectory import Bunch, Trajectory

__all__ = ["BeamResult", "monte_carlo", "convolve_beam", "radiate_bunch", "PARTS"]

#: Parts a :class:`BeamResult` can report.
PARTS = ("single", "incoherent", "coherent", "total")


class BeamResult:
    """Radiation of a beam or bunch, with single-electron, incoherent and coherent parts.

    Each part is a :class:`lwrad.radiation.Result` (built from intensity
    moments), so flux density, Stokes parameters and flux through an
    aperture follow the conventions of :mod:`lwrad.radiation`:

    ``single``      the reference electron (filament beam), per particle;
    ``incoherent``  the weighted mean per particle (× I/|q| per second);
    ``coherent``    the cross terms of one bunch, |Σ w Ẽ|² − Σ w²|Ẽ|²,
                    repeating I/(|q| N) times per second;
    ``total``       incoherent + coherent for one bunch, same repetition.

    Attributes
    ----------
    photon_energy : ndarray, shape (n_e,)
        eV.
    observer : AngularGrid or Screen
    method : str
        ``"monte-carlo"``, ``"convolution"`` or ``"bunch"``.
    parts : dict
        Part name → Result (only the parts that apply).
    incoherent_se : ndarray (n_e, ny, nx) or None
        Standard error of the incoherent mean intensity per pixel (Monte
        Carlo and bunches), in the moments' units.
    n_particles : float or None
        Particles per bunch N = Σ w.
    coherent_field : ndarray (n_e, ny, nx, 3) complex or None
        Σ w Ẽ of one bunch (R·Ẽ on an angular grid), for phases and time-domain work.
    coherent_sum_moments : ndarray (5, n_e, ny, nx) or None
        Moments of Σ w Ẽ (|Σ w Ẽ|² is their first three summed).
    diagnostics : dict
        Particle counts, achieved uncertainty, convergence, quadrature figures.
    """

    def __init__(
        self,
        photon_energy,
        observer,
        method,
        *,
        charge,
        single=None,
        incoherent=None,
        incoherent_se=None,
        coherent_sum=None,
        self_terms=None,
        n_particles=None,
        coherent_field=None,
        diagnostics=None,
    ):
        from lwrad.radiation import Result

        self.photon_energy = np.atleast_1d(np.asarray(photon_energy, dtype=float))
        self.observer = observer
        self.method = method
        self.incoherent_se = incoherent_se
        self.n_particles = None if n_particles is None else float(n_particles)
        self.coherent_sum_moments = coherent_sum
        self.coherent_field = coherent_field
        self.diagnostics = dict(diagnostics or {})
        self.parts = {}

        def part(moments, per=1.0):
            return Result(
                self.photon_energy,
                observer,
                moments=moments,
                charge=charge,
                particles_per_result=per,
                diagnostics=self.diagnostics,
            )

        if single is not None:
            self.parts["single"] = part(single)
        if incoherent is not None:
            self.parts["incoherent"] = part(incoherent)
        if coherent_sum is not None:
            cross = coherent_sum - self_terms
            self.parts["coherent"] = part(cross, self.n_particles)
            self.parts["total"] = part(incoherent * self.n_particles + cross, self.n_particles)

    def part(self, name: str = "incoherent"):
        """The :class:`~lwrad.radiation.Result` of one part (see the class notes)."""
        if name not in PARTS:
            raise InputError(f"unknown part {name!r}; expected one of {PARTS}", location="part")
        if name not in self.parts:
            hint = " (compute it with coherent=True)" if name in ("coherent", "total") else ""
            raise InputError(f"this {self.method} result has no {name} part{hint}", location="part")
        return self.parts[name]

    single = property(
        lambda self: self.parts.get("single"), doc="Reference-electron Result or None."
    )
    incoherent = property(
        lambda self: self.parts.get("incoherent"), doc="Incoherent Result or None."
    )
    coherent = property(
        lambda self: self.parts.get("coherent"), doc="Coherent (cross-term) Result or None."
    )
    total = property(
        lambda self: self.parts.get("total"), doc="Incoherent + coherent Result or None."
    )

    def flux_density(self, current: float, part: str = "incoherent") -> np.ndarray:
        """Photons/s/0.1%BW per mrad² (angular) or per mm² (screen), shape (n_e, ny, nx)."""
        return self.part(part).flux_density(current)

    def flux(self, current: float, aperture=None, part: str = "incoherent") -> np.ndarray:
        """Photons/s/0.1%BW through the grid or an aperture, shape (n_e,)."""
        return self.part(part).flux(current, aperture)

    def stokes(self, current: float, part: str = "incoherent") -> np.ndarray:
        """Stokes parameters in flux-density units, shape (4, n_e, ny, nx)."""
        return self.part(part).stokes(current)

    def flux_density_uncertainty(self, current: float) -> np.ndarray:
        """Standard error of the incoherent flux density (Monte Carlo or bunch), same units."""
        if self.incoherent_se is None:
            raise InputError(f"a {self.method!r} result carries no statistical uncertainty")
        inc = self.part("incoherent")
        per_unit = inc.flux_density(current)  # linear in the intensity, pixel by pixel
        mean = inc.moments[0] + inc.moments[1] + inc.moments[2]
        return np.divide(
            per_unit * self.incoherent_se, mean, out=np.zeros_like(per_unit), where=mean > 0
        )

    def relative_uncertainty(self, significance: float = 0.1) -> float:
        """max SE/mean over pixels whose mean is ≥ ``significance`` × the peak at their photon energy."""
        if self.incoherent_se is None:
            return 0.0
        m = self.part("incoherent").moments
        return _relative_uncertainty(m[0] + m[1] + m[2], self.incoherent_se, significance)

    def __repr__(self) -> str:
        return f"BeamResult(method={self.method!r}, {self.photon_energy.size} photon energies, parts={list(self.parts)})"


def _relative_uncertainty(mean, se, significance):
    peak = mean.reshape(mean.shape[0], -1).max(axis=1)
    mask = mean >= significance * peak[:, None, None]
    mask &= mean > 0
    if not np.any(mask):
        return math.inf
    return float(np.max(se[mask] / mean[mask]))


def _radiate_field(trajectory, observer, photon_energy, options):
    from lwrad.radiation import radiate

    result = radiate(trajectory, observer, photon_energy, **options)
    field = result.field
    if field is None:
        raise InputError("radiate returned no field for a single trajectory")
    return np.asarray(field)


def _check_positive_int(name, value, minimum=1):
    if isinstance(value, bool) or not isinstance(value, int | np.integer) or value < minimum:
        raise InputError(f"{name} must be an integer >= {minimum}, got {value!r}", location=name)
    return int(value)


_OFFSET_METHODS = ("longitudinal-field", "rigid", "tracking")


def monte_carlo(
    beam: ElectronBeam,
    observer,
    photon_energy,
    *,
    reference: Trajectory | None = None,
    magnet=None,
    offsets: str | None = None,
    z_ref: float | None = None,
    rel_tolerance: float = 0.05,
    significance: float = 0.1,
    batch_size: int = 32,
    min_particles: int = 64,
    max_particles: int = 4096,
    seed=None,
    coherent: bool = False,
    n_jobs: int = 1,
    radiate_options: dict | None = None,
    field_function=None,
) -> BeamResult:
    """Monte Carlo radiation of a beam: sampled macro-electrons, intensities added.

    Parameters
    ----------
    beam : ElectronBeam
        The beam (Twiss parameters at ``z_ref``).
    observer : AngularGrid or Screen
    photon_energy : float or array_like
        eV.
    reference : Trajectory, optional
        The on-orbit particle's path at the beam energy; particles are
        derived from it (``offsets="longitudinal-field"`` or ``"rigid"``).
    magnet : magnet, optional
        Track each particle through it with :func:`lwrad.track`
        (``offsets="tracking"``).
    offsets : {"longitudinal-field", "rigid", "tracking"}, optional
        How particles get their paths (default: tracking with a magnet,
        else longitudinal-field). ``"longitudinal-field"`` is exact for
        fields depending on z only (see :mod:`lwrad.beam`); ``"rigid"``
        tilts and shifts the whole path (third-order error inside a magnet)
        and cannot represent an energy spread.
    z_ref : float, optional
        Plane of the Twiss parameters, m; default the middle of the path
        (or of the magnet).
    rel_tolerance : float or None
        Stop when max SE/mean over significant pixels ≤ this. ``None``: a
        fixed number of particles (``max_particles``), no convergence test;
        the achieved uncertainty is still reported.
    significance : float
        Pixels whose mean is below this fraction of the peak (per photon
        energy) do not count for the stopping rule.
    batch_size, min_particles, max_particles : int
        Particles per batch; at least ``min_particles`` before testing
        convergence; never more than ``max_particles``.
    seed : int, numpy.random.Generator or None
        Seed for sampling (state it in studies).
    coherent : bool
        Also accumulate the coherent sum (needs ``beam.bunch_charge``).
    n_jobs : int
        Threads over particles.
    radiate_options : dict, optional
        Extra keywords for :func:`lwrad.radiate` (``method``, ``tolerance``).
    field_function : callable, optional
        ``f(trajectory, observer, photon_energy) -> field (n_e, ny, nx, 3)``
        instead of :func:`lwrad.radiate`.

    Returns
    -------
    BeamResult
        ``single`` (the reference particle), ``incoherent`` and
        ``incoherent_se``; ``coherent_sum``/``self_terms`` for
        ``coherent=True``; diagnostics ``n_particles_used``,
        ``relative_uncertainty``, ``converged``, ``seed``.

    Warns
    -----
    ConvergenceWarning
        ``max_particles`` reached before ``rel_tolerance``.
    """
    from lwrad.parallel import run_chunks

    if not isinstance(beam, ElectronBeam):
        raise InputError("beam must be an ElectronBeam", location="beam")
    if (reference is None) == (magnet is None):
        raise InputError(
            "give exactly one of reference (a Trajectory) or magnet", location="reference"
        )
    if offsets is None:
        offsets = "tracking" if magnet is not None else "longitudinal-field"
    if offsets not in _OFFSET_METHODS:
        raise InputError(
            f"offsets must be one of {_OFFSET_METHODS}, got {offsets!r}", location="offsets"
        )
    if (offsets == "tracking") != (magnet is not None):
        raise InputError(
            "offsets='tracking' needs a magnet, the other methods a reference trajectory"
        )
    if offsets == "rigid" and beam.energy_spread > 0:
        raise InputError(
            "a rigid tilt cannot represent an energy spread; use offsets='longitudinal-field' or tracking",
            location="offsets",
        )
    if coherent and beam.bunch_charge is None:
        raise InputError("coherent sums of a beam need its bunch_charge", location="bunch_charge")
    fixed = rel_tolerance is None
    if not fixed:
        rel_tolerance = float(rel_tolerance)
        if not rel_tolerance > 0:
            raise InputError(
                "rel_tolerance must be positive (or None for a fixed particle count)",
                location="rel_tolerance",
            )
    batch_size = _check_positive_int("batch_size", batch_size)
    max_particles = _check_positive_int("max_particles", max_particles)
    min_particles = (
        max_particles
        if fixed
        else min(_check_positive_int("min_particles", min_particles, 2), max_particles)
    )
    n_jobs = _check_positive_int("n_jobs", n_jobs)
    rng = make_rng(seed)
    options = dict(radiate_options or {})
    field_of = field_function or (lambda tr, obs, pe: _radiate_field(tr, obs, pe, options))
    make_path, reference_path = _path_maker(beam, reference, magnet, offsets, z_ref)

    single = coherency_moments(field_of(reference_path, observer, photon_energy))
    inc = IncoherentSum()
    coh = CoherentSum() if coherent else None
    achieved = math.inf
    used = 0
    n_batches = 0
    while used < max_particles:
        m = min(batch_size, max_particles - used)
        batch = beam.sample(m, rng)
        paths = [make_path(batch.coordinates(i)) for i in range(m)]
        fields = run_chunks(
            lambda tr: field_of(tr, observer, photon_energy),
            paths,
            workers=n_jobs,
            backend="serial" if n_jobs == 1 else "threads",
        )
        for f in fields:  # fixed order: reproducible sums
            inc.add(f, 1.0)
            if coh is not None:
                coh.add(f, 1.0)
        used += m
        n_batches += 1
        if used >= min_particles:
            achieved = _relative_uncertainty(inc.mean(), inc.standard_error(), significance)
            if not fixed and achieved <= rel_tolerance:
                break
    converged = None if fixed else achieved <= rel_tolerance
    if converged is False:
        warnings.warn(
            f"Monte Carlo stopped at max_particles={max_particles} with relative uncertainty {achieved:.3g} "
            f"> rel_tolerance {rel_tolerance:.3g}; the result carries the achieved figure",
            ConvergenceWarning,
            stacklevel=2,
        )
    extra = {}
    if coh is not None:
        n_bunch = beam.particles_per_bunch
        scale = n_bunch / used  # each macro-particle stands for N/M real particles
        extra = dict(
            coherent_sum=coh.moments() * scale**2,
            self_terms=coh.self_moments() * scale**2,
            n_particles=n_bunch,
            coherent_field=coh.field() * scale,
        )
    return BeamResult(
        photon_energy,
        observer,
        "monte-carlo",
        charge=beam.charge,
        single=single,
        incoherent=inc.coherency(),
        incoherent_se=inc.standard_error(),
        diagnostics={
            "n_particles_used": used,
            "n_batches": n_batches,
            "relative_uncertainty": achieved,
            "rel_tolerance": rel_tolerance,
            "significance": significance,
            "converged": converged,
            "offsets": offsets,
            "seed": seed if isinstance(seed, int | None) else "generator",
        },
        **extra,
    )


def _path_maker(beam, reference, magnet, offsets, z_ref):
    """(coordinates → Trajectory, reference Trajectory) for the chosen offset method."""
    if offsets == "tracking":
        from lwrad.tracking import track

        z_start, z_end = (float(v) for v in magnet.z_range)
        z0 = 0.5 * (z_start + z_end) if z_ref is None else float(z_ref)

        def tracked(co):
            # initial conditions at the entrance: the straight line that passes (x, x') at z_ref
            lever = z0 - z_start
            return track(
                magnet,
                beam.energy * (1.0 + co["delta"]),
                particle=beam.particle,
                x0=co["x"] - co["xp"] * lever,
                y0=co["y"] - co["yp"] * lever,
                xp0=co["xp"],
                yp0=co["yp"],
            )

        ref = tracked({"x": 0.0, "xp": 0.0, "y": 0.0, "yp": 0.0, "delta": 0.0})
        t_ref0 = _time_at(ref, z0)

        def make(co):
            tr = tracked(co)
            return tr.replace(t=tr.t + (t_ref0 + co["t"] - _time_at(tr, z0)))

        return make, ref

    if (
        abs(reference.charge - beam.charge) > 1e-9 * abs(beam.charge)
        or abs(np.median(reference.energy_ev) - beam.energy) > 1e-6 * beam.energy
    ):
        raise InputError(
            "the reference trajectory's particle and energy must match the beam's "
            f"(reference {np.median(reference.energy_ev):.9g} eV, beam {beam.energy:.9g} eV)",
            location="reference",
        )
    if offsets == "rigid":

        def make(co):
            return rigid_offset(
                reference, x=co["x"], xp=co["xp"], y=co["y"], yp=co["yp"], t=co["t"], z_ref=z_ref
            )

    else:

        def make(co):
            return offset_in_longitudinal_field(reference, z_ref=z_ref, **co)

    return make, reference


def _time_at(trajectory, z):
    zs = trajectory.r[:, 2]
    if not (np.all(np.diff(zs) > 0) and zs[0] <= z <= zs[-1]):
        raise InputError(f"the tracked path must move forward in z and cross z_ref = {z} m")
    return float(np.interp(z, zs, trajectory.t))


def convolve_beam(
    single,
    beam: ElectronBeam,
    *,
    delta_step: float | None = None,
    n_sigma: float = 6.0,
    max_nodes: int = 4001,
) -> BeamResult:
    """Fast path: a far-field single-electron result smeared by the beam's divergence and energy spread.

    Parameters
    ----------
    single : Result
        :func:`lwrad.radiate` of the reference trajectory on a full
        :class:`~lwrad.observers.AngularGrid` (``.moments``, ``.photon_energy``,
        ``.observer``). The grid must reach where the smeared pattern has
        fallen off (the relative change of the flux on the grid is reported as
        ``diagnostics["flux_change"]``, with a warning above 1e-3), and with an
        energy spread the photon energies must resolve the lines and extend
        beyond the energies wanted by about ±2·6σ_δ relative.
    beam : ElectronBeam
    delta_step, n_sigma, max_nodes
        Energy-spread quadrature, see
        :func:`lwrad.engine.convolution.smear_far_field`.

    Returns
    -------
    BeamResult
        ``single`` and ``incoherent`` at the photon
        energies that could be computed (``diagnostics["dropped_energies"]``).

    Notes
    -----
    Assumes a zero-size source: in the far field a position offset x₀ moves
    the pattern by x₀/D, which vanishes for D → ∞, so only the angular
    distribution at the source (σ_x' = sqrt(ε γ_T), dispersion slope D')
    and the energy spread enter. Each particle's pattern is the reference's
    shifted by its angle and rescaled for its energy,
    s² I(ω/s², sθ) with s = 1 + δ, so a harmonic moves by 2δ in relative
    photon energy (module notes of :mod:`lwrad.engine.convolution`). Valid
    for static fields depending on z only; a screen at finite distance
    needs :func:`monte_carlo`.
    """
    if not isinstance(beam, ElectronBeam):
        raise InputError("beam must be an ElectronBeam", location="beam")
    observer = getattr(single, "observer", None)
    if observer is None or observer.kind != "angular" or not observer.is_grid:
        raise InputError(
            "the fast path needs a far-field result on a full AngularGrid", location="observer"
        )
    moments = getattr(single, "moments", None)
    if moments is None or np.shape(moments)[0] != 5:
        raise InputError("the fast path needs a Result of one trajectory (its intensity moments)")
    moments = np.asarray(moments, dtype=float)
    sx, sy = beam.betatron_divergence
    kwargs = dict(
        sigma_xp=sx,
        sigma_yp=sy,
        sigma_delta=beam.energy_spread,
        dispersion_xp=beam.dispersion_xp,
        dispersion_yp=beam.dispersion_yp,
        delta_step=delta_step,
        n_sigma=n_sigma,
        max_nodes=max_nodes,
    )
    tx, ty = observer.theta_x, observer.theta_y
    e = np.asarray(single.photon_energy, dtype=float)
    smeared = []
    diag = None
    e_out = None
    lost = 0.0
    flux = 0.0
    area = trapezoid_weights(ty)[:, None] * trapezoid_weights(tx)[None, :]
    for k, comp in enumerate(moments):  # the convolution is linear: smear each polarisation moment
        out, e_out, diag = smear_far_field(comp, e, tx, ty, **kwargs)
        smeared.append(out)
        if k < 3:  # the intensity moments: relative change of the total flux on the grid
            after = np.sum(out * area, axis=(1, 2))
            change = diag["flux_change_per_energy"]
            lost = lost + after - after / (1.0 + change)
            flux = flux + after / (1.0 + change)
    per_energy = np.divide(lost, flux, out=np.zeros_like(flux), where=flux > 0)
    change = float(per_energy[np.argmax(np.abs(per_energy))])
    diag["flux_change"] = change
    diag.pop("flux_change_per_energy")
    keep = np.isin(e, e_out)
    if abs(change) > 1e-3:
        warnings.warn(
            f"the beam's angular spread changes the flux on the grid by {change:.2%} (radiation crosses the "
            "grid's edge); widen the grid",
            ConvergenceWarning,
            stacklevel=2,
        )
    return BeamResult(
        e_out,
        observer,
        "convolution",
        charge=beam.charge,
        single=moments[:, keep],
        incoherent=np.stack(smeared),
        diagnostics=dict(diag, sigma_xp=sx, sigma_yp=sy, sigma_delta=beam.energy_spread),
    )


def radiate_bunch(
    bunch: Bunch,
    observer,
    photon_energy,
    *,
    coherent: bool = True,
    n_jobs: int = 1,
    radiate_options: dict | None = None,
    field_function=None,
) -> BeamResult:
    """Incoherent and coherent sums over the macro-particles of a bunch.

    Parameters
    ----------
    bunch : Bunch
        Trajectories with weights w_j (real particles per macro-particle);
        their times carry the longitudinal positions.
    observer : AngularGrid or Screen
    photon_energy : float or array_like
        eV.
    coherent : bool
        Also form Σ w Ẽ (costs one complex field array).
    n_jobs : int
        Threads over particles.
    radiate_options : dict, optional
        Extra keywords for :func:`lwrad.radiate`.
    field_function : callable, optional
        ``f(trajectory, observer, photon_energy) -> field`` instead of radiate.

    Returns
    -------
    BeamResult
        ``incoherent`` = Σ w|Ẽ|²/Σ w with its standard error (the spread of
        the macro-particles), ``coherent_sum`` = |Σ w Ẽ|², ``self_terms`` =
        Σ w²|Ẽ|², ``n_particles`` = Σ w. See the module notes for the
        normalisation by the current.
    """
    from lwrad.parallel import run_chunks

    if not isinstance(bunch, Bunch):
        raise InputError("radiate_bunch needs a Bunch", location="bunch")
    n_jobs = _check_positive_int("n_jobs", n_jobs)
    options = dict(radiate_options or {})
    field_of = field_function or (lambda tr, obs, pe: _radiate_field(tr, obs, pe, options))
    charges = {tr.charge for tr in bunch}
    if len(charges) != 1:
        raise InputError("all particles of a bunch must have the same charge", location="bunch")
    inc = IncoherentSum()
    coh = CoherentSum() if coherent else None
    indices = list(range(len(bunch)))
    chunk = max(1, 4 * n_jobs)
    for start in range(0, len(indices), chunk):  # bounded memory: a few fields at a time
        part = indices[start : start + chunk]
        fields = run_chunks(
            lambda i: field_of(bunch[i], observer, photon_energy),
            part,
            workers=n_jobs,
            backend="serial" if n_jobs == 1 else "threads",
        )
        for i, f in zip(part, fields, strict=True):
            w = float(bunch.weights[i])
            inc.add(f, w)
            if coh is not None:
                coh.add(f, w)
    extra = {}
    if coh is not None:
        extra = dict(
            coherent_sum=coh.moments(), self_terms=coh.self_moments(), coherent_field=coh.field()
        )
    return BeamResult(
        photon_energy,
        observer,
        "bunch",
        charge=charges.pop(),
        incoherent=inc.coherency(),
        incoherent_se=inc.standard_error(),
        n_particles=inc.sum_w,
        diagnostics={"n_macro_particles": len(bunch), "effective_count": inc.effective_count},
        **extra,
    )

"""Radiation spectra, flux density, polarization and power density (public API).

Conventions (one place for all of them)
---------------------------------------
* Fourier transform: Ẽ(ω) = ∫ E(t) e^{+iωt} dt (observer time t), ω > 0.
* Energy per area and angular frequency: d²W/(dA dω) = (ε0 c/π)|Ẽ|² (Jackson
  14.60 with ω > 0 only); per solid angle with R·Ẽ in place of Ẽ.
* Photon flux density for a current I, per 0.1 % bandwidth:
  (ε0 c/π)|Ẽ|² · 10⁻³/ħ · I/|q|   (dω/ω = 10⁻³ and one photon = ħω).
* Angular grids: densities per dθx dθy (tangent-plane angles, reported per
  mrad²) = per steradian × n_z³, the Jacobian dΩ/(dθx dθy) = (1+θx²+θy²)^{-3/2}.
  Screens: per dx dy (reported per mm²).
* Stokes parameters in flux-density units, from the transverse components:
  S0 = |Ex|² + |Ey|², S1 = |Ex|² − |Ey|² (horizontal minus vertical),
  S2 = 2 Re(Ex Ey*) (+45° minus −45°), S3 = 2 Im(Ex* Ey).
  **Handedness:** with the e^{+iωt} convention, Ẽ ∝ (1, i) is the real field
  (cos ωt, sin ωt): it turns from +x towards +y, counter-clockwise for an
  observer facing the source (looking back along −z). This is positive
  helicity (photon spin along the direction of travel), which lwrad calls
  *right-circular* (the IEEE / helicity convention; classical optics texts
  call the same wave left-circular). S3 > 0 means right-circular in this sense.
* Current normalisation: one particle's result × I/|q| particles per second;
  an incoherent Bunch result is the weighted mean per particle × I/|q|; a
  coherent Bunch result is the field of the whole bunch (Σ w_j Ẽ_j) and
  repeats I/(|q| Σ w_j) times per second.

Power estimates (:func:`power_density`, :func:`total_power`) are estimates for
design; shielding, radiation safety and thermal design follow local codes and
licensed engineering practice.
"""

from __future__ import annotations

import math

import numpy as np

from lwrad.constants import c, epsilon_0, hbar, photon_energy_to_omega
from lwrad.engine.beam_sums import coherency_moments, coherency_moments_into
from lwrad.errors import InputError
from lwrad.observers import (
    AngularGrid,
    CircularAperture,
    RectangularAperture,
    Screen,
    observer_from_dict,
)
from lwrad.trajectory import Bunch, Trajectory

__all__ = [
    "radiate",
    "power_density",
    "total_power",
    "Result",
    "RectangularAperture",
    "CircularAperture",
    "merge_diagnostics",
]

_CHUNK_PIXELS = 64  # pixels per parallel task (fixed: results never depend on n_jobs)
_METHODS = ("auto", "direct", "fft")


# ---------------------------------------------------------------------------- input checks
def _photon_energies(photon_energy):
    try:
        e = np.atleast_1d(np.asarray(photon_energy, dtype=float))
    except (TypeError, ValueError):
        raise InputError("photon_energy must be numeric (eV)", location="photon_energy") from None
    if e.ndim != 1 or e.size == 0:
        raise InputError(
            "photon_energy must be a scalar or a non-empty 1-D array (eV)", location="photon_energy"
        )
    if not np.all(np.isfinite(e)) or np.any(e <= 0):
        raise InputError("photon energies must be finite and > 0 eV", location="photon_energy")
    return e


def _trajectories(source):
    if isinstance(source, Trajectory):
        return [source], np.ones(1), False
    if isinstance(source, Bunch):
        return list(source), np.asarray(source.weights, float), True
    raise InputError(f"source must be a Trajectory or a Bunch, got {type(source).__name__}")


def _check_observer(observer, source_trajs):
    if not isinstance(observer, AngularGrid | Screen):
        raise InputError(
            f"observer must be an AngularGrid or a Screen, got {type(observer).__name__}"
        )
    if observer.n_pixels == 0:
        raise InputError("the observer has no pixels")
    if isinstance(observer, Screen):
        for tr in source_trajs:
            if observer.distance <= tr.r[:, 2].max():
                raise InputError(
                    f"the screen at z = {observer.distance} m is not downstream of the whole path "
                    f"(path reaches z = {tr.r[:, 2].max():.6g} m): the observer would be inside "
                    "the path",
                    location="observer.distance",
                )


# ---------------------------------------------------------------------------- Result
class Result:
    """Frequency-domain radiation on an observer.

    Attributes
    ----------
    photon_energy : ndarray (n_e,)
        eV.
    observer : AngularGrid or Screen
    field : ndarray (n_e, ny, nx, 3) complex or None
        R·Ẽ (V·s) on an angular grid, Ẽ (V·s/m) on a screen; None for an
        incoherent sum of many particles.
    moments : ndarray (5, n_e, ny, nx)
        |Ex|², |Ey|², |Ez|², Re(Ex Ey*), Im(Ex Ey*), per particle (weighted
        mean for an incoherent bunch), in field units squared.
    charge : float
        |q| of one particle, C (normalises the current).
    particles_per_result : float
        Particles the stored field stands for (1, or Σ w for a coherent bunch).
    diagnostics : dict
        Convergence figures achieved.
    standard_error : ndarray (n_e, ny, nx) or None
        Standard error of the mean intensity |Ẽ|² per pixel (same units as
        the moments) for an incoherent bunch: the spread of its
        macro-particles (:class:`lwrad.engine.beam_sums.IncoherentSum`).
    parts : dict
        For a bunch: part name → Result (``"incoherent"``, and with
        ``coherent=True`` also ``"coherent"`` and ``"total"``), see
        :class:`lwrad.beam_radiation.BeamResult`; empty otherwise.
    """

    def __init__(
        self,
        photon_energy,
        observer,
        *,
        field=None,
        moments=None,
        charge,
        particles_per_result=1.0,
        diagnostics=None,
        standard_error=None,
    ):
        self.photon_energy = np.asarray(photon_energy, float)
        self.observer = observer
        self.field = field
        if moments is None:
            if field is None:
                raise InputError("a Result needs a field or intensity moments")
            moments = coherency_moments(field)
        self.moments = moments
        self.charge = abs(float(charge))
        self.particles_per_result = float(particles_per_result)
        self.diagnostics = dict(diagnostics or {})
        self.standard_error = standard_error
        self.parts = {}

    # -- units ---------------------------------------------------------------
    @property
    def angular(self) -> bool:
        """True for an angular grid (far field)."""
        return self.observer.kind == "angular"

    @property
    def density_unit(self) -> str:
        """``"mrad^-2"`` or ``"mm^-2"``."""
        return "mrad^-2" if self.angular else "mm^-2"

    def _jacobian(self):
        # per steradian → per dθx dθy: n_z³; a screen: 1. Then per rad²/m² → per mrad²/mm².
        if self.angular:
            n = self.observer.directions()[:, 2] ** 3
            return n.reshape(self.observer.shape) * 1e-6
        return np.full(self.observer.shape, 1e-6)

    def _photons_factor(self, current):
        try:
            current = float(current)
        except (TypeError, ValueError):
            raise InputError("current must be a number (A)", location="current") from None
        if not (np.isfinite(current) and current >= 0):
            raise InputError("current must be finite and >= 0 (A)", location="current")
        # (ε0 c/π)|Ẽ|² per unit ω → photons per 0.1 % BW: × 1e-3 ω/(ħω) = 1e-3/ħ
        return (
            epsilon_0
            * c
            / math.pi
            * 1e-3
            / hbar
            * current
            / (self.charge * self.particles_per_result)
        )

    def spectral_energy(self) -> np.ndarray:
        """d²W/(dΩ dω) (J·s/rad per sr) or d²W/(dA dω) (J·s/rad per m²), (n_e, ny, nx), per result."""
        return epsilon_0 * c / math.pi * (self.moments[0] + self.moments[1] + self.moments[2])

    def flux_density(self, current) -> np.ndarray:
        """Photon flux density, ph/s/0.1%BW/mrad² (angular) or /mm² (screen), (n_e, ny, nx).

        Parameters
        ----------
        current : float
            Beam current, A.
        """
        s = self.moments[0] + self.moments[1] + self.moments[2]
        return self._photons_factor(current) * s * self._jacobian()

    def stokes(self, current) -> np.ndarray:
        """Stokes parameters (S0, S1, S2, S3) in flux-density units, (4, n_e, ny, nx).

        See the module docstring for the definitions and the handedness convention
        (S3 > 0: right-circular = positive helicity). S0 counts the transverse
        components only (|Ex|² + |Ey|²); :meth:`flux_density` adds |Ez|².
        """
        m = self.moments
        f = self._photons_factor(current) * self._jacobian()
        return np.stack([(m[0] + m[1]) * f, (m[0] - m[1]) * f, 2.0 * m[3] * f, -2.0 * m[4] * f])

    def pixel_weights(self, aperture=None) -> np.ndarray:
        """Integration weights (mrad² or mm² per pixel), (ny, nx), trapezoid rule.

        Each pixel owns the cell between the mid-points to its neighbours (half
        cells at the grid edges: the 2-D trapezoid rule); with an aperture, a
        pixel's weight is multiplied by the fraction of its cell inside it. An
        axis with a single pixel counts as 1 mrad (1 mm) wide, so the flux of a
        single column or row is per mrad (per mm) of the other axis.
        """
        obs = self.observer
        if not obs.is_grid:
            raise InputError("integration over pixels needs a full grid observer, not a chunk")
        scale = 1e3  # rad → mrad, m → mm

        def cells(a):
            a = np.asarray(a, float)
            if a.size == 1:
                # a single pixel along an axis counts as 1 mrad (1 mm) wide: the flux of one
                # column is then per mrad (per mm) of that axis
                return a - 0.5 / scale, a + 0.5 / scale, np.ones(1)
            mid = 0.5 * (a[1:] + a[:-1])
            lo = np.concatenate(([a[0]], mid))
            hi = np.concatenate((mid, [a[-1]]))
            return lo, hi, (hi - lo) * scale

        x0, x1, wx = cells(obs._x)
        y0, y1, wy = cells(obs._y)
        w = wy[:, None] * wx[None, :]
        if aperture is None:
            return w
        if not isinstance(aperture, RectangularAperture | CircularAperture):
            raise InputError("aperture must be a RectangularAperture or a CircularAperture")
        frac = aperture.fraction(
            np.broadcast_to(x0[None, :], w.shape),
            np.broadcast_to(x1[None, :], w.shape),
            np.broadcast_to(y0[:, None], w.shape),
            np.broadcast_to(y1[:, None], w.shape),
        )
        return w * frac

    def flux(self, current, aperture=None) -> np.ndarray:
        """Photon flux through the grid or an aperture, ph/s/0.1%BW, shape (n_e,)."""
        return np.sum(self.flux_density(current) * self.pixel_weights(aperture), axis=(1, 2))

    # -- assembly and storage ---------------------------------------------------
    @property
    def field_unit(self) -> str:
        """``"V s"`` (R·Ẽ) or ``"V s/m"`` (Ẽ)."""
        return "V s" if self.angular else "V s/m"

    @property
    def attrs(self) -> dict:
        """Plain JSON-able description (observer, charge, normalisation, diagnostics)."""
        return {
            "observer": self.observer.to_dict(),
            "charge": self.charge,
            "particles_per_result": self.particles_per_result,
            "diagnostics": _plain(self.diagnostics),
            "stokes_convention": "S1=|Ex|^2-|Ey|^2, S2=2Re(Ex Ey*), S3=2Im(Ex* Ey); S3>0 right-circular (positive helicity)",
            "fourier_convention": "E(w) = int E(t) exp(+i w t) dt",
        }

    def to_arrays(self) -> dict:
        """name → (ndarray, unit string)."""
        unit2 = "V^2 s^2" if self.angular else "V^2 s^2/m^2"
        out = {
            "photon_energy": (self.photon_energy, "eV"),
            "intensity_moments": (self.moments, unit2),
        }
        if self.field is not None:
            out["field"] = (self.field, self.field_unit)
        if self.standard_error is not None:
            out["intensity_standard_error"] = (self.standard_error, unit2)
        return out

    @classmethod
    def from_arrays(cls, arrays: dict, attrs: dict) -> Result:
        """Rebuild from :meth:`to_arrays` (values or (value, unit) pairs) and :attr:`attrs`."""

        def val(name):
            v = arrays.get(name)
            return v[0] if isinstance(v, tuple) else v

        try:
            observer = observer_from_dict(attrs["observer"])
            return cls(
                val("photon_energy"),
                observer,
                field=val("field"),
                moments=val("intensity_moments"),
                charge=attrs["charge"],
                particles_per_result=attrs.get("particles_per_result", 1.0),
                diagnostics=attrs.get("diagnostics"),
                standard_error=val("intensity_standard_error"),
            )
        except KeyError as exc:
            raise InputError(f"result description lacks {exc}") from None

    @classmethod
    def concatenate_pixels(cls, results, observer) -> Result:
        """Assemble results computed on ``observer.take(chunk)`` (in pixel order) into one.

        The chunks' diagnostics are merged by :func:`merge_diagnostics` (worst
        error estimate, all-converged flag, summed event counts).
        """
        results = list(results)
        if not results:
            raise InputError("no chunk results to assemble")
        ny, nx = observer.shape
        first = results[0]
        n_e = first.photon_energy.size

        moments = np.concatenate([r.moments.reshape(5, n_e, -1) for r in results], axis=2)
        if moments.shape[2] != ny * nx:
            raise InputError(f"chunks hold {moments.shape[2]} pixels, the observer {ny * nx}")
        field = None
        if all(r.field is not None for r in results):
            field = np.concatenate([r.field.reshape(n_e, -1, 3) for r in results], axis=1)
            field = field.reshape(n_e, ny, nx, 3)
        se = None
        if all(r.standard_error is not None for r in results):
            se = np.concatenate([r.standard_error.reshape(n_e, -1) for r in results], axis=1)
            se = se.reshape(n_e, ny, nx)
        diag = merge_diagnostics(r.diagnostics for r in results)
        return cls(
            first.photon_energy,
            observer,
            field=field,
            moments=moments.reshape(5, n_e, ny, nx),
            charge=first.charge,
            particles_per_result=first.particles_per_result,
            diagnostics=diag,
            standard_error=se,
        )

    def __repr__(self):
        return (
            f"Result({self.observer!r}, {self.photon_energy.size} photon energies, "
            f"field={'yes' if self.field is not None else 'no'})"
        )


def _plain(obj):
    if isinstance(obj, dict):
        return {str(k): _plain(v) for k, v in obj.items()}
    if isinstance(obj, list | tuple):
        return [_plain(v) for v in obj]
    if isinstance(obj, np.generic):
        return obj.item()
    return obj


#: diagnostics that count events per chunk: added when chunks are assembled
_SUMMED_DIAGNOSTICS = ("n_not_converged", "n_pixels")
#: diagnostics that say whether a target was met: all chunks must meet it
_ALL_DIAGNOSTICS = ("converged", "all_converged")


def merge_diagnostics(diagnostics) -> dict:
    """Merge the diagnostics of pixel chunks into one, conservatively.

    Flags (``converged``, ``all_converged``): False if any chunk is False,
    True if all are True, else None (not tested). Event counts
    (``n_not_converged``, ``n_pixels``): summed. Other numbers (error
    estimates, refinement factors, sample counts, iteration maxima): the
    maximum, the figure that bounds every chunk. Anything else: kept when
    all chunks agree, else the list of distinct values in chunk order.
    Maxima, sums and flags do not depend on how the pixels were cut, so the
    merged figures are the same for any chunk size (nothing records the
    number of chunks).

    Parameters
    ----------
    diagnostics : iterable of dict
        One per chunk, in chunk order.

    Returns
    -------
    dict
    """
    diagnostics = [dict(d or {}) for d in diagnostics]
    keys = list(dict.fromkeys(k for d in diagnostics for k in d))
    out = {}
    for key in keys:
        values = [d[key] for d in diagnostics if key in d]
        numbers = [v for v in values if v is not None]
        if key in _ALL_DIAGNOSTICS or (numbers and all(isinstance(v, bool) for v in numbers)):
            if any(v is False for v in values):
                out[key] = False
            elif all(v is True for v in values) and len(values) == len(diagnostics):
                out[key] = True
            else:
                out[key] = None
        elif numbers and all(
            isinstance(v, int | float | np.integer | np.floating) and not isinstance(v, bool)
            for v in numbers
        ):
            if key in _SUMMED_DIAGNOSTICS:
                out[key] = sum(numbers)
            else:
                out[key] = max(numbers)
            if isinstance(out[key], np.generic):
                out[key] = out[key].item()
        elif all(_same(v, values[0]) for v in values):
            out[key] = values[0]
        else:
            distinct = []
            for v in values:
                if not any(_same(v, u) for u in distinct):
                    distinct.append(v)
            out[key] = distinct
    return out


def _same(a, b) -> bool:
    try:
        return bool(a == b)
    except (TypeError, ValueError):  # arrays and the like: compare as plain data
        return _plain(a) == _plain(b)


# ---------------------------------------------------------------------------- radiate
def _pixel_chunks(n):
    from lwrad.parallel import plan_chunks

    return plan_chunks(n, _CHUNK_PIXELS)


def _one_trajectory(traj, observer, omega, tolerance, n_jobs, method, refinement, tails):
    from lwrad.engine import frequency as F
    from lwrad.parallel import run_chunks

    if method == "fft":
        from lwrad.engine.fft import fft_field

        field, diag = fft_field(traj, observer, omega, n_jobs=n_jobs)
        return field, diag, None
    kept = {}
    factor, diag = F.converged_sampling(
        traj, observer, omega, tolerance, tails=tails, factor=refinement, workers=n_jobs, keep=kept
    )
    # each energy band sampled for its own highest energy (F.energy_bands); the probes'
    # bands of the chosen factor when they built them
    bands = kept.get("bands") or F.band_nodes(traj, observer, omega, factor, n_jobs)
    diag["n_samples"] = int(max(b[1] for b in bands))
    diag["energy_bands"] = len(bands)
    n_pix = observer.n_pixels
    targets = observer.directions() if observer.kind == "angular" else observer.points()

    chunks = _pixel_chunks(n_pix)
    # one level of threads: over pixel chunks, or over the energy bands when there are
    # fewer chunks than workers (a spectrum at a few pixels)
    inner = n_jobs if len(chunks) < n_jobs else 1

    field = np.empty((omega.size, n_pix, 3), dtype=complex)
    moments = np.empty((5, omega.size, n_pix))
    probe = kept.get("probe_field")
    if probe is not None and np.array_equal(F.probe_targets(observer), targets):
        # the pixels are the probes (e.g. a spectrum in one direction): the probes' field at
        # the chosen factor is this field, computed by the same code (band_field)
        field[...] = probe.transpose(1, 0, 2)
        coherency_moments_into(field, moments)
        diag["probe_field_reused"] = True
        ny, nx = observer.shape
        return field.reshape(omega.size, ny, nx, 3), diag, moments.reshape(5, omega.size, ny, nx)

    def work(sl):
        # the chunk's pixels written in place (disjoint slices: no copy, no serial assembly)
        part = field[:, sl, :]
        F.band_field(
            bands,
            targets[sl],
            omega,
            traj.charge,
            tails=tails,
            factor=factor,
            workers=inner,
            out=part.transpose(1, 0, 2),
        )
        coherency_moments_into(part, moments[:, :, sl])  # in the workers, not after them

    run_chunks(work, chunks, workers=1 if inner > 1 else n_jobs, backend="threads")
    ny, nx = observer.shape
    return field.reshape(omega.size, ny, nx, 3), diag, moments.reshape(5, omega.size, ny, nx)


def radiate(
    source,
    observer,
    photon_energy,
    *,
    method="auto",
    n_jobs=1,
    tolerance=1e-4,
    coherent=False,
    refinement=None,
    tails=True,
) -> Result:
    """Frequency-domain radiation of a trajectory or a bunch on an observer.

    Parameters
    ----------
    source : Trajectory or Bunch
    observer : AngularGrid or Screen
    photon_energy : float or array_like
        Photon energies, eV (> 0). Equally spaced energies use a faster path.
    method : {"auto", "direct", "fft"}
        ``"direct"`` (= ``"auto"``): the Filon-type radiation integral of
        :mod:`lwrad.engine.frequency` (far field: Jackson 14.65; screen: the
        Liénard–Wiechert field transformed to ω, with straight-line tails).
        ``"fft"``: time-domain fields at each pixel, Fourier transformed.
    n_jobs : int
        Worker threads over pixel chunks (results do not depend on it).
    tolerance : float
        Relative accuracy goal of the sampling refinement (of the peak field).
    coherent : bool
        For a Bunch: add complex fields (Σ w_j Ẽ_j) instead of intensities.
        A Bunch is summed by :func:`lwrad.beam_radiation.radiate_bunch`
        (particles in fixed order, n_jobs threads over particles).
    refinement : float, optional
        Fix the sampling refinement factor F instead of choosing it (testing).
    tails : bool
        Continue the ends of the path by straight lines (screens only).

    Returns
    -------
    Result
        For a Bunch: ``.parts`` holds the incoherent (and coherent, total)
        parts; an incoherent result carries ``.standard_error``; the
        diagnostics add ``n_trajectories``, ``max_estimated_relative_error``
        and ``all_converged`` over the particles.
    """
    if method not in _METHODS:
        raise InputError(f"method must be one of {_METHODS}, got {method!r}", location="method")
    energies = _photon_energies(photon_energy)
    trajs, weights, is_bunch = _trajectories(source)
    _check_observer(observer, trajs)
    try:
        tolerance = float(tolerance)
    except (TypeError, ValueError):
        raise InputError("tolerance must be a number") from None
    if not (0 < tolerance < 1):
        raise InputError("tolerance must lie in (0, 1)", location="tolerance")
    if int(n_jobs) < 1:
        raise InputError("n_jobs must be >= 1", location="n_jobs")
    omega = photon_energy_to_omega(energies)
    charge = abs(trajs[0].charge)
    if not is_bunch:
        field, diag, moments = _one_trajectory(
            trajs[0], observer, omega, tolerance, int(n_jobs), method, refinement, tails
        )
        return Result(
            energies, observer, field=field, moments=moments, charge=charge, diagnostics=diag
        )
    return _radiate_bunch(
        source,
        observer,
        energies,
        charge,
        coherent,
        int(n_jobs),
        method,
        tolerance,
        refinement,
        tails,
    )


def _radiate_bunch(
    bunch, observer, energies, charge, coherent, n_jobs, method, tolerance, refinement, tails
):
    """A Bunch through :func:`lwrad.beam_radiation.radiate_bunch` (one place for the sums)."""
    from lwrad.beam_radiation import radiate_bunch

    options = dict(method=method, tolerance=tolerance, refinement=refinement, tails=tails)
    # each particle's convergence figures; summarised below by max and all(), which do not
    # depend on the order in which worker threads append them
    diags = []

    def field_of(traj, obs, pe):
        one = radiate(traj, obs, pe, **options)
        diags.append(one.diagnostics)
        return one.field

    br = radiate_bunch(
        bunch, observer, energies, coherent=coherent, n_jobs=n_jobs, field_function=field_of
    )
    summary = dict(br.diagnostics)
    summary.update(
        n_trajectories=len(diags),
        max_estimated_relative_error=max(
            (d.get("estimated_relative_error", 0.0) or 0.0) for d in diags
        ),
        all_converged=all(d.get("converged") is not False for d in diags),
    )
    br.diagnostics.update(summary)
    if coherent:
        result = Result(
            energies,
            observer,
            field=br.coherent_field,
            charge=charge,
            particles_per_result=br.n_particles,
            diagnostics=summary,
        )
    else:
        result = Result(
            energies,
            observer,
            moments=br.part("incoherent").moments,
            charge=charge,
            diagnostics=summary,
            standard_error=br.incoherent_se,
        )
    result.parts = br.parts
    return result


# ---------------------------------------------------------------------------- power
def _power_nodes(traj, factor=1.0):
    """Gauss nodes for the power integrals (no phase: the amplitude only).

    Steps resolve the deflection, (ALPHA_MAX/2)/γ per step (divided by ``factor``),
    with a floor at the path's mean of that density: where β̇ passes through
    zero (an undulator's turning points) the direction is stationary and the
    power seen from the edge of the fan is sharply peaked there, which the
    deflection rate alone would sample too coarsely (2e-4 error at the fan edge
    of the 2.5 GeV, K = 1.4 undulator; with the floor 2e-5 at half the nodes,
    ``tests/test_power.py``).
    """
    from lwrad.engine import frequency as F

    acc = np.linalg.norm(traj.beta_dot, axis=1) * traj.gamma
    dens = acc * (2.0 * factor / F.ALPHA_MAX)
    duration = max(traj.duration, 1e-300)
    mean = float(np.sum(0.5 * (dens[1:] + dens[:-1]) * np.diff(traj.t))) / duration
    dens = np.maximum(dens, max(mean, 16.0 * factor / duration))
    cum = np.concatenate(([0.0], np.cumsum(0.5 * (dens[1:] + dens[:-1]) * np.diff(traj.t))))
    n = max(int(math.ceil(cum[-1])), 16)
    t_nodes = np.unique(np.interp(np.linspace(0, cum[-1], n + 1), cum, traj.t))
    return F.gauss_split(traj, t_nodes)


def power_density(source, observer, current, *, n_jobs=1, refinement=1.0) -> np.ndarray:
    """Radiated power density, W/mrad² (angular grid) or W/mm² (screen), shape (ny, nx).

    Far field: dW/dΩ = q²/(16π²ε0 c) ∫ |n×((n−β)×β̇)|²/κ⁵ dt (Jackson 14.38,
    integrated over retarded time), × n_z³ for per dθx dθy. Screen: the
    energy through the plane per area, ε0 c ∫ |E_rad|² n_z κ dt with the
    acceleration (radiation) field E_rad at distance R; the velocity field is
    left out: its ratio to E_rad is c/(γ² R |β̇|) (≈ 4e-8 for a 2.5 GeV
    undulator at 15 m), and it carries no energy to infinity. Power for a
    current I: energy per particle × I/|q|. Estimates only — heat-load and
    safety design follow local codes and licensed engineering practice.

    Parameters
    ----------
    source : Trajectory or Bunch (weighted mean per particle)
    observer : AngularGrid or Screen
    current : float
        A.
    n_jobs : int
        Worker threads.
    refinement : float
        Sampling density factor (default 1: ~2e-5 of the peak on an undulator's
        fan edge; 2 reduces the error ~16×).
    """
    from lwrad.engine import _fd_kernels as K
    from lwrad.parallel import run_chunks

    try:
        refinement = float(refinement)
    except (TypeError, ValueError):
        raise InputError("refinement must be a number >= 1", location="refinement") from None
    if not (refinement >= 1.0 and math.isfinite(refinement)):
        raise InputError(f"refinement must be >= 1, got {refinement}", location="refinement")
    trajs, weights, _ = _trajectories(source)
    _check_observer(observer, trajs)
    try:
        current = float(current)
    except (TypeError, ValueError):
        raise InputError("current must be a number (A)") from None
    wg = np.array([0.5, 0.5])
    total = np.zeros(observer.n_pixels)
    for traj, w in zip(trajs, weights / weights.sum(), strict=True):
        _, g = _power_nodes(traj, refinement)
        data = K.power_samples(g["h"], wg, g["r"], g["beta"], g["beta_dot"], g["ig2"])
        q = abs(traj.charge)
        if observer.kind == "angular":
            nvec = observer.directions()

            def work(sl, data=data, nvec=nvec):
                out = np.empty(sl.stop - sl.start)
                K.far_power_pixels(np.ascontiguousarray(nvec[sl]), data, out)
                return out

            coef = q * q / (16 * math.pi**2 * epsilon_0 * c) * (nvec[:, 2] ** 3)
        else:
            pts = observer.points()

            def work(sl, data=data, pts=pts):
                out = np.empty(sl.stop - sl.start)
                K.near_power_pixels(np.ascontiguousarray(pts[sl]), data, c, out)
                return out

            coef = epsilon_0 * c * (q / (4 * math.pi * epsilon_0)) ** 2
        parts = run_chunks(
            work, _pixel_chunks(observer.n_pixels), workers=int(n_jobs), backend="threads"
        )
        total += w * coef * np.concatenate(parts) * current / q
    return (total * 1e-6).reshape(observer.shape)


def total_power(source, current) -> float:
    """Total radiated power, W: Liénard's formula over the path × I/|q|.

    P = q² γ⁶/(6π ε0 c) (|β̇|² − |β × β̇|²) (Jackson 14.26), integrated over
    laboratory time (energy per passage) and multiplied by I/|q|. An estimate
    for design; see the caution in :func:`power_density`.
    """
    from lwrad.engine import _fd_kernels as K

    trajs, weights, _ = _trajectories(source)
    try:
        current = float(current)
    except (TypeError, ValueError):
        raise InputError("current must be a number (A)") from None
    wg = np.array([0.5, 0.5])
    total = 0.0
    for traj, w in zip(trajs, weights / weights.sum(), strict=True):
        _, g = _power_nodes(traj)
        q = abs(traj.charge)
        energy = (
            q
            * q
            / (6 * math.pi * epsilon_0 * c)
            * K.lienard_energy(g["h"], wg, g["gamma"], g["beta"], g["beta_dot"])
        )
        total += w * energy * current / q
    return float(total)

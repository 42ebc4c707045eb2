"""Studies of an electron-beam source: how the beam's sum fits the chunked, checkpointed run.

A source with a ``beam`` table (see :mod:`lwrad.jobs.schema`) stands for a
Gaussian beam of electrons around the source's reference trajectory. Its
studies keep the single-electron spectra of the reference (the ``spectra``
chunks, exactly as for any source) and add the beam's sum in one of two ways:

``convolution`` (far field, angular grids only)
    The fast path :func:`lwrad.convolve_beam` convolves the single-electron
    angular map across pixels (beam divergence) and across photon energies
    (energy spread), so it needs the whole map and cannot run per pixel chunk.
    The single-electron spectra are computed by chunks (checkpointed, resumed
    like any other), and the convolution runs once when the study is
    assembled from the checkpoint. It is a deterministic function of the
    assembled map, so the result is the same for any number of workers and
    after a resume. With an energy spread the single electron is computed on
    the study's photon energies *extended* at both ends (by the grid's end
    spacing) far enough that every requested energy's images
    E/(1 + δ)², |δ| ≤ (6 + 1/4) σ_δ, lie inside
    (:func:`single_electron_energies`); the stored results are at the
    requested energies only.

``monte_carlo`` (angular grids and screens)
    :func:`lwrad.monte_carlo` runs on each pixel chunk (the ``beam`` chunks)
    with a fixed number of particles (``beam.particles``) drawn from a fixed
    seed (``beam.seed``) in fixed batches of :data:`BATCH_SIZE`, so every
    chunk sums the same particles in the same order and a pixel's result does
    not depend on the chunking. ``beam.rel_tolerance`` is checked on the
    assembled grid (largest standard error over the mean among pixels brighter
    than 10 % of the peak at their photon energy): a run that misses it warns
    (:class:`~lwrad.errors.ConvergenceWarning`) with the particle count that
    would reach it (the error falls as 1/√N); the achieved figure is stored.

What a beam study's case holds (all in the case group, with units)
------------------------------------------------------------------
==========================  ==============================================================
quantity                    meaning
==========================  ==============================================================
``flux_density``            the beam: incoherent sum (mean per electron × I/|q|)
``flux_density_single``     the reference electron (filament beam), same current
``flux_density_coherent``   coherent part (cross terms of one bunch, at the bunch rate
                            I/Q); ``study.coherent = true``, Monte Carlo only
``flux_density_se``         Monte Carlo standard error of ``flux_density``
``stokes``, ``stokes_...``  the same parts of the Stokes parameters (``stokes`` asked)
``flux``, ``flux_...``      the same parts of the flux (``flux`` asked; no standard error:
                            the pixels share their particles)
``spectra`` group           the single-electron radiation result (fields)
==========================  ==============================================================

The case attribute ``beam`` records the beam (SI/eV), the method and its
figures (Monte Carlo: particles, seed, achieved relative uncertainty;
convolution: divergences, energy-spread nodes, flux change on the grid).
"""

from __future__ import annotations

import math
import warnings

import numpy as np

from lwrad.errors import ConvergenceWarning, InputError

__all__ = [
    "N_SIGMA",
    "BATCH_SIZE",
    "SIGNIFICANCE",
    "build_beam",
    "single_electron_energies",
    "beam_options",
    "monte_carlo_chunk",
    "assemble_beam",
    "add_beam_parts",
]

#: the energy distribution is cut at ±N_SIGMA σ_δ (the default of :func:`lwrad.convolve_beam`)
N_SIGMA = 6.0
#: Monte Carlo particles per batch; fixed, since it fixes which particles are drawn
BATCH_SIZE = 32
#: pixels below this fraction of the peak do not count for the Monte Carlo tolerance
SIGNIFICANCE = 0.1

_PART_SUFFIX = {"incoherent": "", "single": "_single", "coherent": "_coherent"}
_PART_TEXT = {
    "incoherent": "of the beam (incoherent sum over its electrons)",
    "single": "of the single reference electron (filament beam)",
    "coherent": "coherent part of the beam (cross terms of one bunch, at the bunch rate)",
}


def build_beam(spec, reference, *, job_source=None):
    """The :class:`lwrad.ElectronBeam` of a source, checked against its reference trajectory.

    Parameters
    ----------
    spec : SourceSpec
        A validated source with a ``beam``.
    reference : Trajectory
        The source's path (tracked or read).
    job_source : str, optional
        The job file, for messages.

    Raises
    ------
    InputError
        A reference whose particle charge or energy (median, relative 1e-6)
        differs from the beam's, or a bunch instead of one trajectory.
    """
    from lwrad.trajectory import Trajectory

    location = f"key sources.{spec.name}.beam"
    if not isinstance(reference, Trajectory):
        raise InputError(
            "a beam needs one reference trajectory, the source gives a bunch",
            source=job_source,
            location=location,
        )
    beam = spec.beam.electron_beam()
    energy = float(np.median(reference.energy_ev))
    if abs(reference.charge - beam.charge) > 1e-9 * abs(beam.charge):
        raise InputError(
            f"the trajectory's charge {reference.charge:.6g} C is not the beam particle's "
            f"{beam.charge:.6g} C",
            source=job_source,
            location=location,
        )
    if abs(energy - beam.energy) > 1e-6 * beam.energy:
        raise InputError(
            f"the trajectory's energy {energy / 1e9:.9g} GeV differs from the beam's "
            f"{beam.energy / 1e9:.9g} GeV",
            source=job_source,
            location=f"{location}.energy",
        )
    return beam


def _extension_bound(sigma_delta: float) -> float:
    # smear_far_field uses δ nodes up to step·ceil(N_SIGMA σ/step) < N_SIGMA σ + step, step <= σ/4
    return (N_SIGMA + 0.25) * sigma_delta


def single_electron_energies(study, source) -> np.ndarray:
    """Photon energies (eV) at which a study's single-electron spectra are computed.

    The study's own energies, except for the convolution with an energy
    spread: then extended below and above by the grid's end spacings until
    E_first/(1 + d)² and E_last/(1 − d)² are covered, d = (6 + 1/4) σ_δ
    (see the module notes). The requested energies are kept bit for bit.

    Parameters
    ----------
    study : StudySpec
    source : SourceSpec
    """
    energies = study.photon_energy
    if energies is None or study.beam_method != "convolution" or source.beam is None:
        return energies
    sigma = source.beam.energy_spread
    if sigma == 0.0:
        return energies
    e = np.asarray(energies, dtype=np.float64)
    if e.size < 2:
        raise InputError(
            "the energy spread is convolved across photon energies: give a grid",
            location=f"key study {study.name!r} photon_energy",
        )
    d = _extension_bound(sigma)
    lo, hi = e[0] / (1.0 + d) ** 2, e[-1] / (1.0 - d) ** 2
    h_lo, h_hi = e[1] - e[0], e[-1] - e[-2]
    n_lo, n_hi = math.ceil((e[0] - lo) / h_lo), math.ceil((hi - e[-1]) / h_hi)
    below = e[0] - h_lo * np.arange(n_lo, 0, -1)
    above = e[-1] + h_hi * np.arange(1, n_hi + 1)
    if below.size and not below[0] > 0:
        raise InputError(
            f"the energy spread needs the single electron down to {lo:.6g} eV, which the grid's "
            f"first step ({h_lo:.6g} eV) cannot reach above zero; use a finer photon-energy grid",
            location=f"key study {study.name!r} photon_energy",
        )
    return np.concatenate((below, e, above))


def beam_options(study, source) -> dict:
    """The Monte Carlo options a ``beam`` chunk needs (plain data)."""
    spec = source.beam
    return {
        "particles": spec.particles,
        "seed": spec.seed,
        "offsets": spec.offsets,
        "z_ref": spec.z_ref,
        "coherent": bool(study.coherent),
    }


def _moment_unit(observer) -> str:
    # the unit lwrad.radiation.Result gives its intensity moments
    return "V^2 s^2" if observer.kind == "angular" else "V^2 s^2/m^2"


def monte_carlo_chunk(work) -> dict:
    """Monte Carlo sums of one pixel chunk: name → (ndarray, unit), to checkpoint.

    ``incoherent_moments`` (5, n_e, 1, m) and ``incoherent_se`` (n_e, 1, m);
    with ``coherent`` also ``coherent_moments`` (the cross terms, 5, n_e, 1, m).
    """
    from lwrad.beam_radiation import monte_carlo

    opts = work.beam_options
    result = monte_carlo(
        work.beam,
        work.observer,
        work.photon_energy,
        reference=work.source,
        offsets=opts["offsets"],
        z_ref=opts["z_ref"],
        rel_tolerance=None,
        batch_size=BATCH_SIZE,
        max_particles=opts["particles"],
        seed=opts["seed"],
        coherent=opts["coherent"],
        n_jobs=1,
        radiate_options={"method": work.method, "tolerance": work.tolerance},
    )
    unit = _moment_unit(work.observer)
    out = {
        "incoherent_moments": (np.asarray(result.part("incoherent").moments), unit),
        "incoherent_se": (np.asarray(result.incoherent_se), unit),
    }
    if opts["coherent"]:
        out["coherent_moments"] = (np.asarray(result.part("coherent").moments), unit)
    return out


def _pixels(payloads, name, observer):
    """Concatenate one array of every chunk along the pixel axis → (..., ny, nx)."""
    ny, nx = observer.shape
    arrays = [np.asarray(p[name][0]) for p in payloads]
    lead = arrays[0].shape[:-2]
    joined = np.concatenate([a.reshape(*lead, -1) for a in arrays], axis=-1)
    return joined.reshape(*lead, ny, nx)


def _slice_energies(result, index):
    from lwrad.radiation import Result

    return Result(
        result.photon_energy[index],
        result.observer,
        field=None if result.field is None else result.field[index],
        moments=result.moments[:, index],
        charge=result.charge,
        particles_per_result=result.particles_per_result,
        diagnostics=result.diagnostics,
    )


def _plain(value):
    """JSON-able copy of diagnostics (arrays → lists, NumPy scalars → Python; others dropped)."""
    if isinstance(value, dict):
        out = {}
        for k, v in value.items():
            v = _plain(v)
            if v is not _DROP:
                out[str(k)] = v
        return out
    if isinstance(value, list | tuple):
        return [v for v in (_plain(x) for x in value) if v is not _DROP]
    if isinstance(value, np.ndarray):
        return value.tolist()
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, bool | int | float | str) or value is None:
        return value
    return _DROP


_DROP = object()


def assemble_beam(study, source, beam, single, payloads=()):
    """The beam's sum of one study from its assembled single-electron result.

    Parameters
    ----------
    study : StudySpec
        With ``beam_method`` ``"convolution"`` or ``"monte_carlo"``.
    source : SourceSpec
    beam : ElectronBeam
    single : lwrad.radiation.Result
        The reference electron on the full observer, at
        :func:`single_electron_energies`.
    payloads : sequence of dict
        The ``beam`` chunks (Monte Carlo), in chunk order.

    Returns
    -------
    beam_result : BeamResult
        At the study's photon energies.
    single : Result
        The reference electron at the study's photon energies.
    info : dict
        Plain data for the case attribute ``beam``.

    Warns
    -----
    ConvergenceWarning
        Convolution: the blur carries more than 1e-3 of the flux across the
        grid's edge. Monte Carlo: the standard error is above ``rel_tolerance``.
    """
    from lwrad.beam_radiation import BeamResult, convolve_beam

    spec = source.beam
    wanted = np.asarray(study.photon_energy, dtype=np.float64)
    observer = single.observer
    info = {"parameters": spec.parameters, "method": study.beam_method}
    if study.beam_method == "convolution":
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            full = convolve_beam(single, beam, n_sigma=N_SIGMA)
        for w in caught:
            warnings.warn(f"study {study.name!r}: {w.message}", w.category, stacklevel=2)
        index = np.searchsorted(full.photon_energy, wanted)
        index = np.clip(index, 0, full.photon_energy.size - 1)
        if not np.array_equal(full.photon_energy[index], wanted):
            raise InputError(  # pragma: no cover - single_electron_energies extends the grid
                f"study {study.name!r}: the energy-spread convolution could not reach every "
                "requested photon energy"
            )
        result = BeamResult(
            wanted,
            observer,
            "convolution",
            charge=beam.charge,
            single=full.part("single").moments[:, index],
            incoherent=full.part("incoherent").moments[:, index],
            diagnostics=full.diagnostics,
        )
        single_index = np.searchsorted(single.photon_energy, wanted)
        info.update(_plain(full.diagnostics))
        # energies dropped by the convolution are the extension's, never requested ones
        info.pop("dropped_energies", None)
        info["single_electron_photon_energies"] = int(single.photon_energy.size)
        return result, _slice_energies(single, single_index), info
    if study.beam_method != "monte_carlo":
        raise InputError(f"study {study.name!r} has no beam method")  # pragma: no cover
    inc = _pixels(payloads, "incoherent_moments", observer)
    se = _pixels(payloads, "incoherent_se", observer)
    extra = {}
    if study.coherent:
        cross = _pixels(payloads, "coherent_moments", observer)
        # the chunks hold the cross terms already: no self terms left to subtract
        extra = dict(
            coherent_sum=cross,
            self_terms=np.zeros_like(cross),
            n_particles=beam.particles_per_bunch,
        )
    result = BeamResult(
        wanted,
        observer,
        "monte-carlo",
        charge=beam.charge,
        single=single.moments,
        incoherent=inc,
        incoherent_se=se,
        diagnostics={"n_particles_used": spec.particles, "seed": spec.seed},
        **extra,
    )
    achieved = result.relative_uncertainty(SIGNIFICANCE)
    converged = bool(achieved <= spec.rel_tolerance)
    result.diagnostics.update(
        relative_uncertainty=achieved, rel_tolerance=spec.rel_tolerance, converged=converged
    )
    info.update(
        particles=spec.particles,
        seed=spec.seed,
        batch_size=BATCH_SIZE,
        offsets=spec.offsets,
        z_ref=spec.z_ref,
        relative_uncertainty=achieved,
        rel_tolerance=spec.rel_tolerance,
        significance=SIGNIFICANCE,
        converged=converged,
    )
    if not converged:
        need = (
            math.ceil(spec.particles * (achieved / spec.rel_tolerance) ** 2)
            if math.isfinite(achieved)
            else None
        )
        hint = f"; about {need} particles would reach it" if need else ""
        warnings.warn(
            f"study {study.name!r}: Monte Carlo with {spec.particles} particles reached a relative "
            f"standard error of {achieved:.3g} > rel_tolerance {spec.rel_tolerance:.3g}{hint} "
            f"(sources.{source.name}.beam.particles); the result stores the achieved figure",
            ConvergenceWarning,
            stacklevel=2,
        )
    return result, single, info


def add_beam_parts(case, study, single, beam_result, current, *, aperture=None, info=None):
    """Store a beam study's parts in a results Case (see the module table).

    Parameters
    ----------
    case : lwrad.results.Case
        The study's case, built on the full observer.
    study : StudySpec
    single : Result
        The reference electron at the study's photon energies (kept as ``spectra``).
    beam_result : BeamResult
    current : float
        Beam current, A.
    aperture : aperture, optional
        For ``flux``.
    info : dict, optional
        Stored as the case attribute ``beam``.
    """
    from lwrad.results import UNIT_TABLE

    case.add_spectra(single, None)
    current = float(current)
    case.attrs["current_A"] = current
    grid = ("theta_y", "theta_x") if case.kind == "angular" else ("y", "x")
    wanted = [q for q in ("flux_density", "stokes", "flux") if q in study.quantities]
    parts = [p for p in ("incoherent", "single", "coherent") if p in beam_result.parts]
    for part in parts:
        res = beam_result.part(part)
        suffix = _PART_SUFFIX[part]
        if "flux_density" in wanted:
            case.add_quantity(
                f"flux_density{suffix}",
                np.asarray(res.flux_density(current), dtype=np.float64),
                UNIT_TABLE["flux_density"][case.kind],
                ("photon_energy", *grid),
                f"photon flux density {_PART_TEXT[part]}",
            )
        if "stokes" in wanted:
            case.set_axis("stokes_parameter", np.array(["S0", "S1", "S2", "S3"], dtype=object))
            case.add_quantity(
                f"stokes{suffix}",
                np.asarray(res.stokes(current), dtype=np.float64),
                UNIT_TABLE["stokes"][case.kind],
                ("stokes_parameter", "photon_energy", *grid),
                f"Stokes parameters S0..S3 {_PART_TEXT[part]}",
            )
        if "flux" in wanted:
            case.add_quantity(
                f"flux{suffix}",
                np.asarray(res.flux(current, aperture=aperture), dtype=np.float64),
                UNIT_TABLE["flux"]["*"],
                ("photon_energy",),
                f"photon flux through the grid or aperture {_PART_TEXT[part]}",
            )
    if "flux" in wanted and aperture is not None:
        case.attrs["flux_aperture"] = (
            _plain(aperture.to_dict()) if hasattr(aperture, "to_dict") else repr(aperture)
        )
    if beam_result.incoherent_se is not None and "flux_density" in wanted:
        case.add_quantity(
            "flux_density_se",
            np.asarray(beam_result.flux_density_uncertainty(current), dtype=np.float64),
            UNIT_TABLE["flux_density"][case.kind],
            ("photon_energy", *grid),
            "Monte Carlo standard error of the beam's photon flux density",
        )
    case.attrs["beam"] = _plain(dict(info or {}, parts=parts))
    return case

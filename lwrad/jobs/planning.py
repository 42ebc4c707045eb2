"""Chunk plan, memory estimate and time estimate of a job.

Chunk plan
----------
Every study's observer pixels (row-major over ``(ny, nx)``; points for
time-domain fields) are cut with :func:`lwrad.parallel.plan_chunks` into
consecutive chunks of ``chunk_pixels``, once per solver group (see
:mod:`lwrad.jobs.tasks`). The plan depends only on the job and the chunk
size — never on the number of workers — and is part of the checkpoint
fingerprint, so a run is resumed only with the plan it started with.

Memory model (an estimate of our own; common practice, no source)
-----------------------------------------------------------------
``total = fixed + workers × per_worker`` (threads share one process, so the
per-process baseline counts once for them), with

* ``fixed``: one process baseline (:data:`PROCESS_BASELINE`) + the sources
  (13 float64 per trajectory sample: t, r, β, β̇, γ) + the result arrays,
  each held up to three times while chunks are collected, read back from
  the checkpoint and assembled: complex fields and the five float64
  intensity moments 3 × (48 + 40) bytes per (photon energy, pixel), plus
  8 bytes for flux density and 32 for Stokes parameters; power density 3 × 8 bytes per pixel; time-domain fields
  3 × 48 bytes per (time, point); for a beam study the single electron's
  photon energies (extended for an energy-spread convolution, see
  :mod:`lwrad.jobs.beams`), and per (photon energy, pixel) 3 × 8 × 11 bytes
  of Monte Carlo sums (moments, standard error, coherent part) plus
  8 × 12 bytes of beam parts and the convolution's copies;
* ``per_worker``: the chunk's own result (field and moments) twice (solver
  output and its pickled copy) + solver scratch of :data:`SCRATCH_PER_SAMPLE` bytes per
  trajectory sample + a copy of the source; plus a process baseline for
  each worker process (``processes`` back end).

Memory available: ``--memory-limit`` on the command line, else the job's
``run.memory_limit``, else the environment variable ``LWRAD_MEMORY_LIMIT``
(same syntax, e.g. ``"2 GB"``), else ``MemAvailable`` of ``/proc/meminfo``.
A job whose estimate exceeds it is refused before any work, with the chunk
size (and number of workers) that would fit.

Time estimate
-------------
A calibration run computes the first pixel of every study and group twice
(the first call compiles the numba kernels) and times the second; the
estimate is ``Σ t_pixel × pixels / workers``. Per-call overheads are counted
once per pixel, so this errs on the long side.
"""

from __future__ import annotations

import math
import os
import time
from dataclasses import dataclass, field

from lwrad.errors import InputError
from lwrad.jobs.schema import Job, parse_memory
from lwrad.jobs.tasks import Chunk, groups_of
from lwrad.parallel import plan_chunks

__all__ = [
    "JobPlan",
    "MemoryEstimate",
    "plan_job",
    "estimate_memory",
    "estimate_output_bytes",
    "OUTPUT_OVERHEAD",
    "memory_limit",
    "available_memory",
    "check_memory",
    "fitting_chunk_pixels",
    "format_bytes",
    "format_seconds",
    "time_calls",
    "PROCESS_BASELINE",
    "SCRATCH_PER_SAMPLE",
]

#: bytes of one Python process with lwrad, NumPy, SciPy, numba and h5py loaded and the
#: radiation kernels compiled or loaded from numba's cache (measured on the development
#: machine, 2026-12-02: 210 MB resident with a warm cache, 621 MB in a fresh install where
#: numba compiles every kernel; the cold figure, rounded up)
PROCESS_BASELINE = 700_000_000
#: result-file and checkpoint bytes beside the arrays (provenance, job text, HDF5 metadata
#: of a few hundred chunk files); a generous round figure, common practice, no source
OUTPUT_OVERHEAD = 16_000_000
#: solver scratch per trajectory sample and worker, bytes (16 float64)
SCRATCH_PER_SAMPLE = 128
#: NUFFT workspace per photon energy and worker, bytes: 8 far-field pixels × a grid of
#: 2 points per energy × (12 float64 + 6 complex128 transformed) = 3072, rounded up
NUFFT_BYTES_PER_ENERGY = 4096
_FIELD_BYTES = 48  # three complex128 components
_MOMENT_BYTES = 40  # five float64 intensity moments (Result.moments), kept beside the field
_HELD_COPIES = 3


@dataclass(frozen=True)
class JobPlan:
    """The chunks of a job, in the order they are assembled.

    Attributes
    ----------
    job : Job
    chunk_pixels : int
    chunks : tuple of Chunk
    """

    job: Job
    chunk_pixels: int
    chunks: tuple

    @property
    def n_pixels(self) -> int:
        """Pixel-computations over all studies and groups."""
        return sum(c.n_pixels for c in self.chunks)

    def chunks_of(self, study: str, group: str) -> list[Chunk]:
        """The chunks of one study and group, in pixel order."""
        return [c for c in self.chunks if c.study == study and c.group == group]

    def fingerprint(self, input_hashes: dict) -> str:
        """Identity of this job and plan, for checkpoints (see :func:`lwrad.results.job_fingerprint`)."""
        from lwrad.results import job_fingerprint

        plan_tag = f"\n# lwrad plan: chunk_pixels={self.chunk_pixels}\n"
        return job_fingerprint(self.job.text + plan_tag, input_hashes)


def plan_job(job: Job, *, chunk_pixels: int | None = None) -> JobPlan:
    """Cut every study into chunks of consecutive pixels.

    Parameters
    ----------
    job : Job
        A validated job.
    chunk_pixels : int, optional
        Pixels per chunk; default the job's ``run.chunk_pixels``.
    """
    size = job.run.chunk_pixels if chunk_pixels is None else int(chunk_pixels)
    if size < 1:
        raise InputError(f"chunk size must be >= 1 pixel, got {size}", location="chunk_pixels")
    chunks = []
    for study in job.studies:
        for group in groups_of(study.quantities, study.beam_method):
            for i, sl in enumerate(plan_chunks(study.observer.n_pixels, size)):
                chunks.append(Chunk(study.name, group, i, sl.start, sl.stop))
    return JobPlan(job, size, tuple(chunks))


@dataclass(frozen=True)
class MemoryEstimate:
    """Estimated peak memory of a run, bytes (see the module's memory model)."""

    fixed: int
    per_worker: int
    workers: int
    backend: str
    breakdown: dict = field(default_factory=dict)

    @property
    def total(self) -> int:
        return int(self.fixed + self.workers * self.per_worker)


def _study_bytes(study, n_time=None, source=None) -> tuple[int, int]:
    """(assembled bytes, bytes per pixel of one chunk's payload) of one study."""
    n_pix = study.observer.n_pixels
    assembled = 0
    per_pixel = 0
    groups = groups_of(study.quantities, study.beam_method)
    if "spectra" in groups:
        n_e = len(study.photon_energy)
        if source is not None and study.beam_method is not None:
            from lwrad.jobs.beams import single_electron_energies

            n_e = len(single_electron_energies(study, source))
            # beam parts (single, incoherent, coherent, standard error) and the convolution's copies
            assembled += n_e * n_pix * 8 * 12
        derived = (8 if "flux_density" in study.quantities else 0) + (
            32 if "stokes" in study.quantities else 0
        )
        assembled += n_e * n_pix * (_HELD_COPIES * (_FIELD_BYTES + _MOMENT_BYTES) + derived)
        per_pixel = max(per_pixel, 2 * n_e * (_FIELD_BYTES + _MOMENT_BYTES))
    if "beam" in groups:
        n_e = len(study.photon_energy)
        assembled += n_e * n_pix * _HELD_COPIES * 8 * 11
        per_pixel = max(per_pixel, 2 * n_e * (_FIELD_BYTES + 8 * 11))
    if "power" in groups:
        assembled += n_pix * _HELD_COPIES * 8
        per_pixel = max(per_pixel, 2 * 8)
    if "fields" in groups:
        n_t = len(study.time)
        assembled += n_t * n_pix * _HELD_COPIES * 48
        per_pixel = max(per_pixel, 2 * n_t * 48)
    return assembled, per_pixel


def estimate_output_bytes(plan: JobPlan) -> int:
    """Disk space a run needs at its peak, bytes: the checkpoint and the final file together.

    Both hold every study's arrays (the checkpoint is removed only after the
    final file is written), so the estimate is twice the stored arrays plus
    :data:`OUTPUT_OVERHEAD` for provenance, job text and HDF5 metadata. Stored
    per (photon energy, pixel): field 48 bytes + moments 40 (+ 40 for a
    bunch's standard error), flux density 8, Stokes 32; beam studies a further
    8 × 12 (parts) and 8 × 11 (Monte Carlo sums); power density 8 bytes per
    pixel; time-domain fields 48 bytes per (time, point) (uncompressed sizes:
    an upper estimate, HDF5 compresses large datasets).
    """
    total = 0
    for study in plan.job.studies:
        n_pix = study.observer.n_pixels
        groups = groups_of(study.quantities, study.beam_method)
        if "spectra" in groups:
            n_e = len(study.photon_energy)
            source = plan.job.sources.get(study.source)
            if source is not None and study.beam_method is not None:
                from lwrad.jobs.beams import single_electron_energies

                n_e = len(single_electron_energies(study, source))
                total += n_e * n_pix * 8 * 12
            total += n_e * n_pix * (_FIELD_BYTES + 2 * _MOMENT_BYTES + 8 + 32)
        if "beam" in groups:
            total += len(study.photon_energy) * n_pix * 8 * 11
        if "power" in groups:
            total += n_pix * 8
        if "fields" in groups:
            total += len(study.time) * n_pix * 48
    return int(2 * total + OUTPUT_OVERHEAD)


def estimate_memory(
    plan: JobPlan, n_samples: dict, *, workers: int, backend: str, chunk_pixels: int | None = None
) -> MemoryEstimate:
    """Peak memory of running ``plan``.

    Parameters
    ----------
    plan : JobPlan
    n_samples : dict
        Source name → trajectory samples (summed over a bunch's members).
    workers : int
        Parallel workers.
    backend : str
        ``"serial"``, ``"threads"``, ``"processes"`` or ``"dask"`` (Dask
        workers live elsewhere: only the assembly on this node counts).
    chunk_pixels : int, optional
        Estimate for another chunk size than the plan's (for suggestions).
    """
    chunk = plan.chunk_pixels if chunk_pixels is None else int(chunk_pixels)
    sources = sum(13 * 8 * int(n) for n in n_samples.values())
    results = 0
    worker = 0
    for study in plan.job.studies:
        assembled, per_pixel = _study_bytes(study, source=plan.job.sources.get(study.source))
        results += assembled
        n_chunk = min(chunk, study.observer.n_pixels)
        scratch = SCRATCH_PER_SAMPLE * int(n_samples.get(study.source, 0))
        source_copy = 13 * 8 * int(n_samples.get(study.source, 0))
        if "spectra" in groups_of(study.quantities, study.beam_method):
            # NUFFT grids and their transforms (engine.frequency: a batch of far-field pixels)
            scratch += NUFFT_BYTES_PER_ENERGY * len(study.photon_energy)
        worker = max(worker, n_chunk * per_pixel + scratch + source_copy)
    if backend == "dask":
        workers_here = 0
    else:
        workers_here = 1 if backend == "serial" else max(1, int(workers))
    if backend == "processes":
        worker += PROCESS_BASELINE
    breakdown = {
        "process baseline": PROCESS_BASELINE,
        "sources": sources,
        "result arrays": results,
        "per worker": worker,
    }
    return MemoryEstimate(
        fixed=PROCESS_BASELINE + sources + results,
        per_worker=worker,
        workers=workers_here,
        backend=backend,
        breakdown=breakdown,
    )


def available_memory() -> int | None:
    """Memory the machine can give now (``MemAvailable``), bytes; None if unknown."""
    try:
        with open("/proc/meminfo") as fh:
            for line in fh:
                if line.startswith("MemAvailable:"):
                    return int(line.split()[1]) * 1024
    except (OSError, ValueError, IndexError):
        pass
    try:
        return int(os.sysconf("SC_AVPHYS_PAGES") * os.sysconf("SC_PAGE_SIZE"))
    except (ValueError, OSError, AttributeError):  # pragma: no cover - non-POSIX
        return None


def memory_limit(explicit=None, job: Job | None = None) -> tuple[int | None, str]:
    """The memory a run may use and where that figure comes from.

    Order: ``explicit`` (command line), the job's ``run.memory_limit``, the
    environment variable ``LWRAD_MEMORY_LIMIT``, the machine's available memory.
    """
    if explicit is not None:
        return parse_memory(explicit, location="--memory-limit"), "--memory-limit"
    if job is not None and job.run.memory_limit is not None:
        return job.run.memory_limit, "run.memory_limit in the job file"
    env = os.environ.get("LWRAD_MEMORY_LIMIT")
    if env:
        return parse_memory(
            env, source="environment", location="LWRAD_MEMORY_LIMIT"
        ), "LWRAD_MEMORY_LIMIT"
    return available_memory(), "memory available on this machine"


def fitting_chunk_pixels(
    plan: JobPlan, n_samples: dict, *, workers: int, backend: str, limit: int
) -> int | None:
    """Largest chunk size (pixels) whose estimate stays within ``limit``; None if none does."""
    if (
        estimate_memory(plan, n_samples, workers=workers, backend=backend, chunk_pixels=1).total
        > limit
    ):
        return None
    lo, hi = 1, max(1, max((s.observer.n_pixels for s in plan.job.studies), default=1))
    while lo < hi:  # the estimate grows monotonically with the chunk size
        mid = (lo + hi + 1) // 2
        if (
            estimate_memory(
                plan, n_samples, workers=workers, backend=backend, chunk_pixels=mid
            ).total
            <= limit
        ):
            lo = mid
        else:
            hi = mid - 1
    return lo


def check_memory(
    plan: JobPlan,
    n_samples: dict,
    *,
    workers: int,
    backend: str,
    limit: int | None,
    limit_from: str,
) -> MemoryEstimate:
    """The memory estimate; refuse (``InputError``) a plan above ``limit``.

    The message gives the estimate, the limit and where it came from, and the
    chunk size (or number of workers) that would fit, or says that the result
    arrays alone are too large.
    """
    est = estimate_memory(plan, n_samples, workers=workers, backend=backend)
    if limit is None or est.total <= limit:
        return est
    parts = ", ".join(f"{k} {format_bytes(v)}" for k, v in est.breakdown.items())
    msg = (
        f"estimated memory {format_bytes(est.total)} exceeds the limit {format_bytes(limit)} "
        f"({limit_from}); estimate: {parts}, {est.workers} worker(s), chunks of {plan.chunk_pixels} pixels. "
    )
    fit = fitting_chunk_pixels(plan, n_samples, workers=workers, backend=backend, limit=limit)
    if fit is not None:
        msg += f"It would fit with chunk_pixels = {fit} (run.chunk_pixels or --chunk-pixels {fit})."
    else:
        one = fitting_chunk_pixels(plan, n_samples, workers=1, backend="serial", limit=limit)
        if one is not None and workers > 1:
            msg += f"It would fit with 1 worker and chunk_pixels = {one} (--workers 1 --chunk-pixels {one})."
        else:
            msg += (
                "The result arrays alone do not fit: use fewer pixels or photon energies, "
                "or split the job into several studies run as separate jobs."
            )
    raise InputError(msg, location="memory estimate")


def format_bytes(n: float) -> str:
    """``1.5 GB``-style text (decimal units)."""
    for unit, size in (("TB", 1e12), ("GB", 1e9), ("MB", 1e6), ("kB", 1e3)):
        if abs(n) >= size:
            return f"{n / size:.3g} {unit}"
    return f"{int(n)} B"


def format_seconds(s: float | None) -> str:
    """``1 h 02 min``-style text."""
    if s is None or not math.isfinite(s):
        return "unknown"
    s = max(0.0, s)
    if s < 60:
        return f"{s:.1f} s"
    if s < 3600:
        return f"{int(s // 60)} min {int(s % 60):02d} s"
    return f"{int(s // 3600)} h {int(s % 3600 // 60):02d} min"


def time_calls(func, arg, repeats: int = 2) -> float:
    """Seconds of the last of ``repeats`` calls ``func(arg)`` (earlier calls warm caches and compile)."""
    elapsed = math.inf
    for _ in range(repeats):
        t0 = time.perf_counter()
        func(arg)
        elapsed = time.perf_counter() - t0
    return elapsed

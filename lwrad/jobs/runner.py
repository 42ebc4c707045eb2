"""Run a job: checks, estimates, parallel chunks, checkpoint, resume, one result file.

Order of a run (nothing is computed before every check has passed):

1. the job file is validated (:mod:`lwrad.jobs.schema`);
2. the output is checked: its folder exists and is writable, has room for
   the checkpoint and the result (:func:`lwrad.jobs.planning.estimate_output_bytes`),
   the file does not exist (unless ``force``), no unfinished checkpoint is in
   the way (unless ``resume`` or ``force``);
3. sources are built (tracked or read), observers made, the chunk plan cut;
4. the memory estimate is compared with the limit; too large → refused;
5. a calibration of one pixel per study gives the time estimate;
6. chunks run in parallel (:func:`lwrad.parallel.run_chunks`); each finished
   chunk is written to the checkpoint ``<out>.parts/`` as it arrives;
7. every study is assembled from the checkpoint in chunk order and the
   result file is written atomically; the checkpoint is then removed.

A killed run leaves the checkpoint; ``resume=True`` computes only the
missing chunks, and because the stored chunks are exact copies of the
computed arrays and the assembly order is fixed, the result is identical to
an uninterrupted run.

Batch clusters (dask-jobqueue)
------------------------------
Start a Dask cluster on the batch system and give its scheduler address to
``lwrad run --scheduler``; every worker needs lwrad installed (the same
version) and the chunks' results come back to the node running
``lwrad run``, which writes the checkpoint and the result. For SLURM::

    # cluster.py — run it on a login node; it prints the scheduler address
    from dask_jobqueue import SLURMCluster
    cluster = SLURMCluster(cores=8, processes=8, memory="32GB",
                           walltime="04:00:00", job_extra_directives=["--partition=compute"])
    cluster.scale(jobs=4)          # 4 batch jobs × 8 single-threaded workers
    print(cluster.scheduler_address, flush=True)
    input("press Enter to shut the cluster down\\n")

    $ python cluster.py &           # prints tcp://10.0.0.5:8786
    $ lwrad run study.toml -o study.h5 --scheduler tcp://10.0.0.5:8786

Use ``processes=cores`` (one thread per worker): lwrad runs numba kernels
single-threaded inside each chunk. If the run is interrupted, run the same
command with ``--resume``. PBSCluster, SGECluster and LSFCluster take the
same arguments.
"""

from __future__ import annotations

import sys
import time
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from lwrad.errors import InputError
from lwrad.jobs import beams as beam_studies
from lwrad.jobs.build import build_aperture, build_observer, build_source
from lwrad.jobs.planning import (
    JobPlan,
    check_memory,
    estimate_output_bytes,
    format_bytes,
    format_seconds,
    memory_limit,
    plan_job,
    time_calls,
)
from lwrad.jobs.progress import Progress
from lwrad.jobs.schema import Job, load_job
from lwrad.jobs.tasks import Chunk, Work, compute

__all__ = [
    "Prepared",
    "prepare",
    "choose_refinements",
    "make_work",
    "run_job",
    "resolve_parallel",
    "calibrate",
]


@dataclass
class Prepared:
    """A job ready to run: built sources and observers and the chunk plan.

    Attributes
    ----------
    job : Job
    plan : JobPlan
    sources : dict
        Source name → Trajectory or Bunch (only sources some study uses).
    observers : dict
        Study name → AngularGrid, Screen or Points.
    times : dict
        Study name → observer times (s) for time-domain fields.
    n_samples : dict
        Source name → trajectory samples (summed over a bunch).
    beams : dict
        Source name → ElectronBeam, for sources with a ``beam`` table.
    refinements : dict
        Study name → (refinement factor, diagnostics) of the radiation
        integral's sampling, chosen once per study (:func:`choose_refinements`);
        empty until then.
    """

    job: Job
    plan: JobPlan
    sources: dict
    observers: dict
    times: dict
    n_samples: dict
    beams: dict = field(default_factory=dict)
    refinements: dict = field(default_factory=dict)

    def input_hashes(self) -> dict:
        """Input file → SHA-256, for provenance and the checkpoint fingerprint."""
        from lwrad.results import sha256_file

        return {str(p): sha256_file(p) for p in self.job.input_files}


def _samples(obj) -> int:
    from lwrad.trajectory import Bunch

    if isinstance(obj, Bunch):
        return sum(len(t) for t in obj)
    return len(obj)


def _first_arrival(source, points) -> float:
    """Earliest observer time (s) of the trajectory's first sample over the points."""
    from lwrad.timedomain import observer_times
    from lwrad.trajectory import Bunch

    trajs = list(source) if isinstance(source, Bunch) else [source]
    return float(min(observer_times(t, p)[0] for t in trajs for p in points))


def prepare(job: Job, *, chunk_pixels: int | None = None) -> Prepared:
    """Build the sources and observers of a validated job and cut its chunk plan."""
    where = None if job.path is None else str(job.path)
    used = {s.source for s in job.studies}
    sources = {
        name: build_source(spec, job_source=where)
        for name, spec in job.sources.items()
        if name in used
    }
    observers = {}
    times = {}
    for study in job.studies:
        observers[study.name] = build_observer(study.observer)
        if study.time is not None:
            t = np.asarray(study.time, dtype=np.float64)
            if study.time_origin == "first_arrival":
                t = t + _first_arrival(sources[study.source], study.observer.points)
            times[study.name] = t
    beams = {
        name: beam_studies.build_beam(job.sources[name], ref, job_source=where)
        for name, ref in sources.items()
        if job.sources[name].beam is not None
    }
    plan = plan_job(job, chunk_pixels=chunk_pixels)
    return Prepared(
        job, plan, sources, observers, times, {k: _samples(v) for k, v in sources.items()}, beams
    )


def choose_refinements(prep: Prepared) -> dict:
    """Choose the sampling refinement of every frequency-domain study once (fills ``prep.refinements``).

    The convergence probe then runs once per study instead of once per chunk,
    and all chunks of a study sample the path with the same factor, so a
    pixel's value cannot depend on the chunk it falls in. Studies computed
    with ``method = "fft"`` do not use it.
    """
    from lwrad.engine.frequency import choose_refinement

    for study in prep.job.studies:
        if study.name in prep.refinements or not study.frequency_domain:
            continue
        if study.method == "fft":
            continue
        energies = beam_studies.single_electron_energies(study, prep.job.sources[study.source])
        prep.refinements[study.name] = choose_refinement(
            prep.sources[study.source],
            prep.observers[study.name],
            energies,
            study.tolerance,
        )
    return prep.refinements


def make_work(prep: Prepared, chunk: Chunk) -> Work:
    """The picklable work item of one chunk."""
    study = prep.job.study(chunk.study)
    src_spec = prep.job.sources[study.source]
    observer = prep.observers[study.name].take(np.arange(chunk.start, chunk.stop))
    energies = None
    beam = options = None
    if chunk.group == "spectra":
        # a beam's convolution may need the single electron beyond the requested energies
        energies = beam_studies.single_electron_energies(study, src_spec)
    elif chunk.group == "beam":
        energies = study.photon_energy
        beam = prep.beams[study.source]
        options = beam_studies.beam_options(study, src_spec)
    return Work(
        chunk=chunk,
        source=prep.sources[study.source],
        observer=observer,
        photon_energy=energies,
        current=src_spec.current,
        time=prep.times.get(study.name),
        method=study.method,
        tolerance=study.tolerance,
        # a beam study's spectra chunks are the single reference electron's
        coherent=study.coherent and chunk.group == "spectra" and src_spec.beam is None,
        refinement=prep.refinements.get(study.name, (None, None))[0],
        beam=beam,
        beam_options=options,
    )


def resolve_parallel(job: Job, workers=None, backend=None, scheduler=None) -> tuple[int, str]:
    """(workers, back end) from the command line, the job file and the machine."""
    from lwrad.parallel import default_workers

    if scheduler is not None:
        return (int(workers) if workers else 0), "dask"
    n = workers if workers is not None else job.run.workers
    n = default_workers() if n is None else int(n)
    if n < 1:
        raise InputError(f"workers must be >= 1, got {n}", location="--workers")
    chosen = backend or job.run.backend
    if chosen in (None, "auto"):
        chosen = "serial" if n == 1 else "threads"
    return n, chosen


def calibrate(prep: Prepared, chunks) -> dict:
    """Seconds per pixel for each (study, group) among ``chunks`` (one pixel, timed after a warm-up call).

    A Monte Carlo (``beam``) chunk is timed with 2 particles and scaled to the
    job's count (its time is one solver call per particle plus the reference).
    """
    from dataclasses import replace

    out = {}
    for chunk in chunks:
        pair = (chunk.study, chunk.group)
        if pair in out:
            continue
        one = Chunk(chunk.study, chunk.group, -1, 0, 1)
        work = make_work(prep, one)
        scale = 1.0
        if chunk.group == "beam":
            scale = (work.beam_options["particles"] + 1) / 3.0
            work = replace(work, beam_options=dict(work.beam_options, particles=2))
        out[pair] = scale * time_calls(compute, work)
    return out


def _assemble(prep: Prepared, checkpoint):
    """One results Case per study, read back from the checkpoint in chunk order."""
    from lwrad.radiation import Result
    from lwrad.results import Case

    cases = []
    for study in prep.job.studies:
        observer = prep.observers[study.name]
        src = prep.job.sources[study.source]
        attrs = {
            "source": study.source,
            "source_kind": src.kind,
            "quantities": list(study.quantities),
            "method": study.method,
            "tolerance": study.tolerance,
            "coherent": study.coherent,
        }
        if src.current is not None:
            attrs["current_A"] = src.current
        if src.beam is not None and any(q in ("power_density", "fields") for q in study.quantities):
            attrs["beam_note"] = (
                "power_density and fields are those of the single reference electron"
            )
        if study.map_photon_energy is not None:
            attrs["plot_photon_energies"] = [float(e) for e in study.map_photon_energy]
        case = Case.from_observer(study.name, observer, attrs=attrs)
        ny, nx = observer.shape
        spectra = [checkpoint.load_chunk(c.key) for c in prep.plan.chunks_of(study.name, "spectra")]
        sampling = prep.refinements.get(study.name, (None, None))[1]
        if sampling:
            # the convergence figures of the study-wide choice of sampling (chunks ran with it fixed)
            for r in spectra:
                r.diagnostics.update(sampling)
        if spectra and study.beam_method is not None:
            # the beam's sum: the convolution needs the whole assembled map (lwrad.jobs.beams)
            single = Result.concatenate_pixels(spectra, observer)
            payloads = [
                checkpoint.load_chunk(c.key) for c in prep.plan.chunks_of(study.name, "beam")
            ]
            beam_result, single, info = beam_studies.assemble_beam(
                study, src, prep.beams[study.source], single, payloads
            )
            beam_studies.add_beam_parts(
                case,
                study,
                single,
                beam_result,
                src.current,
                aperture=build_aperture(study.aperture),
                info=info,
            )
        elif spectra:
            result = Result.concatenate_pixels(spectra, observer)
            wanted = [q for q in ("flux_density", "stokes", "flux") if q in study.quantities]
            case.add_spectra(
                result, src.current, quantities=wanted, aperture=build_aperture(study.aperture)
            )
        power = [checkpoint.load_chunk(c.key) for c in prep.plan.chunks_of(study.name, "power")]
        if power:
            values = np.concatenate([p["power_density"][0].reshape(-1) for p in power])
            case.add_power_density(values.reshape(ny, nx))
        fields = [checkpoint.load_chunk(c.key) for c in prep.plan.chunks_of(study.name, "fields")]
        if fields:
            e_field = np.concatenate([f["E"][0] for f in fields], axis=1)
            b_field = np.concatenate([f["B"][0] for f in fields], axis=1)
            case.add_fields(prep.times[study.name], study.observer.points, e_field, b_field)
            case.attrs["retarded_time"] = _retarded_time_figures(fields)
        cases.append(case)
    return cases


def _retarded_time_figures(payloads) -> dict:
    """The retarded-time solver's counts over a study's ``fields`` chunks (sums; maximum iterations)."""
    from lwrad.jobs.tasks import RETARDED_TIME_FIGURES

    out = {}
    for name in RETARDED_TIME_FIGURES:
        values = [int(p[name][0][0]) for p in payloads if name in p]
        if values:
            out[name] = max(values) if name == "max_iterations" else sum(values)
    return out


def _say(quiet, stream, text):
    if not quiet:
        print(text, file=stream, flush=True)


def run_job(
    job,
    output,
    *,
    workers: int | None = None,
    backend: str | None = None,
    scheduler=None,
    resume: bool = False,
    force: bool = False,
    quiet: bool = False,
    memory_limit_override=None,
    chunk_pixels: int | None = None,
    calibration: bool = True,
    stream=None,
) -> Path:
    """Run a job to one HDF5 result file.

    Parameters
    ----------
    job : Job or path-like
        A validated job or a job file.
    output : path-like
        The result file (HDF5).
    workers : int, optional
        Workers on this node; default the job's ``run.workers``, else all cores.
    backend : {"serial", "threads", "processes"}, optional
        Local back end; default the job's ``run.backend`` (``"auto"``: serial
        for one worker, threads otherwise).
    scheduler : str or distributed.Client, optional
        A Dask scheduler: chunks run on its workers.
    resume : bool
        Continue from the checkpoint of an interrupted run of the same job.
    force : bool
        Replace an existing output and discard an existing checkpoint.
    quiet : bool
        No estimates, progress or summary on ``stream``.
    memory_limit_override : str or int, optional
        Memory limit (``"4 GB"``; a bare number is GB), above the job's.
    chunk_pixels : int, optional
        Pixels per chunk, instead of the job's ``run.chunk_pixels``.
    calibration : bool
        Time one pixel per study first, for the time estimate.
    stream : file, optional
        Where messages go (default ``sys.stderr``).

    Returns
    -------
    Path
        The result file.

    Raises
    ------
    InputError
        Invalid job, unwritable or existing output, foreign checkpoint,
        memory estimate above the limit — all before any chunk is computed.
    """
    from lwrad.parallel import run_chunks
    from lwrad.results import Checkpoint, Provenance, RunResult, check_writable

    stream = sys.stderr if stream is None else stream
    if not isinstance(job, Job):
        job = load_job(job)
    output = Path(output)
    parts = output.with_name(output.name + ".parts")
    # the checkpoint and the final file share the target's file system: refuse a run that
    # could not store them before any work (what a resumed checkpoint holds already counts)
    needed = estimate_output_bytes(plan_job(job, chunk_pixels=chunk_pixels))
    if resume and parts.is_dir():
        needed -= sum(p.stat().st_size for p in parts.iterdir() if p.is_file())
    check_writable(
        output, overwrite=force, hint="use --force to replace it", needed_bytes=max(needed, 0)
    )
    if parts.exists() and not (resume or force):
        raise InputError(
            f"a checkpoint of an unfinished run exists in {str(parts)!r}; "
            "use --resume to continue it or --force to start over",
            source=str(output),
        )
    t_start = time.monotonic()
    n_workers, chosen = resolve_parallel(job, workers, backend, scheduler)
    prep = prepare(job, chunk_pixels=chunk_pixels)
    plan = prep.plan
    limit, limit_from = memory_limit(memory_limit_override, job)
    estimate = check_memory(
        plan, prep.n_samples, workers=n_workers, backend=chosen, limit=limit, limit_from=limit_from
    )
    hashes = prep.input_hashes()
    fingerprint = plan.fingerprint(hashes)
    label = (
        f"{n_workers} worker(s), {chosen}" if chosen != "dask" else f"Dask scheduler {scheduler}"
    )
    _say(
        quiet,
        stream,
        f"lwrad run: {job.title or (job.path.name if job.path else 'job')}: {len(job.studies)} studies, "
        f"{len(plan.chunks)} chunks of up to {plan.chunk_pixels} pixels ({plan.n_pixels} pixel computations); "
        f"{label}",
    )
    for p in job.input_files:
        _say(quiet, stream, f"lwrad run: input file {p}")
    _say(
        quiet,
        stream,
        f"lwrad run: memory estimate {format_bytes(estimate.total)} "
        f"(limit {format_bytes(limit) if limit else 'unknown'}, {limit_from})",
    )
    # the sampling of each study, chosen once (deterministic: the same on a resumed run)
    choose_refinements(prep)
    # calibrate before the checkpoint exists: a chunk that cannot be computed stops the run
    # here, with nothing left behind
    per_pixel = calibrate(prep, plan.chunks) if calibration and not quiet else None
    checkpoint = Checkpoint(output, fingerprint, resume=resume, overwrite=force)
    done = set(checkpoint.done)
    todo = [c for c in plan.chunks if c.key not in done]
    if checkpoint.resumed:
        _say(
            quiet,
            stream,
            f"lwrad run: resuming: {len(plan.chunks) - len(todo)} of {len(plan.chunks)} chunks done",
        )
    if per_pixel is not None and todo:
        seconds = sum(per_pixel[(c.study, c.group)] * c.n_pixels for c in todo)
        parallel = max(1, min(n_workers or 1, len(todo)))
        _say(
            quiet,
            stream,
            f"lwrad run: time estimate {format_seconds(seconds / parallel)} "
            "(calibrated on one pixel per study; an upper estimate)",
        )
    provenance = Provenance.start(
        job_text=job.text,
        input_files=job.input_files,
        workers=n_workers or None,
        backend=chosen,
        scheduler=None if scheduler is None else str(scheduler),
        extra={
            "job_file": None if job.path is None else str(job.path),
            "chunk_pixels": plan.chunk_pixels,
            "n_chunks": len(plan.chunks),
            "chunks_resumed": len(plan.chunks) - len(todo),
            "memory_estimate_bytes": estimate.total,
        },
    )
    progress = Progress(
        plan.n_pixels,
        initial=plan.n_pixels - sum(c.n_pixels for c in todo),
        n_chunks=len(plan.chunks),
        chunks_done=len(plan.chunks) - len(todo),
        quiet=quiet,
        stream=stream,
    )

    def on_result(index, payload):
        chunk = todo[index]
        checkpoint.save_chunk(
            chunk.key, payload, attrs={"study": chunk.study, "group": chunk.group}
        )
        progress.update(chunk)

    try:
        works = [make_work(prep, c) for c in todo]
        run_chunks(
            compute,
            works,
            workers=max(1, n_workers),
            backend=None if chosen == "dask" else chosen,
            scheduler=scheduler,
            on_result=on_result,
            # every payload is in the checkpoint once on_result returns: keeping them too
            # would hold the whole job's results in memory during the run
            keep_results=False,
        )
    finally:
        progress.close()
    run = RunResult(provenance=provenance)
    for case in _assemble(prep, checkpoint):
        run.add(case)
    provenance.finish()
    path = checkpoint.finalize(run)
    _say(quiet, stream, f"lwrad run: wrote {path} in {format_seconds(time.monotonic() - t_start)}")
    return path

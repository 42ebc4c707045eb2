"""``lwrad info FILE``: describe a job, result, trajectory or field-map file.

What the file is, is told by its content: a TOML job file (``.toml``), an
lwrad result (HDF5 with root attribute ``format = "lwrad_result"``), a
trajectory any reader of :mod:`lwrad.io` accepts, or a field map. ``--as``
skips the guessing.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

from lwrad.errors import InputError

__all__ = ["register", "main", "describe_job", "describe_result", "beam_lines", "KINDS"]

KINDS = ("job", "result", "trajectory", "field-map", "on-axis-field-map")


def register(subparsers) -> None:
    """Add the ``info`` subcommand."""
    p = subparsers.add_parser(
        "info",
        help="describe a job, result, trajectory or field-map file",
        description="Describe a file: a job (validated, with its plan and estimates), a result (contents and "
        "provenance), a trajectory (summary) or a field map (summary).",
    )
    p.add_argument("file", metavar="FILE")
    p.add_argument(
        "--as", dest="kind", choices=KINDS, help="what the file is (default: told by its content)"
    )
    p.add_argument("--workers", type=int, metavar="N", help="workers assumed by a job's estimates")
    p.add_argument(
        "--no-calibration", action="store_true", help="job files: skip the one-pixel timing run"
    )
    p.set_defaults(handler=main)


def _is_result(path: Path) -> bool:
    import h5py

    try:
        if not h5py.is_hdf5(path):
            return False
        with h5py.File(path, "r") as f:
            fmt = f.attrs.get("format")
    except OSError:
        return False
    fmt = fmt.decode() if isinstance(fmt, bytes) else fmt
    from lwrad.results import FORMAT_NAME

    return fmt == FORMAT_NAME


def _guess(path: Path) -> str:
    if path.suffix.lower() == ".toml":
        return "job"
    if _is_result(path):
        return "result"
    return "trajectory-or-field-map"


def _range_text(values, unit, scale) -> str:
    if values is None:
        return "-"
    v = [float(x) / scale for x in values]
    if len(v) == 1:
        return f"{v[0]:.6g} {unit}"
    return f"{v[0]:.6g} .. {v[-1]:.6g} {unit} ({len(v)} values)"


def beam_lines(spec) -> list[str]:
    """Lines describing a source's electron beam (a :class:`lwrad.jobs.schema.BeamSpec`).

    Emittances in nm·rad, β and dispersion in m, dispersion slope in mrad,
    rms divergences (sqrt(ε γ_T), γ_T = (1 + α²)/β) in µrad, energy spread
    in %, bunch length in mm, bunch charge in nC; then how the study sums
    the electrons.
    """
    beam = spec.electron_beam()
    sx, sy = beam.betatron_divergence
    lines = [
        f"beam emittance {beam.emittance_x * 1e9:.4g} × {beam.emittance_y * 1e9:.4g} nm·rad (x × y), "
        f"beta {beam.beta_x:.4g} × {beam.beta_y:.4g} m, alpha {beam.alpha_x:.4g} × {beam.alpha_y:.4g}",
        f"     rms divergence {sx * 1e6:.4g} × {sy * 1e6:.4g} µrad, "
        f"energy spread {beam.energy_spread * 100:.4g} %",
    ]
    extra = []
    if beam.dispersion_x or beam.dispersion_y:
        extra.append(f"dispersion {beam.dispersion_x:.4g} × {beam.dispersion_y:.4g} m")
    if beam.dispersion_xp or beam.dispersion_yp:
        extra.append(
            f"dispersion slope {beam.dispersion_xp * 1e3:.4g} × {beam.dispersion_yp * 1e3:.4g} mrad"
        )
    if beam.bunch_length is not None:
        extra.append(f"bunch length {beam.bunch_length * 1e3:.4g} mm rms")
    if beam.longitudinal_profile is not None:
        extra.append("longitudinal profile given")
    if beam.bunch_charge is not None:
        extra.append(f"bunch charge {beam.bunch_charge * 1e9:.4g} nC")
    if extra:
        lines.append("     " + ", ".join(extra))
    how = f"     method {spec.method}"
    if spec.method != "convolution":
        tol = "none" if spec.rel_tolerance is None else f"{spec.rel_tolerance:.3g}"
        how += (
            f" (Monte Carlo: {spec.particles} particles, seed {spec.seed}, offsets {spec.offsets}, "
            f"target relative error {tol})"
        )
    if spec.z_ref is not None:
        how += f", Twiss plane z = {spec.z_ref:.6g} m"
    lines.append(how)
    return lines


def describe_job(path, *, workers=None, calibration=True, out=None) -> None:
    """Print a validated job: sources, studies, chunk plan, memory and time estimates."""
    from lwrad.jobs.planning import check_memory, format_bytes, format_seconds, memory_limit
    from lwrad.jobs.runner import calibrate, prepare, resolve_parallel
    from lwrad.jobs.schema import load_job

    out = sys.stdout if out is None else out
    job = load_job(path)
    say = lambda text="": print(text, file=out)  # noqa: E731
    say(f"job file     {job.path}  (valid)")
    if job.title:
        say(f"title        {job.title}")
    for name, src in job.sources.items():
        if src.kind == "magnets":
            kinds = ", ".join(m["type"] for m in src.magnets)
            say(
                f"source       {name}: {src.particle}, {src.energy_ev / 1e9:.6g} GeV through {kinds}"
            )
        else:
            say(f"source       {name}: trajectory file(s) {', '.join(map(str, src.files))}")
        if src.current is not None:
            say(f"             current {src.current:.6g} A")
        if src.beam is not None:
            for line in beam_lines(src.beam):
                say(f"             {line}")
    for p in job.input_files:
        say(f"input file   {p}")
    for s in job.studies:
        o = s.observer
        if o.kind == "angular":
            where = f"angular {_range_text(o.theta_x, 'mrad', 1e-3)} × {_range_text(o.theta_y, 'mrad', 1e-3)}"
        elif o.kind == "screen":
            where = f"screen at {o.distance:.6g} m, {_range_text(o.x, 'mm', 1e-3)} × {_range_text(o.y, 'mm', 1e-3)}"
        else:
            where = f"{len(o.points)} points"
        say(f"study        {s.name}: {', '.join(s.quantities)} from {s.source}; {where}")
        if s.photon_energy is not None:
            say(f"             photon energy {_range_text(s.photon_energy, 'eV', 1.0)}")
        if s.time is not None:
            say(f"             time {_range_text(s.time, 'ns', 1e-9)} ({s.time_origin})")
    n_workers, backend = resolve_parallel(job, workers)
    prep = prepare(job)
    plan = prep.plan
    say(
        f"plan         {len(plan.chunks)} chunks of up to {plan.chunk_pixels} pixels, {plan.n_pixels} pixel computations"
    )
    for name, n in prep.n_samples.items():
        say(f"             source {name}: {n} trajectory samples")
    limit, limit_from = memory_limit(None, job)
    try:
        est = check_memory(
            plan,
            prep.n_samples,
            workers=n_workers,
            backend=backend,
            limit=limit,
            limit_from=limit_from,
        )
        verdict = "fits"
    except InputError as exc:
        from lwrad.jobs.planning import estimate_memory

        est = estimate_memory(plan, prep.n_samples, workers=n_workers, backend=backend)
        verdict = f"REFUSED: {exc.detail}"
    say(
        f"memory       {format_bytes(est.total)} with {n_workers} worker(s), {backend} "
        f"(limit {format_bytes(limit) if limit else 'unknown'}, {limit_from}): {verdict}"
    )
    if calibration:
        per_pixel = calibrate(prep, plan.chunks)
        seconds = sum(per_pixel[(c.study, c.group)] * c.n_pixels for c in plan.chunks)
        say(
            f"time         about {format_seconds(seconds / max(1, min(n_workers, len(plan.chunks))))} (upper estimate from one pixel per study)"
        )


def describe_result(path, *, out=None) -> None:
    """Print what a result file holds and where it came from."""
    from lwrad.results import load

    out = sys.stdout if out is None else out
    run = load(path)
    say = lambda text="": print(text, file=out)  # noqa: E731
    prov = run.provenance
    say(f"result file  {Path(path).resolve()}")
    say(
        f"made by      lwrad {prov.lwrad_version} on {prov.host}, {prov.start_time} .. {prov.end_time}"
    )
    say(
        f"workers      {prov.workers} ({prov.backend}{', ' + prov.scheduler if prov.scheduler else ''})"
    )
    for name, digest in prov.input_files.items():
        say(f"input file   {name}  sha256 {digest[:16]}…")
    job_file = prov.extra.get("job_file") if isinstance(prov.extra, dict) else None
    if job_file:
        say(f"job file     {job_file} (text stored in /provenance/job_text)")
    for case in run.cases.values():
        say(f"case         {case.name} ({case.kind})")
        for aname, axis in case.axes.items():
            vals = axis.values
            if vals.dtype.kind == "f" and vals.ndim == 1 and vals.size:
                say(
                    f"  axis       {aname}: {vals.size} values {vals[0]:.6g} .. {vals[-1]:.6g} {axis.unit}"
                )
            else:
                say(f"  axis       {aname}: shape {vals.shape}")
        for qname, q in case.quantities.items():
            v = q.values
            peak = f", max {float(v.max()):.4g}" if v.size and v.dtype.kind == "f" else ""
            say(f"  quantity   {qname} {v.shape} [{q.unit}]{peak}")
        if case.spectra is not None:
            say("  spectra    radiation result stored (complex fields / intensities)")
        if case.attrs:
            say(f"  attrs      {json.dumps(case.attrs, sort_keys=True)}")
    say(f"caution      {prov.caution}")


def _describe_trajectory_or_map(path: Path, kind: str | None, out) -> None:
    from lwrad.summary import summarize

    errors = []
    if kind in (None, "trajectory"):
        from lwrad.io import read_trajectory
        from lwrad.trajectory import Bunch

        try:
            obj = read_trajectory(path)
        except InputError as exc:
            if kind:
                raise
            errors.append(f"as a trajectory: {exc.detail}")
        else:
            if isinstance(obj, Bunch):
                print(
                    f"bunch of {len(obj)} trajectories, total weight {obj.total_weight:.6g}; first member:",
                    file=out,
                )
                obj = obj[0]
            print(str(summarize(obj)), file=out)
            return
    from lwrad import magnets

    for k, cls in (("field-map", "FieldMap"), ("on-axis-field-map", "OnAxisFieldMap")):
        if kind not in (None, k):
            continue
        try:
            magnet = getattr(magnets, cls).from_file(path)
        except InputError as exc:
            if kind:
                raise
            errors.append(f"as a {k}: {exc.detail}")
        else:
            print(str(summarize(magnet)), file=out)
            return
    raise InputError(
        "not a job, result, trajectory or field-map file:\n  " + "\n  ".join(errors),
        source=str(path),
    )


def main(args) -> int:
    """Handler of ``lwrad info``."""
    path = Path(args.file)
    if not path.exists():
        raise InputError("no such file", source=str(path))
    kind = args.kind or _guess(path)
    if kind == "job":
        describe_job(path, workers=args.workers, calibration=not args.no_calibration)
    elif kind == "result":
        describe_result(path)
    else:
        _describe_trajectory_or_map(
            path, None if kind == "trajectory-or-field-map" else kind, sys.stdout
        )
    return 0

"""Running jobs end to end: results equal the Python API, determinism across runs,
workers and back ends (threads, processes, Dask), overwrite and checkpoint rules,
memory refusal, provenance.
"""

import io
import os

import numpy as np
import pytest
from jobkit import fields_at_points_study, undulator_source

from lwrad.errors import InputError
from lwrad.jobs.planning import check_memory, estimate_memory, estimate_output_bytes
from lwrad.jobs.runner import prepare, run_job
from lwrad.jobs.schema import load_job, parse_job
from lwrad.results import load

# A short undulator (5 periods, 2.5 GeV, K = 1.4): first harmonic near 1.2 keV.
TINY = (
    '\ntitle = "tiny test job"\n'
    + undulator_source()
    + """
[[study]]
name = "spec"
quantities = ["flux_density", "flux", "stokes", "power_density"]
photon_energy = { start = "1 keV", stop = "4 keV", count = 4 }
[study.observer]
kind = "angular"
theta_x = { start = -0.2, stop = 0.2, count = 5 }
theta_y = { start = -0.1, stop = 0.1, count = 3 }
[study.aperture]
kind = "circular"
radius = "0.1 mrad"

[[study]]
name = "scr"
quantities = ["power_density"]
[study.observer]
kind = "screen"
distance = "10 m"
x = { start = "-2 mm", stop = "2 mm", count = 4 }
y = [-0.5, 0.5]

"""
    + fields_at_points_study(8)
    + """
[run]
chunk_pixels = 4
"""
)


@pytest.fixture
def tiny(tmp_path):
    path = tmp_path / "tiny.toml"
    path.write_text(TINY)
    return path


def _run(job, out, **kw):
    kw.setdefault("quiet", True)
    kw.setdefault("workers", 1)
    return run_job(job, out, **kw)


def _numbers(path):
    """Every numeric dataset of a result, by case and name."""
    run = load(path)
    out = {}
    for name, case in run.cases.items():
        for q, quantity in case.quantities.items():
            out[f"{name}/{q}"] = quantity.values
        if case.spectra is not None:
            for k, (values, _unit) in case.spectra.to_arrays().items():
                if np.asarray(values).dtype.kind in "fc":
                    out[f"{name}/spectra/{k}"] = np.asarray(values)
    return out


def _assert_identical(a, b):
    assert a.keys() == b.keys()
    for k in a:
        np.testing.assert_array_equal(a[k], b[k], err_msg=k)


def test_run_matches_the_python_api(tiny, tmp_path):
    out = _run(tiny, tmp_path / "r.h5")
    run = load(out)
    assert set(run.cases) == {"spec", "scr", "td"}
    from lwrad.observers import AngularGrid, CircularAperture, Screen
    from lwrad.radiation import power_density, radiate
    from lwrad.timedomain import fields, observer_times

    prep = prepare(load_job(tiny))
    traj = prep.sources["u"]
    grid = AngularGrid(np.linspace(-2e-4, 2e-4, 5), np.linspace(-1e-4, 1e-4, 3))
    energies = np.linspace(1e3, 4e3, 4)
    direct = radiate(traj, grid, energies)
    spec = run.cases["spec"]
    # The solver promises per-pixel results independent of the chunking; 1e-12 relative
    # leaves room for nothing but rounding in a different summation order.
    np.testing.assert_allclose(spec.flux_density.values, direct.flux_density(0.3), rtol=1e-12)
    np.testing.assert_allclose(
        spec.stokes.values, direct.stokes(0.3), rtol=1e-12, atol=1e-12 * direct.stokes(0.3).max()
    )
    np.testing.assert_allclose(
        spec.flux.values, direct.flux(0.3, aperture=CircularAperture(1e-4)), rtol=1e-12
    )
    np.testing.assert_allclose(
        spec.power_density.values, power_density(traj, grid, 0.3), rtol=1e-12
    )
    assert spec.flux_density.unit == "ph/s/0.1%BW/mrad^2"
    screen = Screen(10.0, np.linspace(-2e-3, 2e-3, 4), [-5e-4, 5e-4])
    np.testing.assert_allclose(
        run.cases["scr"].power_density.values, power_density(traj, screen, 0.3), rtol=1e-12
    )
    pts = np.array([[5e-4, 0, 5], [1e-3, 0, 5], [0, 1e-3, 5]])
    t0 = min(observer_times(traj, p)[0] for p in pts)
    t = t0 + np.linspace(0, 2e-14, 8)
    e_field, b_field = fields(traj, pts, t)
    td = run.cases["td"].fields
    np.testing.assert_allclose(td.time, t, rtol=1e-15)
    np.testing.assert_allclose(td.E, e_field, rtol=1e-12, atol=1e-12 * np.abs(e_field).max())
    np.testing.assert_allclose(td.B, b_field, rtol=1e-12, atol=1e-12 * np.abs(b_field).max())
    # provenance: the job text verbatim, workers, no checkpoint left
    assert run.provenance.job_text == TINY
    assert run.provenance.workers == 1
    assert run.provenance.extra["chunk_pixels"] == 4
    assert not (tmp_path / "r.h5.parts").exists()


def test_same_job_twice_bit_identical(tiny, tmp_path):
    a = _numbers(_run(tiny, tmp_path / "a.h5"))
    b = _numbers(_run(tiny, tmp_path / "b.h5"))
    _assert_identical(a, b)


def test_workers_and_back_ends_identical(tiny, tmp_path):
    """1 worker, 2 threads, 2 processes, a Dask LocalCluster: the same numbers.

    Required: 1e-10 relative; the chunk plan and assembly order are fixed, so
    equality is expected and asserted.
    """
    distributed = pytest.importorskip("distributed")
    ref = _numbers(_run(tiny, tmp_path / "serial.h5"))
    _assert_identical(
        ref, _numbers(_run(tiny, tmp_path / "threads.h5", workers=2, backend="threads"))
    )
    _assert_identical(
        ref, _numbers(_run(tiny, tmp_path / "procs.h5", workers=2, backend="processes"))
    )
    with distributed.LocalCluster(
        n_workers=2, threads_per_worker=1, processes=False, dashboard_address=None
    ) as cluster:
        dask_out = _run(tiny, tmp_path / "dask.h5", scheduler=cluster.scheduler_address)
    _assert_identical(ref, _numbers(dask_out))
    assert load(dask_out).provenance.backend == "dask"


def test_trajectory_file_source_hashed_and_reported(tmp_path):
    from lwrad.io import write_trajectory
    from lwrad.magnets import PlanarUndulator
    from lwrad.tracking import track

    traj = track(PlanarUndulator(0.025, 5, 0.6), 2.5e9, samples_per_period=48)
    (tmp_path / "data").mkdir()
    write_trajectory(traj, tmp_path / "data" / "u.h5")
    (tmp_path / "job.toml").write_text(
        """
        [sources.file]
        kind = "trajectory"
        file = "data/u.h5"
        current = "0.1 A"
        [[study]]
        quantities = ["flux_density"]
        photon_energy = ["1 keV", "1.2 keV"]
        observer = { kind = "angular", theta_x = [-0.05, 0, 0.05], theta_y = 0 }
        """
    )
    log = io.StringIO()
    out = run_job(
        tmp_path / "job.toml", tmp_path / "out.h5", workers=1, stream=log, calibration=False
    )
    resolved = str((tmp_path / "data" / "u.h5").resolve())
    assert f"input file {resolved}" in log.getvalue()  # paths from the job file are reported
    prov = load(out).provenance
    assert list(prov.input_files) == [resolved]
    from lwrad.results import sha256_file

    assert prov.input_files[resolved] == sha256_file(tmp_path / "data" / "u.h5")


def test_existing_output_not_overwritten_without_force(tiny, tmp_path):
    out = tmp_path / "r.h5"
    out.write_bytes(b"precious")
    with pytest.raises(InputError, match="exists"):
        _run(tiny, out)
    assert out.read_bytes() == b"precious"
    assert not (tmp_path / "r.h5.parts").exists()  # refused before any work
    _run(tiny, out, force=True)
    assert set(load(out).cases) == {"spec", "scr", "td"}


def test_output_directory_checked_before_work(tiny, tmp_path):
    with pytest.raises(InputError, match="does not exist"):
        _run(tiny, tmp_path / "missing" / "r.h5")
    if os.geteuid() != 0:  # root may write anywhere; the permission check cannot fail then
        ro = tmp_path / "ro"
        ro.mkdir()
        ro.chmod(0o500)
        try:
            with pytest.raises(InputError, match="not writable"):
                _run(tiny, ro / "r.h5")
        finally:
            ro.chmod(0o700)


def test_stale_checkpoint_needs_resume_or_force(tiny, tmp_path):
    out = tmp_path / "r.h5"
    (tmp_path / "r.h5.parts").mkdir()
    with pytest.raises(InputError, match="--resume"):
        _run(tiny, out)
    # --resume with a checkpoint of another job is refused
    (tmp_path / "r.h5.parts" / "checkpoint.json").write_text('{"fingerprint": "another job"}')
    with pytest.raises(InputError, match="different job"):
        _run(tiny, out, resume=True)
    # --force starts over
    _run(tiny, out, force=True)
    assert out.exists() and not (tmp_path / "r.h5.parts").exists()


def test_memory_refused_with_estimate_and_fitting_chunk(tiny, tmp_path, monkeypatch):
    job = load_job(tiny)
    prep = prepare(job, chunk_pixels=64)
    est = estimate_memory(prep.plan, prep.n_samples, workers=2, backend="threads")
    # a limit between the 1-pixel-chunk estimate and the 64-pixel one
    small = estimate_memory(prep.plan, prep.n_samples, workers=2, backend="threads", chunk_pixels=1)
    assert small.total < est.total  # the chunk size matters in the model
    limit = (small.total + est.total) // 2
    monkeypatch.setenv("LWRAD_MEMORY_LIMIT", f"{limit} B")
    with pytest.raises(InputError) as info:
        run_job(tiny, tmp_path / "r.h5", workers=2, chunk_pixels=64, quiet=True)
    msg = str(info.value)
    assert "estimated memory" in msg and "LWRAD_MEMORY_LIMIT" in msg and "chunk_pixels = " in msg
    assert not (tmp_path / "r.h5").exists() and not (tmp_path / "r.h5.parts").exists()
    fit = int(msg.split("chunk_pixels = ")[1].split()[0])
    assert 1 <= fit < 64
    # the suggestion really fits, and one pixel more does not
    prep_fit = prepare(job, chunk_pixels=fit)
    check_memory(
        prep_fit.plan,
        prep_fit.n_samples,
        workers=2,
        backend="threads",
        limit=limit,
        limit_from="test",
    )
    over = estimate_memory(
        prep.plan, prep.n_samples, workers=2, backend="threads", chunk_pixels=fit + 1
    )
    assert over.total > limit
    # a limit below the result arrays themselves: told to shrink the job
    with pytest.raises(InputError, match="result arrays alone do not fit"):
        run_job(tiny, tmp_path / "r.h5", memory_limit_override="1 kB", quiet=True)


def test_memory_estimate_grows_with_the_job():
    base = parse_job(TINY, base_dir=".")
    bigger = parse_job(TINY.replace('"4 keV", count = 4 }', '"4 keV", count = 400 }'), base_dir=".")
    n = {"u": 1000}
    from lwrad.jobs.planning import plan_job

    small = estimate_memory(plan_job(base), n, workers=1, backend="serial")
    large = estimate_memory(plan_job(bigger), n, workers=1, backend="serial")
    # result arrays: 4 → 400 photon energies on 15 pixels, 3 copies of field (48 bytes) and
    # intensity moments (40 bytes), + flux density 8 + Stokes 32 bytes each (planning's model)
    assert large.breakdown["result arrays"] - small.breakdown["result arrays"] == 396 * 15 * (
        3 * (48 + 40) + 8 + 32
    )
    # disk: checkpoint + final file, twice the stored arrays (48 + 2 × 40 + 8 + 32 bytes each)
    grow = estimate_output_bytes(plan_job(bigger)) - estimate_output_bytes(plan_job(base))
    assert grow == 2 * 396 * 15 * (48 + 2 * 40 + 8 + 32)
    procs = estimate_memory(plan_job(base), n, workers=2, backend="processes")
    threads = estimate_memory(plan_job(base), n, workers=2, backend="threads")
    assert procs.total > threads.total  # each process carries its own interpreter


def test_progress_log_lines_when_not_a_terminal(tiny, tmp_path):
    log = io.StringIO()  # not a tty
    run_job(tiny, tmp_path / "r.h5", workers=1, stream=log, calibration=True)
    text = log.getvalue()
    assert "memory estimate" in text and "time estimate" in text
    # spec: 15 pixels in chunks of 4 → 4 spectra + 4 power chunks; scr: 8 pixels → 2; td: 3 points → 1
    assert text.count("lwrad run: chunk ") == 11
    assert "lwrad run: chunk 11/11 done" in text and "px/s" in text and "left" in text
    quiet = io.StringIO()
    run_job(tiny, tmp_path / "q.h5", workers=1, stream=quiet, quiet=True)
    assert quiet.getvalue() == ""


def test_too_little_disk_space_refused_before_any_work(tiny, tmp_path, monkeypatch):
    # Simulated (monkeypatched free space): one byte less than the estimate of checkpoint +
    # result is refused with the figure, and nothing is computed or written.
    import shutil
    from collections import namedtuple

    from lwrad.jobs.planning import plan_job

    need = estimate_output_bytes(plan_job(load_job(tiny)))
    usage = namedtuple("usage", "total used free")
    monkeypatch.setattr(shutil, "disk_usage", lambda p: usage(10 * need, 9 * need, need - 1))
    with pytest.raises(InputError, match="not enough free space"):
        _run(tiny, tmp_path / "r.h5")
    assert not (tmp_path / "r.h5").exists()
    assert not (tmp_path / "r.h5.parts").exists()


def test_retarded_time_figures_in_the_fields_case(tiny, tmp_path):
    run = load(_run(tiny, tmp_path / "r.h5"))
    figures = run.cases["td"].attrs["retarded_time"]
    assert figures["n_not_converged"] == 0
    # every (time, point) pair is counted once: 8 times × 3 points, split into 1 chunk
    assert figures["n_inside"] + figures["n_before"] + figures["n_after"] == 8 * 3
    assert figures["max_iterations"] >= 1


def test_sampling_chosen_once_per_study(tiny):
    # one refinement factor per study, carried by every chunk; the joined chunks equal one
    # solver call on the whole grid with that factor, bit for bit (the solver's per-pixel contract)
    from lwrad.jobs.runner import choose_refinements, make_work
    from lwrad.jobs.tasks import compute
    from lwrad.radiation import Result, radiate

    prep = prepare(load_job(tiny))
    choose_refinements(prep)
    assert set(prep.refinements) == {"spec"}  # power and fields studies do not sample spectra
    factor, diag = prep.refinements["spec"]
    assert diag["refinement_factor"] == factor
    works = [make_work(prep, c) for c in prep.plan.chunks_of("spec", "spectra")]
    assert len(works) > 1 and all(w.refinement == factor for w in works)
    observer = prep.observers["spec"]
    joined = Result.concatenate_pixels([compute(w) for w in works], observer)
    energies = prep.job.study("spec").photon_energy
    whole = radiate(prep.sources["u"], observer, energies, refinement=factor)
    assert np.array_equal(joined.field, whole.field)

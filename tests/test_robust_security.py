"""Job files and result files are data; output targets are checked before any work.

Security (what each test really exercises)
------------------------------------------
* Job files are parsed by :mod:`tomllib` and validated; values that look like
  Python code, YAML tags or shell commands are plain strings that fail
  validation. While a job is validated *and run*, ``eval``, ``exec``,
  ``compile``, ``pickle.load(s)``, ``os.system`` and ``subprocess.Popen`` are
  replaced by traps, so any use of them fails the test.
* Paths in job files are resolved relative to the job file's folder (not the
  current directory), normalised (``..`` removed) and reported.
* Result files are read with h5py only: the pickle traps stay armed while a
  file is loaded, and datasets of opaque, reference or pickled-bytes type are
  refused with :class:`~lwrad.errors.InputError` naming the dataset.

Output targets
--------------
We run as root, so permission bits do not bind and ``chmod`` cannot make a
directory read-only. Instead: a *real* read-only file system and a *real*
tiny full file system (tmpfs mounts, skipped when mounting is not permitted),
and ``/sys`` (a pseudo file system where even root cannot create files).
"""

import builtins
import os
import pickle
import shutil
import subprocess
import uuid

import h5py
import numpy as np
import pytest

from lwrad import atomic
from lwrad.errors import InputError
from lwrad.jobs.runner import run_job
from lwrad.jobs.schema import load_job, parse_job
from lwrad.results import Case, RunResult, check_writable, load, save

# invented test scenario: a 5-period undulator, one tiny study
JOB = """
[sources.u]
kind = "magnets"
energy = {energy}
current = "0.3 A"
samples_per_period = 48
[[sources.u.magnet]]
type = "planar_undulator"
period = "25 mm"
n_periods = {n_periods}
k = 1.4
[[study]]
name = "s"
quantities = ["flux_density"]
photon_energy = {photon_energy}
[study.observer]
kind = "angular"
theta_x = [-0.05, 0.05]
theta_y = 0
"""
GOOD = {"energy": '"2.5 GeV"', "n_periods": "5", "photon_energy": '"1.2 keV"'}


def _job(**kw):
    return JOB.format(**{**GOOD, **kw})


#: text planted in job and result files; it must never reach an evaluator
MARK = f"pwned-{uuid.uuid4().hex}"  # made at run time: this source file never holds it


@pytest.fixture
def no_code_execution(monkeypatch, tmp_path):
    """Traps on every way a file's content could become code.

    ``eval``/``exec``/``compile`` are used legitimately by Python, numba and pytest,
    and numba reads its own kernel cache with pickle, so these are wrapped: a call
    fails the test when its text carries :data:`MARK` (planted in the files under
    test) or when pickle reads a file from the test's folder (where the user's job,
    inputs and results live). ``os.system`` and ``subprocess.Popen`` fail the test
    whenever they are called (the runs here are serial).
    """
    calls = []

    def trap(name):
        def fail(*args, **kwargs):
            calls.append(name)
            raise AssertionError(f"{name} called")

        return fail

    def from_files(value) -> bool:
        if isinstance(value, bytes | bytearray | memoryview):
            return MARK.encode() in bytes(value)
        if isinstance(value, str):
            return MARK in value
        name = getattr(value, "name", None)  # an open file
        return isinstance(name, str) and os.path.abspath(name).startswith(str(tmp_path))

    def guard(name, original):
        def checked(source, *args, **kwargs):
            if from_files(source):
                calls.append(name)
                raise AssertionError(f"{name} called on file content")
            return original(source, *args, **kwargs)

        return checked

    for module, name in [
        (builtins, "eval"),
        (builtins, "exec"),
        (builtins, "compile"),
        (pickle, "loads"),
        (pickle, "load"),
    ]:
        original = getattr(module, name)
        monkeypatch.setattr(module, name, guard(f"{module.__name__}.{name}", original))
    for module, name in [(os, "system"), (subprocess, "Popen")]:
        monkeypatch.setattr(module, name, trap(f"{module.__name__}.{name}"))
    yield calls
    assert calls == []


CODE_LIKE = [
    "\"__import__('os').system('touch {marker}')\"",
    "\"!!python/object/apply:os.system ['touch {marker}']\"",
    '"$(touch {marker})"',
    "\"{{{{ ''.__class__.__mro__ }}}}\"",
    '"2.5 GeV; import os"',
]


@pytest.mark.parametrize("value", CODE_LIKE)
def test_code_like_values_are_only_strings(value, tmp_path, no_code_execution):
    marker = tmp_path / f"{MARK}-{uuid.uuid4().hex}"
    text = _job(energy=value.format(marker=marker))
    with pytest.raises(InputError, match="sources.u.energy"):
        parse_job(text, base_dir=tmp_path)
    # the same string as free text is kept verbatim, never interpreted
    job = parse_job(f"title = {value.format(marker=marker)}\n" + _job(), base_dir=tmp_path)
    assert "touch" in job.title or "__class__" in job.title or "import" in job.title
    assert not marker.exists()


@pytest.mark.parametrize(
    "key, value",
    [
        ("format", '"os"'),
        ("format", '"../../lwrad/cli"'),
        ("format", '"lwrad.results"'),
        ("reader", '{ __class__ = "x" }'),
        ("reader", "{ format = { module = 'os' } }"),
    ],
)
def test_reader_names_cannot_import_code(key, value, tmp_path, no_code_execution):
    from lwrad.ideal import planar_undulator
    from lwrad.io import write_trajectory

    write_trajectory(planar_undulator(2.5e9, 0.025, 2, 1.4), tmp_path / "u.h5")
    text = (
        _job()
        .replace(
            '[sources.u]\nkind = "magnets"',
            f'[sources.f]\nkind = "trajectory"\nfile = "u.h5"\ncurrent = "0.3 A"\n{key} = {value}\n'
            '[sources.u]\nkind = "magnets"',
        )
        .replace('name = "s"', 'name = "s"\nsource = "f"')
    )
    (tmp_path / "job.toml").write_text(text)
    with pytest.raises(InputError):
        run_job(tmp_path / "job.toml", tmp_path / "r.h5", workers=1, quiet=True)
    assert not (tmp_path / "r.h5").exists()


def test_a_job_runs_without_any_code_path(tmp_path, no_code_execution):
    # the whole run — validate, track, compute, checkpoint, write, read back — under the traps
    (tmp_path / "job.toml").write_text(f"title = \"__import__('os') {MARK}\"\n" + _job())
    out = run_job(tmp_path / "job.toml", tmp_path / "r.h5", workers=1, quiet=True)
    run = load(out)
    assert run.cases["s"].flux_density.values.shape == (1, 1, 2)
    assert MARK in run.provenance.job_text  # kept verbatim as text


def test_relative_paths_resolved_against_the_job_file_and_reported(tmp_path, monkeypatch):
    from lwrad.ideal import planar_undulator
    from lwrad.io import write_trajectory

    (tmp_path / "data").mkdir()
    (tmp_path / "jobs" / "deep").mkdir(parents=True)
    write_trajectory(planar_undulator(2.5e9, 0.025, 2, 1.4), tmp_path / "data" / "u.h5")
    text = (
        _job()
        .replace(
            '[sources.u]\nkind = "magnets"',
            '[sources.f]\nkind = "trajectory"\nfile = "../../data/u.h5"\ncurrent = "0.3 A"\n'
            '[sources.u]\nkind = "magnets"',
        )
        .replace('name = "s"', 'name = "s"\nsource = "f"')
    )
    job_path = tmp_path / "jobs" / "deep" / "job.toml"
    job_path.write_text(text)
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    monkeypatch.chdir(elsewhere)  # the current directory plays no part
    job = load_job(job_path)
    resolved = (tmp_path / "data" / "u.h5").resolve()
    assert job.input_files == (resolved,)
    assert ".." not in str(job.input_files[0])
    import io

    log = io.StringIO()
    out = run_job(job, tmp_path / "r.h5", workers=1, stream=log, calibration=False)
    assert f"input file {resolved}" in log.getvalue()
    assert list(load(out).provenance.input_files) == [str(resolved)]
    # a path that leaves the folder and misses names the key and where it looked
    job_path.write_text(text.replace("../../data/u.h5", "../../../nowhere/u.h5"))
    with pytest.raises(InputError, match=r"sources\.f\.file.*looked for"):
        load_job(job_path)


def test_a_job_path_to_a_system_file_is_read_as_data_only(tmp_path):
    # a path may point anywhere the user can read; the content is then parsed as a
    # trajectory and refused, never executed or echoed beyond the error message
    text = (
        _job()
        .replace(
            '[sources.u]\nkind = "magnets"',
            '[sources.f]\nkind = "trajectory"\nfile = "/etc/hostname"\ncurrent = "0.3 A"\n'
            '[sources.u]\nkind = "magnets"',
        )
        .replace('name = "s"', 'name = "s"\nsource = "f"')
    )
    if not os.path.isfile("/etc/hostname"):
        pytest.skip("no /etc/hostname on this machine")
    (tmp_path / "job.toml").write_text(text)
    with pytest.raises(InputError, match="hostname"):
        run_job(tmp_path / "job.toml", tmp_path / "r.h5", workers=1, quiet=True)


@pytest.mark.parametrize(
    "kw, key",
    [
        ({"energy": "1e400"}, "sources.u.energy"),  # TOML reads it as inf
        ({"energy": "nan"}, "sources.u.energy"),
        ({"n_periods": "-3"}, "n_periods"),
        ({"photon_energy": '{ start = "1 keV", stop = "2 keV", count = 0 }'}, "photon_energy"),
    ],
)
def test_non_finite_and_negative_numbers_refused(kw, key, tmp_path):
    with pytest.raises(InputError, match=key):
        parse_job(_job(**kw), base_dir=tmp_path)


@pytest.mark.parametrize(
    "kw, key",
    [
        (
            {"photon_energy": '{ start = "1 keV", stop = "2 keV", count = 1000000000000 }'},
            "photon_energy.count",
        ),
        (
            {"photon_energy": '{ start = "1 keV", stop = "2 keV", count = 9223372036854775807 }'},
            "photon_energy.count",
        ),
        # 10 000 001 values: one above the documented cap (lwrad.jobs.schema.MAX_RANGE_COUNT)
        (
            {"photon_energy": '{ start = "1 keV", stop = "2 keV", count = 10000001 }'},
            "photon_energy.count",
        ),
        # finite in joules (1.6e290 J), infinite in eV: the overflow happens after parse_quantity
        ({"energy": '"1e300 GeV"'}, "sources.u.energy"),
        ({"photon_energy": '"1e306 keV"'}, "photon_energy"),
        ({"n_periods": "9223372036854775807"}, "n_periods"),
        ({"n_periods": "100001"}, "n_periods"),
    ],
    ids=[
        "count-1e12",
        "count-2^63",
        "count-cap+1",
        "energy-overflow",
        "photon-energy-overflow",
        "n_periods-2^63",
        "n_periods-cap+1",
    ],
)
def test_huge_numbers_refused_by_the_validator(kw, key, tmp_path):
    with pytest.raises(InputError, match=key.replace(".", r"\.")):
        parse_job(_job(**kw), base_dir=tmp_path)


def test_caps_admit_their_largest_value(tmp_path):
    """The caps are not off by one: the largest allowed n_periods validates."""
    job = parse_job(_job(n_periods="100000"), base_dir=tmp_path)
    assert job.sources["u"].magnets[0]["n_periods"] == 100_000


# ----------------------------------------------------------------------------- result files


def _small_result(path):
    run = RunResult()
    case = Case("c", "none")
    case.set_axis("time", np.arange(3.0))
    case.add_quantity("signal", np.ones(3), "1", ("time",))
    run.add(case)
    return save(path, run)


class _Payload:
    """Unpickling this would leave a marker file: proof that pickle ran."""

    def __init__(self, marker):
        self.marker = str(marker)

    def __reduce__(self):
        return (open, (self.marker, "w"))


@pytest.mark.parametrize("kind", ["opaque", "reference", "pickled", "compound"])
def test_result_loading_refuses_non_numeric_datasets(kind, tmp_path, no_code_execution):
    path = _small_result(tmp_path / "r.h5")
    marker = tmp_path / f"unpickled-{MARK}"
    with h5py.File(path, "r+") as f:
        del f["cases/c/signal"]
        if kind == "opaque":
            ds = f.create_dataset("cases/c/signal", data=np.array([b"abcdefgh"] * 3, dtype="V8"))
        elif kind == "reference":
            ds = f.create_dataset("cases/c/signal", (3,), dtype=h5py.ref_dtype)
            for i in range(3):
                ds[i] = f["cases/c/axes/time"].ref
        elif kind == "pickled":
            blob = np.frombuffer(pickle.dumps(_Payload(marker)), dtype=np.uint8)
            ds = f.create_dataset(
                "cases/c/signal", data=np.void(blob.tobytes()).reshape(1).repeat(3)
            )
        else:  # a compound that is not lwrad's complex (r, i) layout
            ds = f.create_dataset(
                "cases/c/signal", data=np.zeros(3, dtype=[("a", "f8"), ("b", "i4")])
            )
        ds.attrs["unit"] = "1"
        ds.attrs["long_name"] = "tampered"
        ds.attrs["axes"] = np.array(["time"], dtype=object)
    with pytest.raises(InputError, match="/cases/c/signal") as info:
        load(path)
    assert str(path) in str(info.value)
    assert not marker.exists()


def test_result_file_unchanged_loads(tmp_path, no_code_execution):
    # the control: the untampered file loads under the same traps
    run = load(_small_result(tmp_path / "r.h5"))
    np.testing.assert_array_equal(run.cases["c"].get("signal").values, np.ones(3))


def test_points_case_axis_from_points_method_and_old_xyz():
    from lwrad.observers import Points

    xyz = np.array([[0.0, 0.0, 5.0], [1e-3, 0.0, 5.0]])
    case = Case.from_observer("p", Points(xyz))
    np.testing.assert_array_equal(case.axes["points"].values, xyz)

    class OldPoints:  # an observer of the older layout: positions in an ``xyz`` attribute
        kind = "points"

        def __init__(self, xyz):
            self.xyz = xyz

    np.testing.assert_array_equal(
        Case.from_observer("q", OldPoints(xyz)).axes["points"].values, xyz
    )

    class Broken:
        kind = "points"
        xyz = np.zeros((2, 2))

    with pytest.raises(InputError, match=r"shape \(n, 3\)"):
        Case.from_observer("r", Broken())


# ----------------------------------------------------------------------------- output targets


def _mount_tmpfs(where, options):
    where.mkdir()
    if shutil.which("mount") is None or os.geteuid() != 0:
        pytest.skip("mounting a tmpfs needs root and the mount command")
    proc = subprocess.run(
        ["mount", "-t", "tmpfs", "-o", options, "tmpfs", str(where)], capture_output=True
    )
    if proc.returncode != 0:
        pytest.skip(f"cannot mount a tmpfs here: {proc.stderr.decode().strip()}")
    return where


@pytest.fixture
def tiny_fs(tmp_path):
    """A real 64 kB tmpfs: a directory that fills up."""
    where = _mount_tmpfs(tmp_path / "tiny", "size=64k")
    yield where
    subprocess.run(["umount", str(where)], check=True)


@pytest.fixture
def read_only_fs(tmp_path):
    """A real read-only tmpfs (binding for root, unlike permission bits)."""
    where = _mount_tmpfs(tmp_path / "ro", "ro,size=64k")
    yield where
    subprocess.run(["umount", str(where)], check=True)


def test_read_only_file_system_refused_before_work(read_only_fs, tmp_path, monkeypatch):
    from lwrad.jobs import runner

    (tmp_path / "job.toml").write_text(_job())
    monkeypatch.setattr(runner, "prepare", lambda *a, **k: pytest.fail("work started"))
    with pytest.raises(InputError, match="not writable"):
        run_job(tmp_path / "job.toml", read_only_fs / "r.h5", workers=1, quiet=True)


def test_pseudo_file_system_refused_before_work(tmp_path, monkeypatch):
    # root passes os.access on /sys, but no file can be created there: the probe file finds it
    from lwrad.jobs import runner

    if not os.path.isdir("/sys/kernel"):
        pytest.skip("no /sys on this machine")
    (tmp_path / "job.toml").write_text(_job())
    monkeypatch.setattr(runner, "prepare", lambda *a, **k: pytest.fail("work started"))
    with pytest.raises(InputError, match="cannot create a file there"):
        run_job(tmp_path / "job.toml", "/sys/kernel/lwrad-r.h5", workers=1, quiet=True)


def test_free_space_checked_when_the_size_is_known(tiny_fs):
    check_writable(tiny_fs / "r.h5", needed_bytes=1000)
    with pytest.raises(InputError, match="not enough free space") as info:
        check_writable(tiny_fs / "r.h5", needed_bytes=10_000_000)
    assert "10 MB needed" in str(info.value)


# h5py retries the flush when the failed file's handle is freed and reports that second
# failure as an "Exception ignored" message (cosmetic; the InputError above it is what counts)
@pytest.mark.filterwarnings("ignore::pytest.PytestUnraisableExceptionWarning")
def test_disk_full_mid_write_gives_a_clear_error_and_no_file(tiny_fs):
    # the write itself fills the device: an InputError naming the file, no partial file left
    run = RunResult()
    case = Case("c", "none")
    case.set_axis("time", np.arange(50_000.0))  # 400 kB of noise (incompressible)
    case.add_quantity("signal", np.random.default_rng(20261202).random(50_000), "1", ("time",))
    run.add(case)
    with pytest.raises(InputError, match="no space left") as info:
        save(tiny_fs / "r.h5", run)
    assert str(tiny_fs / "r.h5") in str(info.value)
    assert list(tiny_fs.iterdir()) == []  # neither the file nor its temporary


def test_disk_full_mid_run_keeps_the_checkpoint_for_resume(tmp_path, monkeypatch):
    # Simulated (monkeypatched): the final write reports ENOSPC. What it proves: the run
    # stops with an InputError, the finished chunks stay in the checkpoint and --resume
    # completes the file without recomputing them.
    import errno

    from lwrad import results

    (tmp_path / "job.toml").write_text(_job() + "[run]\nchunk_pixels = 1\n")
    real_save = results.save

    def full(*args, **kwargs):
        raise atomic._disk_error(OSError(errno.ENOSPC, "No space left on device"), tmp_path)

    monkeypatch.setattr(results, "save", full)
    with pytest.raises(InputError, match="no space left"):
        run_job(tmp_path / "job.toml", tmp_path / "r.h5", workers=1, quiet=True)
    parts = tmp_path / "r.h5.parts"
    assert len(list(parts.glob("chunk_*.h5"))) == 2 and not (tmp_path / "r.h5").exists()
    monkeypatch.setattr(results, "save", real_save)
    out = run_job(tmp_path / "job.toml", tmp_path / "r.h5", workers=1, quiet=True, resume=True)
    assert load(out).provenance.extra["chunks_resumed"] == 2

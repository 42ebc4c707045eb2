"""HDF5 result files: round trip, units, provenance, atomic writing, checkpoints and resume."""

import hashlib
import json
import os
import signal
import subprocess
import sys
import textwrap
import time

import h5py
import numpy as np
import pytest

from lwrad import results
from lwrad.errors import InputError
from lwrad.observers import AngularGrid, Points, Screen
from lwrad.results import (
    FORMAT_NAME,
    Case,
    Checkpoint,
    Provenance,
    RunResult,
    check_writable,
    job_fingerprint,
    load,
    save,
    sha256_file,
)

# ----------------------------------------------------------------------------- stand-ins
# A small stand-in with the agreed interface of lwrad.radiation.Result (INTERFACES.md),
# so this file tests storage alone, with data of our own.


class FakeResult:
    """Complex fields (n_e, ny, nx, 3); derived quantities are arbitrary but deterministic."""

    def __init__(self, photon_energy, field, attrs=None):
        self.photon_energy = np.asarray(photon_energy, float)
        self.field = field
        self.attrs = dict(attrs or {"method": "stand-in", "tolerance": 1e-4})
        self.observer = None

    def to_arrays(self):
        return {"photon_energy": (self.photon_energy, "eV"), "field": (self.field, "V*s")}

    @classmethod
    def from_arrays(cls, arrays, attrs):
        if arrays["photon_energy"][1] != "eV":
            raise InputError("photon_energy must be in eV", location="dataset photon_energy")
        return cls(arrays["photon_energy"][0], arrays["field"][0], attrs)

    def flux_density(self, current):
        return current * np.sum(np.abs(self.field) ** 2, axis=-1)

    def stokes(self, current):
        ex, ey = self.field[..., 0], self.field[..., 1]
        s0 = np.abs(ex) ** 2 + np.abs(ey) ** 2
        s1 = np.abs(ex) ** 2 - np.abs(ey) ** 2
        s2 = 2 * np.real(ex * np.conj(ey))
        s3 = -2 * np.imag(ex * np.conj(ey))
        return current * np.stack([s0, s1, s2, s3])

    def flux(self, current, aperture=None):
        return np.sum(self.flux_density(current), axis=(1, 2))


@pytest.fixture(autouse=True)
def _fake_result_class(monkeypatch):
    monkeypatch.setattr(results, "_result_class", lambda: FakeResult)


def make_run(rng, *, job_text="[source]\nkind = 'invented test'\n"):
    """A run with an angular case (spectra), a screen case (power density), a points case (fields)."""
    ne, ny, nx = 5, 4, 6
    grid = AngularGrid(np.linspace(-1e-4, 1e-4, nx), np.linspace(-5e-5, 5e-5, ny))
    field = rng.normal(size=(ne, ny, nx, 3)) + 1j * rng.normal(size=(ne, ny, nx, 3))
    res = FakeResult(np.linspace(100.0, 900.0, ne), field)
    run = RunResult(provenance=Provenance.start(job_text=job_text, workers=2, backend="threads"))
    ang = run.add(Case.from_observer("undulator", grid, attrs={"note": "invented"}))
    ang.add_spectra(res, current=0.3)
    scr = run.add(
        Case.from_observer(
            "screen_power", Screen(15.0, np.linspace(-0.01, 0.01, 7), np.linspace(-0.005, 0.005, 3))
        )
    )
    scr.add_power_density(rng.uniform(0, 2, size=(3, 7)))
    points = rng.normal(size=(2, 3))
    pts = run.add(Case.from_observer("thz_points", Points(points)))
    pts.add_fields(
        np.linspace(0, 1e-11, 9), points, rng.normal(size=(9, 2, 3)), rng.normal(size=(9, 2, 3))
    )
    return run


# ----------------------------------------------------------------------------- round trip


def test_round_trip_bit_identical(tmp_path, rng):
    run = make_run(rng)
    path = save(tmp_path / "out.h5", run)
    back = load(path)
    assert list(back.cases) == list(run.cases)
    for name, case in run.cases.items():
        other = back.cases[name]
        assert other.kind == case.kind and other.attrs == case.attrs
        assert other.observer_dict == case.observer_dict
        assert other.observer == case.observer  # rebuilt from its description
        for table, other_table in ((case.axes, other.axes), (case.quantities, other.quantities)):
            assert set(table) == set(other_table)
            for key, q in table.items():
                r = other_table[key]
                # bit-identical: HDF5 stores float64/complex128 exactly
                assert np.array_equal(np.asarray(q.values), np.asarray(r.values)), f"{name}/{key}"
                assert r.values.dtype == q.values.dtype or q.values.dtype.kind == "O"
                assert (r.unit, r.axes, r.long_name) == (q.unit, q.axes, q.long_name)
    spec = back.spectra
    assert isinstance(spec, FakeResult)
    assert np.array_equal(spec.field, run.cases["undulator"].spectra.field)
    assert spec.field.dtype == np.complex128
    assert spec.attrs == run.cases["undulator"].spectra.attrs
    assert back.cases["undulator"].attrs["current_A"] == 0.3
    assert np.array_equal(back.power_density.values, run.cases["screen_power"].power_density.values)
    f_in, f_out = run.cases["thz_points"].fields, back.fields
    for a, b in zip(f_in, f_out, strict=True):
        assert np.array_equal(a, b)
    assert back.job_text == run.job_text


def test_every_dataset_has_unit_and_long_name(tmp_path, rng):
    path = save(tmp_path / "out.h5", make_run(rng))
    seen = []

    def visit(name, obj):
        if isinstance(obj, h5py.Dataset):
            seen.append(name)
            assert "unit" in obj.attrs, name
            assert "long_name" in obj.attrs and obj.attrs["long_name"], name

    with h5py.File(path, "r") as f:
        f.visititems(visit)
        assert f.attrs["format"] == FORMAT_NAME and f.attrs["format_version"] == 1
        assert "licensed practice" in f.attrs["caution"]
        # units as the layout documents them
        assert f["cases/undulator/flux_density"].attrs["unit"] == "ph/s/0.1%BW/mrad^2"
        assert f["cases/screen_power/power_density"].attrs["unit"] == "W/mm^2"
        assert f["cases/undulator/axes/photon_energy"].attrs["unit"] == "eV"
        assert f["cases/undulator/axes/theta_x"].attrs["unit"] == "rad"
        assert f["cases/screen_power/axes/x"].attrs["unit"] == "m"
        assert f["cases/thz_points/E"].attrs["unit"] == "V/m"
        assert f["cases/thz_points/axes/time"].attrs["unit"] == "s"
        # plain h5py: complex as complex128, dimension scales attached
        assert f["cases/undulator/spectra/field"].dtype == np.complex128
        fd = f["cases/undulator/flux_density"]
        assert list(fd.attrs["axes"]) == ["photon_energy", "theta_y", "theta_x"]
        assert fd.dims[0][0].name == "/cases/undulator/axes/photon_energy"
        assert fd.dims[2][0].name == "/cases/undulator/axes/theta_x"
    assert len(seen) >= 20


def test_provenance_fields(tmp_path, rng):
    src = tmp_path / "traj.csv"
    src.write_bytes(b"abc")
    job = 'title = "Saltmarsh invented — ünïcode"\n\tkey = "25 mm"  # comment\n'
    run = make_run(rng, job_text=job)
    run.provenance = Provenance.start(
        job_text=job, input_files=[src], workers=3, backend="processes", scheduler="tcp://h:1"
    )
    run.provenance.finish()
    path = save(tmp_path / "out.h5", run)
    with h5py.File(path, "r") as f:
        p = f["provenance"]
        for key in (
            "lwrad_version", "start_time", "end_time", "host", "workers", "backend", "scheduler",
            "codata_edition", "python_version", "numpy_version", "numba_version", "h5py_version",
            "hdf5_version", "platform", "job_fingerprint", "caution",
        ):  # fmt: skip
            assert key in p.attrs, key
        assert p["job_text"].asstr()[()] == job  # verbatim
        assert p.attrs["workers"] == 3
        assert p.attrs["start_time"].endswith("Z") and "T" in p.attrs["start_time"]
        # SHA-256("abc") from the FIPS 180-2 example
        assert list(p["input_sha256"].asstr()[()]) == [
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
        ]
    back = load(path).provenance
    assert back.job_text == job and back.input_files == {str(src): sha256_file(src)}
    assert back.start_time <= back.end_time
    assert back.codata_edition == results.CODATA_EDITION


def test_fingerprint_depends_on_job_inputs_and_version(monkeypatch):
    a = job_fingerprint("job", {"f": "00"})
    assert a == job_fingerprint("job", {"f": "00"})
    assert a != job_fingerprint("job ", {"f": "00"})
    assert a != job_fingerprint("job", {"f": "01"})
    monkeypatch.setattr(results, "__version__", "999")
    assert a != job_fingerprint("job", {"f": "00"})
    assert hashlib.sha256(b"x").hexdigest() != a


# ----------------------------------------------------------------------------- safety


def test_crash_mid_write_leaves_nothing_finished(tmp_path, rng, monkeypatch):
    def boom(*args, **kwargs):
        raise RuntimeError("simulated crash")

    monkeypatch.setattr(results, "_write_case", boom)
    with pytest.raises(RuntimeError):
        save(tmp_path / "out.h5", make_run(rng))
    assert list(tmp_path.iterdir()) == []


def test_killed_writer_leaves_no_finished_file(tmp_path):
    # SIGKILL inside the writer: the final name never appears; the hidden temporary
    # file left behind is refused by load as unfinished.
    script = textwrap.dedent(
        f"""
        import os, signal, numpy as np
        from lwrad import results
        def die(*a, **k):
            os.kill(os.getpid(), signal.SIGKILL)
        results._write_case = die
        run = results.RunResult()
        case = results.Case("c", "none")
        case.set_axis("time", np.arange(3.0))
        run.add(case)
        results.save({str(tmp_path / "out.h5")!r}, run)
        """
    )
    proc = subprocess.run([sys.executable, "-c", script], capture_output=True, timeout=120)
    assert proc.returncode == -signal.SIGKILL
    assert not (tmp_path / "out.h5").exists()
    leftovers = list(tmp_path.iterdir())
    assert len(leftovers) == 1
    assert leftovers[0].name.startswith(".") and leftovers[0].name.endswith(".tmp")
    # HDF5 killed mid-write typically leaves a file its library cannot even open
    # (the reason checkpoints use one renamed file per chunk); either way it is refused.
    with pytest.raises(InputError, match="not a readable HDF5|not an lwrad result"):
        load(leftovers[0])


def test_file_mode_like_plain_open(tmp_path, rng):
    # the temporary file starts private (0600); the result gets the mode open() would give
    save(tmp_path / "out.h5", make_run(rng))
    (tmp_path / "plain").write_bytes(b"")
    assert (tmp_path / "out.h5").stat().st_mode == (tmp_path / "plain").stat().st_mode


def test_overwrite_refused_then_allowed(tmp_path, rng):
    path = tmp_path / "out.h5"
    save(path, make_run(rng))
    before = path.read_bytes()
    with pytest.raises(InputError, match="--force") as info:
        save(path, make_run(rng))
    assert str(path) in str(info.value)
    assert path.read_bytes() == before
    save(path, make_run(rng), overwrite=True)
    assert path.read_bytes() != before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out.h5"]


def test_unwritable_targets(tmp_path, monkeypatch):
    # Root ignores permission bits, so a chmod-based test would pass vacuously there;
    # these paths fail for every user.
    with pytest.raises(InputError, match="does not exist"):
        check_writable(tmp_path / "missing" / "out.h5")
    (tmp_path / "file").write_text("x")
    with pytest.raises(InputError, match="not a directory"):
        check_writable(tmp_path / "file" / "out.h5")
    with pytest.raises(InputError, match="is a directory"):
        check_writable(tmp_path)
    # The permission branch, with os.access answering as it does for a read-only directory.
    monkeypatch.setattr(results.os, "access", lambda *a, **k: False)
    with pytest.raises(InputError, match="not writable"):
        check_writable(tmp_path / "out.h5")


@pytest.mark.skipif(os.geteuid() == 0, reason="root ignores directory permissions")
def test_read_only_directory_real(tmp_path, rng):
    ro = tmp_path / "ro"
    ro.mkdir()
    ro.chmod(0o555)
    try:
        with pytest.raises(InputError, match="not writable"):
            save(ro / "out.h5", make_run(rng))
    finally:
        ro.chmod(0o755)


# ----------------------------------------------------------------------------- bad files


def test_load_rejects_bad_files(tmp_path, rng):
    with pytest.raises(InputError, match="no such file"):
        load(tmp_path / "nope.h5")
    text = tmp_path / "text.h5"
    text.write_text("not hdf5")
    with pytest.raises(InputError, match="not a readable HDF5"):
        load(text)
    foreign = tmp_path / "foreign.h5"
    with h5py.File(foreign, "w") as f:
        f["x"] = np.arange(3)
    with pytest.raises(InputError, match="not an lwrad result") as info:
        load(foreign)
    assert str(foreign) in str(info.value)

    good = save(tmp_path / "good.h5", make_run(rng))

    def tampered(name, edit):
        path = tmp_path / f"{name}.h5"
        path.write_bytes(good.read_bytes())
        with h5py.File(path, "r+") as f:
            edit(f)
        return path

    bad_unit = tampered(
        "unit", lambda f: f["cases/undulator/flux_density"].attrs.__setitem__("unit", "W")
    )
    with pytest.raises(InputError, match="dataset /cases/undulator/flux_density.*expected") as info:
        load(bad_unit)
    assert str(bad_unit) in str(info.value)
    no_unit = tampered(
        "nounit", lambda f: f["cases/thz_points/axes/time"].attrs.__delitem__("unit")
    )
    with pytest.raises(InputError, match="dataset /cases/thz_points/axes/time: no 'unit'"):
        load(no_unit)
    newer = tampered("newer", lambda f: f.attrs.__setitem__("format_version", 2))
    with pytest.raises(InputError, match="format_version"):
        load(newer)
    unfinished = tampered("unfinished", lambda f: f.attrs.__setitem__("complete", False))
    with pytest.raises(InputError, match="not marked complete"):
        load(unfinished)
    wrong_axis = tampered(
        "axis", lambda f: f["cases/undulator/flux"].attrs.__setitem__("axes", ["theta_x"])
    )
    with pytest.raises(InputError, match="dataset /cases/undulator/flux: axis"):
        load(wrong_axis)
    bad_spectra = tampered(
        "spectra",
        lambda f: f["cases/undulator/spectra/photon_energy"].attrs.__setitem__("unit", "keV"),
    )
    with pytest.raises(InputError, match="photon_energy") as info:
        load(bad_spectra)
    assert str(bad_spectra) in str(info.value)


def test_case_validation(rng):
    grid = AngularGrid([0.0, 1e-4], [0.0])
    case = Case.from_observer("c", grid)
    with pytest.raises(InputError, match="expected 'W/mrad\\^2'"):
        case.add_quantity("power_density", np.zeros((1, 2)), "W/mm^2", ("theta_y", "theta_x"))
    with pytest.raises(InputError, match="entries"):
        case.add_power_density(np.zeros((2, 2)))
    with pytest.raises(InputError, match="case name"):
        Case("a/b", "none")
    run = RunResult()
    run.add(case)
    with pytest.raises(InputError, match="exists already"):
        run.add(Case.from_observer("c", grid))


# ----------------------------------------------------------------------------- checkpoints


def chunk_payload(index):
    """Deterministic chunk data (seed = chunk index)."""
    r = np.random.default_rng(index)
    return {
        "flux_density": (r.normal(size=(4, 64, 64)), "ph/s/0.1%BW/mrad^2"),
        "index": (np.array([index]), "1"),
    }


def test_checkpoint_resume_semantics(tmp_path):
    out = tmp_path / "run.h5"
    fp = job_fingerprint("job A")
    cp = Checkpoint(out, fp)
    assert cp.done == [] and not cp.resumed
    for i in (0, 2, 5):
        cp.save_chunk(i, chunk_payload(i), attrs={"pixels": [i, i + 1]})
    cp.save_chunk("bend-1", FakeResult([10.0], np.ones((1, 1, 1, 3), complex)))
    with pytest.raises(InputError, match="--resume"):
        Checkpoint(out, fp)  # a checkpoint exists
    with pytest.raises(InputError, match="different job"):
        Checkpoint(out, job_fingerprint("job B"), resume=True)
    again = Checkpoint(out, fp, resume=True)
    assert again.resumed and again.done == [0, 2, 5, "bend-1"]
    assert again.is_done(2) and not again.is_done(1)
    for i in (0, 2, 5):
        got = again.load_chunk(i)
        for name, (values, unit) in chunk_payload(i).items():
            assert np.array_equal(got[name][0], values) and got[name][1] == unit
    assert again.load_chunk_attrs(5) == {"pixels": [5, 6]}
    assert isinstance(again.load_chunk("bend-1"), FakeResult)
    with pytest.raises(InputError, match="not stored"):
        again.load_chunk(1)
    # a chunk file of another job in the directory does not count
    other = Checkpoint(tmp_path / "other.h5", job_fingerprint("job B"))
    other.save_chunk(7, chunk_payload(7))
    os.replace(other._file(7), again._file(7))
    assert 7 not in again.done
    path = again.finalize(RunResult())
    assert path == out and load(out).cases == {}
    assert not again.directory.exists()
    # --force discards a checkpoint
    Checkpoint(tmp_path / "x.h5", fp).save_chunk(0, chunk_payload(0))
    assert Checkpoint(tmp_path / "x.h5", fp, overwrite=True).done == []


def test_checkpoint_refuses_existing_output_before_work(tmp_path, rng):
    out = save(tmp_path / "run.h5", make_run(rng))
    with pytest.raises(InputError, match="--force"):
        Checkpoint(out, "fp")
    with pytest.raises(InputError, match="does not exist"):
        Checkpoint(tmp_path / "no" / "run.h5", "fp")


_WRITER = """
import os, signal, sys, numpy as np
from lwrad import results
sys.path.insert(0, {here!r})
from test_results import chunk_payload
kill_in = {kill_in!r}
if kill_in is not None:
    write = results._write_dataset
    def write_then_die(group, name, *args, **kwargs):
        out = write(group, name, *args, **kwargs)
        if name == "index" and int(args[0][0]) == kill_in:  # data of this chunk half written
            os.kill(os.getpid(), signal.SIGKILL)
        return out
    results._write_dataset = write_then_die
cp = results.Checkpoint({out!r}, "fp-kill", resume=True)
for i in range({n}):
    if not cp.is_done(i):
        cp.save_chunk(i, chunk_payload(i))
"""


@pytest.mark.parametrize("kill_after, kill_in", [(1, None), (5, None), (4, 4)])
def test_sigkill_mid_run_then_resume(tmp_path, kill_after, kill_in):
    """A writer killed with SIGKILL leaves a resumable checkpoint.

    Either killed from outside at an arbitrary moment once ``kill_after`` chunks are
    stored, or (``kill_in``) from inside while chunk ``kill_in`` is being written, which
    leaves a half-written temporary file that must not count.
    """
    n = 10
    out = tmp_path / "run.h5"
    here = os.path.dirname(__file__)
    parts = tmp_path / "run.h5.parts"
    script = _WRITER.format(here=here, out=str(out), n=n, kill_in=kill_in)
    if kill_in is None:
        proc = subprocess.Popen(
            [sys.executable, "-c", script], stdout=subprocess.PIPE, stderr=subprocess.PIPE
        )
        deadline = time.monotonic() + 120
        while time.monotonic() < deadline and proc.poll() is None:
            if parts.exists() and len(list(parts.glob("chunk_*.h5"))) >= kill_after:
                break
            time.sleep(0.001)
        proc.send_signal(signal.SIGKILL)
        proc.communicate(timeout=60)
    else:
        proc = subprocess.run([sys.executable, "-c", script], capture_output=True, timeout=120)
        assert proc.returncode == -signal.SIGKILL, proc.stderr.decode()
        assert len(list(parts.glob(".*.tmp"))) == 1  # the chunk being written when killed
    cp = Checkpoint(out, "fp-kill", resume=True)
    done = cp.done
    assert len(done) >= kill_after and done == list(range(len(done)))
    if kill_in is not None:
        assert done == list(range(kill_in))
    assert not list(parts.glob(".*.tmp"))  # temporary leftovers cleared on reopen
    for i in done:
        got = cp.load_chunk(i)
        assert np.array_equal(got["flux_density"][0], chunk_payload(i)["flux_density"][0])
    # resume: only the missing chunks are computed, the assembly equals an uninterrupted run
    script = _WRITER.format(here=here, out=str(out), n=n, kill_in=None)
    proc = subprocess.run([sys.executable, "-c", script], capture_output=True, timeout=120)
    assert proc.returncode == 0, proc.stderr.decode()
    assert cp.done == list(range(n))
    total = sum(cp.load_chunk(i)["flux_density"][0] for i in range(n))
    assert np.array_equal(total, sum(chunk_payload(i)["flux_density"][0] for i in range(n)))


def test_chunk_payload_must_carry_units(tmp_path):
    cp = Checkpoint(tmp_path / "r.h5", "fp")
    with pytest.raises(InputError, match="unit"):
        cp.save_chunk(0, {"a": np.zeros(3)})
    with pytest.raises(InputError, match="chunk key"):
        cp.save_chunk("../evil", {"a": (np.zeros(3), "1")})
    assert cp.done == []
    assert json.loads((cp.directory / "checkpoint.json").read_text())["fingerprint"] == "fp"


# ----------------------------------------------------------------------------- with lwrad.radiation.Result


@pytest.mark.parametrize("kind", ["angular", "screen-incoherent"])
def test_real_result_round_trip(tmp_path, rng, monkeypatch, kind):
    from lwrad.constants import e
    from lwrad.observers import CircularAperture
    from lwrad.radiation import Result

    monkeypatch.setattr(results, "_result_class", lambda: Result)
    shape = (4, 3, 5)
    if kind == "angular":
        observer = AngularGrid(np.linspace(-2e-4, 2e-4, 5), np.linspace(-1e-4, 1e-4, 3))
        field = rng.normal(size=(*shape, 3)) + 1j * rng.normal(size=(*shape, 3))
        res = Result(
            np.linspace(1e3, 4e3, 4),
            observer,
            field=field,
            charge=e,
            diagnostics={"phase_step": 0.1},
        )
        aperture = CircularAperture(1e-4)
    else:  # an incoherent sum: intensity moments only, no field
        observer = Screen(20.0, np.linspace(-2e-3, 2e-3, 5), np.linspace(-1e-3, 1e-3, 3))
        moments = np.abs(rng.normal(size=(5, *shape)))
        res = Result(
            np.linspace(1e3, 4e3, 4), observer, moments=moments, charge=e, particles_per_result=1.0
        )
        aperture = None
    run = RunResult()
    run.add(Case.from_observer("study", observer)).add_spectra(res, 0.3, aperture=aperture)
    other = AngularGrid([0.0], [0.0])
    with pytest.raises(InputError, match="another observer"):
        Case.from_observer("other", other).add_spectra(res, 0.3)
    path = save(tmp_path / "out.h5", run)
    back = load(path)
    got = back.spectra
    assert isinstance(got, Result) and got.observer == observer
    assert np.array_equal(got.moments, res.moments) and np.array_equal(
        got.photon_energy, res.photon_energy
    )
    assert (got.field is None) == (res.field is None)
    if res.field is not None:
        assert np.array_equal(got.field, res.field)
    assert got.diagnostics == res.diagnostics
    # stored derived quantities are exactly the Result's own, and so is the rebuilt result's
    case = back.cases["study"]
    assert np.array_equal(case.flux_density.values, res.flux_density(0.3))
    assert np.array_equal(case.stokes.values, res.stokes(0.3))
    assert np.array_equal(case.flux.values, res.flux(0.3, aperture=aperture))
    assert np.array_equal(got.flux_density(0.3), res.flux_density(0.3))
    name = "field" if res.field is not None else "intensity_moments"
    with h5py.File(path, "r+") as f:
        f[f"cases/study/spectra/{name}"].attrs["unit"] = "V"
    with pytest.raises(InputError, match=f"dataset /cases/study/spectra/{name}: unit 'V'"):
        load(path)


# ----------------------------------------------------------------------------- structural fuzzing


def _inventory(path):
    objects, attributes = [], []

    def visit(name, obj):
        objects.append(name)
        attributes.extend((name, key) for key in obj.attrs)

    with h5py.File(path, "r") as f:
        attributes.extend(("/", key) for key in f.attrs)
        f.visititems(visit)
    return sorted(objects), sorted(attributes)


_JUNK = [
    0,
    -1,
    7.5,
    "",
    "junk",
    "not json {",
    np.arange(3),
    np.array(["a", "b"], dtype=object),
    b"\xff\xfe",
]


def test_load_fuzz_structure(tmp_path_factory, monkeypatch):
    """Randomly damaged files: load succeeds or raises InputError, never anything else.

    Seed: hypothesis' derandomized mode (fixed), 60 examples — enough to touch every
    dataset and attribute of the small file a few times.
    """
    from hypothesis import HealthCheck, given, settings
    from hypothesis import strategies as st

    monkeypatch.setattr(results, "_result_class", lambda: FakeResult)
    base_dir = tmp_path_factory.mktemp("fuzz")
    good = save(base_dir / "good.h5", make_run(np.random.default_rng(5)))
    objects, attributes = _inventory(good)
    blob = good.read_bytes()
    actions = st.one_of(
        st.tuples(st.just("del_attr"), st.sampled_from(attributes), st.just(None)),
        st.tuples(
            st.just("set_attr"), st.sampled_from(attributes), st.sampled_from(range(len(_JUNK)))
        ),
        st.tuples(st.just("del_obj"), st.sampled_from(objects), st.just(None)),
        st.tuples(st.just("to_group"), st.sampled_from(objects), st.just(None)),
    )

    @settings(
        max_examples=60, derandomize=True, deadline=None, suppress_health_check=list(HealthCheck)
    )
    @given(st.lists(actions, min_size=1, max_size=3))
    def check(edits):
        path = base_dir / "damaged.h5"
        path.write_bytes(blob)
        with h5py.File(path, "r+") as f:
            for action, target, junk in edits:
                if action in ("del_attr", "set_attr"):
                    name, key = target
                    if name not in f:
                        continue
                    obj = f[name]
                    if action == "del_attr" and key in obj.attrs:
                        del obj.attrs[key]
                    elif action == "set_attr":
                        value = _JUNK[junk]
                        obj.attrs[key] = value if not isinstance(value, bytes) else np.void(value)
                elif target in f:
                    del f[target]
                    if action == "to_group":
                        f.create_group(target)
        try:
            load(path)
        except InputError as exc:
            assert str(path) in str(exc)

    check()


def test_run_accessors_refuse_ambiguity(rng):
    run = make_run(rng)
    grid = AngularGrid(np.linspace(-1e-4, 1e-4, 3), [0.0])
    with pytest.raises(InputError, match="full observer grid"):
        Case.from_observer("chunk", grid.take([0, 1]))
    second = run.add(Case.from_observer("second", grid))
    second.add_power_density(np.ones((1, 3)))
    with pytest.raises(
        InputError, match=r"several cases hold power_density: \['screen_power', 'second'\]"
    ):
        run.power_density  # noqa: B018
    assert run.spectra is run.cases["undulator"].spectra
    assert RunResult().spectra is None

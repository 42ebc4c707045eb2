"""Property-based fuzzing of the readers: whatever the bytes, only InputError may escape.

Sizes follow ``lwrad.testing.scaled``: 200 examples per property in the quick run, 10000 with
LWRAD_FULL_VALIDATION=1. Hypothesis derandomises nothing here; a failure prints the example and
the seed to reproduce it.
"""

import math
from pathlib import Path

import h5py
import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import lwrad
from lwrad.constants import c
from lwrad.io import read_trajectory, write_trajectory
from lwrad.testing import scaled

pytestmark = pytest.mark.validation

FUZZ = settings(
    max_examples=scaled(200, 10000),
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large],
    database=None,
)


def arc(n=12, rho=7.0, gamma=4892.0):
    """Uniform circular motion (exact): the valid file every mutation starts from."""
    beta = math.sqrt((gamma - 1) * (gamma + 1)) / gamma
    t = np.linspace(0.0, 0.1 / (beta * c), n)
    phi = beta * c * t / rho
    zero = np.zeros(n)
    r = np.column_stack([rho * (1 - np.cos(phi)), zero, rho * np.sin(phi)])
    b = beta * np.column_stack([np.sin(phi), zero, np.cos(phi)])
    return lwrad.Trajectory(t, r, b, gamma=np.full(n, gamma))


def outcome(path, **options):
    """Read and classify: a valid Trajectory/Bunch, or an InputError with a message. Anything else fails."""
    try:
        obj = read_trajectory(path, **options)
    except lwrad.InputError as exc:
        assert str(exc), "an InputError must carry a message"
        return "error"
    members = [obj] if isinstance(obj, lwrad.Trajectory) else list(obj)
    for tr in members:
        for arr in (tr.t, tr.r, tr.beta, tr.beta_dot, tr.gamma):
            assert np.all(np.isfinite(arr)), "a non-finite value was accepted"
        assert np.all(np.einsum("ij,ij->i", tr.beta, tr.beta) < 1.0)
        assert np.all(np.diff(tr.t) > 0)
    return "ok"


@st.composite
def mutations(draw, data: bytes):
    """Byte-level damage: overwrite, delete, insert, duplicate and truncate."""
    buf = bytearray(data)
    for _ in range(draw(st.integers(1, 8))):
        kind = draw(st.sampled_from(["flip", "delete", "insert", "truncate", "duplicate"]))
        if not buf:
            break
        at = draw(st.integers(0, len(buf) - 1))
        if kind == "flip":
            buf[at] = draw(st.integers(0, 255))
        elif kind == "delete":
            del buf[at : at + draw(st.integers(1, 64))]
        elif kind == "insert":
            buf[at:at] = draw(st.binary(min_size=1, max_size=32))
        elif kind == "truncate":
            del buf[at:]
        else:
            piece = bytes(buf[at : at + draw(st.integers(1, 64))])
            buf[at:at] = piece
    return bytes(buf)


# -- text ----------------------------------------------------------------------------------------
NAMES = [
    "t", "x", "y", "z", "s", "beta_x", "beta_y", "beta_z", "beta_dot_x", "beta_dot_y", "beta_dot_z",
    "gamma", "px", "py", "pz", "xp", "yp", "energy", "delta", "q", "", "t t",
]  # fmt: skip
UNITS = [
    "",
    "[m]",
    "[mm]",
    "[ns]",
    "[MeV/c]",
    "[eV/c]",
    "[mrad]",
    "[GeV]",
    "[1/s]",
    "[furlong]",
    "[",
    "[]",
]
TOKENS = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.floats(-1.0, 1.0).map(repr),
    st.integers(-(10**30), 10**30).map(str),
    st.sampled_from(["nan", "inf", "-inf", "", "abc", "1e999", "0x10", "1_0", "#", "1,2", "\t"]),
    st.text(max_size=6),
)


@st.composite
def text_files(draw):
    delimiter = draw(st.sampled_from([",", " ", "\t", ";"]))
    header = [
        draw(st.sampled_from(NAMES)) + draw(st.sampled_from(UNITS))
        for _ in range(draw(st.integers(0, 10)))
    ]
    lines = []
    for _ in range(draw(st.integers(0, 3))):
        lines.append(
            draw(st.sampled_from(["# particle: electron", "# particle: muon?", "# charge: 1", "# mass: x",
                                  "# reference_energy: 2.5 GeV", "# reference_energy: cheese", "# just text"]))
        )  # fmt: skip
    lines.append(delimiter.join(header))
    for _ in range(draw(st.integers(0, 8))):
        width = len(header) + draw(st.sampled_from([0, 0, 0, -1, 1]))
        lines.append(delimiter.join(draw(TOKENS) for _ in range(max(width, 0))))
    return "\n".join(lines)


VALID_HEADERS = [
    "t,x,y,z,beta_x,beta_y,beta_z",
    "t[ns],x[mm],y[mm],z[mm],px,py,pz",
    "t,x,y,z,beta_x,beta_y,beta_z,beta_dot_x,beta_dot_y,beta_dot_z,gamma",
    "z,x,xp[mrad],y,yp,energy[GeV]",
    "s,x,xp,y,yp,gamma",
    "s,x,y,z,gamma",
    "z,x,xp,y,yp,delta",
]


@st.composite
def near_valid_text(draw):
    """Well-formed files with plausible numbers, a few tokens replaced by bad ones: both outcomes occur."""
    header = draw(st.sampled_from(VALID_HEADERS))
    names = header.split(",")
    n = draw(st.integers(1, 8))
    steps = draw(st.lists(st.floats(1e-3, 1.0), min_size=n, max_size=n))
    first = np.cumsum(steps)
    rows = []
    for i in range(n):
        row = [repr(float(first[i]))]
        for name in names[1:]:
            if name.startswith(("gamma", "energy")):
                row.append(repr(draw(st.floats(0.5, 1e5))))
            elif name.startswith("p"):
                row.append(repr(draw(st.floats(-1e4, 1e4))))
            else:
                row.append(repr(draw(st.floats(-0.7, 0.7))))
        rows.append(row)
    for _ in range(draw(st.integers(0, 2))):
        i, j = draw(st.integers(0, n - 1)), draw(st.integers(0, len(names) - 1))
        rows[i][j] = draw(TOKENS)
    return "\n".join([header] + [",".join(r) for r in rows]) + "\n"


@pytest.fixture(scope="module")
def workdir(tmp_path_factory):
    return tmp_path_factory.mktemp("fuzz")


@FUZZ
@given(
    text=st.one_of(text_files(), near_valid_text()),
    reference=st.one_of(st.none(), st.floats(allow_nan=True), st.just("2.5 GeV")),
)
def test_text_structured_inputs(workdir, text, reference):
    path = workdir / "fuzz.csv"
    path.write_bytes(
        text.encode("utf-8", "surrogatepass")
    )  # lone surrogates give invalid UTF-8: also fuzz
    options = {} if reference is None else {"reference_energy": reference}
    outcome(path, **options)


@pytest.fixture(scope="module")
def valid_text(tmp_path_factory):
    d = tmp_path_factory.mktemp("valid_text")
    tr = arc()
    files = {
        form: write_trajectory(tr, d / f"{form}.csv", form=form, length_unit="mm")
        for form in ("time", "momentum", "path")
    }
    return {form: Path(path).read_bytes() for form, path in files.items()}


@FUZZ
@given(data=st.data(), form=st.sampled_from(["time", "momentum", "path"]))
def test_text_damaged_bytes(workdir, valid_text, data, form):
    damaged = data.draw(mutations(valid_text[form]))
    path = workdir / "damaged.csv"
    path.write_bytes(damaged)
    outcome(path)


# -- HDF5 ----------------------------------------------------------------------------------------
@pytest.fixture(scope="module")
def valid_hdf5(tmp_path_factory):
    d = tmp_path_factory.mktemp("valid_h5")
    single = write_trajectory(arc(), d / "one.h5")
    bunch = write_trajectory(lwrad.Bunch([arc(), arc(8)], weights=[1, 2]), d / "two.h5")
    return {"single": Path(single).read_bytes(), "bunch": Path(bunch).read_bytes()}


@FUZZ
@given(data=st.data(), which=st.sampled_from(["single", "bunch"]))
def test_hdf5_damaged_bytes(workdir, valid_hdf5, data, which):
    original = valid_hdf5[which]
    # damage concentrated in the first 4 kB, where superblock and object headers live, half the time
    if data.draw(st.booleans()):
        head = data.draw(mutations(original[:4096]))
        damaged = head + original[4096:]
    else:
        damaged = data.draw(mutations(original))
    path = workdir / "damaged.h5"
    path.write_bytes(damaged)
    outcome(path)


DTYPES = ["f8", "f4", "i4", "u1", "c16", "S3", "bool"]


@st.composite
def hdf5_layouts(draw):
    spec = {"root": draw(st.sampled_from(["lwrad_trajectory", "other", None]))}
    spec["version"] = draw(st.sampled_from([1, 1, 2, "1", None, 1.5]))
    spec["kind"] = draw(st.sampled_from(["trajectory", "trajectory", "bunch", "x", None]))
    n = draw(st.integers(0, 6))
    spec["datasets"] = {}
    for name in ("t", "r", "beta", "beta_dot", "gamma", "weights"):
        if draw(st.booleans()) or name in ("t", "r", "beta"):
            shape = draw(st.sampled_from([(n,), (n, 3), (n, 2), (), (n + 1,), (n, 3, 1)]))
            unit = draw(st.sampled_from(["s", "m", "1", "1/s", "ms", None, b"s"]))
            values = draw(st.sampled_from(["ramp", "zeros", "nan", "big", "random"]))
            spec["datasets"][name] = (shape, draw(st.sampled_from(DTYPES)), unit, values)
    spec["charge"] = draw(st.sampled_from([-1.6e-19, 0.0, float("nan"), "x", None]))
    spec["mass"] = draw(st.sampled_from([9.1e-31, -1.0, None, float("inf")]))
    return spec


def _values(shape, kind, rng):
    size = int(np.prod(shape)) if shape else 1
    if kind == "ramp":
        v = np.arange(size, dtype=float) * 1e-12
    elif kind == "zeros":
        v = np.zeros(size)
    elif kind == "nan":
        v = np.full(size, np.nan)
    elif kind == "big":
        v = np.full(size, 1e300)
    else:
        v = rng.uniform(-1, 1, size)
    return v.reshape(shape)


@FUZZ
@given(spec=hdf5_layouts())
def test_hdf5_structured_layouts(workdir, spec):
    rng = np.random.default_rng(20261202)  # seed stated; values only fill the shapes
    path = workdir / "layout.h5"
    with h5py.File(path, "w") as f:
        if spec["root"] is not None:
            g = f.create_group(spec["root"])
            for key in ("version", "kind", "charge", "mass"):
                value = spec[key]
                if value is not None:
                    g.attrs["format_version" if key == "version" else key] = value
            target = g
            if spec["kind"] == "bunch":
                target = g.create_group("particles").create_group("0")
                for key in ("charge", "mass"):
                    if spec[key] is not None:
                        target.attrs[key] = spec[key]
            for name, (shape, dtype, unit, kind) in spec["datasets"].items():
                values = _values(shape, kind, rng)
                if dtype == "S3":
                    data = np.full(shape, b"abc", dtype="S3")
                elif dtype == "c16":
                    data = values.astype(complex)
                else:
                    with np.errstate(invalid="ignore", over="ignore"):
                        data = values.astype(dtype) if dtype != "bool" else values > 0
                ds = (g if name == "weights" else target).create_dataset(name, data=data)
                if unit is not None:
                    ds.attrs["unit"] = unit
    outcome(path)


# -- npz -----------------------------------------------------------------------------------------
@pytest.fixture(scope="module")
def valid_npz(tmp_path_factory):
    d = tmp_path_factory.mktemp("valid_npz")
    return Path(write_trajectory(arc(), d / "a.npz")).read_bytes()


@FUZZ
@given(data=st.data())
def test_npz_damaged_bytes(workdir, valid_npz, data):
    path = workdir / "damaged.npz"
    path.write_bytes(data.draw(mutations(valid_npz)))
    outcome(path)


@FUZZ
@given(
    arrays=st.dictionaries(
        st.sampled_from(
            ["t", "r", "beta", "beta_dot", "gamma", "charge", "mass", "format", "extra"]
        ),
        st.tuples(
            st.sampled_from([(4,), (4, 3), (3,), (), (4, 2)]),
            st.sampled_from(["ramp", "zeros", "nan", "random"]),
        ),
        max_size=8,
    )
)
def test_npz_structured_archives(workdir, arrays):
    rng = np.random.default_rng(20261202)  # seed stated
    path = workdir / "layout.npz"
    with open(path, "wb") as fh:
        np.savez(fh, **{name: _values(shape, kind, rng) for name, (shape, kind) in arrays.items()})
    outcome(path)


# -- any bytes at all ----------------------------------------------------------------------------
@FUZZ
@given(
    blob=st.binary(max_size=2048),
    prefix=st.sampled_from([b"", b"\x89HDF\r\n\x1a\n", b"PK\x03\x04", b"t,x,y,z\n"]),
    suffix=st.sampled_from([".csv", ".h5", ".npz", ".bin", ""]),
)
def test_arbitrary_bytes_under_any_extension(workdir, blob, prefix, suffix):
    path = workdir / f"blob{suffix}"
    path.write_bytes(prefix + blob)
    outcome(path)

"""lwrad's own HDF5 layout for trajectories and bunches.

Layout (format_version 1)
-------------------------
One particle::

    /lwrad_trajectory                 group
        @format_version = 1           int; a reader refuses versions it does not know
        @kind = "trajectory"
        @charge                       float, C
        @mass                         float, kg
        t          (N,)    float64    @unit = "s"
        r          (N, 3)  float64    @unit = "m"
        beta       (N, 3)  float64    @unit = "1"
        beta_dot   (N, 3)  float64    @unit = "1/s"
        gamma      (N,)    float64    @unit = "1"

Many particles (a :class:`~lwrad.trajectory.Bunch`)::

    /lwrad_trajectory
        @format_version = 1
        @kind = "bunch"
        @n_particles = M
        weights    (M,)    float64    @unit = "1"   (real particles per member)
        particles/0, particles/1, …, particles/<M-1>
                   each a group laid out like the one-particle group above
                   (@charge, @mass, t, r, beta, beta_dot, gamma), each with
                   its own N

Every dataset's ``unit`` attribute is checked on reading; a missing or wrong
unit, a wrong shape or dtype, a non-finite value, non-increasing ``t`` or
|beta| ≥ 1 is an :class:`~lwrad.errors.InputError` naming the dataset.
Files are written atomically (temporary file in the same directory, then a
rename) and an existing file is only replaced with ``overwrite=True``.

For developers: to extend the layout, add datasets with a ``unit``
attribute and bump ``FORMAT_VERSION`` only when an old reader would
misread the new file; readers ignore datasets they do not know.
"""

from __future__ import annotations

import os

import numpy as np

from lwrad.errors import InputError
from lwrad.io._common import (
    atomic_write,
    build,
    check_readable,
    check_samples,
    foreign_errors,
    is_hdf5_head,
)
from lwrad.trajectory import Bunch, Trajectory

__all__ = ["FORMAT_VERSION", "GROUP", "DATASETS", "sniff", "read", "write"]

FORMAT_VERSION = 1
GROUP = "lwrad_trajectory"
#: dataset → (shape after the sample axis, unit attribute, required)
DATASETS: dict[str, tuple[tuple[int, ...], str, bool]] = {
    "t": ((), "s", True),
    "r": ((3,), "m", True),
    "beta": ((3,), "1", True),
    "beta_dot": ((3,), "1/s", False),
    "gamma": ((), "1", False),
}


def sniff(path, head: bytes) -> bool:
    """True for an HDF5 file with a ``/lwrad_trajectory`` group."""
    if not is_hdf5_head(head):
        return False
    try:
        import h5py

        with h5py.File(path, "r") as f:
            return GROUP in f
    except Exception:  # noqa: BLE001 - a sniffer answers, it never raises
        return False


def _text_attr(obj, name):
    value = obj.attrs.get(name)
    if isinstance(value, bytes):
        value = value.decode("utf-8", "replace")
    if isinstance(value, np.ndarray) and value.shape == ():
        value = value[()]
    return value


def _number_attr(group, name, source):
    value = group.attrs.get(name)
    try:
        number = float(np.asarray(value, dtype=float).reshape(()))
    except (TypeError, ValueError):
        raise InputError(
            f"attribute {name!r} must be a number, got {value!r}",
            source=source,
            location=f"group {group.name}",
        ) from None
    return number


def _dataset(group, name, source):
    import h5py

    tail, unit, required = DATASETS[name]
    where = f"dataset {group.name.rstrip('/')}/{name}"
    obj = group.get(name)
    if obj is None:
        if required:
            raise InputError("missing dataset", source=source, location=where)
        return None
    if not isinstance(obj, h5py.Dataset):
        raise InputError("must be a dataset, found a group", source=source, location=where)
    if obj.dtype.kind not in "fiu":
        raise InputError(
            f"must hold real numbers, found dtype {obj.dtype}", source=source, location=where
        )
    found = _text_attr(obj, "unit")
    if found != unit:
        raise InputError(
            f"unit attribute must be {unit!r}, found {found!r}", source=source, location=where
        )
    if obj.ndim != 1 + len(tail) or obj.shape[1:] != tail:
        want = "(N,)" if not tail else f"(N, {tail[0]})"
        raise InputError(f"shape must be {want}, found {obj.shape}", source=source, location=where)
    return np.asarray(obj[()], dtype=np.float64)


def _read_one(group, source) -> Trajectory:
    arrays = {name: _dataset(group, name, source) for name in DATASETS}
    n = arrays["t"].shape[0]
    for name, arr in arrays.items():
        if arr is not None and arr.shape[0] != n:
            raise InputError(
                f"{arr.shape[0]} samples but t has {n}",
                source=source,
                location=f"dataset {group.name}/{name}",
            )

    def locate(name, i):
        return f"dataset {group.name}/{name}", f"sample {i}"

    check_samples({k: v for k, v in arrays.items() if v is not None}, locate, source)
    gamma = arrays["gamma"]
    if gamma is not None and np.any(gamma < 1.0):
        raise InputError("gamma below 1", source=source, location=f"dataset {group.name}/gamma")
    for attr in ("charge", "mass"):
        if attr not in group.attrs:
            raise InputError(
                f"missing attribute {attr!r}", source=source, location=f"group {group.name}"
            )
    return build(
        Trajectory,
        source,
        location=f"group {group.name}",
        t=arrays["t"],
        r=arrays["r"],
        beta=arrays["beta"],
        beta_dot=arrays["beta_dot"],
        gamma=gamma,
        charge=_number_attr(group, "charge", source),
        mass=_number_attr(group, "mass", source),
        source=source,
    )


def read(path, *, particle_id: int | None = None, **unknown):
    """Read lwrad's HDF5 layout (see the module docstring).

    Parameters
    ----------
    path : str or os.PathLike
    particle_id : int, optional
        For a bunch file: read only member ``particles/<particle_id>``.

    Returns
    -------
    Trajectory or Bunch
    """
    p = check_readable(os.fspath(path))
    if unknown:
        raise InputError(
            f"unknown option(s) {', '.join(sorted(unknown))} for lwrad HDF5; known: particle_id",
            source=p,
        )
    import h5py

    with foreign_errors(p, what="not a readable HDF5 file"):
        fh = h5py.File(p, "r")
    with fh, foreign_errors(p, what="damaged HDF5 file"):
        root = fh.get(GROUP)
        if not isinstance(root, h5py.Group):
            raise InputError(f"no /{GROUP} group: not an lwrad trajectory file", source=p)
        version = root.attrs.get("format_version")
        if isinstance(version, np.generic):
            version = version.item()
        try:
            version_ok = int(np.asarray(version).reshape(())) == FORMAT_VERSION
        except (TypeError, ValueError):
            version_ok = False
        if not version_ok:
            raise InputError(
                f"format_version {version!r} is not {FORMAT_VERSION} (the version this lwrad reads)",
                source=p,
                location=f"group /{GROUP}",
            )
        kind = _text_attr(root, "kind")
        if kind == "trajectory":
            if particle_id is not None:
                raise InputError(
                    "particle_id applies to bunch files only",
                    source=p,
                    location="option particle_id",
                )
            return _read_one(root, p)
        if kind != "bunch":
            raise InputError(
                f"attribute kind must be 'trajectory' or 'bunch', found {kind!r}",
                source=p,
                location=f"group /{GROUP}",
            )
        particles = root.get("particles")
        if not isinstance(particles, h5py.Group):
            raise InputError("missing group", source=p, location=f"group /{GROUP}/particles")
        n_particles = len(particles)
        names = [str(i) for i in range(n_particles)]
        if sorted(particles.keys(), key=lambda k: (len(k), k)) != names:
            raise InputError(
                "members must be named 0, 1, …, M-1", source=p, location=f"group /{GROUP}/particles"
            )
        if n_particles == 0:
            raise InputError(
                "the bunch has no particles", source=p, location=f"group /{GROUP}/particles"
            )
        if particle_id is not None:
            key = str(particle_id)
            if key not in particles:
                raise InputError(
                    f"no particle {particle_id!r}; the file has 0..{n_particles - 1}",
                    source=p,
                    location="option particle_id",
                )
            return _read_one(particles[key], p)
        trajectories = []
        for name in names:
            member = particles[name]
            if not isinstance(member, h5py.Group):
                raise InputError("must be a group", source=p, location=f"group {member.name}")
            trajectories.append(_read_one(member, p))
        wobj = root.get("weights")
        weights = None
        if wobj is not None:
            if (
                not isinstance(wobj, h5py.Dataset)
                or wobj.dtype.kind not in "fiu"
                or wobj.shape != (n_particles,)
            ):
                raise InputError(
                    f"weights must be a numeric dataset of shape ({n_particles},)",
                    source=p,
                    location=f"dataset /{GROUP}/weights",
                )
            if _text_attr(wobj, "unit") != "1":
                raise InputError(
                    "unit attribute must be '1'", source=p, location=f"dataset /{GROUP}/weights"
                )
            weights = np.asarray(wobj[()], dtype=float)
        return build(
            Bunch,
            p,
            location=f"dataset /{GROUP}/weights",
            trajectories=trajectories,
            weights=weights,
            source=p,
        )


def _write_one(group, tr: Trajectory):
    group.attrs["charge"] = float(tr.charge)
    group.attrs["mass"] = float(tr.mass)
    for name, data in (
        ("t", tr.t),
        ("r", tr.r),
        ("beta", tr.beta),
        ("beta_dot", tr.beta_dot),
        ("gamma", tr.gamma),
    ):
        ds = group.create_dataset(name, data=np.asarray(data, dtype=np.float64))
        ds.attrs["unit"] = DATASETS[name][1]


def write(obj, path, *, overwrite: bool = False, **unknown) -> str:
    """Write a Trajectory or Bunch in lwrad's HDF5 layout, atomically.

    Parameters
    ----------
    obj : Trajectory or Bunch
    path : str or os.PathLike
    overwrite : bool
        Replace an existing file.

    Returns
    -------
    str
        The path written.
    """
    p = os.fspath(path)
    if unknown:
        raise InputError(f"unknown option(s) {', '.join(sorted(unknown))} for lwrad HDF5", source=p)
    import h5py

    def _write(tmp):
        with h5py.File(tmp, "w") as fh:
            root = fh.create_group(GROUP)
            root.attrs["format_version"] = FORMAT_VERSION
            if isinstance(obj, Trajectory):
                root.attrs["kind"] = "trajectory"
                _write_one(root, obj)
                return
            root.attrs["kind"] = "bunch"
            root.attrs["n_particles"] = len(obj)
            w = root.create_dataset("weights", data=np.asarray(obj.weights, dtype=np.float64))
            w.attrs["unit"] = "1"
            particles = root.create_group("particles")
            for i, tr in enumerate(obj):
                _write_one(particles.create_group(str(i)), tr)

    return atomic_write(p, _write, overwrite=overwrite)

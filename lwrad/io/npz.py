"""NumPy ``.npz`` archives holding one trajectory, in SI.

Arrays (names fixed, units implied, SI as in :mod:`lwrad.trajectory`):

==========  =======  ========  =========
name        shape    unit      required
==========  =======  ========  =========
t           (N,)     s         yes
r           (N, 3)   m         yes
beta        (N, 3)   1         yes
beta_dot    (N, 3)   1/s       no (derived when absent)
gamma       (N,)     1         no (from beta when absent)
charge      ()       C         no (electron)
mass        ()       kg        no (electron)
format      ()       text      no; ``"lwrad-trajectory-npz 1"`` when written by lwrad
==========  =======  ========  =========

Other names are refused (a misspelt ``beta_dot`` would otherwise be
dropped silently). Archives are opened with ``allow_pickle=False``: an
object array is an :class:`~lwrad.errors.InputError`, never code run.
"""

from __future__ import annotations

import os

import numpy as np

from lwrad.errors import InputError
from lwrad.io._common import (
    ZIP_SIGNATURES,
    atomic_write,
    build,
    check_readable,
    check_samples,
    foreign_errors,
    resolve_particle,
)
from lwrad.trajectory import Bunch, Trajectory

__all__ = ["ARRAYS", "FORMAT_TAG", "sniff", "read", "write"]

FORMAT_TAG = "lwrad-trajectory-npz 1"
#: name → (shape after the sample axis or None for a scalar, required)
ARRAYS: dict[str, tuple[tuple[int, ...] | None, bool]] = {
    "t": ((), True),
    "r": ((3,), True),
    "beta": ((3,), True),
    "beta_dot": ((3,), False),
    "gamma": ((), False),
    "charge": (None, False),
    "mass": (None, False),
}


def sniff(path, head: bytes) -> bool:
    """True for a zip archive (what ``numpy.savez`` writes)."""
    return head[:4] in ZIP_SIGNATURES


def read(path, *, particle=None, **unknown) -> Trajectory:
    """Read an ``.npz`` trajectory (see the module docstring).

    Parameters
    ----------
    path : str or os.PathLike
    particle : str or (float, float), optional
        Must agree with ``charge``/``mass`` in the archive when both are given.

    Returns
    -------
    Trajectory
    """
    p = check_readable(os.fspath(path))
    if unknown:
        raise InputError(
            f"unknown option(s) {', '.join(sorted(unknown))} for .npz; known: particle", source=p
        )
    arrays = {}
    # the file is opened here, not by np.load, so it is closed even when the archive is damaged
    with foreign_errors(p, what="not a readable .npz archive"), open(p, "rb") as fh:
        with np.load(fh, allow_pickle=False) as archive:
            names = list(archive.files)
            extra = sorted(set(names) - set(ARRAYS) - {"format"})
            if extra:
                raise InputError(
                    f"unknown array(s) {', '.join(extra)}; expected {', '.join(ARRAYS)}",
                    source=p,
                    location=f"array {extra[0]}",
                )
            for name in names:
                with foreign_errors(p, location=f"array {name}", what="cannot read the array"):
                    arrays[name] = archive[name]
    if "format" in arrays:
        tag = arrays.pop("format")
        if tag.shape != () or tag.dtype.kind != "U" or str(tag) != FORMAT_TAG:
            raise InputError(
                f"format tag must be {FORMAT_TAG!r}, found {tag!r}",
                source=p,
                location="array format",
            )
    values = {}
    for name, (tail, required) in ARRAYS.items():
        if name not in arrays:
            if required:
                raise InputError("missing array", source=p, location=f"array {name}")
            continue
        arr = arrays[name]
        if arr.dtype.kind not in "fiu":
            raise InputError(
                f"must hold real numbers, found dtype {arr.dtype}",
                source=p,
                location=f"array {name}",
            )
        if tail is None:
            if arr.shape != ():
                raise InputError(
                    f"must be a scalar, found shape {arr.shape}", source=p, location=f"array {name}"
                )
        elif arr.ndim != 1 + len(tail) or arr.shape[1:] != tail:
            want = "(N,)" if not tail else "(N, 3)"
            raise InputError(
                f"shape must be {want}, found {arr.shape}", source=p, location=f"array {name}"
            )
        values[name] = np.asarray(arr, dtype=np.float64)
    n = values["t"].shape[0]
    for name, arr in values.items():
        if ARRAYS[name][0] is not None and arr.shape[0] != n:
            raise InputError(
                f"{arr.shape[0]} samples but t has {n}", source=p, location=f"array {name}"
            )
    check_samples(
        {k: v for k, v in values.items() if ARRAYS[k][0] is not None},
        lambda name, i: (f"array {name}", f"sample {i}"),
        p,
    )
    charge, mass = resolve_particle(
        particle,
        charge=float(values["charge"]) if "charge" in values else None,
        mass=float(values["mass"]) if "mass" in values else None,
        source=p,
    )
    return build(
        Trajectory,
        p,
        t=values["t"],
        r=values["r"],
        beta=values["beta"],
        beta_dot=values.get("beta_dot"),
        gamma=values.get("gamma"),
        charge=charge,
        mass=mass,
        source=p,
    )


def write(obj, path, *, overwrite: bool = False, **unknown) -> str:
    """Write one trajectory as an uncompressed ``.npz`` archive, atomically.

    Parameters
    ----------
    obj : Trajectory (or a Bunch of one)
    path : str or os.PathLike
    overwrite : bool
        Replace an existing file.
    """
    p = os.fspath(path)
    if unknown:
        raise InputError(f"unknown option(s) {', '.join(sorted(unknown))} for .npz", source=p)
    if isinstance(obj, Bunch):
        if len(obj) != 1:
            raise InputError(
                "an .npz file holds one trajectory; use HDF5 or openPMD for a bunch", source=p
            )
        obj = obj[0]
    arrays = {
        "format": np.array(FORMAT_TAG),
        "t": obj.t,
        "r": obj.r,
        "beta": obj.beta,
        "beta_dot": obj.beta_dot,
        "gamma": obj.gamma,
        "charge": np.float64(obj.charge),
        "mass": np.float64(obj.mass),
    }

    def _write(tmp):
        with open(tmp, "wb") as fh:
            np.savez(fh, **arrays)

    return atomic_write(p, _write, overwrite=overwrite)

"""Helpers shared by the trajectory readers and writers (private).

Everything two formats would otherwise repeat lives here: opening a file
for sniffing, atomic writes that never overwrite by accident, the particle
(charge, mass) choice, the exact kinematics from momentum, per-sample checks
that name the offending line or dataset, and the conversion of foreign
exceptions into :class:`~lwrad.errors.InputError`.
"""

from __future__ import annotations

import contextlib
import os
import zipfile
import zlib
from collections.abc import Callable

import numpy as np

from lwrad.atomic import atomic_write
from lwrad.constants import particle_properties
from lwrad.errors import InputError

__all__ = [
    "HDF5_SIGNATURE",
    "ZIP_SIGNATURES",
    "read_head",
    "is_hdf5_head",
    "check_readable",
    "atomic_write",
    "foreign_errors",
    "resolve_particle",
    "kinematics_from_momentum",
    "check_samples",
    "build",
]

#: The HDF5 superblock signature; it may sit at offset 0, 512, 1024, 2048, …
HDF5_SIGNATURE = b"\x89HDF\r\n\x1a\n"
#: Local-file header and empty-archive signatures of a zip file (``.npz``).
ZIP_SIGNATURES = (b"PK\x03\x04", b"PK\x05\x06")


def check_readable(path) -> str:
    """Return ``path`` as a string if it names a readable, non-empty regular file."""
    p = os.fspath(path)
    if not os.path.exists(p):
        raise InputError("no such file", source=p)
    if not os.path.isfile(p):
        raise InputError("not a regular file", source=p)
    if os.path.getsize(p) == 0:
        raise InputError("the file is empty", source=p)
    return p


def read_head(path, n_bytes: int = 4096) -> bytes:
    """The first ``n_bytes`` of a file (fewer if it is shorter)."""
    try:
        with open(path, "rb") as fh:
            return fh.read(n_bytes)
    except OSError as exc:
        raise InputError(f"cannot read the file: {exc.strerror or exc}", source=str(path)) from None


def is_hdf5_head(head: bytes) -> bool:
    """True if the HDF5 signature is at offset 0 or at a user-block offset (512·2^k)."""
    if head.startswith(HDF5_SIGNATURE):
        return True
    offset = 512
    while offset + len(HDF5_SIGNATURE) <= len(head):
        if head[offset : offset + len(HDF5_SIGNATURE)] == HDF5_SIGNATURE:
            return True
        offset *= 2
    return False


# Exceptions that h5py, numpy, zipfile and openpmd-api raise for a damaged or
# unexpected file. They are turned into InputError at the reader's edge; an
# InputError raised on purpose passes through unchanged.
_FOREIGN = (
    OSError,
    KeyError,
    RuntimeError,
    ValueError,
    TypeError,
    IndexError,
    EOFError,
    AttributeError,
    zipfile.BadZipFile,
    zlib.error,
)


@contextlib.contextmanager
def foreign_errors(
    source, location: str | None = None, what: str = "cannot read the file", extra=()
):
    """Turn library exceptions raised inside the block into :class:`InputError`.

    ``extra`` adds exception classes of a library (openpmd-api's ``Error``).
    """
    try:
        yield
    except InputError:
        raise
    except (*_FOREIGN, *extra) as exc:
        raise InputError(
            f"{what}: {type(exc).__name__}: {exc}", source=source, location=location
        ) from None


def resolve_particle(particle=None, *, charge=None, mass=None, source=None) -> tuple[float, float]:
    """Charge (C) and mass (kg) from the option ``particle`` and values found in a file.

    ``particle`` is the user's option (a name, ``"ion:Z:A"`` or a
    ``(charge, mass)`` pair); ``charge`` and ``mass`` are what the file says.
    When both are present they must agree (to 1e-9 relative, the rounding of
    constants written with 10 digits); a conflict is an error, not a silent
    choice. With neither, the particle is an electron.
    """
    from_option = None
    if particle is not None:
        try:
            from_option = particle_properties(particle)
        except InputError as exc:
            raise InputError(exc.detail, source=source, location="option particle") from None
    if charge is None and mass is None:
        return from_option if from_option is not None else particle_properties("electron")
    default_q, default_m = (
        from_option if from_option is not None else particle_properties("electron")
    )
    q = default_q if charge is None else float(charge)
    m = default_m if mass is None else float(mass)
    if from_option is not None:
        for name, mine, theirs in (("charge", q, from_option[0]), ("mass", m, from_option[1])):
            if not abs(mine - theirs) <= 1e-9 * abs(theirs):
                raise InputError(
                    f"the file gives {name} {mine!r} but particle={particle!r} has {theirs!r}",
                    source=source,
                    location=f"option particle / {name}",
                )
        return from_option
    if not (np.isfinite(q) and q != 0.0 and np.isfinite(m) and m > 0.0):
        raise InputError(
            f"the file gives charge {q!r} C and mass {m!r} kg; need a non-zero charge and a positive mass",
            source=source,
        )
    return q, m


def kinematics_from_momentum(u):
    """Lorentz factor and velocity from momentum over m c.

    γ = sqrt(1 + |u|²) and β = u/γ with u = p/(m c), from p = γ m v and
    E² = (pc)² + (mc²)² (Jackson 3rd ed. sec. 11.5; section cited from memory). Computed this way γ is exact to rounding even for γ ~ 1e5, where
    γ from |β| would have lost half its digits.

    Parameters
    ----------
    u : ndarray, shape (N, 3)
        Momentum in units of m c.

    Returns
    -------
    gamma : ndarray, shape (N,)
    beta : ndarray, shape (N, 3)
    """
    u = np.asarray(u, dtype=float)
    with np.errstate(over="ignore", invalid="ignore"):
        u2 = np.einsum("ij,ij->i", u, u)
        gamma = np.sqrt(1.0 + u2)
        beta = u / gamma[:, None]
    return gamma, beta


def check_samples(arrays: dict, locate: Callable[[str, int], tuple[str, str]], source) -> None:
    """Check samples before a :class:`Trajectory` is built, naming where a fault is.

    Parameters
    ----------
    arrays : dict
        Name → ndarray with samples along axis 0. ``"t"`` (if present) must be
        strictly increasing; ``"beta"`` (if present, shape (N, 3)) must have
        |β| < 1; every array must be finite.
    locate : callable
        ``locate(name, sample_index) -> (location, what)``: the location
        string for the error (``"line 12"``, ``"dataset /a/t"``) and the
        column or record name.
    source : str
        The file.
    """
    with np.errstate(all="ignore"):
        _check_samples(arrays, locate, source)


def _check_samples(arrays, locate, source):
    for name, arr in arrays.items():
        arr = np.asarray(arr)
        finite = np.isfinite(arr)
        if not finite.all():
            index = int(np.argwhere(~finite)[0][0])
            loc, what = locate(name, index)
            raise InputError(f"{what}: not a finite number", source=source, location=loc)
    if "t" in arrays:
        t = np.asarray(arrays["t"], dtype=float)
        if t.shape[0] < 2:
            loc, what = locate("t", 0)
            raise InputError(
                f"{what}: a trajectory needs at least 2 samples, got {t.shape[0]}",
                source=source,
                location=loc,
            )
        ok = np.diff(t) > 0
        if not ok.all():
            index = int(np.argmin(ok)) + 1
            loc, what = locate("t", index)
            raise InputError(
                f"{what}: time must increase strictly ({t[index]!r} after {t[index - 1]!r})",
                source=source,
                location=loc,
            )
    if "beta" in arrays:
        beta = np.asarray(arrays["beta"], dtype=float)
        speed2 = np.einsum("ij,ij->i", beta, beta)
        bad = speed2 >= 1.0
        if bad.any():
            index = int(np.argmax(bad))
            loc, what = locate("beta", index)
            raise InputError(
                f"{what}: |beta| = {np.sqrt(speed2[index])!r} is not below 1",
                source=source,
                location=loc,
            )


def build(factory, file, /, location=None, **kwargs):
    """Call a constructor (Trajectory, Bunch) and give its InputError the file's name."""
    try:
        # overflow in a derived quantity (extreme but finite input) must end as an InputError below,
        # not as a floating-point warning
        with np.errstate(all="ignore"):
            obj = factory(**kwargs)
            derived = getattr(obj, "beta_dot", None)
            if derived is not None and not np.all(np.isfinite(derived)):
                raise InputError(
                    "beta_dot derived from the samples is not finite (extreme sample spacing)"
                )
        return obj
    except InputError as exc:
        loc = location or exc.location
        raise InputError(exc.detail, source=file, location=loc) from None

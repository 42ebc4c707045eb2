"""Trajectory readers and writers, one module per format, behind a small registry.

=========  ==========================================  ==========================
format     module                                      extensions
=========  ==========================================  ==========================
text       :mod:`lwrad.io.text` (delimited columns)     .txt .csv .tsv .dat
hdf5       :mod:`lwrad.io.hdf5` (lwrad's own layout)    .h5 .hdf5
openpmd    :mod:`lwrad.io.openpmd` (openPMD particles)  ``name_%T.h5``, .h5, .json
npz        :mod:`lwrad.io.npz` (NumPy archive)          .npz
=========  ==========================================  ==========================

:func:`read_trajectory` picks the format from the file's content first (the
HDF5 signature and then the layout inside, the zip signature, UTF-8 text)
and only then from the extension; ``format=`` overrides both. A path with
``%T`` in it names a file-based openPMD series. :func:`write_trajectory`
picks the format from ``format=`` or the extension (``.h5`` means lwrad's
own layout; give ``format="openpmd"`` or a ``%T`` path for openPMD).

Every format module provides ``sniff(path, head) -> bool``, ``read(path,
**options)`` returning a :class:`~lwrad.trajectory.Trajectory` or
:class:`~lwrad.trajectory.Bunch`, and ``write(obj, path, **options)``.
Every problem with a file is an :class:`~lwrad.errors.InputError` naming
the file and, where it applies, the line, dataset or column.
"""

from __future__ import annotations

import importlib
import os
from dataclasses import dataclass

from lwrad.errors import InputError
from lwrad.io._common import check_readable, read_head
from lwrad.trajectory import Bunch, Trajectory

__all__ = ["FORMATS", "read_trajectory", "read_bunch", "write_trajectory", "detect_format"]


@dataclass(frozen=True)
class _Format:
    name: str
    module: str
    extensions: tuple[str, ...]

    def load(self):
        return importlib.import_module(self.module)


# Order matters for sniffing: the specific signatures first, text last.
FORMATS: dict[str, _Format] = {
    "hdf5": _Format("hdf5", "lwrad.io.hdf5", (".h5", ".hdf5", ".hdf")),
    "openpmd": _Format("openpmd", "lwrad.io.openpmd", ()),
    "npz": _Format("npz", "lwrad.io.npz", (".npz",)),
    "text": _Format("text", "lwrad.io.text", (".txt", ".csv", ".tsv", ".dat", ".text")),
}


def _by_extension(path: str) -> str | None:
    ext = os.path.splitext(path)[1].lower()
    for name, fmt in FORMATS.items():
        if ext in fmt.extensions:
            return name
    return None


def _check_format_name(format, source):
    if format not in FORMATS:
        raise InputError(
            f"unknown format {format!r}; expected one of {sorted(FORMATS)}",
            source=source,
            location="option format",
        )
    return format


def detect_format(path) -> str:
    """Name of the format of an existing file: by content first, then by extension.

    Raises
    ------
    InputError
        Missing or empty file, or a file no format recognises.
    """
    p = os.fspath(path)
    if "%T" in os.path.basename(p):
        return "openpmd"
    p = check_readable(p)
    head = read_head(p)
    for name, fmt in FORMATS.items():
        if fmt.load().sniff(p, head):
            return name
    by_ext = _by_extension(p)
    if by_ext is not None:
        return by_ext
    raise InputError(
        "cannot tell the file's format from its content or its extension; expected delimited text, "
        "lwrad HDF5, openPMD or .npz (or pass format=...)",
        source=p,
    )


def read_trajectory(path, *, format: str | None = None, **options) -> Trajectory | Bunch:
    """Read a trajectory (one particle) or a bunch (many) from a file.

    Parameters
    ----------
    path : str or os.PathLike
        The file; for a file-based openPMD series the pattern ``dir/name_%T.h5``
        (or any one file of the series).
    format : {"text", "hdf5", "openpmd", "npz"}, optional
        Skip detection.
    **options
        Passed to the format's reader, e.g. ``particle="electron"``,
        ``reference_energy=`` (eV) for text; ``species=``, ``particle_id=``
        for openPMD. See :mod:`lwrad.io.text`, :mod:`lwrad.io.hdf5`,
        :mod:`lwrad.io.openpmd`, :mod:`lwrad.io.npz`.

    Returns
    -------
    Trajectory or Bunch
        A :class:`~lwrad.trajectory.Trajectory` when the file holds one
        particle, a :class:`~lwrad.trajectory.Bunch` for many.

    Raises
    ------
    InputError
        Anything wrong with the file, named with file and line or dataset.
    """
    p = os.fspath(path)
    name = _check_format_name(format, p) if format is not None else detect_format(p)
    return FORMATS[name].load().read(p, **options)


def read_bunch(path, *, format: str | None = None, **options) -> Bunch:
    """Like :func:`read_trajectory`, but always a :class:`~lwrad.trajectory.Bunch` (one member for one particle)."""
    obj = read_trajectory(path, format=format, **options)
    if isinstance(obj, Bunch):
        return obj
    return Bunch([obj], source=os.fspath(path))


def write_trajectory(
    obj, path, format: str | None = None, *, overwrite: bool = False, **options
) -> str:
    """Write a trajectory or a bunch atomically.

    Parameters
    ----------
    obj : Trajectory or Bunch
    path : str or os.PathLike
        Target file (``name_%T.h5`` for a file-based openPMD series).
    format : {"text", "hdf5", "openpmd", "npz"}, optional
        Default: from the extension (``.h5`` → lwrad's HDF5 layout) or
        ``openpmd`` for a path with ``%T``.
    overwrite : bool
        Replace existing files; without it an existing file is an error.
    **options
        Passed to the format's writer (see the format modules).

    Returns
    -------
    str
        The path written.
    """
    p = os.fspath(path)
    if not isinstance(obj, Trajectory | Bunch):
        raise InputError(f"expected a Trajectory or Bunch, got {type(obj).__name__}", source=p)
    if format is not None:
        name = _check_format_name(format, p)
    elif "%T" in os.path.basename(p):
        name = "openpmd"
    else:
        name = _by_extension(p)
        if name is None:
            raise InputError(
                "cannot tell the format from the extension; use .txt/.csv/.tsv/.dat, .h5/.hdf5, .npz, "
                "a name_%T.h5 pattern, or pass format=...",
                source=p,
            )
    return FORMATS[name].load().write(obj, p, overwrite=overwrite, **options)

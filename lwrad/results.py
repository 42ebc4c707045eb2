"""Self-describing HDF5 result files with provenance, and per-chunk checkpoints.

One run writes one HDF5 file that plain :mod:`h5py` reads without lwrad.

File layout (``format = "lwrad_result"``, ``format_version = 1``)
-----------------------------------------------------------------
::

    /                         attrs: format, format_version, complete, caution, cases
    /provenance/              attrs: lwrad_version, start_time, end_time (ISO 8601 UTC), host,
                                     workers, backend, scheduler, codata_edition, python_version,
                                     numpy_version, numba_version, h5py_version, hdf5_version,
                                     platform, job_fingerprint, caution, extra (JSON)
    /provenance/job_text      the job file, verbatim (text)
    /provenance/input_files   paths of the input files (text, one per row)
    /provenance/input_sha256  SHA-256 of each input file (text, same order)
    /cases/<name>/            one group per case (one source seen by one observer);
                              attrs: kind ("angular" | "screen" | "points" | "none"),
                                     observer (JSON), attrs (JSON: e.g. current_A,
                                     plot_photon_energies, flux_aperture, source)
    /cases/<name>/axes/       axes: photon_energy (eV), theta_x / theta_y (rad) or x / y (m),
                              time (s), points (n, 3) (m), stokes_parameter (text S0..S3),
                              component (text x, y, z)
    /cases/<name>/spectra/    the radiation result exactly as ``Result.to_arrays()`` gives it;
                              group attr ``result_attrs`` (JSON of ``Result.attrs``)
    /cases/<name>/flux_density   (n_energy, ny, nx)
    /cases/<name>/stokes         (4, n_energy, ny, nx)
    /cases/<name>/flux           (n_energy,)
    /cases/<name>/power_density  (ny, nx)
    /cases/<name>/E, /B          time-domain fields (n_time, n_points, 3)

Every dataset carries a ``unit`` attribute (``"1"`` for pure numbers, ``""``
for text, which is not a quantity) and a ``long_name``; quantities carry an
``axes`` attribute naming, per dimension, the dataset in ``axes/`` that labels
it, and the axes are also attached as HDF5 dimension scales. Complex arrays
are stored the way h5py stores NumPy complex128: a compound type with float64
fields ``r`` and ``i``; h5py reads it back as complex128, other HDF5 tools see
the two fields. Units are checked on read (:func:`load`).

Writing is atomic: the file is written under a hidden temporary name in the
target directory, flushed to disk, then linked to its final name, so a crash
never leaves a file that looks finished, and an existing file is never
replaced unless asked to.

Checkpoints
-----------
:class:`Checkpoint` keeps the chunks a run has finished in a directory
``<out>.parts/``, one small HDF5 file per chunk, each written atomically in
the same way. One file per chunk rather than one growing HDF5 file: HDF5
without single-writer/multiple-reader mode gives no guarantee that a file is
readable after its writer dies in the middle of a metadata update, so a
SIGKILL at the wrong moment could make every chunk done so far unreadable
(observed here: a writer killed between two dataset writes left a file that
HDF5 refused to open, "bad object header version number"; see
``tests/test_results.py``). A chunk file renamed into place is complete or
absent; nothing else counts, and temporary leftovers are removed on reopen.
Chunks arrive in the process that runs the job (workers return them), so each
file has one writer and HDF5 file locking is not needed (it is switched off
for writing; it fails on many cluster file systems).
A fingerprint of the job (job text, input-file hashes, lwrad version) is
kept beside the chunks, and a different job is refused.

Results are estimates; shielding, radiation safety and thermal design follow
local codes and licensed practice (the caution is written into every file).
"""

from __future__ import annotations

import contextlib
import datetime as _dt
import hashlib
import io
import json
import os
import platform
import re
import shutil
import socket
import sys
import tempfile
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import NamedTuple

import h5py
import numpy as np

from lwrad._version import __version__
from lwrad.atomic import atomic_output
from lwrad.constants import CODATA_EDITION
from lwrad.errors import InputError

__all__ = [
    "FORMAT_NAME",
    "FORMAT_VERSION",
    "CAUTION",
    "UNIT_TABLE",
    "Quantity",
    "TimeFields",
    "Case",
    "Provenance",
    "RunResult",
    "save",
    "load",
    "check_writable",
    "atomic_output",
    "sha256_file",
    "job_fingerprint",
    "utc_now",
    "Checkpoint",
]

FORMAT_NAME = "lwrad_result"
FORMAT_VERSION = 1
_CHUNK_FORMAT = "lwrad_chunk"
_MANIFEST = "checkpoint.json"

CAUTION = (
    "Results are estimates. Shielding, radiation safety and thermal (heat-load) design "
    "follow local codes and licensed practice and need engineering review."
)

#: Unit of each known quantity, by observer kind ("*" for any kind). ASCII,
#: "^2" for squares; "ph" stands for photons.
UNIT_TABLE: dict[str, dict[str, str]] = {
    "flux_density": {"angular": "ph/s/0.1%BW/mrad^2", "screen": "ph/s/0.1%BW/mm^2"},
    "stokes": {"angular": "ph/s/0.1%BW/mrad^2", "screen": "ph/s/0.1%BW/mm^2"},
    "flux": {"*": "ph/s/0.1%BW"},
    # parts of an electron beam's result (lwrad.jobs.beams): same units as the whole
    "flux_density_single": {"angular": "ph/s/0.1%BW/mrad^2", "screen": "ph/s/0.1%BW/mm^2"},
    "flux_density_coherent": {"angular": "ph/s/0.1%BW/mrad^2", "screen": "ph/s/0.1%BW/mm^2"},
    "flux_density_se": {"angular": "ph/s/0.1%BW/mrad^2", "screen": "ph/s/0.1%BW/mm^2"},
    "stokes_single": {"angular": "ph/s/0.1%BW/mrad^2", "screen": "ph/s/0.1%BW/mm^2"},
    "stokes_coherent": {"angular": "ph/s/0.1%BW/mrad^2", "screen": "ph/s/0.1%BW/mm^2"},
    "flux_single": {"*": "ph/s/0.1%BW"},
    "flux_coherent": {"*": "ph/s/0.1%BW"},
    "power_density": {"angular": "W/mrad^2", "screen": "W/mm^2"},
    "E": {"*": "V/m"},
    "B": {"*": "T"},
    # axes
    "photon_energy": {"*": "eV"},
    "theta_x": {"*": "rad"},
    "theta_y": {"*": "rad"},
    "x": {"*": "m"},
    "y": {"*": "m"},
    "time": {"*": "s"},
    "points": {"*": "m"},
    "stokes_parameter": {"*": ""},
    "component": {"*": ""},
}

_LONG_NAMES = {
    "flux_density": "photon flux density",
    "stokes": "Stokes parameters S0, S1, S2, S3 (flux density units)",
    "flux": "photon flux integrated over the grid or aperture",
    "flux_density_single": "photon flux density of the single reference electron (filament beam)",
    "flux_density_coherent": "coherent part of the beam's photon flux density",
    "flux_density_se": "Monte Carlo standard error of the beam's photon flux density",
    "stokes_single": "Stokes parameters of the single reference electron",
    "stokes_coherent": "Stokes parameters of the beam's coherent part",
    "flux_single": "photon flux of the single reference electron",
    "flux_coherent": "photon flux of the beam's coherent part",
    "power_density": "radiated power density (estimate; heat-load design needs engineering review)",
    "E": "electric field at the observer points",
    "B": "magnetic flux density at the observer points",
    "photon_energy": "photon energy",
    "theta_x": "horizontal observation angle (tangent-plane coordinate)",
    "theta_y": "vertical observation angle (tangent-plane coordinate)",
    "x": "horizontal position on the screen",
    "y": "vertical position on the screen",
    "time": "observer time",
    "points": "observer point coordinates (x, y, z)",
    "stokes_parameter": "Stokes parameter",
    "component": "vector component",
}

_GRID_AXES = {"angular": ("theta_y", "theta_x"), "screen": ("y", "x")}
_KINDS = ("angular", "screen", "points", "none")
_NAME_RE = re.compile(r"^[A-Za-z0-9_][A-Za-z0-9_.\-]*$")


def utc_now() -> str:
    """The current time as ISO 8601 UTC with seconds, e.g. ``2026-12-02T01:37:00Z``."""
    return _dt.datetime.now(_dt.UTC).replace(microsecond=0).isoformat().replace("+00:00", "Z")


# ----------------------------------------------------------------------------- data containers


@dataclass(frozen=True)
class Quantity:
    """An array with its unit and the names of the axes that label it.

    Parameters
    ----------
    values : ndarray
        The numbers (float64, complex128, or text for labels).
    unit : str
        Unit string (``"eV"``, ``"W/mm^2"``, ``"1"`` for pure numbers, ``""`` for text).
    long_name : str
        What the numbers are.
    axes : tuple of str
        Per dimension, the name of the axis in the case's ``axes`` (``""`` for none).
    """

    values: np.ndarray
    unit: str
    long_name: str = ""
    axes: tuple[str, ...] = ()


class TimeFields(NamedTuple):
    """Time-domain fields: ``time`` (n_t,) s, ``points`` (n_p, 3) m, ``E`` V/m, ``B`` T (n_t, n_p, 3)."""

    time: np.ndarray
    points: np.ndarray
    E: np.ndarray
    B: np.ndarray


def _as_json(obj, what: str) -> str:
    try:
        return json.dumps(obj, sort_keys=True, allow_nan=True)
    except (TypeError, ValueError) as exc:
        raise InputError(
            f"{what} must be plain data (numbers, strings, lists, dicts): {exc}"
        ) from None


def _plain(obj):
    """Convert NumPy scalars and arrays inside ``obj`` to JSON-able Python objects."""
    if isinstance(obj, Mapping):
        return {str(k): _plain(v) for k, v in obj.items()}
    if isinstance(obj, list | tuple):
        return [_plain(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return obj.tolist()
    if isinstance(obj, np.generic):
        return obj.item()
    return obj


def _observer_kind(observer) -> str:
    kind = getattr(observer, "kind", None)
    if kind in _KINDS:
        return kind
    raise InputError(f"cannot store an observer of kind {kind!r}; expected one of {_KINDS}")


def _observer_axis(observer, name: str) -> np.ndarray:
    values = getattr(observer, name, None)
    if values is None and hasattr(observer, "axes"):
        entry = observer.axes().get(name)
        values = entry[0] if isinstance(entry, tuple) else entry
    if values is None:
        raise InputError(f"observer has no axis {name!r}")
    return np.atleast_1d(np.asarray(values, dtype=np.float64))


def _observer_points(observer) -> np.ndarray:
    """Positions (n, 3) m of a points observer.

    ``Points`` gives them through its ``points()`` method; a ``points`` array
    attribute or the older ``xyz`` attribute are still accepted.
    """
    values = getattr(observer, "points", None)
    if callable(values):
        values = values()
    if values is None:
        values = getattr(observer, "xyz", None)
    if values is None:
        raise InputError("a points observer needs points() (or an xyz attribute)")
    values = np.asarray(values, dtype=np.float64)
    if values.shape == (3,):  # a single point
        values = values.reshape(1, 3)
    if values.ndim != 2 or values.shape[1] != 3 or values.shape[0] == 0:
        raise InputError(f"observer points must have shape (n, 3), got {values.shape}")
    return values


class Case:
    """One source seen by one observer: axes, radiation result and derived quantities.

    Build one with :meth:`from_observer` and the ``add_*`` methods; :func:`load`
    gives the same object back.

    Parameters
    ----------
    name : str
        Group name in the file (letters, digits, ``_ . -``).
    kind : str
        ``"angular"``, ``"screen"``, ``"points"`` or ``"none"``.
    observer : object, optional
        The observer (kept for the Python side; stored through ``to_dict()``).
    attrs : dict, optional
        Plain data describing the case (source, current in A, notes).
    """

    def __init__(self, name: str, kind: str, *, observer=None, attrs: Mapping | None = None):
        if not isinstance(name, str) or not _NAME_RE.match(name):
            raise InputError(f"case name {name!r} must be letters, digits, '_', '.', '-'")
        if kind not in _KINDS:
            raise InputError(f"case kind {kind!r} not one of {_KINDS}")
        self.name = name
        self.kind = kind
        self.observer = observer
        self.observer_dict: dict | None = (
            _plain(observer.to_dict()) if hasattr(observer, "to_dict") else None
        )
        self.attrs: dict = _plain(dict(attrs or {}))
        self.axes: dict[str, Quantity] = {}
        self.quantities: dict[str, Quantity] = {}
        self.spectra = None  # a lwrad.radiation.Result

    def __repr__(self) -> str:
        parts = list(self.quantities) + (["spectra"] if self.spectra is not None else [])
        return f"Case({self.name!r}, kind={self.kind!r}, quantities={parts})"

    # -- building
    @classmethod
    def from_observer(cls, name: str, observer, *, attrs: Mapping | None = None) -> Case:
        """A case whose grid axes come from an ``AngularGrid`` or ``Screen`` (or ``Points``)."""
        kind = _observer_kind(observer)
        if not getattr(observer, "is_grid", True):
            raise InputError(f"case {name!r}: store the full observer grid, not a chunk of pixels")
        case = cls(name, kind, observer=observer, attrs=attrs)
        if kind in _GRID_AXES:
            for axis_name in _GRID_AXES[kind]:
                case.set_axis(axis_name, _observer_axis(observer, axis_name))
        elif kind == "points":
            case.set_axis("points", _observer_points(observer))
        return case

    def set_axis(
        self, name: str, values, unit: str | None = None, long_name: str | None = None
    ) -> None:
        """Add or replace an axis (unit from :data:`UNIT_TABLE` when not given)."""
        values = np.asarray(values)
        if values.dtype.kind in "fiu":
            values = values.astype(np.float64)
            if not np.all(np.isfinite(values)):
                raise InputError(f"axis {name!r} of case {self.name!r} has non-finite values")
        unit = _expected_unit(name, self.kind) if unit is None else unit
        if unit is None:
            raise InputError(f"axis {name!r} needs a unit")
        self.axes[name] = Quantity(values, unit, long_name or _LONG_NAMES.get(name, name), (name,))

    def add_quantity(
        self, name: str, values, unit: str, axes: tuple[str, ...], long_name: str | None = None
    ) -> None:
        """Add a named array; its shape must match the axes it names (``""`` = unlabelled)."""
        if not _NAME_RE.match(name) or name in ("axes", "spectra"):
            raise InputError(f"quantity name {name!r} is not allowed")
        values = np.asarray(values)
        if values.ndim != len(axes):
            raise InputError(f"{self.name}/{name}: {values.ndim} dimensions but axes {axes}")
        for dim, axis in enumerate(axes):
            if axis and axis in self.axes and len(self.axes[axis].values) != values.shape[dim]:
                raise InputError(
                    f"{self.name}/{name}: dimension {dim} has {values.shape[dim]} entries, "
                    f"axis {axis!r} has {len(self.axes[axis].values)}"
                )
            if axis and axis not in self.axes:
                raise InputError(f"{self.name}/{name}: unknown axis {axis!r}; set it first")
        expected = _expected_unit(name, self.kind)
        if expected is not None and unit != expected:
            raise InputError(f"{self.name}/{name}: unit {unit!r}, expected {expected!r}")
        self.quantities[name] = Quantity(
            values, unit, long_name or _LONG_NAMES.get(name, name), tuple(axes)
        )

    def add_spectra(
        self,
        result,
        current: float | None = None,
        *,
        quantities=("flux_density", "stokes", "flux"),
        aperture=None,
    ) -> None:
        """Store a radiation ``Result`` and, for a beam current, its derived quantities.

        Parameters
        ----------
        result : lwrad.radiation.Result
            The result of ``radiate`` on this case's observer.
        current : float, optional
            Beam current (A) for flux density, Stokes parameters and flux; without it
            only the result itself is stored.
        quantities : sequence of str
            Which of ``"flux_density"``, ``"stokes"``, ``"flux"`` to derive.
        aperture : object, optional
            Aperture for the flux (``RectangularAperture`` / ``CircularAperture``).
        """
        theirs = getattr(result, "observer", None)
        if self.observer is not None and theirs is not None and theirs != self.observer:
            raise InputError(f"case {self.name!r}: the result was computed on another observer")
        self.spectra = result
        self.set_axis(
            "photon_energy", np.atleast_1d(np.asarray(result.photon_energy, dtype=np.float64))
        )
        if current is None:
            return
        current = float(current)
        self.attrs["current_A"] = current
        grid = _GRID_AXES.get(self.kind, ("", ""))
        unknown = set(quantities) - {"flux_density", "stokes", "flux"}
        if unknown:
            raise InputError(f"cannot derive {sorted(unknown)} from a result")
        if "flux_density" in quantities:
            self.add_quantity(
                "flux_density",
                np.asarray(result.flux_density(current), dtype=np.float64),
                UNIT_TABLE["flux_density"][self.kind],
                ("photon_energy", *grid),
            )
        if "stokes" in quantities:
            self.set_axis("stokes_parameter", np.array(["S0", "S1", "S2", "S3"], dtype=object))
            self.add_quantity(
                "stokes",
                np.asarray(result.stokes(current), dtype=np.float64),
                UNIT_TABLE["stokes"][self.kind],
                ("stokes_parameter", "photon_energy", *grid),
            )
        if "flux" in quantities:
            self.add_quantity(
                "flux",
                np.asarray(result.flux(current, aperture=aperture), dtype=np.float64),
                UNIT_TABLE["flux"]["*"],
                ("photon_energy",),
            )
            if aperture is not None:
                self.attrs["flux_aperture"] = (
                    _plain(aperture.to_dict()) if hasattr(aperture, "to_dict") else repr(aperture)
                )

    def add_power_density(self, values) -> None:
        """Store a power-density map (ny, nx) in W/mrad² (angular) or W/mm² (screen)."""
        if self.kind not in _GRID_AXES:
            raise InputError(f"case {self.name!r}: power density needs an angular grid or a screen")
        self.add_quantity(
            "power_density",
            np.asarray(values, dtype=np.float64),
            UNIT_TABLE["power_density"][self.kind],
            _GRID_AXES[self.kind],
        )

    def add_fields(self, time, points, E, B) -> None:
        """Store time-domain fields: ``time`` (n_t,) s, ``points`` (n_p, 3) m, E (V/m), B (T) (n_t, n_p, 3)."""
        self.set_axis("time", np.asarray(time, dtype=np.float64))
        self.set_axis("points", np.asarray(points, dtype=np.float64).reshape(-1, 3))
        self.set_axis("component", np.array(["x", "y", "z"], dtype=object))
        self.add_quantity(
            "E", np.asarray(E, dtype=np.float64), "V/m", ("time", "points", "component")
        )
        self.add_quantity(
            "B", np.asarray(B, dtype=np.float64), "T", ("time", "points", "component")
        )

    # -- reading
    def get(self, name: str) -> Quantity | None:
        """The quantity ``name`` or None."""
        return self.quantities.get(name)

    @property
    def flux_density(self) -> Quantity | None:
        return self.quantities.get("flux_density")

    @property
    def stokes(self) -> Quantity | None:
        return self.quantities.get("stokes")

    @property
    def flux(self) -> Quantity | None:
        return self.quantities.get("flux")

    @property
    def power_density(self) -> Quantity | None:
        return self.quantities.get("power_density")

    @property
    def fields(self) -> TimeFields | None:
        if "E" not in self.quantities:
            return None
        return TimeFields(
            self.axes["time"].values,
            self.axes["points"].values,
            self.quantities["E"].values,
            self.quantities["B"].values,
        )

    def axis_values(self, quantity: Quantity) -> list[Quantity | None]:
        """The axis quantities labelling each dimension of ``quantity`` (None where unlabelled)."""
        return [self.axes.get(a) if a else None for a in quantity.axes]


@dataclass
class Provenance:
    """Where a result came from; every field is written to ``/provenance``.

    Use :meth:`start` when a run begins and :meth:`finish` when it ends.
    """

    job_text: str | None = None
    input_files: dict[str, str] = field(default_factory=dict)  # path → SHA-256 hex
    start_time: str | None = None
    end_time: str | None = None
    host: str = field(default_factory=socket.gethostname)
    workers: int | None = None
    backend: str | None = None
    scheduler: str | None = None
    job_fingerprint: str | None = None
    lwrad_version: str = __version__
    codata_edition: str = CODATA_EDITION
    python_version: str = field(default_factory=lambda: sys.version.split()[0])
    numpy_version: str = np.__version__
    numba_version: str = field(default_factory=lambda: _module_version("numba"))
    h5py_version: str = h5py.version.version
    hdf5_version: str = h5py.version.hdf5_version
    platform: str = field(default_factory=platform.platform)
    caution: str = CAUTION
    extra: dict = field(default_factory=dict)

    @classmethod
    def start(
        cls,
        *,
        job_text: str | None = None,
        input_files=(),
        workers: int | None = None,
        backend: str | None = None,
        scheduler=None,
        fingerprint: str | None = None,
        extra: Mapping | None = None,
    ) -> Provenance:
        """Record the start of a run: time now, input hashes, job fingerprint.

        Parameters
        ----------
        job_text : str, optional
            The job file, verbatim.
        input_files : iterable of path
            Files the run reads (hashed now, so a file changed mid-run is noticed on resume).
        workers : int, optional
            Number of workers.
        backend : str, optional
            Parallel back end (``"serial"``, ``"threads"``, ``"processes"``, ``"dask"``).
        scheduler : str, optional
            Dask scheduler address.
        fingerprint : str, optional
            The checkpoint fingerprint, when the caller's differs from
            :func:`job_fingerprint` of the job text and inputs.
        extra : dict, optional
            Further plain data (job file path, chunking, estimates).
        """
        hashes = {str(p): sha256_file(p) for p in input_files}
        return cls(
            job_text=job_text,
            input_files=hashes,
            start_time=utc_now(),
            workers=None if workers is None else int(workers),
            backend=backend,
            scheduler=None if scheduler is None else str(scheduler),
            job_fingerprint=fingerprint
            if fingerprint is not None
            else job_fingerprint(job_text or "", hashes),
            extra=_plain(dict(extra or {})),
        )

    def finish(self) -> Provenance:
        """Set the end time to now; returns self."""
        self.end_time = utc_now()
        return self


def _module_version(name: str) -> str:
    try:
        return str(__import__(name).__version__)
    except ImportError:  # pragma: no cover - numba is a dependency
        return "not installed"


@dataclass
class RunResult:
    """Everything one run produced: named cases and provenance.

    ``run.spectra``, ``run.power_density`` and ``run.fields`` give the one
    case that holds that quantity (an :class:`InputError` lists the cases
    when several do; use ``run.cases[name]`` then).
    """

    cases: dict[str, Case] = field(default_factory=dict)
    provenance: Provenance = field(default_factory=Provenance)
    source: str | None = None  # the file it was loaded from

    def add(self, case: Case) -> Case:
        """Add a case (names are unique); returns it."""
        if case.name in self.cases:
            raise InputError(f"case {case.name!r} exists already")
        self.cases[case.name] = case
        return case

    @property
    def job_text(self) -> str | None:
        return self.provenance.job_text

    def _only(self, what: str, getter):
        hits = [(n, getter(c)) for n, c in self.cases.items() if getter(c) is not None]
        if len(hits) == 1:
            return hits[0][1]
        if not hits:
            return None
        raise InputError(
            f"several cases hold {what}: {[n for n, _ in hits]}; use run.cases[name]",
            source=self.source,
        )

    @property
    def spectra(self):
        return self._only("spectra", lambda c: c.spectra)

    @property
    def power_density(self) -> Quantity | None:
        return self._only("power_density", lambda c: c.power_density)

    @property
    def fields(self) -> TimeFields | None:
        return self._only("fields", lambda c: c.fields)


def _expected_unit(name: str, kind: str) -> str | None:
    table = UNIT_TABLE.get(name)
    if table is None:
        return None
    return table.get(kind, table.get("*"))


# ----------------------------------------------------------------------------- hashing, paths


def sha256_file(path) -> str:
    """SHA-256 (hex) of a file's bytes; an unreadable file is an :class:`InputError`."""
    digest = hashlib.sha256()
    try:
        with open(path, "rb") as fh:
            for block in iter(lambda: fh.read(1 << 20), b""):
                digest.update(block)
    except OSError as exc:
        raise InputError(f"cannot read input file: {exc.strerror}", source=str(path)) from None
    return digest.hexdigest()


def job_fingerprint(job_text: str, input_hashes: Mapping[str, str] | None = None) -> str:
    """SHA-256 (hex) identifying a job: lwrad version, job text and input-file hashes.

    Two runs may share checkpoints only when their fingerprints are equal.
    """
    digest = hashlib.sha256()
    digest.update(f"lwrad {__version__}\0".encode())
    digest.update(job_text.encode("utf-8"))
    for name, value in sorted((input_hashes or {}).items()):
        digest.update(f"\0{name}\0{value}".encode())
    return digest.hexdigest()


def check_writable(
    path,
    *,
    overwrite: bool = False,
    hint: str = "use --force to replace it",
    needed_bytes: int | None = None,
) -> Path:
    """Check, before any work, that ``path`` can be written; returns it as a Path.

    Besides the permission bits (which do not bind root) a hidden probe file is
    created and removed in the target directory, so a read-only file system, a
    pseudo file system (``/proc``, ``/sys``) or a directory full to the last
    inode is found here and not after hours of work.

    Parameters
    ----------
    path : path-like
        The file to be written.
    overwrite : bool
        Allow ``path`` to exist.
    hint : str
        What to tell the user when it exists.
    needed_bytes : int, optional
        Bytes the caller will write there (e.g. checkpoint and result); refused
        when the file system has less free space.

    Raises
    ------
    InputError
        The parent directory does not exist or is not a directory, the process
        may not create files in it, it has less free space than
        ``needed_bytes``, or ``path`` exists and ``overwrite`` is false.
    """
    path = Path(path)
    parent = path.parent if str(path.parent) else Path(".")
    if not parent.exists():
        raise InputError(f"output directory {str(parent)!r} does not exist", source=str(path))
    if not parent.is_dir():
        raise InputError(f"{str(parent)!r} is not a directory", source=str(path))
    if not os.access(parent, os.W_OK | os.X_OK):
        raise InputError(f"output directory {str(parent)!r} is not writable", source=str(path))
    if path.is_dir():
        raise InputError("output path is a directory", source=str(path))
    if path.exists() and not overwrite:
        raise InputError(f"output file exists; not overwritten ({hint})", source=str(path))
    try:
        fd, probe = tempfile.mkstemp(prefix=".lwrad-probe.", suffix=".tmp", dir=parent)
    except OSError as exc:
        raise InputError(
            f"output directory {str(parent)!r} is not writable: cannot create a file there "
            f"({exc.strerror or exc})",
            source=str(path),
        ) from None
    os.close(fd)
    with contextlib.suppress(OSError):
        os.unlink(probe)
    if needed_bytes is not None:
        try:
            free = shutil.disk_usage(parent).free
        except OSError:  # pragma: no cover - statvfs unsupported; the write itself will tell
            free = None
        if free is not None and free < int(needed_bytes):
            raise InputError(
                f"not enough free space in {str(parent)!r}: about {_size(needed_bytes)} needed, "
                f"{_size(free)} free",
                source=str(path),
            )
    return path


def _size(n) -> str:
    for unit, size in (("TB", 1e12), ("GB", 1e9), ("MB", 1e6), ("kB", 1e3)):
        if abs(n) >= size:
            return f"{n / size:.3g} {unit}"
    return f"{int(n)} B"


# ----------------------------------------------------------------------------- writing


def _open_h5(path, mode: str) -> h5py.File:
    """Open an HDF5 file; without HDF5's file locks where they cannot work.

    Files are written under unique temporary names by one process and renamed
    when closed, so no two processes ever open one file for writing; HDF5's
    locks add nothing then, and on network file systems without lock support
    (common on clusters) they make every open fail. Writes skip them; reads
    try them first.
    """
    if mode == "w":
        return _write_h5(path)
    if mode != "r":
        return h5py.File(path, mode, locking=False)
    try:
        return h5py.File(path, "r")
    except OSError as exc:
        if "lock" not in str(exc).lower():
            raise
        return h5py.File(path, "r", locking=False)


@contextlib.contextmanager
def _write_h5(path):
    """Build a new HDF5 file in memory, then write its bytes to ``path`` with plain I/O.

    HDF5 that meets a full or vanished file system while flushing keeps the file
    open inside the library and can crash the interpreter when it shuts down;
    writing the finished image with Python's own I/O turns the same failure into
    an ordinary ``OSError`` (which :func:`lwrad.atomic.atomic_output` reports).
    """
    buffer = io.BytesIO()
    with h5py.File(buffer, "w") as f:
        yield f
    with open(path, "wb") as fh:
        fh.write(buffer.getbuffer())


_TEXT = h5py.string_dtype("utf-8")


def _write_dataset(
    group: h5py.Group, name: str, values, unit: str, long_name: str = ""
) -> h5py.Dataset:
    values = np.asarray(values)
    if values.dtype.kind in "OUS":
        ds = group.create_dataset(
            name, data=np.asarray(values, dtype=object).astype(str).astype(object), dtype=_TEXT
        )
    else:
        if values.dtype.kind == "c":
            values = values.astype(np.complex128)
        elif values.dtype.kind in "fiub":
            values = values.astype(np.float64) if values.dtype.kind == "f" else values
        else:
            raise InputError(f"cannot store dataset {name!r} of type {values.dtype}")
        kw = {}
        if values.size >= 4096:  # small arrays stay contiguous; big ones compressed losslessly
            kw = {"compression": "gzip", "compression_opts": 4, "shuffle": True}
        ds = group.create_dataset(name, data=values, **kw)
    ds.attrs["unit"] = unit
    ds.attrs["long_name"] = long_name
    return ds


def _write_case(root: h5py.Group, case: Case) -> None:
    g = root.create_group(case.name)
    g.attrs["kind"] = case.kind
    g.attrs["observer"] = _as_json(case.observer_dict, f"observer of case {case.name!r}")
    g.attrs["attrs"] = _as_json(case.attrs, f"attributes of case {case.name!r}")
    axes_group = g.create_group("axes")
    scales = {}
    for name, q in case.axes.items():
        ds = _write_dataset(axes_group, name, q.values, q.unit, q.long_name)
        ds.make_scale(name)
        scales[name] = ds
    for name, q in case.quantities.items():
        ds = _write_dataset(g, name, q.values, q.unit, q.long_name)
        ds.attrs["axes"] = (
            np.array(list(q.axes), dtype=object).astype(str).astype(object) if q.axes else ""
        )
        for dim, axis in enumerate(q.axes):
            if axis and axis in scales and scales[axis].ndim == 1:
                ds.dims[dim].attach_scale(scales[axis])
    if case.spectra is not None:
        sg = g.create_group("spectra")
        sg.attrs["result_attrs"] = _as_json(
            _plain(case.spectra.attrs), f"Result.attrs of case {case.name!r}"
        )
        for name, (values, unit) in case.spectra.to_arrays().items():
            _write_dataset(sg, name, values, unit, f"radiation result: {name}")


def _write_provenance(root: h5py.File, prov: Provenance) -> None:
    g = root.create_group("provenance")
    for key, value in vars(prov).items():
        if key in ("job_text", "input_files", "extra") or value is None:
            continue
        g.attrs[key] = value
    g.attrs["extra"] = _as_json(prov.extra, "provenance extra")
    _write_dataset(
        g, "job_text", np.array(prov.job_text or "", dtype=object), "", "job file, verbatim"
    )
    paths = list(prov.input_files)
    _write_dataset(g, "input_files", np.array(paths, dtype=object), "", "input file paths")
    _write_dataset(
        g,
        "input_sha256",
        np.array([prov.input_files[p] for p in paths], dtype=object),
        "",
        "SHA-256 of each input file",
    )


def save(path, run: RunResult, *, overwrite: bool = False) -> Path:
    """Write a run's results to one HDF5 file, atomically.

    Parameters
    ----------
    path : str or Path
        Output file (conventionally ``.h5``).
    run : RunResult
        Cases and provenance. A provenance without an end time gets the time now
        (and without a start time, the same).
    overwrite : bool
        Replace an existing file (the command line's ``--force``).

    Returns
    -------
    Path
        The file written.

    Raises
    ------
    InputError
        Unwritable directory, existing file without ``overwrite``, or data that cannot be stored.
    """
    path = check_writable(
        path, overwrite=overwrite, hint="use --force to replace it or --resume to continue"
    )
    if run.provenance.end_time is None:
        run.provenance.end_time = utc_now()
    if run.provenance.start_time is None:  # not recorded: the time of saving
        run.provenance.start_time = run.provenance.end_time
    with atomic_output(path, overwrite=overwrite) as tmp:
        with _open_h5(tmp, "w") as f:
            f.attrs["caution"] = CAUTION
            f.attrs["cases"] = (
                np.array(list(run.cases), dtype=object).astype(str).astype(object)
                if run.cases
                else ""
            )
            _write_provenance(f, run.provenance)
            cases = f.create_group("cases")
            for case in run.cases.values():
                _write_case(cases, case)
            # written last: a file without them was never finished
            f.attrs["format"] = FORMAT_NAME
            f.attrs["format_version"] = FORMAT_VERSION
            f.attrs["complete"] = True
    return path


# ----------------------------------------------------------------------------- reading


def _result_class():
    from lwrad.radiation import Result

    return Result


def _text_list(value) -> list[str]:
    if isinstance(value, str):
        return [value] if value else []
    return [v.decode() if isinstance(v, bytes) else str(v) for v in np.atleast_1d(value)]


class _Reader:
    def __init__(self, path: Path, f: h5py.File):
        self.path = path
        self.f = f

    def error(self, message: str, where: str | None = None) -> InputError:
        return InputError(
            message, source=str(self.path), location=None if where is None else f"dataset {where}"
        )

    def dataset(self, obj, expected_unit: str | None) -> tuple[np.ndarray, str]:
        if not isinstance(obj, h5py.Dataset):
            raise self.error("expected a dataset", obj.name)
        if "unit" not in obj.attrs:
            raise self.error("no 'unit' attribute", obj.name)
        unit = obj.attrs["unit"]
        unit = unit.decode() if isinstance(unit, bytes) else str(unit)
        if expected_unit is not None and unit != expected_unit:
            raise self.error(f"unit {unit!r}, expected {expected_unit!r}", obj.name)
        try:
            if h5py.check_string_dtype(obj.dtype) is not None:
                values = obj.asstr()[()]
                values = np.asarray(values, dtype=object)
            else:
                values = obj[()]
        except (OSError, ValueError, TypeError) as exc:
            raise self.error(f"cannot read: {exc}", obj.name) from None
        if values.dtype.kind not in "fciubO" or (
            values.dtype.kind == "O" and h5py.check_string_dtype(obj.dtype) is None
        ):
            # object data other than text (HDF5 references, opaque blobs) is never lwrad's
            raise self.error(f"unexpected data type {obj.dtype}", obj.name)
        return values, unit

    def text_attr(self, obj, key: str, default=None) -> str:
        if key not in obj.attrs:
            if default is not None:
                return default
            raise InputError(
                f"missing attribute {key!r}", source=str(self.path), location=f"group {obj.name}"
            )
        value = obj.attrs[key]
        return value.decode() if isinstance(value, bytes) else str(value)

    def json_attr(self, obj, key: str):
        text = self.text_attr(obj, key, default="null")
        try:
            return json.loads(text)
        except json.JSONDecodeError as exc:
            raise InputError(
                f"attribute {key!r} is not valid JSON: {exc}",
                source=str(self.path),
                location=f"group {obj.name}",
            ) from None

    def provenance(self) -> Provenance:
        if "provenance" not in self.f:
            raise self.error("no provenance group", "/provenance")
        g = self.f["provenance"]
        prov = Provenance()
        for key in vars(prov):
            if key in ("job_text", "input_files", "extra"):
                continue
            if key in g.attrs:
                value = g.attrs[key]
                if isinstance(value, bytes):
                    value = value.decode()
                elif isinstance(value, np.generic):
                    value = value.item()
                setattr(prov, key, value)
            else:
                setattr(prov, key, None)
        prov.extra = self.json_attr(g, "extra") or {}
        for required in ("lwrad_version", "start_time", "end_time"):
            if getattr(prov, required) is None:
                raise InputError(
                    f"provenance lacks {required!r}",
                    source=str(self.path),
                    location=f"group {g.name}",
                )
        for name in ("job_text", "input_files", "input_sha256"):
            if name not in g:
                raise self.error("missing", f"{g.name}/{name}")
        job_text, _ = self.dataset(g["job_text"], "")
        prov.job_text = str(job_text[()]) or None
        paths, _ = self.dataset(g["input_files"], "")
        hashes, _ = self.dataset(g["input_sha256"], "")
        if paths.shape != hashes.shape:
            raise self.error("input_files and input_sha256 differ in length", g.name)
        prov.input_files = {str(p): str(h) for p, h in zip(paths, hashes, strict=True)}
        return prov

    def case(self, g: h5py.Group) -> Case:
        kind = self.text_attr(g, "kind")
        if kind not in _KINDS:
            raise InputError(
                f"case kind {kind!r} not one of {_KINDS}",
                source=str(self.path),
                location=f"group {g.name}",
            )
        attrs = self.json_attr(g, "attrs")
        if not isinstance(attrs, dict):
            raise InputError(
                "attribute 'attrs' must hold a JSON object",
                source=str(self.path),
                location=f"group {g.name}",
            )
        case = Case(g.name.rsplit("/", 1)[-1], kind, attrs=attrs)
        case.observer_dict = self.json_attr(g, "observer")
        case.observer = _rebuild_observer(case.observer_dict, self, g.name)
        if "axes" in g:
            for name, obj in g["axes"].items():
                values, unit = self.dataset(obj, _expected_unit(name, kind))
                long_name = self.text_attr(obj, "long_name", default=name)
                case.axes[name] = Quantity(values, unit, long_name, (name,))
        for name, obj in g.items():
            if name in ("axes", "spectra"):
                continue
            values, unit = self.dataset(obj, _expected_unit(name, kind))
            axes = tuple(_text_list(obj.attrs.get("axes", "")))
            if len(axes) != values.ndim:
                raise self.error(
                    f"'axes' attribute names {len(axes)} axes for {values.ndim} dimensions",
                    obj.name,
                )
            for dim, axis in enumerate(axes):
                if axis and (
                    axis not in case.axes or len(case.axes[axis].values) != values.shape[dim]
                ):
                    raise self.error(f"axis {axis!r} missing or of the wrong length", obj.name)
            case.quantities[name] = Quantity(
                values, unit, self.text_attr(obj, "long_name", default=name), axes
            )
        if ("E" in case.quantities) != ("B" in case.quantities):
            raise self.error(
                "time-domain fields need both E and B",
                f"{g.name}/{'B' if 'E' in case.quantities else 'E'}",
            )
        if "spectra" in g:
            sg = g["spectra"]
            arrays = {name: self.dataset(obj, None) for name, obj in sg.items()}
            attrs = self.json_attr(sg, "result_attrs") or {}
            try:
                case.spectra = _result_class().from_arrays(arrays, attrs)
                # the result class knows its units: what it would write must match what was read
                expected = {name: unit for name, (_, unit) in case.spectra.to_arrays().items()}
            except InputError as exc:
                raise InputError(
                    exc.detail, source=str(self.path), location=exc.location or f"group {sg.name}"
                ) from None
            except (KeyError, ValueError, TypeError, AttributeError) as exc:
                raise InputError(
                    f"cannot rebuild the radiation result: {exc}",
                    source=str(self.path),
                    location=f"group {sg.name}",
                ) from None
            for name, (_, unit) in arrays.items():
                if name not in expected:
                    raise self.error("not part of a radiation result", f"{sg.name}/{name}")
                if unit != expected[name]:
                    raise self.error(
                        f"unit {unit!r}, expected {expected[name]!r}", f"{sg.name}/{name}"
                    )
        return case


def _rebuild_observer(data, reader: _Reader, where: str):
    if not data:
        return None
    from lwrad.observers import observer_from_dict

    try:
        return observer_from_dict(data)
    except InputError as exc:
        raise InputError(
            exc.detail, source=str(reader.path), location=f"group {where} (observer)"
        ) from None


def _read_run(path: Path, f: h5py.File) -> RunResult:
    reader = _Reader(path, f)
    fmt = f.attrs.get("format")
    fmt = fmt.decode(errors="replace") if isinstance(fmt, bytes) else fmt
    if not (isinstance(fmt, str) and fmt == FORMAT_NAME):
        raise InputError(
            f"not an lwrad result file (root attribute 'format' is {fmt!r}, expected {FORMAT_NAME!r})",
            source=str(path),
        )
    version = f.attrs.get("format_version")
    if not isinstance(version, int | np.integer) or not 1 <= int(version) <= FORMAT_VERSION:
        raise InputError(
            f"format_version {version!r} not supported (this lwrad reads 1..{FORMAT_VERSION})",
            source=str(path),
        )
    if f.attrs.get("complete") is not True and not isinstance(
        f.attrs.get("complete"), np.bool_ | bool
    ):
        raise InputError("file is not marked complete", source=str(path))
    if not bool(f.attrs["complete"]):
        raise InputError("file is not marked complete", source=str(path))
    run = RunResult(provenance=reader.provenance(), source=str(path))
    if "cases" not in f:
        raise reader.error("no cases group", "/cases")
    names = _text_list(f.attrs.get("cases", ""))
    for name in names:
        if name not in f["cases"]:
            raise reader.error(f"case {name!r} listed at the root but missing", f"/cases/{name}")
        run.cases[name] = reader.case(f["cases"][name])
    return run


def load(path) -> RunResult:
    """Read a result file written by :func:`save`.

    Parameters
    ----------
    path : str or Path
        The HDF5 file.

    Returns
    -------
    RunResult
        Cases (with the radiation ``Result`` rebuilt by ``Result.from_arrays``),
        quantities with their axes and units, and provenance.

    Raises
    ------
    InputError
        Missing or foreign file, unfinished file, newer format version, a
        dataset without its unit or with an unexpected one; names the file and dataset.
    """
    path = Path(path)
    if not path.is_file():
        raise InputError("no such file", source=str(path))
    try:
        f = _open_h5(path, "r")
    except OSError as exc:
        raise InputError(f"not a readable HDF5 file ({exc})", source=str(path)) from None
    with f:
        try:
            return _read_run(path, f)
        except InputError:
            raise
        except (KeyError, ValueError, TypeError, AttributeError, OSError, RuntimeError) as exc:
            # a structure no lwrad version writes; never let h5py/numpy errors escape
            raise InputError(
                f"malformed lwrad result file: {type(exc).__name__}: {exc}", source=str(path)
            ) from None


# ----------------------------------------------------------------------------- checkpoints


_KEY_RE = re.compile(r"^[A-Za-z0-9_][A-Za-z0-9_.\-]{0,120}$")


class Checkpoint:
    """Per-chunk checkpoints of a running job in ``<out>.parts/``, for ``--resume``.

    Each finished chunk is one HDF5 file written under a temporary name and
    renamed into place, so after a crash (even SIGKILL) a chunk is either
    complete or absent; temporary leftovers are ignored and removed.

    Parameters
    ----------
    out_path : str or Path
        The final result file the run will write.
    fingerprint : str
        :func:`job_fingerprint` of the job; a checkpoint of another job is refused.
    resume : bool
        Continue from chunks already done. Without it an existing checkpoint is
        an error (``--resume`` to continue, ``--force`` to start over).
    overwrite : bool
        Allow the final file to be replaced and discard an existing checkpoint
        (the command line's ``--force``).

    Raises
    ------
    InputError
        Before any work: unwritable directory, existing output, existing or
        foreign checkpoint.
    """

    def __init__(
        self, out_path, fingerprint: str, *, resume: bool = False, overwrite: bool = False
    ):
        self.out_path = check_writable(
            out_path, overwrite=overwrite, hint="use --force to replace it"
        )
        self.fingerprint = str(fingerprint)
        self.overwrite = overwrite
        self.directory = self.out_path.with_name(self.out_path.name + ".parts")
        self.resumed = False
        manifest = self.directory / _MANIFEST
        if self.directory.exists():
            if overwrite and not resume:
                shutil.rmtree(self.directory)
            elif not resume:
                raise InputError(
                    f"a checkpoint of an unfinished run exists in {str(self.directory)!r}; "
                    "use --resume to continue it or --force to start over",
                    source=str(self.out_path),
                )
            else:
                theirs = self._read_manifest(manifest).get("fingerprint")
                if theirs != self.fingerprint:
                    raise InputError(
                        f"the checkpoint in {str(self.directory)!r} belongs to a different job "
                        "(job text, input files or lwrad version changed); use --force to start over",
                        source=str(self.out_path),
                    )
                self.resumed = True
        if not self.directory.exists():
            self.directory.mkdir()
            data = {
                "format": _CHUNK_FORMAT,
                "fingerprint": self.fingerprint,
                "lwrad_version": __version__,
                "created": utc_now(),
            }
            with atomic_output(manifest, overwrite=True) as tmp:
                tmp.write_text(json.dumps(data, indent=1))
        for leftover in self.directory.glob(".*.tmp"):
            with contextlib.suppress(OSError):
                leftover.unlink()

    def _read_manifest(self, manifest: Path) -> dict:
        try:
            data = json.loads(manifest.read_text())
        except (OSError, json.JSONDecodeError, UnicodeDecodeError):
            raise InputError(
                "checkpoint has no readable manifest; use --force to start over",
                source=str(self.directory),
            ) from None
        return data if isinstance(data, dict) else {}

    def _file(self, key) -> Path:
        text = f"{key:08d}" if isinstance(key, int | np.integer) else str(key)
        if not _KEY_RE.match(text):
            raise InputError(f"chunk key {key!r}: use an int or letters, digits, '_', '.', '-'")
        return self.directory / f"chunk_{text}.h5"

    def _valid(self, file: Path):
        """The stored key when ``file`` is a complete chunk of this job, else None."""
        try:
            with _open_h5(file, "r") as f:
                if (
                    f.attrs.get("format") != _CHUNK_FORMAT
                    or f.attrs.get("fingerprint") != self.fingerprint
                ):
                    return None
                return json.loads(f.attrs["key"])
        except (OSError, KeyError, ValueError):
            return None

    @property
    def done(self) -> list:
        """Keys of the chunks finished so far (ints and strings as saved), sorted."""
        keys = [
            k
            for k in (self._valid(p) for p in sorted(self.directory.glob("chunk_*.h5")))
            if k is not None
        ]
        return sorted(keys, key=lambda k: (isinstance(k, str), k))

    def is_done(self, key) -> bool:
        """True when chunk ``key`` is stored and complete."""
        file = self._file(key)
        return file.exists() and self._valid(file) == key

    def save_chunk(self, key, payload, attrs: Mapping | None = None) -> None:
        """Store one finished chunk, atomically, flushed to disk.

        Parameters
        ----------
        key : int or str
            Chunk identifier (the job runner's chunk index, or ``"case-index"``).
        payload : Result or mapping
            A radiation ``Result`` (stored through ``to_arrays()``/``attrs``) or a
            mapping name → (ndarray, unit string).
        attrs : dict, optional
            Plain data to keep with the chunk (returned by :meth:`load_chunk_attrs`).
        """
        file = self._file(key)
        is_result = hasattr(payload, "to_arrays")
        arrays = payload.to_arrays() if is_result else payload
        result_attrs = _plain(payload.attrs) if is_result else {}
        with atomic_output(file, overwrite=True) as tmp:
            with _open_h5(tmp, "w") as f:
                g = f.create_group("arrays")
                for name, item in arrays.items():
                    if not (
                        isinstance(item, tuple) and len(item) == 2 and isinstance(item[1], str)
                    ):
                        raise InputError(
                            f"chunk {key!r}: entry {name!r} must be (ndarray, unit string)"
                        )
                    _write_dataset(g, name, item[0], item[1])
                f.attrs["is_result"] = is_result
                f.attrs["result_attrs"] = _as_json(result_attrs, f"chunk {key!r} result attributes")
                f.attrs["attrs"] = _as_json(_plain(dict(attrs or {})), f"chunk {key!r} attributes")
                f.attrs["key"] = json.dumps(key if isinstance(key, str) else int(key))
                f.attrs["fingerprint"] = self.fingerprint
                f.attrs["format"] = _CHUNK_FORMAT  # last: marks the chunk complete

    def _open_chunk(self, key):
        file = self._file(key)
        if self._valid(file) != key:
            raise InputError(f"chunk {key!r} is not stored", source=str(self.directory))
        return file

    def load_chunk(self, key):
        """A stored chunk: the ``Result`` if one was saved, else dict name → (ndarray, unit)."""
        file = self._open_chunk(key)
        with _open_h5(file, "r") as f:
            reader = _Reader(file, f)
            arrays = {name: reader.dataset(obj, None) for name, obj in f["arrays"].items()}
            if bool(f.attrs["is_result"]):
                return _result_class().from_arrays(arrays, json.loads(f.attrs["result_attrs"]))
        return arrays

    def load_chunk_attrs(self, key) -> dict:
        """The ``attrs`` stored with chunk ``key``."""
        with _open_h5(self._open_chunk(key), "r") as f:
            return json.loads(f.attrs["attrs"])

    def finalize(self, run: RunResult) -> Path:
        """Write the final result file atomically, then remove the checkpoint."""
        path = save(self.out_path, run, overwrite=self.overwrite)
        self.discard()
        return path

    def discard(self) -> None:
        """Remove the checkpoint directory and everything in it."""
        shutil.rmtree(self.directory, ignore_errors=True)

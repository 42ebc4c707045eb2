"""Job files: reading and validating the TOML description of a run.

A job file is data only: it is read with :mod:`tomllib`, never executed, and
every value is checked before any work starts. All problems found in one
pass are reported together; each names the key, the value and what was
expected, and an unknown key gets the nearest known key as a suggestion.
Paths are resolved relative to the job file's folder and must exist.

Values with units are strings ``"<number> <unit>"`` (``"25 mm"``, ``"2.5 GeV"``)
read by :func:`lwrad.units.parse_quantity`; a bare number is taken in the
default unit listed below.

Layout
------
::

    title = "..."                      # optional text
    description = "..."                # optional text

    [sources.<name>]                   # one or more named sources
    kind = "magnets" | "trajectory"
    ...
    [sources.<name>.beam]              # optional: an electron beam around this
    emittance_x = "4 nm*rad"           # source's (reference) trajectory
    ...

    [[study]]                          # one or more studies, run in order
    name = "..."
    source = "<name>"                  # may be omitted when there is one source
    quantities = ["flux_density", ...]
    photon_energy = ...                # value, list or {start, stop, count}
    [study.observer]
    kind = "angular" | "screen" | "points"
    ...

    [run]                              # optional run options

Keys, units and defaults
------------------------
A *range* is a single value, a list of values, or a table
``{start = ..., stop = ..., count = N, spacing = "linear" | "log"}``, with at
most :data:`MAX_RANGE_COUNT` (10 000 000) values per axis. Energies must stay
finite once converted to eV; ``n_periods`` is at most :data:`MAX_PERIODS`
(100 000) and ``beam.particles`` at most :data:`MAX_PARTICLES` (10 000 000).

=========================================  ==========  =============  ==========================================
key                                        default     default        meaning
                                           unit        value
=========================================  ==========  =============  ==========================================
title, description                         text        ""             free text, stored in the result
sources.<name>.kind                        choice      required       ``"magnets"`` or ``"trajectory"``
sources.<name>.current                     A           none           beam current (needed for flux and power)
sources.<name>.particle (magnets)          name        "electron"     ``"electron"``, ``"positron"``,
                                                                      ``"proton"``, ``"ion:Z:A"``
sources.<name>.energy (magnets)            GeV         required       total particle energy
sources.<name>.magnet[] (magnets)          table       required       list of magnets, see below
sources.<name>.offset_x, offset_y          mm          0              start position
sources.<name>.angle_x, angle_y            mrad        0              start angle
sources.<name>.z_start, z_end              m           magnet ends    tracking range
sources.<name>.samples_per_period          number      tracker's      samples per undulator period
sources.<name>.samples_per_radian          number      tracker's      samples per radian of bend
sources.<name>.file (trajectory)           path        (file|files)   one trajectory file
sources.<name>.files (trajectory)          paths       (file|files)   several files, an incoherent bunch
sources.<name>.format (trajectory)         text        "auto"         reader to use
sources.<name>.reader (trajectory)         table       {}             reader options (scalars only)
sources.<name>.beam                        table       (no beam)      the beam around the source's path, below
beam.energy                                GeV         source's (‡)   beam energy (must equal the source's)
beam.current                               A           source's       beam current (must equal the source's)
beam.emittance_x, emittance_y              m*rad       required       geometric rms emittances (>= 0)
beam.beta_x, beta_y                        m           required       Twiss β at the reference plane (> 0)
beam.alpha_x, alpha_y                      1           0              Twiss α at the reference plane
beam.energy_spread                         1 (or %)    0              rms relative energy spread σ_δ
beam.bunch_length                          m (or s)    none           rms bunch length (``"3 mm"``, ``"10 ps"``)
beam.bunch_charge                          C           none           charge of one bunch (coherent part)
beam.longitudinal_profile                  table       none           ``{t = [...], density = [...],
                                                                      t_unit = "ps"}`` (not with
                                                                      bunch_length)
beam.dispersion_x, dispersion_y            m           0              dispersion D at the reference plane
beam.dispersion_xp, dispersion_yp          rad         0              dispersion slope D'
beam.method                                choice      "auto"         ``auto`` (``convolution`` on angular
                                                                      grids, ``monte_carlo`` on screens),
                                                                      ``convolution``, ``monte_carlo``
beam.particles (monte_carlo)               integer     256            macro-electrons (>= 2), the same set
                                                                      for every pixel
beam.rel_tolerance (monte_carlo)           1           0.05           target relative standard error,
                                                                      checked when the study is assembled
beam.seed (monte_carlo)                    integer     1              seed of the particle sampling
beam.offsets (monte_carlo)                 choice      "longitudinal  ``longitudinal-field`` (exact for
                                                       -field"        fields depending on z only) or
                                                                      ``rigid`` (no energy spread)
beam.z_ref                                 m           path middle    plane of the Twiss parameters
magnet[].type                              choice      required       ``planar_undulator``,
                                                                      ``helical_undulator``,
                                                                      ``elliptical_undulator``, ``dipole``,
                                                                      ``field_map``, ``on_axis_field_map``
magnet[].center                            m           0              z of the magnet's centre (field maps:
                                                                      shift of the map's z axis)
magnet[].period (undulators)               mm          required       undulator period
magnet[].n_periods (undulators)            integer     required       number of periods
magnet[].peak_field (planar, helical)      T           (or k)         peak field
magnet[].k (planar, helical)               1           (or field)     deflection parameter K, converted with
                                                                      B0 = 2π m c K / (|q| λu)
magnet[].peak_field_x, peak_field_y        T           required       elliptical undulator fields
magnet[].phase (elliptical)                deg         90             phase between the two field components
magnet[].terminations (undulators)         bool        true           end poles that close the orbit
magnet[].off_axis (undulators)             bool        false          exact flat-pole field off axis
magnet[].pole_error_rms (undulators)       1 (or %)    0              relative rms pole-field error
magnet[].seed (undulators)                 integer     none           seed for the pole errors
magnet[].handedness (helical)              choice      "right"        ``"right"`` or ``"left"``
magnet[].field (dipole)                    T           required       dipole field
magnet[].length (dipole)                   m           required       magnetic length
magnet[].fringe (dipole)                   choice      "hard"         ``"hard"`` or ``"soft"``
magnet[].fringe_length (dipole)            mm          required (†)   10 %-90 % rise length of a soft edge
magnet[].file (field maps)                 path        required       field-map file
study[].name                               text        "study<i>"     group name in the result (letters,
                                                                      digits, ``_``, ``-``)
study[].source                             text        only source    name of a source
study[].quantities                         list        required       ``flux_density``, ``flux``, ``stokes``,
                                                                      ``power_density``, ``fields``
study[].photon_energy                      eV          required (*)   range of photon energies
study[].map_photon_energy                  eV          brightest      photon energies of the maps drawn by
                                                                      ``lwrad plot`` (figures only)
study[].method                             text        run.method     method passed to the radiation solver
study[].tolerance                          1           run.tolerance  relative tolerance of the solver
study[].coherent                           bool        false          add fields of a bunch coherently
study[].observer.kind                      choice      required       ``angular``, ``screen``, ``points``
study[].observer.theta_x, theta_y          mrad        required       angular ranges (angular)
study[].observer.distance                  m           required       screen distance (screen)
study[].observer.x, y                      mm          required       screen ranges (screen)
study[].observer.points                    m           required       list of [x, y, z] (points)
study[].aperture.kind                      choice      (no aperture)  ``rectangular`` or ``circular``
study[].aperture.x_min, x_max, y_min,      mrad or mm  required       rectangle, in the observer's unit
y_max
study[].aperture.radius                    mrad or mm  required       circle radius, observer's unit
study[].aperture.center_x, center_y        mrad or mm  0              circle centre
study[].time                               ns          required (**)  observer-time range for ``fields``
study[].time_origin                        choice      "absolute"     ``absolute`` or ``first_arrival``
                                                                      (times counted from the earliest
                                                                      arrival of the first sample)
run.workers                                integer     all cores      workers on this node
run.backend                                choice      "auto"         ``auto``, ``serial``, ``threads``,
                                                                      ``processes``
run.chunk_pixels                           integer     64             pixels per chunk (fixes the plan)
run.method                                 text        "auto"         default solver method
run.tolerance                              1           1e-4           default solver tolerance
run.memory_limit                           GB          available      refuse jobs above this estimate
                                                                      (``"500 MB"``, ``"2 GiB"``)
=========================================  ==========  =============  ==========================================

(*) for ``flux_density``, ``flux`` and ``stokes``; not allowed otherwise.
(†) with ``fringe = "soft"`` only.
(**) for ``fields`` only, which needs ``observer.kind = "points"`` and is the
only quantity allowed with it.
(‡) required for ``trajectory`` sources, whose energy is only known once the
file is read (it is checked against the file then).

Electron beams
--------------
A source with a ``beam`` table stands for a beam of electrons around its
(reference) trajectory; its energy and current are the source's. The beam
keys are those of :meth:`lwrad.ElectronBeam.from_dict` (which validates
them): bare numbers are in SI (m*rad, m, rad, C) except ``energy`` (GeV, as
everywhere in a job file). Studies of a beam source report the beam's
flux density (``flux_density``, ``stokes``, ``flux``: the incoherent sum)
beside the single electron's (``..._single``); with ``study.coherent = true``
also the coherent part (``..._coherent``, needs ``bunch_charge`` and
``monte_carlo``), and for ``monte_carlo`` the standard error
``flux_density_se``. ``power_density`` and ``fields`` remain those of the
reference electron. How each method runs is described in
:mod:`lwrad.jobs.beams`.
"""

from __future__ import annotations

import difflib
import json
import math
import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from lwrad.errors import InputError
from lwrad.units import parse_quantity

__all__ = [
    "Job",
    "SourceSpec",
    "BeamSpec",
    "ObserverSpec",
    "ApertureSpec",
    "StudySpec",
    "RunSpec",
    "load_job",
    "parse_job",
    "validate_data",
    "parse_memory",
    "job_summary",
    "QUANTITIES",
    "FREQUENCY_QUANTITIES",
    "MAGNET_TYPES",
    "BEAM_METHODS",
    "BEAM_OFFSETS",
    "DEFAULT_CHUNK_PIXELS",
    "MAX_RANGE_COUNT",
    "MAX_PERIODS",
    "MAX_PARTICLES",
]

#: every quantity a study may ask for
QUANTITIES = ("flux_density", "flux", "stokes", "power_density", "fields")
#: quantities computed from the frequency-domain radiation integral
FREQUENCY_QUANTITIES = ("flux_density", "flux", "stokes")
MAGNET_TYPES = (
    "planar_undulator",
    "helical_undulator",
    "elliptical_undulator",
    "dipole",
    "field_map",
    "on_axis_field_map",
)
DEFAULT_CHUNK_PIXELS = 64
#: most values a range (``count``) or list may give one axis: 1e7 float64 is 80 MB, far
#: beyond any sensible grid, and a typo beyond it would otherwise allocate while parsing
MAX_RANGE_COUNT = 10_000_000
#: most undulator periods accepted (a 100 000-period device would be kilometres long)
MAX_PERIODS = 100_000
#: most Monte Carlo macro-electrons of a beam study
MAX_PARTICLES = 10_000_000
#: how a study of a beam source sums the electrons (``auto`` is resolved per study)
BEAM_METHODS = ("auto", "convolution", "monte_carlo")
#: how Monte Carlo particles get their paths from the reference (see :mod:`lwrad.beam`)
BEAM_OFFSETS = ("longitudinal-field", "rigid")
#: ElectronBeam keys a job's beam table passes to :meth:`lwrad.ElectronBeam.from_dict`
_BEAM_PARAMETERS = (
    "energy",
    "current",
    "emittance_x",
    "emittance_y",
    "beta_x",
    "beta_y",
    "alpha_x",
    "alpha_y",
    "energy_spread",
    "bunch_length",
    "bunch_charge",
    "longitudinal_profile",
    "dispersion_x",
    "dispersion_xp",
    "dispersion_y",
    "dispersion_yp",
)
_BACKENDS = ("auto", "serial", "threads", "processes")
_NAME = re.compile(r"^[A-Za-z][A-Za-z0-9_\-]{0,63}$")

_MEMORY_UNITS = {
    "B": 1.0,
    "kB": 1e3,
    "MB": 1e6,
    "GB": 1e9,
    "TB": 1e12,
    "KiB": 2.0**10,
    "MiB": 2.0**20,
    "GiB": 2.0**30,
    "TiB": 2.0**40,
}


def parse_memory(value, *, default_unit: str = "GB", source=None, location=None) -> int:
    """Read a memory size (``"500 MB"``, ``"2 GiB"``, ``8`` = 8 GB) into bytes.

    Parameters
    ----------
    value : int, float or str
        A positive number in ``default_unit`` or ``"<number> <unit>"`` with a
        unit among B, kB, MB, GB, TB, KiB, MiB, GiB, TiB.
    default_unit : str
        Unit of a bare number.

    Returns
    -------
    int
        Bytes.
    """
    where = {"source": source, "location": location}
    if isinstance(value, bool) or not isinstance(value, int | float | str):
        raise InputError(f"expected a memory size like '4 GB', got {value!r}", **where)
    if isinstance(value, str):
        m = re.fullmatch(r"\s*([0-9]*\.?[0-9]+(?:[eE][-+]?\d+)?)\s*([A-Za-z]*)\s*", value)
        if not m:
            raise InputError(f"cannot read {value!r} as a memory size like '4 GB'", **where)
        number, unit = float(m.group(1)), m.group(2) or default_unit
    else:
        number, unit = float(value), default_unit
    if unit not in _MEMORY_UNITS:
        raise InputError(
            f"unknown memory unit {unit!r} in {value!r}; use one of {', '.join(_MEMORY_UNITS)}",
            **where,
        )
    size = number * _MEMORY_UNITS[unit]
    if not math.isfinite(size) or size <= 0:
        raise InputError(f"memory size must be positive and finite, got {value!r}", **where)
    return int(size)


# --------------------------------------------------------------------------
# validated job description (plain data; arrays in SI)
# --------------------------------------------------------------------------


@dataclass(frozen=True)
class BeamSpec:
    """A validated electron beam around a source's reference trajectory.

    Attributes
    ----------
    parameters : dict
        :meth:`lwrad.ElectronBeam.to_dict` of the validated beam (eV, A,
        m·rad, m, rad, C; plain data), rebuilt with ``ElectronBeam.from_dict``.
    method : str
        ``"auto"``, ``"convolution"`` or ``"monte_carlo"`` (resolved per study
        in :attr:`StudySpec.beam_method`).
    particles : int
        Monte Carlo macro-electrons.
    rel_tolerance : float or None
        Target relative standard error (Monte Carlo), checked at assembly.
    seed : int
        Seed of the particle sampling.
    offsets : str
        ``"longitudinal-field"`` or ``"rigid"``.
    z_ref : float or None
        Plane of the Twiss parameters, m (None: middle of the path).
    """

    parameters: dict
    method: str = "auto"
    particles: int = 256
    rel_tolerance: float | None = 0.05
    seed: int = 1
    offsets: str = "longitudinal-field"
    z_ref: float | None = None

    @property
    def energy_spread(self) -> float:
        """rms relative energy spread σ_δ."""
        return float(self.parameters.get("energy_spread", 0.0))

    def electron_beam(self):
        """The :class:`lwrad.ElectronBeam` (built anew; plain data in, validated)."""
        from lwrad.beam import ElectronBeam

        return ElectronBeam.from_dict(self.parameters)


@dataclass(frozen=True)
class SourceSpec:
    """A validated source: magnets to track through, or trajectory files.

    Energies in eV (total), current in A, lengths in m, angles in rad.
    ``magnets`` holds one plain dict per magnet with SI values and a
    ``"type"`` key; ``tracking`` the start conditions and sampling.
    """

    name: str
    kind: str
    current: float | None = None
    particle: str = "electron"
    energy_ev: float | None = None
    magnets: tuple = ()
    tracking: dict = field(default_factory=dict)
    files: tuple = ()
    format: str = "auto"
    reader: dict = field(default_factory=dict)
    bunch: bool = False
    beam: BeamSpec | None = None


@dataclass(frozen=True)
class ObserverSpec:
    """A validated observer: angles in rad, lengths in m."""

    kind: str
    theta_x: np.ndarray | None = None
    theta_y: np.ndarray | None = None
    distance: float | None = None
    x: np.ndarray | None = None
    y: np.ndarray | None = None
    points: np.ndarray | None = None

    @property
    def shape(self) -> tuple[int, int]:
        """(ny, nx) for grids, (1, n_points) for points."""
        if self.kind == "angular":
            return (len(self.theta_y), len(self.theta_x))
        if self.kind == "screen":
            return (len(self.y), len(self.x))
        return (1, len(self.points))

    @property
    def n_pixels(self) -> int:
        """Number of observer pixels (or points)."""
        ny, nx = self.shape
        return ny * nx


@dataclass(frozen=True)
class ApertureSpec:
    """A validated aperture in the observer's SI unit (rad or m)."""

    kind: str
    x_min: float = 0.0
    x_max: float = 0.0
    y_min: float = 0.0
    y_max: float = 0.0
    radius: float = 0.0
    center: tuple = (0.0, 0.0)


@dataclass(frozen=True)
class StudySpec:
    """One calculation: a source, an observer, photon energies and quantities."""

    name: str
    source: str
    quantities: tuple
    observer: ObserverSpec
    photon_energy: np.ndarray | None = None
    aperture: ApertureSpec | None = None
    time: np.ndarray | None = None
    time_origin: str = "absolute"
    method: str = "auto"
    tolerance: float = 1e-4
    coherent: bool = False
    map_photon_energy: np.ndarray | None = None
    beam_method: str | None = None

    @property
    def frequency_domain(self) -> bool:
        """True when the study needs the radiation integral."""
        return any(q in FREQUENCY_QUANTITIES for q in self.quantities)


@dataclass(frozen=True)
class RunSpec:
    """Run options: workers (None = all cores), back end, chunk size, limits."""

    workers: int | None = None
    backend: str = "auto"
    chunk_pixels: int = DEFAULT_CHUNK_PIXELS
    method: str = "auto"
    tolerance: float = 1e-4
    memory_limit: int | None = None


@dataclass(frozen=True)
class Job:
    """A validated job.

    Attributes
    ----------
    path : Path or None
        The job file (None for a job given as text).
    text : str
        The job file's text, stored in the result's provenance.
    sources : dict
        Source name → :class:`SourceSpec`.
    studies : tuple of StudySpec
        In file order.
    run : RunSpec
    input_files : tuple of Path
        Every file the job reads (resolved), for provenance and hashing.
    """

    path: Path | None
    text: str
    title: str
    description: str
    sources: dict
    studies: tuple
    run: RunSpec
    input_files: tuple

    def study(self, name: str) -> StudySpec:
        """The study called ``name``."""
        for s in self.studies:
            if s.name == name:
                return s
        raise KeyError(name)


# --------------------------------------------------------------------------
# the validator
# --------------------------------------------------------------------------


class _Problems:
    """Collects every problem of one job file, so all are reported at once."""

    def __init__(self, source):
        self.source = source
        self.items: list[tuple[str, str]] = []
        self.seen_keys: set[str] = set()
        self.needs_current: dict[str, list[str]] = {}

    def add(self, key: str, message: str):
        self.items.append((key, message))

    def raise_if_any(self):
        if not self.items:
            return
        if len(self.items) == 1:
            key, message = self.items[0]
            raise InputError(message, source=self.source, location=f"key {key}" if key else None)
        lines = [f"{len(self.items)} problems in the job file:"]
        lines += [
            f"  key {key}: {message}" if key else f"  {message}" for key, message in self.items
        ]
        raise InputError("\n".join(lines), source=self.source)


_MISSING = object()


def _unit_problem(value, exc: InputError, unit: str) -> str:
    """A units error that names the value and the default unit of bare numbers."""
    detail = exc.detail if repr(value) in exc.detail else f"got {value!r}: {exc.detail}"
    return f"{detail} (bare numbers are in {unit})"


class _Table:
    """A TOML table being read: typed accessors that record problems, not raise."""

    def __init__(self, data, path: str, problems: _Problems, pattern: str | None = None):
        self.data = data if isinstance(data, dict) else {}
        self.path = path
        self.pattern = path if pattern is None else pattern
        self.problems = problems
        self.known: list[str] = []

    def key(self, name: str) -> str:
        return f"{self.path}.{name}" if self.path else name

    def _get(self, name, required, what, record=None):
        self.known.append(name)
        if record is None:
            record = f"{self.pattern}.{name}" if self.pattern else name
        self.problems.seen_keys.add(record)
        if name in self.data:
            return self.data[name]
        if required:
            self.problems.add(self.key(name), f"missing; expected {what}")
        return _MISSING

    def _bad(self, name, value, expected):
        self.problems.add(self.key(name), f"got {value!r}; expected {expected}")

    def has(self, name) -> bool:
        return name in self.data

    def quantity(
        self, name, dimension, unit, *, required=False, default=None, positive=False, nonneg=False
    ):
        value = self._get(name, required, f"a {dimension} like '1 {unit}'")
        if value is _MISSING:
            return default
        try:
            return parse_quantity(
                value,
                dimension,
                default_unit=unit,
                allow_negative=not (positive or nonneg),
                allow_zero=not positive,
            )
        except InputError as exc:
            self.problems.add(self.key(name), _unit_problem(value, exc, unit))
            return default

    def integer(self, name, *, required=False, default=None, minimum=None, maximum=None):
        value = self._get(name, required, "an integer")
        if value is _MISSING:
            return default
        if isinstance(value, bool) or not isinstance(value, int):
            self._bad(name, value, "an integer")
            return default
        if minimum is not None and value < minimum:
            self._bad(name, value, f"an integer >= {minimum}")
            return default
        if maximum is not None and value > maximum:
            self._bad(name, value, f"an integer <= {maximum:,}".replace(",", " "))
            return default
        return int(value)

    def number(self, name, *, required=False, default=None, positive=False):
        value = self._get(name, required, "a number")
        if value is _MISSING:
            return default
        if (
            isinstance(value, bool)
            or not isinstance(value, int | float)
            or not math.isfinite(value)
        ):
            self._bad(name, value, "a finite number")
            return default
        if positive and value <= 0:
            self._bad(name, value, "a positive number")
            return default
        return float(value)

    def boolean(self, name, *, default=False):
        value = self._get(name, False, "true or false")
        if value is _MISSING:
            return default
        if not isinstance(value, bool):
            self._bad(name, value, "true or false")
            return default
        return value

    def text(self, name, *, required=False, default="", choices=None):
        what = f"one of {', '.join(map(repr, choices))}" if choices else "a string"
        value = self._get(name, required, what)
        if value is _MISSING:
            return default
        invalid = None if required else default
        if not isinstance(value, str):
            self._bad(name, value, what)
            return invalid
        if choices and value not in choices:
            close = difflib.get_close_matches(value, choices, n=1)
            hint = f" (did you mean {close[0]!r}?)" if close else ""
            self.problems.add(self.key(name), f"got {value!r}; expected {what}{hint}")
            return invalid
        return value

    def table(self, name, *, required=False, pattern=None):
        value = self._get(name, required, "a table", record=pattern)
        if value is _MISSING:
            return None
        if not isinstance(value, dict):
            self._bad(name, value, "a table")
            return None
        pat = (
            pattern if pattern is not None else (f"{self.pattern}.{name}" if self.pattern else name)
        )
        return _Table(value, self.key(name), self.problems, pat)

    def raw(self, name, *, required=False, what="a value"):
        value = self._get(name, required, what)
        return None if value is _MISSING else value

    def finish(self):
        """Report keys that were never asked for, with the nearest known key."""
        for name in self.data:
            if name in self.known:
                continue
            close = difflib.get_close_matches(name, self.known, n=1, cutoff=0.6)
            hint = f"; did you mean {close[0]!r}?" if close else ""
            allowed = ", ".join(sorted(set(self.known))) or "none"
            self.problems.add(self.key(name), f"unknown key{hint} (keys allowed here: {allowed})")


def _in_ev(value_j, table: _Table, name):
    """Joules → eV, refusing what overflows.

    :func:`lwrad.units.parse_quantity` checks that the value is finite in SI
    (J), but the division by e that gives eV can still overflow (``"1e300 GeV"``
    is 1.6e290 J but 1e309 eV = inf), so the finite check is repeated here.
    """
    with np.errstate(over="ignore"):
        ev = np.asarray(value_j, dtype=np.float64) / parse_quantity(
            "1 eV", "energy", default_unit="eV"
        )
    if not np.all(np.isfinite(ev)):
        table.problems.add(
            table.key(name), f"got {table.data.get(name)!r}; expected a finite energy"
        )
        return None
    return float(ev) if np.ndim(value_j) == 0 else ev


def _range(table: _Table, name, dimension, unit, *, required=True, increasing=True, positive=False):
    """A single value, a list, or {start, stop, count, spacing} → float64 array (SI)."""
    value = table._get(name, required, f"a {dimension}, a list of them, or {{start, stop, count}}")
    if value is _MISSING:
        return None
    key = table.key(name)
    problems = table.problems

    def one(v, where):
        try:
            return parse_quantity(
                v,
                dimension,
                default_unit=unit,
                allow_negative=not positive,
                allow_zero=not positive,
            )
        except InputError as exc:
            problems.add(where, _unit_problem(v, exc, unit))
            return None

    if isinstance(value, dict):
        sub = _Table(value, key, problems, f"{table.pattern}.{name}")
        start = sub.quantity("start", dimension, unit, required=True, positive=positive)
        stop = sub.quantity("stop", dimension, unit, required=True, positive=positive)
        # the cap keeps a typo from allocating gigabytes (or failing inside numpy) while parsing
        count = sub.integer("count", required=True, minimum=1, maximum=MAX_RANGE_COUNT)
        spacing = sub.text("spacing", default="linear", choices=("linear", "log"))
        sub.finish()
        if start is None or stop is None or count is None:
            return None
        if count > 1 and not stop > start:
            problems.add(
                key,
                f"stop ({value.get('stop')!r}) must be greater than start ({value.get('start')!r})",
            )
            return None
        if count == 1:
            return np.array([start])
        if spacing == "log":
            if start <= 0:
                problems.add(key, "log spacing needs a positive start")
                return None
            return np.geomspace(start, stop, count)
        return np.linspace(start, stop, count)
    items = value if isinstance(value, list) else [value]
    if not items:
        problems.add(key, "empty list; expected at least one value")
        return None
    if len(items) > MAX_RANGE_COUNT:
        problems.add(key, f"{len(items)} values; at most {MAX_RANGE_COUNT} are allowed per axis")
        return None
    out = [one(v, f"{key}[{i}]" if isinstance(value, list) else key) for i, v in enumerate(items)]
    if any(v is None for v in out):
        return None
    arr = np.array(out, dtype=np.float64)
    if increasing and len(arr) > 1 and not np.all(np.diff(arr) > 0):
        problems.add(key, f"values must be strictly increasing, got {value!r}")
        return None
    return arr


def _path(table: _Table, name, base: Path, *, required=True, value=_MISSING, key=None):
    if value is _MISSING:
        value = table.raw(name, required=required, what="a file path")
        key = table.key(name)
    if value is None:
        return None
    if not isinstance(value, str) or not value.strip():
        table.problems.add(key, f"got {value!r}; expected a file path (string)")
        return None
    path = Path(value).expanduser()
    if not path.is_absolute():
        path = base / path
    path = path.resolve()
    if not path.is_file():
        table.problems.add(key, f"file {value!r} not found (looked for {path})")
        return None
    return path


# --------------------------------------------------------------------------
# sections
# --------------------------------------------------------------------------


def _magnet(t: _Table, base: Path, files: list) -> dict | None:
    kind = t.text("type", required=True, choices=MAGNET_TYPES)
    out: dict[str, Any] = {"type": kind, "center": t.quantity("center", "length", "m", default=0.0)}
    if kind in ("planar_undulator", "helical_undulator", "elliptical_undulator"):
        out["period"] = t.quantity("period", "length", "mm", required=True, positive=True)
        out["n_periods"] = t.integer("n_periods", required=True, minimum=1, maximum=MAX_PERIODS)
        out["terminations"] = t.boolean("terminations", default=True)
        out["off_axis"] = t.boolean("off_axis", default=False)
        out["pole_error_rms"] = t.quantity(
            "pole_error_rms", "dimensionless", "1", default=0.0, nonneg=True
        )
        out["seed"] = t.integer("seed", default=None, minimum=0)
    if kind == "helical_undulator":
        out["handedness"] = t.text("handedness", default="right", choices=("right", "left"))
    if kind in ("planar_undulator", "helical_undulator"):
        has_b, has_k = t.has("peak_field"), t.has("k")
        out["peak_field"] = t.quantity("peak_field", "field", "T", nonneg=True)
        out["k"] = t.quantity("k", "dimensionless", "1", nonneg=True)
        if has_b == has_k:
            t.problems.add(t.key("peak_field"), "give exactly one of 'peak_field' and 'k'")
    if kind == "elliptical_undulator":
        out["peak_field_x"] = t.quantity("peak_field_x", "field", "T", required=True)
        out["peak_field_y"] = t.quantity("peak_field_y", "field", "T", required=True)
        out["phase"] = t.quantity("phase", "angle", "deg", default=math.pi / 2)
    if kind == "dipole":
        out["field"] = t.quantity("field", "field", "T", required=True)
        out["length"] = t.quantity("length", "length", "m", required=True, positive=True)
        out["fringe"] = t.text("fringe", default="hard", choices=("hard", "soft"))
        out["fringe_length"] = t.quantity(
            "fringe_length", "length", "mm", default=None, positive=True
        )
        if out["fringe_length"] is not None and out["fringe"] != "soft":
            t.problems.add(t.key("fringe_length"), "only used with fringe = 'soft'")
        if out["fringe"] == "soft" and out["fringe_length"] is None and not t.has("fringe_length"):
            t.problems.add(
                t.key("fringe_length"),
                "missing; fringe = 'soft' needs the edge length (10 %-90 % rise)",
            )
    if kind in ("field_map", "on_axis_field_map"):
        out["file"] = _path(t, "file", base)
        if out["file"] is not None:
            files.append(out["file"])
    if kind is not None:  # keys of an unknown type cannot be judged
        t.finish()
    return out


def _source(name: str, t: _Table, base: Path, files: list) -> SourceSpec | None:
    if not _NAME.match(name):
        t.problems.add(
            t.path,
            f"source name {name!r} must start with a letter and hold letters, digits, _ or -",
        )
    kind = t.text("kind", required=True, choices=("magnets", "trajectory"))
    current = t.quantity("current", "current", "A", default=None, positive=True)
    spec: dict[str, Any] = {"name": name, "kind": kind, "current": current}
    if kind == "magnets":
        particle = t.text("particle", default="electron")
        try:
            from lwrad.constants import particle_properties

            particle_properties(particle)
        except InputError as exc:
            t.problems.add(t.key("particle"), exc.detail)
        spec["particle"] = particle
        spec["energy_ev"] = t.quantity("energy", "energy", "GeV", required=True, positive=True)
        if spec["energy_ev"] is not None:
            spec["energy_ev"] = _in_ev(spec["energy_ev"], t, "energy")
        magnets = t.raw(
            "magnet", required=True, what="a list of magnet tables ([[sources.<name>.magnet]])"
        )
        if magnets is not None:
            if isinstance(magnets, dict):
                magnets = [magnets]
            if (
                not isinstance(magnets, list)
                or not magnets
                or not all(isinstance(m, dict) for m in magnets)
            ):
                t.problems.add(
                    t.key("magnet"), f"got {magnets!r}; expected one or more magnet tables"
                )
            else:
                pattern = f"{t.pattern}.magnet[]"
                spec["magnets"] = tuple(
                    _magnet(_Table(m, f"{t.key('magnet')}[{i}]", t.problems, pattern), base, files)
                    for i, m in enumerate(magnets)
                )
        tracking = {
            "x0": t.quantity("offset_x", "length", "mm", default=0.0),
            "y0": t.quantity("offset_y", "length", "mm", default=0.0),
            "xp0": t.quantity("angle_x", "angle", "mrad", default=0.0),
            "yp0": t.quantity("angle_y", "angle", "mrad", default=0.0),
            "z_start": t.quantity("z_start", "length", "m", default=None),
            "z_end": t.quantity("z_end", "length", "m", default=None),
            "samples_per_period": t.number("samples_per_period", default=None, positive=True),
            "samples_per_radian": t.number("samples_per_radian", default=None, positive=True),
        }
        if (
            tracking["z_start"] is not None
            and tracking["z_end"] is not None
            and not tracking["z_end"] > tracking["z_start"]
        ):
            t.problems.add(t.key("z_end"), "must be greater than z_start")
        spec["tracking"] = {k: v for k, v in tracking.items() if v is not None}
    elif kind == "trajectory":
        has_one, has_many = t.has("file"), t.has("files")
        if has_one == has_many:
            t.problems.add(
                t.key("file"), "give exactly one of 'file' (one trajectory) and 'files' (a bunch)"
            )
        one = _path(t, "file", base, required=False)
        many = t.raw("files", what="a list of file paths")
        paths = []
        if one is not None:
            paths = [one]
        elif many is not None:
            if not isinstance(many, list) or not many:
                t.problems.add(
                    t.key("files"), f"got {many!r}; expected a non-empty list of file paths"
                )
            else:
                paths = [
                    _path(t, "files", base, value=v, key=f"{t.key('files')}[{i}]")
                    for i, v in enumerate(many)
                ]
                spec["bunch"] = True
        spec["files"] = tuple(p for p in paths if p is not None)
        files.extend(spec["files"])
        from lwrad.io import FORMATS

        spec["format"] = t.text("format", default="auto", choices=("auto", *FORMATS))
        reader = t.table("reader")
        options = {}
        if reader is not None:
            for k, v in reader.data.items():
                reader.known.append(k)
                if isinstance(v, bool | int | float | str):
                    options[k] = v
                else:
                    reader.problems.add(
                        reader.key(k),
                        f"got {v!r}; reader options must be strings, numbers or booleans",
                    )
            reader.finish()
        spec["reader"] = options
    if t.has("beam"):
        bt = t.table("beam")
        if bt is not None and kind is not None:
            beam, beam_current = _beam(bt, spec)
            spec["beam"] = beam
            if spec["current"] is None:
                spec["current"] = beam_current
    else:
        t.known.append("beam")
        t.problems.seen_keys.add(f"{t.pattern}.beam")
    if kind is None:
        return None
    t.finish()
    return SourceSpec(**spec)


def _beam(t: _Table, spec: dict) -> tuple[BeamSpec | None, float | None]:
    """The ``beam`` table of a source → (BeamSpec or None, beam current in A or None).

    Units and values are judged by :meth:`lwrad.ElectronBeam.from_dict`; this
    adds the job's conventions (energy in GeV, energy and current shared with
    the source) and the keys that say how the beam is summed.
    """
    from lwrad.beam import ElectronBeam

    problems = t.problems
    n_before = len(problems.items)
    params: dict[str, Any] = {}
    energy = t.quantity("energy", "energy", "GeV", default=None, positive=True)
    source_energy = spec.get("energy_ev")
    if energy is not None:
        energy = _in_ev(energy, t, "energy")
    if energy is not None:
        if source_energy is not None and abs(energy - source_energy) > 1e-9 * source_energy:
            problems.add(
                t.key("energy"),
                f"got {t.data['energy']!r}; expected the source's energy "
                f"({source_energy / 1e9:.9g} GeV): the source's path is the beam's reference electron",
            )
    elif source_energy is not None:
        energy = source_energy
    elif spec.get("kind") == "trajectory":
        problems.add(
            t.key("energy"),
            "missing; a beam around a trajectory file needs its energy (e.g. '2.5 GeV'), "
            "checked against the file",
        )
    current = t.quantity("current", "current", "A", default=None, positive=True)
    source_current = spec.get("current")
    if current is not None and source_current is not None:
        if abs(current - source_current) > 1e-12 * source_current:
            problems.add(
                t.key("current"),
                f"got {t.data['current']!r}; expected the source's current ({source_current:.9g} A) "
                "or no beam current at all",
            )
    current = source_current if current is None else current
    if current is None:
        problems.add(
            t.key("current"), "missing; give the beam current here or in the source (e.g. '0.3 A')"
        )
    for key in _BEAM_PARAMETERS:
        if key in ("energy", "current"):
            continue
        value = t.raw(key)
        if value is not None:
            params[key] = value
    method = t.text("method", default="auto", choices=BEAM_METHODS)
    particles = t.integer("particles", default=256, minimum=2, maximum=MAX_PARTICLES)
    rel_tolerance = t.number("rel_tolerance", default=0.05, positive=True)
    seed = t.integer("seed", default=1, minimum=0)
    offsets = t.text("offsets", default="longitudinal-field", choices=BEAM_OFFSETS)
    z_ref = t.quantity("z_ref", "length", "m", default=None)
    if method == "convolution":
        for key in ("particles", "rel_tolerance", "seed", "offsets"):
            if t.has(key):
                problems.add(
                    t.key(key), "only used by method = 'monte_carlo' (or 'auto' on a screen)"
                )
    if spec.get("bunch"):
        problems.add(
            t.path,
            "a beam needs one reference trajectory ('file'), not a bunch of them ('files')",
        )
    t.finish()
    if len(problems.items) > n_before or energy is None or current is None:
        return None, current
    params["energy"] = energy
    params["current"] = current
    params["particle"] = spec.get("particle", "electron")
    try:
        beam = ElectronBeam.from_dict(params, source=problems.source, prefix=t.path)
    except InputError as exc:
        location = (exc.location or t.path).removeprefix("key ")
        name = location.rsplit(".", 1)[-1]
        unit = ElectronBeam._KEYS.get(name, (None, None))[1]
        hint = f" (bare numbers are in {unit})" if unit and name != "energy" else ""
        problems.add(location, f"{exc.detail}{hint}")
        return None, current
    if offsets == "rigid" and beam.energy_spread > 0:
        problems.add(
            t.key("offsets"),
            "'rigid' offsets cannot represent an energy spread; use 'longitudinal-field'",
        )
        return None, current
    return (
        BeamSpec(
            parameters=beam.to_dict(),
            method=method,
            particles=particles,
            rel_tolerance=rel_tolerance,
            seed=seed,
            offsets=offsets,
            z_ref=z_ref,
        ),
        current,
    )


def _observer(t: _Table) -> ObserverSpec | None:
    kind = t.text("kind", required=True, choices=("angular", "screen", "points"))
    out: dict[str, Any] = {"kind": kind}
    if kind == "angular":
        out["theta_x"] = _range(t, "theta_x", "angle", "mrad")
        out["theta_y"] = _range(t, "theta_y", "angle", "mrad")
    elif kind == "screen":
        out["distance"] = t.quantity("distance", "length", "m", required=True, positive=True)
        out["x"] = _range(t, "x", "length", "mm")
        out["y"] = _range(t, "y", "length", "mm")
    elif kind == "points":
        raw = t.raw("points", required=True, what="a list of [x, y, z] positions")
        if raw is not None:
            pts = []
            if not isinstance(raw, list) or not raw:
                t.problems.add(
                    t.key("points"), f"got {raw!r}; expected a non-empty list of [x, y, z]"
                )
            for i, p in enumerate(raw if isinstance(raw, list) else []):
                key = f"{t.key('points')}[{i}]"
                if not isinstance(p, list) or len(p) != 3:
                    t.problems.add(key, f"got {p!r}; expected [x, y, z] (bare numbers in m)")
                    continue
                try:
                    pts.append([parse_quantity(v, "length", default_unit="m") for v in p])
                except InputError as exc:
                    t.problems.add(key, _unit_problem(p, exc, "m"))
            if pts and len(pts) == len(raw):
                out["points"] = np.array(pts, dtype=np.float64)
    if kind is not None:
        t.finish()
    if kind is None or any(v is None for v in out.values()):
        return None
    return ObserverSpec(**out)


def _aperture(t: _Table, observer_kind: str | None) -> ApertureSpec | None:
    kind = t.text("kind", required=True, choices=("rectangular", "circular"))
    if observer_kind not in ("angular", "screen"):
        # units depend on the observer, which is itself wrong or not a grid: judged once it is fixed
        t.known.extend(t.data)
        return None
    dim, unit = ("angle", "mrad") if observer_kind == "angular" else ("length", "mm")
    out: dict[str, Any] = {"kind": kind}
    if kind == "rectangular":
        for name in ("x_min", "x_max", "y_min", "y_max"):
            out[name] = t.quantity(name, dim, unit, required=True)
        if None not in out.values():
            if not (out["x_max"] > out["x_min"] and out["y_max"] > out["y_min"]):
                t.problems.add(t.path, "needs x_max > x_min and y_max > y_min")
    elif kind == "circular":
        out["radius"] = t.quantity("radius", dim, unit, required=True, positive=True)
        cx = t.quantity("center_x", dim, unit, default=0.0)
        cy = t.quantity("center_y", dim, unit, default=0.0)
        out["center"] = (cx, cy)
    if kind is not None:
        t.finish()
    if kind is None or any(v is None for v in out.values()):
        return None
    return ApertureSpec(**out)


def _study(i: int, t: _Table, sources: dict, run: dict) -> StudySpec | None:
    problems = t.problems
    name = t.text("name", default=f"study{i + 1}")
    if name and not _NAME.match(name):
        problems.add(
            t.key("name"),
            f"got {name!r}; expected a name of letters, digits, _ or - (starting with a letter)",
        )
    if len(sources) == 1:
        source = t.text("source", default=next(iter(sources)))
    else:
        source = t.text("source", required=True)
    if source and sources and source not in sources:
        close = difflib.get_close_matches(source, list(sources), n=1)
        hint = f" (did you mean {close[0]!r}?)" if close else ""
        problems.add(
            t.key("source"), f"no source named {source!r}; defined: {', '.join(sources)}{hint}"
        )
    quantities = t.raw("quantities", required=True, what=f"a list among {', '.join(QUANTITIES)}")
    qs: list[str] = []
    if quantities is not None:
        if isinstance(quantities, str):
            quantities = [quantities]
        if not isinstance(quantities, list) or not quantities:
            problems.add(
                t.key("quantities"),
                f"got {quantities!r}; expected a list among {', '.join(QUANTITIES)}",
            )
        else:
            for q in quantities:
                if q not in QUANTITIES:
                    close = difflib.get_close_matches(str(q), QUANTITIES, n=1)
                    hint = f" (did you mean {close[0]!r}?)" if close else ""
                    problems.add(
                        t.key("quantities"),
                        f"unknown quantity {q!r}; expected one of {', '.join(QUANTITIES)}{hint}",
                    )
                elif q not in qs:
                    qs.append(q)
    obs_table = t.table("observer", required=True)
    observer = _observer(obs_table) if obs_table is not None else None
    obs_kind = observer.kind if observer is not None else None
    needs_energy = any(q in FREQUENCY_QUANTITIES for q in qs)
    photon_energy = None
    map_energy = None
    if needs_energy:
        photon_energy = _range(t, "photon_energy", "energy", "eV", positive=True, increasing=False)
        if photon_energy is not None:
            photon_energy = _in_ev(photon_energy, t, "photon_energy")
        map_energy = _range(
            t, "map_photon_energy", "energy", "eV", required=False, positive=True, increasing=False
        )
        if map_energy is not None:
            map_energy = _in_ev(map_energy, t, "map_photon_energy")
    elif t.has("photon_energy"):
        t.raw("photon_energy")
        problems.add(
            t.key("photon_energy"),
            f"not used by {', '.join(qs) or 'these quantities'}; remove it or add flux_density, flux or stokes",
        )
    aperture = None
    if t.has("aperture"):
        at = t.table("aperture")
        aperture = _aperture(at, obs_kind) if at is not None else None
        if "flux" not in qs:
            problems.add(t.key("aperture"), "only used by the quantity 'flux'")
        if obs_kind == "points":
            problems.add(t.key("aperture"), "not available for a points observer")
    else:
        t.known.append("aperture")
        problems.seen_keys.add(f"{t.pattern}.aperture")
    time = None
    time_origin = "absolute"
    if "fields" in qs:
        time = _range(t, "time", "time", "ns")
        time_origin = t.text(
            "time_origin", default="absolute", choices=("absolute", "first_arrival")
        )
        if obs_kind is not None and obs_kind != "points":
            problems.add(t.key("quantities"), "'fields' needs observer.kind = 'points'")
        if len(qs) > 1:
            problems.add(t.key("quantities"), "'fields' is computed in a study of its own")
    else:
        for k in ("time", "time_origin"):
            if t.has(k):
                t.raw(k)
                problems.add(t.key(k), "only used by the quantity 'fields'")
        if obs_kind == "points":
            problems.add(
                t.key("observer.kind"), "a points observer is only used by the quantity 'fields'"
            )
    method = t.text("method", default=run.get("method", "auto"))
    tolerance = t.number("tolerance", default=run.get("tolerance", 1e-4), positive=True)
    coherent = t.boolean("coherent", default=False)
    src = sources.get(source)
    if src is not None and src.current is None and any(q != "fields" for q in qs):
        problems.needs_current.setdefault(source, []).append(name)
    beam_method = None
    if src is not None and src.beam is not None and needs_energy and observer is not None:
        beam_method = _beam_method(t, src, name, observer, photon_energy, coherent)
    t.finish()
    if (
        observer is None
        or not qs
        or (needs_energy and photon_energy is None)
        or ("fields" in qs and time is None)
    ):
        return None
    return StudySpec(
        name=name,
        source=source,
        quantities=tuple(qs),
        observer=observer,
        photon_energy=photon_energy,
        aperture=aperture,
        time=time,
        time_origin=time_origin,
        method=method,
        tolerance=tolerance,
        coherent=coherent,
        map_photon_energy=map_energy,
        beam_method=beam_method,
    )


def _beam_method(t: _Table, src: SourceSpec, study: str, observer, photon_energy, coherent) -> str:
    """Resolve ``auto`` and check that the study can use the source's beam method."""
    problems = t.problems
    spec = src.beam
    method_key = f"sources.{src.name}.beam.method"
    method = spec.method
    if method == "auto":
        method = "convolution" if observer.kind == "angular" else "monte_carlo"
    if method == "convolution" and observer.kind != "angular":
        problems.add(
            method_key,
            f"'convolution' (the far-field fast path) works on angular grids only, but study "
            f"{study!r} has {t.key('observer.kind')} = {observer.kind!r}; use method = "
            "'monte_carlo' (or 'auto', which picks it for screens)",
        )
    if coherent:
        if method == "convolution":
            problems.add(
                t.key("coherent"),
                f"the coherent part of a beam needs {method_key} = 'monte_carlo'; the "
                "convolution fast path adds intensities only",
            )
        if spec.parameters.get("bunch_charge") is None:
            problems.add(
                f"sources.{src.name}.beam.bunch_charge",
                f"missing; study {study!r} asks for the coherent part (coherent = true), "
                "which needs the charge of one bunch (e.g. '1 nC')",
            )
    if method == "convolution":
        beam = spec.electron_beam()
        sx, sy = beam.betatron_divergence
        spread = beam.energy_spread > 0
        for axis, values, sigma, slope in (
            ("theta_x", observer.theta_x, sx, beam.dispersion_xp),
            ("theta_y", observer.theta_y, sy, beam.dispersion_yp),
        ):
            one_point = values is not None and len(values) < 2
            if one_point and (sigma > 0 or slope != 0 or (spread and values[0] != 0.0)):
                problems.add(
                    t.key(f"observer.{axis}"),
                    f"a single angle; the beam's spread (rms {sigma * 1e6:.3g} urad) is convolved "
                    "across pixels: give a grid covering several rms divergences",
                )
        if spread and photon_energy is not None and len(photon_energy) < 2:
            problems.add(
                t.key("photon_energy"),
                "a single photon energy; the energy spread is convolved across photon energies: "
                "give a grid that resolves the spectral lines",
            )
    return method


def _run(t: _Table | None, problems) -> dict:
    if t is None:
        return {}
    out: dict[str, Any] = {}
    workers = t.raw("workers", what="an integer >= 1 or 'all'")
    if workers is not None and workers != "all":
        if isinstance(workers, bool) or not isinstance(workers, int) or workers < 1:
            t._bad("workers", workers, "an integer >= 1 or 'all'")
        else:
            out["workers"] = workers
    out["backend"] = t.text("backend", default="auto", choices=_BACKENDS)
    out["chunk_pixels"] = t.integer("chunk_pixels", default=DEFAULT_CHUNK_PIXELS, minimum=1)
    out["method"] = t.text("method", default="auto")
    out["tolerance"] = t.number("tolerance", default=1e-4, positive=True)
    limit = t.raw("memory_limit", what="a memory size like '4 GB'")
    if limit is not None:
        try:
            out["memory_limit"] = parse_memory(limit)
        except InputError as exc:
            problems.add(t.key("memory_limit"), exc.detail)
    t.finish()
    return {k: v for k, v in out.items() if v is not None}


def parse_job(text: str, *, path=None, base_dir=None) -> Job:
    """Validate a job given as TOML text.

    Parameters
    ----------
    text : str
        The job file's contents.
    path : path-like, optional
        The file the text came from (for messages and provenance).
    base_dir : path-like, optional
        Folder that relative paths are resolved against; default the job
        file's folder, else the current directory.

    Returns
    -------
    Job

    Raises
    ------
    InputError
        Every problem found, in one message.
    """
    source = None if path is None else str(path)
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"not a valid TOML file: {exc}", source=source) from None
    return validate_data(data, text=text, path=path, base_dir=base_dir)[0]


def validate_data(data: dict, *, text: str = "", path=None, base_dir=None) -> tuple[Job, set]:
    """Validate a job already read into plain data (what :mod:`tomllib` gives).

    Returns
    -------
    job : Job
    keys : set of str
        The key patterns the validator looked at (``sources.<name>.magnet[].period``),
        for checking that the documentation lists every key.
    """
    source = None if path is None else str(path)
    if not isinstance(data, dict):
        raise InputError("a job must be a table of keys", source=source)
    base = (
        Path(base_dir)
        if base_dir is not None
        else (Path(path).resolve().parent if path else Path.cwd())
    )
    problems = _Problems(source)
    top = _Table(data, "", problems)
    title = top.text("title", default="")
    description = top.text("description", default="")
    run = _run(top.table("run"), problems)
    files: list[Path] = []
    sources: dict[str, SourceSpec] = {}
    src_table = top.table("sources", required=True)
    if src_table is not None:
        if not src_table.data:
            problems.add("sources", "no source defined; add a table [sources.<name>]")
        for name in src_table.data:
            sub = src_table.table(name, pattern="sources.<name>")
            if sub is not None:
                spec = _source(name, sub, base, files)
                if spec is not None:
                    sources[name] = spec
    studies = []
    raw_studies = top.raw("study", required=True, what="one or more [[study]] tables")
    if raw_studies is not None:
        if isinstance(raw_studies, dict):
            raw_studies = [raw_studies]
        if (
            not isinstance(raw_studies, list)
            or not raw_studies
            or not all(isinstance(s, dict) for s in raw_studies)
        ):
            problems.add("study", "expected one or more [[study]] tables")
        else:
            names = set()
            for i, s in enumerate(raw_studies):
                spec = _study(i, _Table(s, f"study[{i}]", problems, "study[]"), sources, run)
                if spec is not None:
                    if spec.name in names:
                        problems.add(f"study[{i}].name", f"duplicate study name {spec.name!r}")
                    names.add(spec.name)
                    studies.append(spec)
    top.finish()
    for name, studies_needing in problems.needs_current.items():
        if "current" not in src_table.data.get(name, {}):
            problems.add(
                f"sources.{name}.current",
                f"missing; needed for flux and power by study {', '.join(map(repr, studies_needing))} "
                "(give the beam current, e.g. '0.3 A')",
            )
    problems.raise_if_any()
    unique_files = tuple(dict.fromkeys(files))
    job = Job(
        path=None if path is None else Path(path).resolve(),
        text=text,
        title=title,
        description=description,
        sources=sources,
        studies=tuple(studies),
        run=RunSpec(**run),
        input_files=unique_files,
    )
    return job, set(problems.seen_keys)


def load_job(path) -> Job:
    """Read and validate a job file.

    Parameters
    ----------
    path : path-like
        A TOML job file; relative paths inside it are resolved against its
        folder.

    Returns
    -------
    Job

    Raises
    ------
    InputError
        Unreadable file, or every problem found in it.
    """
    p = Path(path)
    try:
        raw = p.read_bytes()
    except OSError as exc:
        raise InputError(f"cannot read the job file: {exc.strerror}", source=str(p)) from None
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise InputError(
            f"the job file is not UTF-8 text ({exc.reason} at byte {exc.start})", source=str(p)
        ) from None
    return parse_job(text, path=p)


def job_summary(job: Job) -> dict:
    """Plain JSON-able description of a validated job (for ``info`` and provenance)."""

    def plain(v):
        if isinstance(v, np.ndarray):
            return v.tolist()
        if isinstance(v, Path):
            return str(v)
        if isinstance(v, dict):
            return {k: plain(x) for k, x in v.items()}
        if isinstance(v, list | tuple):
            return [plain(x) for x in v]
        if hasattr(v, "__dataclass_fields__"):
            return {k: plain(getattr(v, k)) for k in v.__dataclass_fields__}
        return v

    return json.loads(
        json.dumps(
            {
                "title": job.title,
                "sources": plain(job.sources),
                "studies": plain(list(job.studies)),
                "run": plain(job.run),
                "input_files": [str(p) for p in job.input_files],
            }
        )
    )

"""openPMD particle series (the open standard for particle-mesh data), via openpmd-api.

Reading
-------
A series is opened with ``openpmd_api.Series`` in any iteration encoding:
group-based (one file, ``/data/<iteration>/…``) or file-based (one file per
iteration; pass the pattern ``dir/name_%T.h5`` — or any one file of the
series, whose ``iterationFormat`` attribute gives the pattern).

For the chosen particle species (``species=``; by default the only one in
the series, else an error listing them) every iteration contributes one
sample per particle, and each particle's path is gathered across the
iterations by its ``id`` record:

* time: (``time`` + record ``timeOffset``) × ``timeUnitSI`` of each iteration;
* position: ``position`` × unitSI + ``positionOffset`` × unitSI per
  component (``positionOffset`` absent counts as 0);
* momentum: ``momentum`` × unitSI, turned into u = p/(m c) with the mass of
  the particle, then γ = sqrt(1 + |u|²), β = u/γ exactly
  (:func:`lwrad.io._common.kinematics_from_momentum`);
* records with ``macroWeighted = 1`` hold the value of the whole
  macro-particle; the value per real particle is value × w^(−weightingPower)
  with w the ``weighting`` (openPMD standard 1.1, "macroWeighted");
* when ``momentum`` has another ``timeOffset`` than ``position`` (leapfrog
  codes store it half a step apart), u is moved to the position times by a
  not-a-knot cubic spline through each particle's momenta in time;
* charge and mass from the ``charge`` and ``mass`` records when present
  (they must agree with ``particle=`` if that is given), else from
  ``particle=`` (default electron);
* ``unitDimension`` of every record used is checked against the expected
  dimension (L for positions, L·M/T for momentum, I·T for charge, M for
  mass, none for weighting and id); all-zero dimensions are taken as "not
  set by the writer" and accepted;
* ``weighting`` (constant along each path) becomes the Bunch weights.

One particle gives a :class:`~lwrad.trajectory.Trajectory` (also when
``particle_id=`` picks one), several a :class:`~lwrad.trajectory.Bunch`.

Writing
-------
:func:`write` stores a Trajectory or a Bunch whose members share one time
grid: one iteration per sample (``time`` in s, ``timeUnitSI`` = 1),
``position`` in m, ``positionOffset`` 0, ``momentum`` as u = γβ with
unitSI = m c (so γ comes back exact), ``id``, ``weighting``, constant
``charge`` and ``mass``. β̇ is not an openPMD record; the reader derives it.
A path with ``%T`` gives a file-based series (files written in a temporary
directory, then moved in place one by one, never over existing files unless
``overwrite=True``), any other path a group-based file written atomically.
"""

from __future__ import annotations

import contextlib
import glob
import os
import re
import shutil
import tempfile

import numpy as np

from lwrad.constants import c
from lwrad.errors import InputError
from lwrad.io._common import (
    atomic_write,
    build,
    check_samples,
    foreign_errors,
    is_hdf5_head,
    kinematics_from_momentum,
    resolve_particle,
)
from lwrad.trajectory import Bunch, Trajectory

__all__ = ["UNIT_DIMENSIONS", "sniff", "series_path", "read", "write"]

# openPMD unitDimension order: L, M, T, I, θ, N, J (openPMD standard 1.1, "unitDimension")
#: record → expected unitDimension exponents
UNIT_DIMENSIONS: dict[str, tuple[float, ...]] = {
    "position": (1, 0, 0, 0, 0, 0, 0),
    "positionOffset": (1, 0, 0, 0, 0, 0, 0),
    "momentum": (1, 1, -1, 0, 0, 0, 0),
    "charge": (0, 0, 1, 1, 0, 0, 0),
    "mass": (0, 1, 0, 0, 0, 0, 0),
    "weighting": (0, 0, 0, 0, 0, 0, 0),
    "id": (0, 0, 0, 0, 0, 0, 0),
}
_WEIGHTING_POWER = {
    "position": 0.0,
    "positionOffset": 0.0,
    "momentum": 1.0,
    "charge": 1.0,
    "mass": 1.0,
    "weighting": 1.0,
    "id": 0.0,
}
_HDF5_CONFIG = '{"hdf5": {"dataset": {"chunks": "none"}}}'  # contiguous datasets: small files


def _api():
    try:
        import openpmd_api
    except ImportError:
        raise InputError(
            "reading openPMD needs the package openpmd-api (pip install openpmd-api)"
        ) from None
    return openpmd_api


def sniff(path, head: bytes) -> bool:
    """True for an HDF5 file with the openPMD root attribute, or an openPMD JSON file."""
    if is_hdf5_head(head):
        try:
            import h5py

            with h5py.File(path, "r") as f:
                return "openPMD" in f.attrs
        except Exception:  # noqa: BLE001 - a sniffer answers, it never raises
            return False
    return head.lstrip()[:1] == b"{" and b'"openPMD"' in head


def series_path(path) -> str:
    """The path openpmd-api should open: the ``%T`` pattern for any file of a file-based series."""
    p = os.fspath(path)
    if "%T" in os.path.basename(p) or "%0" in os.path.basename(p):
        return p
    try:
        import h5py

        with h5py.File(p, "r") as f:
            encoding = f.attrs.get("iterationEncoding")
            pattern = f.attrs.get("iterationFormat")
    except Exception:  # noqa: BLE001 - not HDF5: let openpmd-api judge it
        return p
    if isinstance(encoding, bytes):
        encoding = encoding.decode("utf-8", "replace")
    if isinstance(pattern, bytes):
        pattern = pattern.decode("utf-8", "replace")
    if encoding != "fileBased" or not isinstance(pattern, str) or "%" not in pattern:
        return p
    pattern = os.path.basename(pattern)
    if not os.path.splitext(pattern)[1]:
        pattern += os.path.splitext(p)[1]
    return os.path.join(os.path.dirname(p), pattern)


def _dims(record):
    try:
        return tuple(float(v) for v in record.unit_dimension)
    except Exception:  # noqa: BLE001 - absent attribute: treat as unset
        return (0.0,) * 7


def _attr(record, name, default):
    try:
        if record.contains_attribute(name):
            return record.get_attribute(name)
    except Exception:  # noqa: BLE001
        pass
    return default


class _Reader:
    """Loads the records of one species, iteration by iteration, with locations for errors."""

    def __init__(self, io, series, source, species):
        self.io, self.series, self.source, self.species = io, series, source, species

    def where(self, k, record, comp=None):
        name = (
            record
            if comp is None or comp == self.io.Record_Component.SCALAR
            else f"{record}/{comp}"
        )
        return f"iteration {k}, record {self.species}/{name}"

    def check_dims(self, k, ps, name):
        dims = _dims(ps[name])
        want = UNIT_DIMENSIONS[name]
        if any(dims) and dims != tuple(float(v) for v in want):
            raise InputError(
                f"unitDimension {list(dims)} is not that of {name} {list(want)} (L, M, T, I, θ, N, J)",
                source=self.source,
                location=self.where(k, name),
            )

    def component(self, k, ps, name, comp, n):
        """One record component as float64 SI values per particle, shape (n,), loaded lazily."""
        rc = ps[name][comp]
        where = self.where(k, name, comp)
        shape = list(rc.shape)
        if shape != [n]:
            raise InputError(
                f"shape {shape} does not match the {n} particles of the id record",
                source=self.source,
                location=where,
            )
        if np.dtype(rc.dtype).kind not in "fiu":
            raise InputError(
                f"must hold numbers, found {rc.dtype}", source=self.source, location=where
            )
        data = rc.load_chunk([0], [n]) if n else np.empty(0)
        unit = float(rc.unit_SI)
        if not np.isfinite(unit) or unit == 0.0:
            raise InputError(
                f"unitSI {unit!r} must be finite and non-zero", source=self.source, location=where
            )
        return data, unit, where

    def scalar_key(self):
        return self.io.Record_Component.SCALAR


def _finish(values, where, source):
    arr = np.asarray(values, dtype=np.float64)
    bad = ~np.isfinite(arr)
    if bad.any():
        raise InputError(
            f"particle {int(np.argmax(bad))}: not a finite number", source=source, location=where
        )
    return arr


def read(path, *, species: str | None = None, particle_id=None, particle=None, **unknown):
    """Read particle paths from an openPMD series (see the module docstring).

    Parameters
    ----------
    path : str or os.PathLike
        ``dir/name_%T.h5`` (file-based), one file of a file-based series, or a
        group-based file.
    species : str, optional
        Particle species; needed when the series holds more than one.
    particle_id : int or sequence of int, optional
        The ``id`` of the particle(s) to read; one id gives a Trajectory.
    particle : str or (float, float), optional
        Used for charge and mass when the series has no ``charge``/``mass``
        records (default electron); must agree with them otherwise.

    Returns
    -------
    Trajectory or Bunch
    """
    p = os.fspath(path)
    if unknown:
        raise InputError(
            f"unknown option(s) {', '.join(sorted(unknown))} for openPMD; known: species, particle_id, particle",
            source=p,
        )
    spath = series_path(p)
    if spath != p or "%" in os.path.basename(p):
        directory, name = os.path.split(spath)
        pattern = os.path.join(
            glob.escape(directory or "."), re.sub(r"%0?\d*T", "*", glob.escape(name))
        )
        if not glob.glob(pattern):
            raise InputError("no files of the file-based series found", source=spath)
    elif not os.path.isfile(p):
        raise InputError("no such file", source=p)
    io = _api()
    with foreign_errors(spath, what="cannot open as an openPMD series", extra=(io.Error,)):
        series = io.Series(spath, io.Access.read_only)
    try:
        with (
            foreign_errors(spath, what="damaged openPMD series", extra=(io.Error,)),
            np.errstate(all="ignore"),
        ):
            return _read_series(io, series, spath, species, particle_id, particle)
    finally:
        with contextlib.suppress(Exception):
            series.close()


def _read_series(io, series, src, species, particle_id, particle):
    iterations = sorted(int(k) for k in series.iterations)
    if len(iterations) < 2:
        raise InputError(
            f"the series has {len(iterations)} iteration(s); a path needs at least 2", source=src
        )
    names = set()
    for k in iterations:
        names.update(series.iterations[k].particles)
    if not names:
        raise InputError("the series holds no particle species", source=src)
    if species is None:
        if len(names) != 1:
            raise InputError(
                f"the series holds several species; choose one with species=: {', '.join(sorted(names))}",
                source=src,
                location="option species",
            )
        species = next(iter(names))
    elif species not in names:
        raise InputError(
            f"no species {species!r}; the series holds {', '.join(sorted(names))}",
            source=src,
            location="option species",
        )
    reader = _Reader(io, series, src, species)
    scalar = io.Record_Component.SCALAR
    per_iteration = []
    for k in iterations:
        it = series.iterations[k]
        if species not in it.particles:
            continue
        ps = it.particles[species]
        records = set(ps)
        for needed in ("id", "position", "momentum"):
            if needed not in records:
                raise InputError(
                    "missing record"
                    + (
                        " (needed to follow each particle across iterations)"
                        if needed == "id"
                        else ""
                    ),
                    source=src,
                    location=reader.where(k, needed),
                )
        for name in records & set(UNIT_DIMENSIONS):
            reader.check_dims(k, ps, name)
        id_rc = ps["id"][scalar]
        n = int(list(id_rc.shape)[0]) if list(id_rc.shape) else 0
        pending = {"id": reader.component(k, ps, "id", scalar, n)}
        for rec in ("position", "positionOffset", "momentum"):
            if rec == "positionOffset" and rec not in records:
                continue
            for comp in "xyz":
                if comp not in ps[rec]:
                    raise InputError(
                        "missing component", source=src, location=reader.where(k, rec, comp)
                    )
                pending[f"{rec}/{comp}"] = reader.component(k, ps, rec, comp, n)
        for rec in ("weighting", "charge", "mass"):
            if rec in records:
                if scalar not in ps[rec]:
                    raise InputError(
                        "must be a scalar record", source=src, location=reader.where(k, rec)
                    )
                pending[rec] = reader.component(k, ps, rec, scalar, n)
        series.flush()
        time_unit = float(it.time_unit_SI)
        base_time = float(it.time)
        t_pos = (base_time + float(ps["position"].time_offset)) * time_unit
        t_mom = (base_time + float(ps["momentum"].time_offset)) * time_unit
        values = {
            key: _finish(data, where, src) * unit for key, (data, unit, where) in pending.items()
        }
        values["id"] = np.asarray(pending["id"][0]).astype(np.int64)
        if np.unique(values["id"]).size != n:
            raise InputError("duplicate particle ids", source=src, location=reader.where(k, "id"))
        weighting = values.get("weighting")
        for rec in ("position", "positionOffset", "momentum", "charge", "mass"):
            if rec not in records:
                continue
            if int(np.asarray(_attr(ps[rec], "macroWeighted", 0)).reshape(-1)[0]) == 1:
                power = float(
                    np.asarray(_attr(ps[rec], "weightingPower", _WEIGHTING_POWER[rec])).reshape(-1)[
                        0
                    ]
                )
                if power != 0.0:
                    if weighting is None or np.any(weighting <= 0):
                        raise InputError(
                            "macroWeighted record needs a positive weighting record",
                            source=src,
                            location=reader.where(k, rec),
                        )
                    scale = weighting ** (-power)
                    for key in [key for key in values if key == rec or key.startswith(rec + "/")]:
                        values[key] = values[key] * scale
        if not (np.isfinite(t_pos) and np.isfinite(t_mom)):
            raise InputError("iteration time is not finite", source=src, location=f"iteration {k}")
        per_iteration.append((k, t_pos, t_mom, n, values))
    return _assemble(per_iteration, src, species, particle_id, particle)


def _assemble(per_iteration, src, species, particle_id, particle):
    ids = np.concatenate([v["id"] for *_, v in per_iteration])
    t_pos = np.concatenate([np.full(n, tp) for _, tp, _, n, _ in per_iteration])
    t_mom = np.concatenate([np.full(n, tm) for _, _, tm, n, _ in per_iteration])
    iteration = np.concatenate([np.full(n, k) for k, _, _, n, _ in per_iteration])

    def stack(key, default=None):
        parts = [v.get(key) for *_, v in per_iteration]
        if any(part is None for part in parts):
            if all(part is None for part in parts):
                return default
            raise InputError(
                f"record {key} is present in some iterations only",
                source=src,
                location=f"species {species}",
            )
        return np.concatenate(parts)

    pos = np.column_stack([stack(f"position/{c_}") for c_ in "xyz"])
    offset = [stack(f"positionOffset/{c_}") for c_ in "xyz"]
    if all(o is not None for o in offset):
        pos = pos + np.column_stack(offset)
    mom = np.column_stack([stack(f"momentum/{c_}") for c_ in "xyz"])
    weights, charges, masses = stack("weighting"), stack("charge"), stack("mass")

    wanted = None
    if particle_id is not None:
        wanted = np.atleast_1d(np.asarray(particle_id))
        if wanted.dtype.kind not in "iu" or wanted.ndim != 1:
            raise InputError(
                "particle_id must be an integer or a list of integers",
                source=src,
                location="option particle_id",
            )
        missing = sorted(set(wanted.tolist()) - set(np.unique(ids).tolist()))
        if missing:
            raise InputError(
                f"no particle with id {missing[0]} in species {species!r}",
                source=src,
                location="option particle_id",
            )
    order = np.lexsort((t_pos, ids))
    ids_sorted = ids[order]
    starts = np.flatnonzero(np.r_[True, ids_sorted[1:] != ids_sorted[:-1]])
    ends = np.r_[starts[1:], ids_sorted.size]
    trajectories, weight_list = [], []
    for a, b in zip(starts, ends, strict=True):
        pid = int(ids_sorted[a])
        if wanted is not None and pid not in wanted:
            continue
        sel = order[a:b]
        where = f"species {species}, particle id {pid}"
        if sel.size < 2:
            raise InputError(
                f"particle appears in {sel.size} iteration(s) only (iteration {int(iteration[sel][0])}); "
                "a path needs 2; select others with particle_id=",
                source=src,
                location=where,
            )
        q_file = _constant(charges, sel, where, "charge", src)
        m_file = _constant(masses, sel, where, "mass", src)
        charge, mass = resolve_particle(particle, charge=q_file, mass=m_file, source=src)
        t = t_pos[sel]
        u = mom[sel] / (mass * c)
        tm = t_mom[sel]
        its = iteration[sel]
        check_samples(
            {"t": t},
            lambda name, i, where=where, its=its: (where, f"iteration {int(its[i])}, time"),
            src,
        )
        if not np.array_equal(tm, t):
            u = _move_in_time(tm, u, t, where, src)
        gamma, beta = kinematics_from_momentum(u)
        trajectories.append(
            build(
                Trajectory,
                src,
                location=where,
                t=t,
                r=pos[sel],
                beta=beta,
                gamma=gamma,
                charge=charge,
                mass=mass,
                source=src,
            )
        )
        weight_list.append(_constant(weights, sel, where, "weighting", src, default=1.0))
    if len(trajectories) == 1:
        return trajectories[0]
    w = np.asarray(weight_list) if weights is not None else None
    return build(
        Bunch,
        src,
        location=f"species {species}, record weighting",
        trajectories=trajectories,
        weights=w,
        source=src,
    )


def _constant(values, sel, where, name, src, default=None):
    if values is None:
        return default
    v = values[sel]
    if not np.all(np.abs(v - v[0]) <= 1e-12 * np.abs(v[0])):
        raise InputError(
            f"{name} changes along the particle's path",
            source=src,
            location=f"{where}, record {name}",
        )
    return float(v[0])


def _move_in_time(t_from, u, t_to, where, src):
    ok = np.diff(t_from) > 0
    if not ok.all():
        raise InputError(
            "momentum times do not increase", source=src, location=f"{where}, record momentum"
        )
    if t_from.size < 4:
        return np.column_stack([np.interp(t_to, t_from, u[:, j]) for j in range(3)])
    from scipy.interpolate import CubicSpline

    return CubicSpline(t_from, u, axis=0, bc_type="not-a-knot")(t_to)


# -- writing --------------------------------------------------------------------------------------
def write(obj, path, *, overwrite: bool = False, species: str = "electrons", **unknown) -> str:
    """Write a Trajectory or a Bunch (common time grid) as an openPMD series.

    Parameters
    ----------
    obj : Trajectory or Bunch
    path : str or os.PathLike
        ``dir/name_%T.h5`` for a file-based series, else a group-based file
        (``.h5``; ``.json`` for the JSON backend).
    overwrite : bool
        Replace existing files.
    species : str
        Name of the particle species.

    Returns
    -------
    str
        The path (pattern) written.
    """
    p = os.fspath(path)
    if unknown:
        raise InputError(
            f"unknown option(s) {', '.join(sorted(unknown))} for openPMD; known: species", source=p
        )
    members = [obj] if isinstance(obj, Trajectory) else list(obj)
    weights = np.ones(1) if isinstance(obj, Trajectory) else np.asarray(obj.weights)
    t = members[0].t
    for i, tr in enumerate(members):
        if not np.array_equal(tr.t, t):
            raise InputError(
                f"bunch member {i} has other sample times than member 0; openPMD stores one time per "
                "iteration — resample the members onto one grid first",
                source=p,
            )
    io = _api()
    ext = os.path.splitext(p)[1]

    def _write(target):
        config = _HDF5_CONFIG if ext in (".h5", ".hdf5") else "{}"
        with foreign_errors(p, what="openpmd-api could not write", extra=(io.Error,)):
            series = io.Series(target, io.Access.create, config)
            try:
                _write_series(io, series, members, weights, t, species)
            finally:
                series.close()

    if "%T" not in os.path.basename(p):
        return atomic_write(p, _write, overwrite=overwrite, suffix=ext)
    directory = os.path.dirname(os.path.abspath(p))
    if not os.path.isdir(directory):
        raise InputError("the directory does not exist", source=directory)
    tmpdir = tempfile.mkdtemp(prefix=".lwrad-openpmd.", dir=directory)
    try:
        _write(os.path.join(tmpdir, os.path.basename(p)))
        produced = sorted(os.listdir(tmpdir))
        clash = [f for f in produced if os.path.exists(os.path.join(directory, f))]
        if clash and not overwrite:
            raise InputError(
                f"{clash[0]} exists; pass overwrite=True to replace it", source=directory
            )
        for name in produced:
            os.replace(os.path.join(tmpdir, name), os.path.join(directory, name))
    finally:
        shutil.rmtree(tmpdir, ignore_errors=True)
    return os.path.abspath(p)


def _write_series(io, series, members, weights, t, species):
    n = len(members)
    masses = np.array([tr.mass for tr in members])
    same_mass = np.all(masses == masses[0])
    ids = np.arange(n, dtype=np.uint64)
    series.set_software("lwrad")
    dims = {
        "L": io.Unit_Dimension.L,
        "M": io.Unit_Dimension.M,
        "T": io.Unit_Dimension.T,
        "I": io.Unit_Dimension.I,
    }

    def component(rc, data, unit_si=1.0):
        rc.reset_dataset(io.Dataset(np.dtype(data.dtype), [n]))
        rc.store_chunk(np.ascontiguousarray(data))
        rc.unit_SI = unit_si

    def constant(rc, value, unit_si=1.0):
        rc.reset_dataset(io.Dataset(np.dtype("float64"), [n]))
        rc.make_constant(float(value))
        rc.unit_SI = unit_si

    for k in range(t.size):
        it = series.iterations[k]
        it.time = float(t[k])
        it.dt = float(t[k + 1] - t[k]) if k + 1 < t.size else float(t[k] - t[k - 1])
        it.time_unit_SI = 1.0
        ps = it.particles[species]
        r = np.array([tr.r[k] for tr in members])
        u = np.array([tr.gamma[k] * tr.beta[k] for tr in members])
        for j, comp in enumerate("xyz"):
            component(ps["position"][comp], r[:, j].copy())
            constant(ps["positionOffset"][comp], 0.0)
            if same_mass:
                component(ps["momentum"][comp], u[:, j].copy(), masses[0] * c)
            else:
                component(ps["momentum"][comp], u[:, j] * masses * c)
        component(ps["id"][io.Record_Component.SCALAR], ids)
        component(
            ps["weighting"][io.Record_Component.SCALAR],
            np.asarray(weights, dtype=np.float64).copy(),
        )
        charges = np.array([tr.charge for tr in members])
        if np.all(charges == charges[0]):
            constant(ps["charge"][io.Record_Component.SCALAR], charges[0])
        else:
            component(ps["charge"][io.Record_Component.SCALAR], charges)
        if same_mass:
            constant(ps["mass"][io.Record_Component.SCALAR], masses[0])
        else:
            component(ps["mass"][io.Record_Component.SCALAR], masses.copy())
        ps["position"].unit_dimension = {dims["L"]: 1}
        ps["positionOffset"].unit_dimension = {dims["L"]: 1}
        ps["momentum"].unit_dimension = {dims["L"]: 1, dims["M"]: 1, dims["T"]: -1}
        ps["charge"].unit_dimension = {dims["I"]: 1, dims["T"]: 1}
        ps["mass"].unit_dimension = {dims["M"]: 1}
        for rec, power in _WEIGHTING_POWER.items():
            ps[rec].set_attribute("macroWeighted", np.uint32(0))
            ps[rec].set_attribute("weightingPower", float(power))
        it.close()

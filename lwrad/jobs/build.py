"""Turn validated job specs into lwrad objects: sources, observers, apertures.

This is the only place where the job layer calls the readers, the magnet
models and the tracker, so the mapping from job-file keys to API arguments
is written once.
"""

from __future__ import annotations

import math

import numpy as np

from lwrad.errors import InputError
from lwrad.jobs.schema import ApertureSpec, ObserverSpec, SourceSpec

__all__ = [
    "build_source",
    "build_magnet",
    "build_magnets",
    "build_observer",
    "build_aperture",
    "k_to_peak_field",
]


def k_to_peak_field(k: float, period: float, charge: float, mass: float) -> float:
    """Peak field (T) of an undulator with deflection parameter ``k``.

    K = |q| B0 λu / (2π m c)  (X-ray Data Booklet sec. 2.1, K = 0.934 λu[cm] B0[T]
    for electrons), so B0 = 2π m c K / (|q| λu).

    Parameters
    ----------
    k : float
        Deflection parameter K (dimensionless).
    period : float
        Undulator period λu, m.
    charge, mass : float
        Particle charge (C) and mass (kg).
    """
    from lwrad.constants import c

    return 2.0 * math.pi * mass * c * k / (abs(charge) * period)


def build_magnet(m: dict, particle: str = "electron"):
    """One magnet object from a validated magnet dict (SI values, key ``type``).

    Returns
    -------
    (magnet, center) : (lwrad.magnets.Magnet, float)
        The model and the z (m) where the job file puts it.
    """
    from lwrad import magnets
    from lwrad.constants import particle_properties

    kind = m["type"]
    center = float(m.get("center", 0.0))
    common = {
        "terminations": m.get("terminations", True),
        "off_axis": m.get("off_axis", False),
        "pole_error_rms": m.get("pole_error_rms", 0.0),
        "seed": m.get("seed"),
        "z_center": center,
    }
    if kind in ("planar_undulator", "helical_undulator"):
        peak = m.get("peak_field")
        if peak is None:
            charge, mass = particle_properties(particle)
            peak = k_to_peak_field(m["k"], m["period"], charge, mass)
        if kind == "planar_undulator":
            return magnets.PlanarUndulator(m["period"], m["n_periods"], peak, **common), center
        return magnets.HelicalUndulator(
            m["period"], m["n_periods"], peak, handedness=m["handedness"], **common
        ), center
    if kind == "elliptical_undulator":
        return magnets.EllipticalUndulator(
            m["period"], m["n_periods"], m["peak_field_y"], m["peak_field_x"], m["phase"], **common
        ), center
    if kind == "dipole":
        kw = {"fringe": "soft" if m["fringe"] == "soft" else None, "z_center": center}
        if m.get("fringe_length") is not None:
            kw["fringe_length"] = m["fringe_length"]
        return magnets.Dipole(m["field"], m["length"], **kw), center
    if kind == "field_map":
        return magnets.FieldMap.from_file(m["file"]), center
    if kind == "on_axis_field_map":
        return magnets.OnAxisFieldMap.from_file(m["file"]), center
    raise InputError(f"unknown magnet type {kind!r}")  # pragma: no cover - schema checks it


def build_magnets(spec: SourceSpec):
    """The magnet (or sequence of magnets) a ``magnets`` source tracks through.

    Undulators and dipoles are built at their ``center``; a field map's own z
    axis is shifted by its ``center`` through a sequence.
    """
    from lwrad import magnets

    built = [build_magnet(m, spec.particle) for m in spec.magnets]
    if len(built) == 1:
        magnet, center = built[0]
        if spec.magnets[0]["type"] not in ("field_map", "on_axis_field_map") or center == 0.0:
            return magnet
    entries = [
        (magnet, center if m["type"] in ("field_map", "on_axis_field_map") else 0.0)
        for (magnet, center), m in zip(built, spec.magnets, strict=True)
    ]
    return magnets.MagnetSequence(entries)


def build_source(spec: SourceSpec, *, job_source=None):
    """The Trajectory (or Bunch) a source stands for: tracked or read from files.

    Parameters
    ----------
    spec : SourceSpec
        A validated source.
    job_source : str, optional
        The job file, for error messages.
    """
    location = f"key sources.{spec.name}"
    if spec.kind == "magnets":
        from lwrad.tracking import track

        magnet = build_magnets(spec)
        try:
            return track(magnet, spec.energy_ev, particle=spec.particle, **spec.tracking)
        except InputError as exc:
            raise InputError(
                f"tracking failed: {exc}", source=job_source, location=location
            ) from None
    from lwrad.io import read_trajectory
    from lwrad.trajectory import Bunch

    fmt = None if spec.format == "auto" else spec.format
    items = []
    for path in spec.files:
        try:
            obj = read_trajectory(path, format=fmt, **spec.reader)
        except TypeError as exc:
            # an option the reader does not know
            raise InputError(
                f"reader options {sorted(spec.reader)} not accepted for {path}: {exc}",
                source=job_source,
                location=f"{location}.reader",
            ) from None
        items.append(obj)
    if not spec.bunch:
        return items[0]
    members = []
    weights = []
    for obj in items:
        if isinstance(obj, Bunch):
            members.extend(obj)
            weights.extend(np.asarray(obj.weights, dtype=float).tolist())
        else:
            members.append(obj)
            weights.append(1.0)
    return Bunch(members, weights)


def build_observer(spec: ObserverSpec):
    """AngularGrid, Screen or Points from a validated observer spec (SI)."""
    from lwrad.observers import AngularGrid, Points, Screen

    if spec.kind == "angular":
        return AngularGrid(spec.theta_x, spec.theta_y)
    if spec.kind == "screen":
        return Screen(spec.distance, spec.x, spec.y)
    return Points(spec.points)


def build_aperture(spec: ApertureSpec | None):
    """RectangularAperture or CircularAperture (observer units: rad or m), or None."""
    if spec is None:
        return None
    from lwrad.observers import CircularAperture, RectangularAperture

    if spec.kind == "rectangular":
        return RectangularAperture(spec.x_min, spec.x_max, spec.y_min, spec.y_max)
    return CircularAperture(spec.radius, center=spec.center)

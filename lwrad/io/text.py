"""Delimited text trajectories: columns named in a header line.

File layout
-----------
* Lines starting with ``#`` are comments; text after ``#`` on a data line is
  ignored. A comment ``# key: value`` (or ``# key = value``) with a key of
  :data:`HEADER_KEYS` sets a file property: ``particle`` (a name such as
  ``electron``, or ``ion:Z:A``), ``charge`` (C), ``mass`` (kg),
  ``reference_energy`` (``"2.5 GeV"``, bare number in eV). Options of the
  same name passed to :func:`read` must agree with the file.
* The first non-comment line is the header: column names separated by the
  file's delimiter — commas if the header has a comma, else whitespace (spaces
  or tabs). A name may carry a unit in brackets, ``x[mm]``, ``t[ns]``,
  ``px[MeV/c]``, parsed by :func:`lwrad.units.unit_factor`; without one the
  column is in the default unit of :data:`COLUMNS`.
* Every further non-empty line is one sample with one number per column.

Two forms
---------
**Time form** (a ``t`` column): ``t, x, y, z`` and the velocity, either
``beta_x, beta_y, beta_z`` (optionally ``gamma``) or the momentum
``px, py, pz`` (default unit ``mc``, the particle's mass times c; also
``eV/c``, ``MeV/c``, ``GeV/c``, ``kg*m/s``). Optional ``beta_dot_x..z`` (1/s).
``t,x,y,z,beta_x,beta_y,beta_z`` in SI loads with no options. From momentum
γ = sqrt(1 + (p/mc)²) and β = (p/mc)/γ are computed without loss of digits
(:func:`lwrad.io._common.kinematics_from_momentum`) and γ is handed to the
:class:`~lwrad.trajectory.Trajectory`.

**Path-length form** (no ``t`` column), as tracking codes write it. The
energy comes from exactly one of ``energy`` (total energy, default eV),
``gamma``, or ``delta`` (relative momentum deviation, p = p0 (1 + δ), with
``reference_energy`` as option or header comment, total energy in eV).

* ``z, x, xp, y, yp``: z is the independent variable, x′ = dx/dz and
  y′ = dy/dz are slopes (default rad; ``xp[mrad]``). With β from γ,
  β_z = β / sqrt(1 + x′² + y′²), β_x = x′ β_z, β_y = y′ β_z, and the time is
  t(z) = ∫ dz / (c β_z), starting at t = 0 on the first line.
* ``s, x, xp, y, yp`` (no ``z``): s is taken as the coordinate along a
  *straight* reference line, i.e. exactly as z above (position z = s). This
  reader does not know a curved reference orbit; for a curved path give
  Cartesian positions as below.
* ``s, x, y, z`` (Cartesian positions, no slopes): s is the particle's own
  path length along its curved path. Then t(s) = ∫ ds / (β c) and the
  direction of β is the unit tangent dr/ds of a cubic spline through the
  positions. |dr/ds| must be 1 within 1e-3 (else s is not the path length of
  x, y, z and the file is rejected).

The integrals use the exact antiderivative of a not-a-knot cubic spline
through the integrand at the samples (``scipy.interpolate.CubicSpline``),
fourth order in the sample spacing for smooth paths (de Boor, *A Practical
Guide to Splines*, cited from memory); the tests measure the order against
a circular arc.

Every fault is an :class:`~lwrad.errors.InputError` naming the file, the line
and the column.
"""

from __future__ import annotations

import math
import os
import re

import numpy as np

from lwrad.constants import c
from lwrad.errors import InputError
from lwrad.io._common import (
    atomic_write,
    build,
    check_readable,
    check_samples,
    kinematics_from_momentum,
    resolve_particle,
)
from lwrad.trajectory import Bunch, Trajectory, spline_derivative
from lwrad.units import UNITS, parse_quantity, unit_factor

__all__ = ["COLUMNS", "HEADER_KEYS", "sniff", "read", "write"]

#: Column name → (dimension, default unit). ``rate`` is 1/s (only ``1/s``).
COLUMNS: dict[str, tuple[str, str]] = {
    "t": ("time", "s"),
    "x": ("length", "m"),
    "y": ("length", "m"),
    "z": ("length", "m"),
    "s": ("length", "m"),
    "beta_x": ("dimensionless", "1"),
    "beta_y": ("dimensionless", "1"),
    "beta_z": ("dimensionless", "1"),
    "beta_dot_x": ("rate", "1/s"),
    "beta_dot_y": ("rate", "1/s"),
    "beta_dot_z": ("rate", "1/s"),
    "gamma": ("dimensionless", "1"),
    "px": ("momentum", "mc"),
    "py": ("momentum", "mc"),
    "pz": ("momentum", "mc"),
    "xp": ("angle", "rad"),
    "yp": ("angle", "rad"),
    "energy": ("energy", "eV"),
    "delta": ("dimensionless", "1"),
}

#: Keys of ``# key: value`` header comments.
HEADER_KEYS = ("particle", "charge", "mass", "reference_energy")

_GROUPS = {
    "beta": ("beta_x", "beta_y", "beta_z"),
    "beta_dot": ("beta_dot_x", "beta_dot_y", "beta_dot_z"),
    "momentum": ("px", "py", "pz"),
    "position": ("x", "y", "z"),
}
_NAME = re.compile(r"^([A-Za-z_][A-Za-z0-9_]*)(?:\[([^\[\]]*)\])?$")
_HEADER_COMMENT = re.compile(r"^#\s*([A-Za-z_]+)\s*[:=]\s*(.*?)\s*$")
# Tangent-length tolerance for the s, x, y, z form: larger than the spline's
# derivative error at any sampling that resolves the path (a few 1e-5 at 10
# samples per radian of bend), far smaller than a confusion of s with z.
_TANGENT_RTOL = 1e-3


# -- reading --------------------------------------------------------------------------------------
def sniff(path, head: bytes) -> bool:
    """True if the head of the file decodes as text and has no NUL byte."""
    if not head or b"\x00" in head:
        return False
    try:
        head.decode("utf-8")
    except UnicodeDecodeError as exc:
        # a multi-byte character cut at the end of the head is still text
        return exc.start >= len(head) - 3
    return True


def _split(line: str, comma: bool) -> list[str]:
    if comma:
        return [f.strip() for f in line.split(",")]
    return line.split()


def _tokenize(path):
    """Header comments, header fields and data rows with their line numbers."""
    try:
        with open(path, "rb") as fh:
            raw = fh.read()
    except OSError as exc:
        raise InputError(f"cannot read the file: {exc.strerror or exc}", source=path) from None
    if b"\x00" in raw:
        raise InputError("a binary file, not delimited text (NUL byte found)", source=path)
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        raise InputError(
            "not UTF-8 text (undecodable byte)", source=path, location=f"line {line}"
        ) from None
    props: dict[str, tuple[str, int]] = {}
    header = None
    comma = False
    rows, line_numbers = [], []
    for number, line in enumerate(text.splitlines(), start=1):
        stripped = line.strip()
        if stripped.startswith("#"):
            m = _HEADER_COMMENT.match(stripped)
            if m and m.group(1).lower() in HEADER_KEYS:
                key = m.group(1).lower()
                if key in props:
                    raise InputError(
                        f"header key {key!r} given twice", source=path, location=f"line {number}"
                    )
                props[key] = (m.group(2), number)
            continue
        content = stripped.split("#", 1)[0].strip()
        if not content:
            continue
        if header is None:
            comma = "," in content
            header = (_split(content, comma), number)
            continue
        rows.append(_split(content, comma))
        line_numbers.append(number)
    if header is None:
        raise InputError("no header line naming the columns (and no data)", source=path)
    return props, header, rows, line_numbers


def _parse_header(fields, line, path, mass):
    """Column name → (index, factor to SI, unit string as written)."""
    where = f"line {line}"
    if all(_looks_numeric(f) for f in fields):
        raise InputError(
            "the first non-comment line must name the columns (e.g. 't,x,y,z,beta_x,beta_y,beta_z'), "
            "found numbers",
            source=path,
            location=where,
        )
    columns = {}
    for index, field in enumerate(fields):
        m = _NAME.match(field.replace(" ", ""))
        if not m:
            raise InputError(
                f"cannot read column name {field!r}; write name or name[unit], e.g. x[mm]",
                source=path,
                location=f"{where}, column {index + 1}",
            )
        name, unit = m.group(1).lower(), m.group(2)
        if name not in COLUMNS:
            raise InputError(
                f"unknown column {name!r}; known columns: {', '.join(COLUMNS)}",
                source=path,
                location=f"{where}, column {field}",
            )
        if name in columns:
            raise InputError(
                f"column {name!r} appears twice", source=path, location=f"{where}, column {field}"
            )
        dimension, default = COLUMNS[name]
        unit = default if unit is None or unit.strip() == "" else unit.strip()
        if dimension == "rate":
            if unit.replace(" ", "") != "1/s":
                raise InputError(
                    f"unit {unit!r} of {name} must be 1/s",
                    source=path,
                    location=f"{where}, column {field}",
                )
            factor = 1.0
        elif unit.replace(" ", "") == "mc":
            factor = 1.0  # kept as u = p/(m c): multiplying by m c and dividing again would round
        else:
            factor = unit_factor(
                unit, dimension, mass=mass, source=path, location=f"{where}, column {field}"
            )
        columns[name] = (index, factor, unit.replace(" ", ""))
    return columns


def _looks_numeric(token: str) -> bool:
    try:
        float(token)
    except ValueError:
        return False
    return True


def _group(columns, group, path, line, required):
    names = _GROUPS[group]
    present = [n for n in names if n in columns]
    if present and len(present) != len(names):
        missing = [n for n in names if n not in columns]
        raise InputError(
            f"columns {', '.join(names)} go together; missing {', '.join(missing)}",
            source=path,
            location=f"line {line}",
        )
    if required and not present:
        raise InputError(
            f"missing columns {', '.join(names)}",
            source=path,
            location=f"line {line}, column {names[0]}",
        )
    return bool(present)


def _forbid(columns, names, why, path, line):
    extra = [n for n in names if n in columns]
    if extra:
        raise InputError(
            f"column {extra[0]!r} {why}", source=path, location=f"line {line}, column {extra[0]}"
        )


def _require(columns, names, why, path, line):
    for n in names:
        if n not in columns:
            raise InputError(
                f"missing column {n!r} ({why})", source=path, location=f"line {line}, column {n}"
            )


def _numbers(rows, line_numbers, names_by_index, path):
    n_col = len(names_by_index)
    for fields, number in zip(rows, line_numbers, strict=True):
        if len(fields) != n_col:
            raise InputError(
                f"{len(fields)} values but the header names {n_col} columns",
                source=path,
                location=f"line {number}",
            )
    data = np.empty((len(rows), n_col))
    for i, fields in enumerate(rows):
        for j, token in enumerate(fields):
            try:
                data[i, j] = float(token)
            except ValueError:
                shown = token if len(token) <= 40 else token[:37] + "..."
                raise InputError(
                    f"cannot read {shown!r} as a number",
                    source=path,
                    location=f"line {line_numbers[i]}, column {names_by_index[j]}",
                ) from None
    return data


def read(
    path,
    *,
    particle=None,
    reference_energy=None,
    **unknown,
) -> Trajectory:
    """Read a delimited-text trajectory (see the module docstring for the layout).

    Parameters
    ----------
    path : str or os.PathLike
        The file.
    particle : str or (float, float), optional
        ``"electron"`` (default), ``"positron"``, ``"proton"``, ``"ion:Z:A"`` or
        (charge C, mass kg); must agree with a ``# particle:`` / ``# charge:`` /
        ``# mass:`` header comment if the file has one.
    reference_energy : float or str, optional
        Total energy of the reference particle, eV (or ``"2.5 GeV"``), for a
        ``delta`` column.

    Returns
    -------
    Trajectory

    Raises
    ------
    InputError
        Malformed file, unknown column or unit, missing column, a value that
        is not a finite number, non-increasing time or independent variable,
        |β| ≥ 1 or an energy below the rest energy — naming line and column.
    """
    p = os.fspath(path)
    if unknown:
        raise InputError(
            f"unknown option(s) {', '.join(sorted(unknown))} for text files; known: particle, reference_energy",
            source=p,
        )
    p = check_readable(p)
    # values that overflow in a unit conversion or an integral become inf and are refused by the
    # checks that follow; the floating-point warning itself is not the message for the user
    try:
        with np.errstate(all="ignore"):
            return _read(p, particle, reference_energy)
    except InputError:
        raise
    except (ValueError, ArithmeticError) as exc:
        # last resort for numbers so extreme that a numerical routine refuses them
        raise InputError(f"cannot convert the columns: {exc}", source=p) from None


def _read(p, particle, reference_energy):
    props, (fields, header_line), rows, line_numbers = _tokenize(p)

    # the particle first: the momentum unit "mc" depends on its mass
    file_particle = props.get("particle", (None,))[0]
    file_charge = _header_number(props, "charge", "charge", "C", p)
    file_mass = _header_number(props, "mass", None, None, p)
    if file_particle is not None and (file_charge is not None or file_mass is not None):
        raise InputError(
            "give either '# particle:' or '# charge:'/'# mass:', not both",
            source=p,
            location=f"line {props['particle'][1]}",
        )
    if file_particle is not None:
        try:
            fq, fm = resolve_particle(file_particle, source=p)
        except InputError as exc:
            raise InputError(
                exc.detail, source=p, location=f"line {props['particle'][1]}"
            ) from None
        charge, mass = resolve_particle(particle, charge=fq, mass=fm, source=p)
    else:
        charge, mass = resolve_particle(particle, charge=file_charge, mass=file_mass, source=p)

    columns = _parse_header(fields, header_line, p, mass)
    _check_structure(columns, p, header_line)
    if not rows:
        raise InputError("the file has a header but no data lines", source=p)
    data = _numbers(rows, line_numbers, fields, p)
    lines = np.asarray(line_numbers)

    def col(name):
        index, factor, _ = columns[name]
        return data[:, index] * factor if factor != 1.0 else data[:, index].copy()

    def locate(name, i):
        label = {"beta": "columns beta_x..beta_z"}.get(
            name, f"column {fields[columns[name][0]]}" if name in columns else name
        )
        return f"line {lines[i]}", label

    # finiteness of every raw column first, so the message names the column
    check_samples({name: data[:, idx] for name, (idx, _, _) in columns.items()}, locate, p)

    if "t" in columns:
        t, r, beta, beta_dot, gamma = _time_form(columns, col, locate, p, mass)
    else:
        t, r, beta, gamma = _path_form(columns, col, locate, p, props, reference_energy, mass)
        beta_dot = None
    return build(
        Trajectory,
        p,
        t=t,
        r=r,
        beta=beta,
        beta_dot=beta_dot,
        charge=charge,
        mass=mass,
        gamma=gamma,
        source=p,
    )


def _header_number(props, key, dimension, default_unit, path):
    if key not in props:
        return None
    text, line = props[key]
    if dimension is None:  # mass in kg: no kg in the unit table, bare number only
        try:
            value = float(text)
        except ValueError:
            raise InputError(
                f"{key} must be a number in kg, got {text!r}", source=path, location=f"line {line}"
            ) from None
        if not math.isfinite(value):
            raise InputError(f"{key} must be finite", source=path, location=f"line {line}")
        return value
    return parse_quantity(
        text, dimension, default_unit=default_unit, source=path, location=f"line {line}"
    )


def _check_structure(columns, p, line):
    """Which columns go together, before any number is read."""
    if "t" in columns:
        _require(columns, ("x", "y", "z"), "positions of the time form", p, line)
        _forbid(
            columns,
            ("s", "xp", "yp", "energy", "delta"),
            "belongs to the path-length form (no t column)",
            p,
            line,
        )
        has_beta = _group(columns, "beta", p, line, required=False)
        has_mom = _group(columns, "momentum", p, line, required=False)
        _group(columns, "beta_dot", p, line, required=False)
        if has_beta == has_mom:
            raise InputError(
                "give the velocity as beta_x, beta_y, beta_z or as momentum px, py, pz (exactly one of them)",
                source=p,
                location=f"line {line}",
            )
        if has_mom:
            _forbid(columns, ("gamma",), "is computed from the momentum; drop it", p, line)
        return
    _forbid(
        columns,
        (*_GROUPS["beta"], *_GROUPS["beta_dot"], *_GROUPS["momentum"]),
        "belongs to the time form (it needs a t column)",
        p,
        line,
    )
    if "s" not in columns and "z" not in columns:
        raise InputError(
            "no t column (time form) and no z or s column (path-length form)",
            source=p,
            location=f"line {line}",
        )
    present = [n for n in ("energy", "gamma", "delta") if n in columns]
    if len(present) != 1:
        raise InputError(
            "the path-length form needs exactly one of the columns energy, gamma or delta"
            + (f" (found {', '.join(present)})" if present else ""),
            source=p,
            location=f"line {line}",
        )
    if "s" in columns and "z" in columns:
        _forbid(
            columns,
            ("xp", "yp"),
            "is not used with s, x, y, z (the direction comes from the path)",
            p,
            line,
        )
        _require(columns, ("x", "y"), "positions of the s, x, y, z form", p, line)
    else:
        independent = "z" if "z" in columns else "s"
        _require(columns, ("x", "xp", "y", "yp"), f"the {independent}, x, xp, y, yp form", p, line)


def _time_form(columns, col, locate, p, mass):
    has_beta = "beta_x" in columns
    has_bdot = "beta_dot_x" in columns
    t = col("t")
    r = np.column_stack([col("x"), col("y"), col("z")])
    gamma = None
    if has_beta:
        beta = np.column_stack([col("beta_x"), col("beta_y"), col("beta_z")])
        if "gamma" in columns:
            gamma = col("gamma")
            _check_gamma(gamma, locate, p)
    else:
        # momentum in units of mc is u = γβ itself (factor 1 in the header table)
        u = np.column_stack(
            [col(n) if columns[n][2] == "mc" else col(n) / (mass * c) for n in _GROUPS["momentum"]]
        )
        gamma, beta = kinematics_from_momentum(u)
        check_samples(
            {"gamma": gamma, "beta": beta}, lambda n, i: (locate("px", i)[0], "columns px..pz"), p
        )
    check_samples({"t": t, "beta": beta}, locate, p)
    beta_dot = np.column_stack([col(n) for n in _GROUPS["beta_dot"]]) if has_bdot else None
    return t, r, beta, beta_dot, gamma


def _check_gamma(gamma, locate, p):
    bad = gamma < 1.0
    if bad.any():
        i = int(np.argmax(bad))
        loc, what = locate("gamma", i)
        raise InputError(f"{what}: gamma = {gamma[i]!r} is below 1", source=p, location=loc)


def _lorentz_from_energy(columns, col, locate, p, props, reference_energy, mass):
    """γ and u = γβ (N,) from exactly one of energy, gamma, delta."""
    rest = mass * c * c
    kind = next(n for n in ("energy", "gamma", "delta") if n in columns)
    if kind == "delta":
        e0 = _reference_energy(props, reference_energy, p)
        gamma0 = e0 / rest
        if not gamma0 > 1.0:
            raise InputError(
                f"reference energy {e0 / UNITS['eV'][1]!r} eV is not above the rest energy",
                source=p,
                location="option reference_energy",
            )
        u0 = math.sqrt((gamma0 - 1.0) * (gamma0 + 1.0))
        one_plus = 1.0 + col("delta")
        bad = one_plus <= 0.0
        if bad.any():
            i = int(np.argmax(bad))
            loc, what = locate("delta", i)
            raise InputError(f"{what}: 1 + delta must be positive", source=p, location=loc)
        u = u0 * one_plus
        gamma = np.sqrt(1.0 + u * u)
        return gamma, u
    gamma = col("energy") / rest if kind == "energy" else col("gamma")
    bad = ~(gamma > 1.0)
    if bad.any():
        i = int(np.argmax(bad))
        loc, what = locate(kind, i)
        raise InputError(
            f"{what}: the particle must move (total energy above the rest energy, gamma > 1)",
            source=p,
            location=loc,
        )
    u = np.sqrt((gamma - 1.0) * (gamma + 1.0))
    return gamma, u


def _reference_energy(props, option, p):
    from_file = None
    if "reference_energy" in props:
        text, line = props["reference_energy"]
        from_file = parse_quantity(
            text, "energy", default_unit="eV", source=p, location=f"line {line}"
        )
    from_option = None
    if option is not None:
        from_option = parse_quantity(
            option, "energy", default_unit="eV", source=p, location="option reference_energy"
        )
    if from_file is None and from_option is None:
        raise InputError(
            "a delta column needs the reference energy: pass reference_energy= (eV) or write "
            "'# reference_energy: 2.5 GeV' in the header",
            source=p,
            location="column delta",
        )
    if (
        from_file is not None
        and from_option is not None
        and not math.isclose(from_file, from_option, rel_tol=1e-12)
    ):
        raise InputError(
            "reference_energy option disagrees with the file's '# reference_energy:'",
            source=p,
            location="option reference_energy",
        )
    return from_option if from_option is not None else from_file


def _spline_integral(x, f):
    """∫ f dx from x[0] at every sample: exact antiderivative of the not-a-knot cubic spline."""
    if x.shape[0] == 2:
        return np.array([0.0, 0.5 * (f[0] + f[1]) * (x[1] - x[0])])
    from scipy.interpolate import CubicSpline

    return CubicSpline(x, f, bc_type="not-a-knot").antiderivative()(x)


def _path_form(columns, col, locate, p, props, reference_energy, mass):
    curved = "s" in columns and "z" in columns
    gamma, u = _lorentz_from_energy(columns, col, locate, p, props, reference_energy, mass)
    speed = u / gamma  # β = γβ/γ, no 1 − 1/γ² cancellation
    if curved:
        s = col("s")
        check_samples({"s": s}, lambda n, i: locate("s", i), p)
        _increasing(s, "s", locate, p)
        r = np.column_stack([col("x"), col("y"), col("z")])
        tangent = _tangent(s, r)
        length = np.linalg.norm(tangent, axis=1)
        bad = ~(np.abs(length - 1.0) <= _TANGENT_RTOL)  # NaN counts as bad
        if bad.any():
            i = int(np.argmax(bad))
            loc, _ = locate("s", i)
            raise InputError(
                f"s is not the path length of x, y, z here (|dr/ds| = {length[i]:.6g}, expected 1 within "
                f"{_TANGENT_RTOL:g}); for a straight reference give s, x, xp, y, yp without z",
                source=p,
                location=loc,
            )
        beta = tangent / length[:, None] * speed[:, None]
        integrand = 1.0 / (speed * c)
        bad = ~np.isfinite(integrand)
        if bad.any():
            loc, _ = locate("s", int(np.argmax(bad)))
            raise InputError("1/β is not finite here (extreme energy)", source=p, location=loc)
        t = _spline_integral(s, integrand)
        return t, r, beta, gamma
    independent = "z" if "z" in columns else "s"
    z = col(independent)
    _increasing(z, independent, locate, p)
    xp, yp = col("xp"), col("yp")
    slope2 = xp * xp + yp * yp
    root = np.sqrt(1.0 + slope2)
    bad = ~np.isfinite(root)
    if bad.any():
        i = int(np.argmax(bad))
        loc, _ = locate("xp", i)
        raise InputError("slopes xp, yp too large (overflow)", source=p, location=loc)
    beta_z = speed / root
    beta = np.column_stack([xp * beta_z, yp * beta_z, beta_z])
    integrand = root / (speed * c)
    bad = ~np.isfinite(integrand)
    if bad.any():
        loc, _ = locate(independent, int(np.argmax(bad)))
        raise InputError(
            "1/β_z is not finite here (extreme energy or slope)", source=p, location=loc
        )
    t = _spline_integral(z, integrand)
    r = np.column_stack([col("x"), col("y"), z])
    return t, r, beta, gamma


def _tangent(s, r):
    if s.shape[0] < 3:
        return np.repeat(((r[-1] - r[0]) / (s[-1] - s[0]))[None, :], s.shape[0], axis=0)
    return spline_derivative(s, r, what="direction dr/ds")


def _increasing(values, name, locate, p):
    if values.shape[0] < 2:
        raise InputError("a trajectory needs at least 2 samples", source=p)
    ok = np.diff(values) > 0
    if not ok.all():
        i = int(np.argmin(ok)) + 1
        loc, what = locate(name, i)
        raise InputError(
            f"{what}: the independent variable must increase strictly ({values[i]!r} after {values[i - 1]!r})",
            source=p,
            location=loc,
        )


# -- writing --------------------------------------------------------------------------------------
def write(
    obj,
    path,
    *,
    overwrite: bool = False,
    form: str = "time",
    delimiter: str = ",",
    time_unit: str = "s",
    length_unit: str = "m",
    momentum_unit: str = "mc",
    angle_unit: str = "rad",
    energy_column: str = "gamma",
    energy_unit: str = "eV",
    reference_energy=None,
    comment: str | None = None,
) -> str:
    """Write a trajectory as delimited text (17 significant digits: exact round trip in SI).

    Parameters
    ----------
    obj : Trajectory
    path : str or os.PathLike
    overwrite : bool
        Replace an existing file.
    form : {"time", "momentum", "path"}
        ``time``: t, x, y, z, beta_x..z, beta_dot_x..z, gamma. ``momentum``:
        t, x, y, z, px, py, pz (no β̇: the reader derives it). ``path``: z, x,
        xp, y, yp and one energy column (time is recomputed on reading; needs
        β_z > 0 and z increasing).
    delimiter : {",", " ", "\\t"}
    time_unit, length_unit, momentum_unit, angle_unit, energy_unit : str
        Units of the columns (keys of :data:`lwrad.units.UNITS`).
    energy_column : {"gamma", "energy", "delta"}
        For ``form="path"``; ``delta`` needs ``reference_energy`` (eV).
    comment : str, optional
        Free text written as ``#`` comment lines at the top.

    Returns
    -------
    str
        The path written.
    """
    p = os.fspath(path)
    if isinstance(obj, Bunch):
        if len(obj) != 1:
            raise InputError(
                "a text file holds one trajectory; use HDF5 or openPMD for a bunch", source=p
            )
        obj = obj[0]
    if delimiter not in (",", " ", "\t"):
        raise InputError(
            f"delimiter must be ',', ' ' or a tab, got {delimiter!r}",
            source=p,
            location="option delimiter",
        )
    ft = unit_factor(time_unit, "time", source=p, location="option time_unit")
    fl = unit_factor(length_unit, "length", source=p, location="option length_unit")
    tr = obj
    header_lines = []
    if comment:
        header_lines += [f"# {line}" for line in str(comment).splitlines()]
    header_lines += [f"# charge: {tr.charge!r}", f"# mass: {tr.mass!r}"]
    pos_names = [f"{n}[{length_unit}]" if length_unit != "m" else n for n in ("x", "y", "z")]
    t_name = f"t[{time_unit}]" if time_unit != "s" else "t"
    if form == "time":
        names = [t_name, *pos_names, *_GROUPS["beta"], *_GROUPS["beta_dot"], "gamma"]
        data = np.column_stack([tr.t / ft, tr.r / fl, tr.beta, tr.beta_dot, tr.gamma])
    elif form == "momentum":
        u = tr.gamma[:, None] * tr.beta
        if momentum_unit.replace(" ", "") == "mc":
            mom = u
        else:
            mom = (
                u
                * (tr.mass * c)
                / unit_factor(momentum_unit, "momentum", source=p, location="option momentum_unit")
            )
        suffix = "" if momentum_unit == "mc" else f"[{momentum_unit}]"
        names = [t_name, *pos_names, *(n + suffix for n in _GROUPS["momentum"])]
        data = np.column_stack([tr.t / ft, tr.r / fl, mom])
    elif form == "path":
        fa = unit_factor(angle_unit, "angle", source=p, location="option angle_unit")
        bz = tr.beta[:, 2]
        if not (np.all(bz > 0) and np.all(np.diff(tr.r[:, 2]) > 0)):
            raise InputError("the path-length form needs beta_z > 0 and z increasing", source=p)
        xp, yp = tr.beta[:, 0] / bz, tr.beta[:, 1] / bz
        u = np.sqrt((tr.gamma - 1.0) * (tr.gamma + 1.0))
        if energy_column == "gamma":
            energy_name, energy_values = "gamma", tr.gamma
        elif energy_column == "energy":
            fe = unit_factor(energy_unit, "energy", source=p, location="option energy_unit")
            energy_name = "energy" if energy_unit == "eV" else f"energy[{energy_unit}]"
            energy_values = tr.energy / fe
        elif energy_column == "delta":
            if reference_energy is None:
                raise InputError("energy_column='delta' needs reference_energy (eV)", source=p)
            e0 = parse_quantity(
                reference_energy,
                "energy",
                default_unit="eV",
                source=p,
                location="option reference_energy",
            )
            g0 = e0 / (tr.mass * c * c)
            if not g0 > 1.0:
                raise InputError(
                    "reference_energy must exceed the rest energy",
                    source=p,
                    location="option reference_energy",
                )
            u0 = math.sqrt((g0 - 1.0) * (g0 + 1.0))
            energy_name, energy_values = "delta", u / u0 - 1.0
            header_lines.append(f"# reference_energy: {e0 / UNITS['eV'][1]!r} eV")
        else:
            raise InputError(
                f"energy_column must be 'gamma', 'energy' or 'delta', got {energy_column!r}",
                source=p,
                location="option energy_column",
            )
        ang = "" if angle_unit == "rad" else f"[{angle_unit}]"
        names = [pos_names[2], pos_names[0], "xp" + ang, pos_names[1], "yp" + ang, energy_name]
        data = np.column_stack(
            [tr.r[:, 2] / fl, tr.r[:, 0] / fl, xp / fa, tr.r[:, 1] / fl, yp / fa, energy_values]
        )
    else:
        raise InputError(
            f"form must be 'time', 'momentum' or 'path', got {form!r}",
            source=p,
            location="option form",
        )
    row = delimiter.join(["%.17g"] * len(names))
    body = "\n".join(row % tuple(values) for values in data.tolist())
    text = "\n".join([*header_lines, delimiter.join(names), body]) + "\n"

    def _write(tmp):
        with open(tmp, "w", encoding="utf-8", newline="\n") as fh:
            fh.write(text)

    return atomic_write(p, _write, overwrite=overwrite)

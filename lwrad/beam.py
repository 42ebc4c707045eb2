"""Electron beams: Twiss-parameter description, macro-particle sampling, trajectory offsets.

An :class:`ElectronBeam` describes a beam at one reference plane
``z = z_ref`` in SI units (energies in eV):

================  =====  =============================================================
quantity          unit   meaning
================  =====  =============================================================
energy            eV     total energy of the reference particle
current           A      average current I (particles per second = I/|q|)
emittance_x, _y   m·rad  geometric rms emittances ε (zero: a filament beam)
beta_x, _y        m      Twiss β at the reference plane (> 0)
alpha_x, _y       1      Twiss α = −β'/2 at the reference plane
energy_spread     1      rms relative energy deviation σ_δ, δ = ΔE/E
bunch_length      m      rms bunch length (Gaussian), or ``None``
dispersion_x      m      D_x: x = x_β + D_x δ (likewise ``dispersion_y``)
dispersion_xp     rad    D'_x: x' = x'_β + D'_x δ (likewise ``dispersion_yp``)
bunch_charge      C      charge of one bunch, needed only for coherent sums
================  =====  =============================================================

Phase-space coordinates of a particle are its offsets from the reference
orbit at ``z_ref``: x, y (m), x' = Δp_x/p, y' = Δp_y/p (rad), δ = ΔE/E and
the arrival-time offset t (s, positive = later).

Trajectory offsets
------------------
Two ways turn a reference trajectory (the on-orbit particle) into the path
of a particle with other phase-space coordinates, without tracking again:

* :func:`offset_in_longitudinal_field` is exact for static magnetic fields
  that depend on z only and have no B_z (the ideal planar, elliptical and
  helical undulator, a hard-edge dipole without turning back): there
  dp_⊥/dz = q (B_x, −B_y)(z) whatever the particle, so the transverse
  momentum is the reference's plus a constant, and energy deviations,
  offsets and angles are all exact to every order. Real undulators add the
  off-axis field dependence, a relative change of order (k_u y)²/2 for a
  vertical offset y (k_u = 2π/λ_u), which this neglects.
* :func:`rigid_offset` moves and rotates the whole trajectory as a rigid
  body. That is exact for motion in field-free space, and for a far-field
  pattern it is exact to all orders *if the magnet is rotated with the
  beam*. For a particle entering a fixed magnet at an angle θ0, the rotated
  path differs from the true one in the transverse velocity at third order
  in the small angles (θ0, K/γ) — e.g. θ0·K²/γ² — and in the longitudinal
  velocity at fourth order, a radiation phase error of order
  4π n N θ0² K²/(1 + K²/2) at harmonic n of an N-period undulator
  (negligible for beam divergences). A rigid offset cannot represent an
  energy deviation: that needs :func:`offset_in_longitudinal_field` or
  tracking again.

References
----------
Twiss parametrisation of a Gaussian beam: ⟨x²⟩ = εβ, ⟨xx'⟩ = −εα,
⟨x'²⟩ = εγ_T with γ_T = (1 + α²)/β (E. D. Courant and H. S. Snyder,
Ann. Phys. 3 (1958) 1; any accelerator-physics textbook).
"""

from __future__ import annotations

import difflib
import math
from dataclasses import dataclass

import numpy as np

from lwrad.constants import c, e, gamma_from_energy, particle_properties
from lwrad.errors import InputError
from lwrad.trajectory import Trajectory

__all__ = [
    "ElectronBeam",
    "MacroParticles",
    "make_rng",
    "rigid_offset",
    "offset_in_longitudinal_field",
]


def make_rng(seed) -> np.random.Generator:
    """A :class:`numpy.random.Generator` from a seed, a generator or ``None`` (fresh entropy)."""
    if isinstance(seed, np.random.Generator):
        return seed
    if seed is None or (
        isinstance(seed, int | np.integer) and not isinstance(seed, bool) and seed >= 0
    ):
        return np.random.default_rng(seed)
    raise InputError(
        f"seed must be a non-negative integer, a numpy Generator or None, got {seed!r}",
        location="seed",
    )


def _number(name, value, *, positive=False, non_negative=False, allow_none=False):
    if value is None and allow_none:
        return None
    try:
        if isinstance(value, bool):
            raise TypeError
        x = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{name} must be a number, got {value!r}", location=name) from None
    if not math.isfinite(x):
        raise InputError(f"{name} must be finite, got {value!r}", location=name)
    if positive and not x > 0:
        raise InputError(f"{name} must be positive, got {value!r}", location=name)
    if non_negative and x < 0:
        raise InputError(f"{name} must not be negative, got {value!r}", location=name)
    return x


@dataclass(frozen=True)
class MacroParticles:
    """Phase-space coordinates of sampled particles at the reference plane.

    Attributes
    ----------
    x, y : ndarray, shape (M,)
        Offsets from the reference orbit, m.
    xp, yp : ndarray, shape (M,)
        Angles Δp_x/p, Δp_y/p, rad.
    delta : ndarray, shape (M,)
        Relative energy deviation ΔE/E.
    t : ndarray, shape (M,)
        Arrival-time offset at the reference plane, s (positive = later).
    weights : ndarray, shape (M,)
        Real particles per macro-particle.
    """

    x: np.ndarray
    xp: np.ndarray
    y: np.ndarray
    yp: np.ndarray
    delta: np.ndarray
    t: np.ndarray
    weights: np.ndarray

    def __len__(self) -> int:
        return int(self.x.shape[0])

    def coordinates(self, index: int) -> dict[str, float]:
        """The coordinates of particle ``index`` as a dict (x, xp, y, yp, delta, t)."""
        return {k: float(getattr(self, k)[index]) for k in ("x", "xp", "y", "yp", "delta", "t")}


class ElectronBeam:
    """A Gaussian electron beam described by Twiss parameters at a reference plane.

    Parameters
    ----------
    energy : float
        Total energy of the reference particle, eV.
    current : float
        Average beam current, A (> 0). The result of a beam is the mean
        per particle times I/|q| particles per second.
    emittance_x, emittance_y : float
        Geometric rms emittances, m·rad (≥ 0; zero gives no betatron spread).
    beta_x, beta_y : float
        Twiss β functions at the reference plane, m (> 0).
    alpha_x, alpha_y : float, optional
        Twiss α at the reference plane (a waist has α = 0).
    energy_spread : float, optional
        rms relative energy spread σ_δ (≥ 0).
    bunch_length : float, optional
        rms bunch length, m (Gaussian, > 0). Exclusive with
        ``longitudinal_profile``.
    dispersion_x, dispersion_xp, dispersion_y, dispersion_yp : float, optional
        Dispersion D (m) and its slope D' (rad) at the reference plane.
    longitudinal_profile : (array_like, array_like), optional
        ``(t, density)``: arrival-time offsets t (s, strictly increasing)
        and a non-negative density (any scale), linear between samples.
    bunch_charge : float, optional
        Charge of one bunch, C (> 0), for coherent sums; the bunch
        repetition rate is then current / bunch_charge.
    particle : str, optional
        ``"electron"`` (default) or ``"positron"``; see
        :func:`lwrad.constants.particle_properties`.

    Raises
    ------
    InputError
        Negative emittance or energy spread, non-positive β, current,
        bunch length or charge, an energy not above the rest energy, a bad
        profile, or both a bunch length and a profile.

    Notes
    -----
    Twiss relations (Courant and Snyder, Ann. Phys. 3 (1958) 1):
    σ_x² = εβ + (D σ_δ)², σ_x'² = ε(1 + α²)/β + (D' σ_δ)².
    """

    def __init__(
        self,
        energy,
        current,
        emittance_x,
        emittance_y,
        beta_x,
        beta_y,
        alpha_x=0.0,
        alpha_y=0.0,
        energy_spread=0.0,
        bunch_length=None,
        dispersion_x=0.0,
        dispersion_xp=0.0,
        longitudinal_profile=None,
        *,
        dispersion_y=0.0,
        dispersion_yp=0.0,
        bunch_charge=None,
        particle="electron",
    ):
        self.charge, self.mass = particle_properties(particle)
        self.particle = particle
        self.energy = _number("energy", energy, positive=True)
        self.gamma = float(gamma_from_energy(self.energy, self.mass))
        if not self.gamma > 1.0:
            raise InputError(
                f"energy {energy!r} eV is not above the rest energy", location="energy"
            )
        self.current = _number("current", current, positive=True)
        self.emittance_x = _number("emittance_x", emittance_x, non_negative=True)
        self.emittance_y = _number("emittance_y", emittance_y, non_negative=True)
        self.beta_x = _number("beta_x", beta_x, positive=True)
        self.beta_y = _number("beta_y", beta_y, positive=True)
        self.alpha_x = _number("alpha_x", alpha_x)
        self.alpha_y = _number("alpha_y", alpha_y)
        self.energy_spread = _number("energy_spread", energy_spread, non_negative=True)
        if self.energy_spread >= 0.5:
            raise InputError(
                f"energy_spread is the relative rms spread ΔE/E; {energy_spread!r} is not a plausible value "
                "(use e.g. 1e-3 or '0.1 %')",
                location="energy_spread",
            )
        self.bunch_length = _number("bunch_length", bunch_length, positive=True, allow_none=True)
        self.dispersion_x = _number("dispersion_x", dispersion_x)
        self.dispersion_xp = _number("dispersion_xp", dispersion_xp)
        self.dispersion_y = _number("dispersion_y", dispersion_y)
        self.dispersion_yp = _number("dispersion_yp", dispersion_yp)
        self.bunch_charge = _number("bunch_charge", bunch_charge, positive=True, allow_none=True)
        self.longitudinal_profile = self._check_profile(longitudinal_profile)
        if self.longitudinal_profile is not None and self.bunch_length is not None:
            raise InputError(
                "give either bunch_length or longitudinal_profile, not both",
                location="longitudinal_profile",
            )

    # -- validation -----------------------------------------------------------
    @staticmethod
    def _check_profile(profile):
        if profile is None:
            return None
        try:
            t, density = profile
            t = np.array(t, dtype=float)
            density = np.array(density, dtype=float)
        except (TypeError, ValueError):
            raise InputError(
                "longitudinal_profile must be a pair (t [s], density) of equal-length 1-D arrays",
                location="longitudinal_profile",
            ) from None
        if t.ndim != 1 or density.shape != t.shape or t.size < 2:
            raise InputError(
                f"longitudinal_profile needs two 1-D arrays of equal length >= 2, got shapes {t.shape} and "
                f"{density.shape}",
                location="longitudinal_profile",
            )
        if not (np.all(np.isfinite(t)) and np.all(np.isfinite(density))):
            raise InputError(
                "longitudinal_profile has non-finite values", location="longitudinal_profile"
            )
        if not np.all(np.diff(t) > 0):
            raise InputError(
                "longitudinal_profile times must increase strictly", location="longitudinal_profile"
            )
        if np.any(density < 0) or not np.trapezoid(density, t) > 0:
            raise InputError(
                "longitudinal_profile density must be >= 0 with a positive integral",
                location="longitudinal_profile",
            )
        t.setflags(write=False)
        density.setflags(write=False)
        return t, density

    # -- derived quantities ---------------------------------------------------
    @property
    def beta(self) -> float:
        """Speed of the reference particle over c."""
        return math.sqrt(1.0 - 1.0 / self.gamma**2)

    @property
    def particles_per_second(self) -> float:
        """I/|q|, 1/s: the factor from a per-particle result to the beam's."""
        return self.current / abs(self.charge)

    @property
    def particles_per_bunch(self) -> float | None:
        """N = bunch_charge/|q|, or ``None`` without a bunch charge."""
        return None if self.bunch_charge is None else self.bunch_charge / abs(self.charge)

    @property
    def repetition_rate(self) -> float | None:
        """Bunches per second f = I/Q, Hz, or ``None`` without a bunch charge."""
        return None if self.bunch_charge is None else self.current / self.bunch_charge

    @property
    def gamma_twiss_x(self) -> float:
        """Twiss γ_x = (1 + α_x²)/β_x, 1/m."""
        return (1.0 + self.alpha_x**2) / self.beta_x

    @property
    def gamma_twiss_y(self) -> float:
        """Twiss γ_y = (1 + α_y²)/β_y, 1/m."""
        return (1.0 + self.alpha_y**2) / self.beta_y

    @property
    def sigma_x(self) -> float:
        """rms horizontal size at the reference plane, m: sqrt(ε_x β_x + (D_x σ_δ)²)."""
        return math.hypot(
            math.sqrt(self.emittance_x * self.beta_x), self.dispersion_x * self.energy_spread
        )

    @property
    def sigma_y(self) -> float:
        """rms vertical size at the reference plane, m."""
        return math.hypot(
            math.sqrt(self.emittance_y * self.beta_y), self.dispersion_y * self.energy_spread
        )

    @property
    def sigma_xp(self) -> float:
        """rms horizontal divergence, rad: sqrt(ε_x γ_x + (D'_x σ_δ)²)."""
        return math.hypot(
            math.sqrt(self.emittance_x * self.gamma_twiss_x),
            self.dispersion_xp * self.energy_spread,
        )

    @property
    def sigma_yp(self) -> float:
        """rms vertical divergence, rad."""
        return math.hypot(
            math.sqrt(self.emittance_y * self.gamma_twiss_y),
            self.dispersion_yp * self.energy_spread,
        )

    @property
    def betatron_divergence(self) -> tuple[float, float]:
        """rms divergences without the dispersive part, (σ_x'β, σ_y'β), rad."""
        return math.sqrt(self.emittance_x * self.gamma_twiss_x), math.sqrt(
            self.emittance_y * self.gamma_twiss_y
        )

    @property
    def sigma_t(self) -> float | None:
        """rms arrival-time spread, s: bunch_length/(βc), or the profile's rms, or ``None``."""
        if self.bunch_length is not None:
            return self.bunch_length / (self.beta * c)
        if self.longitudinal_profile is not None:
            t, rho = self.longitudinal_profile
            norm = np.trapezoid(rho, t)
            mean = np.trapezoid(rho * t, t) / norm
            return float(np.sqrt(np.trapezoid(rho * (t - mean) ** 2, t) / norm))
        return None

    # -- sampling -------------------------------------------------------------
    def sample(self, n_particles: int, seed=None) -> MacroParticles:
        """Draw macro-particles from the beam's Gaussian phase space.

        Parameters
        ----------
        n_particles : int
            Number of macro-particles M (≥ 1).
        seed : int, numpy.random.Generator or None
            Seed or generator; the same seed gives the same particles.

        Returns
        -------
        MacroParticles
            Each with weight N/M when a bunch charge is known (N particles
            per bunch), else weight 1.

        Notes
        -----
        x = sqrt(εβ) u₁, x' = sqrt(ε/β)(u₂ − α u₁) with independent
        standard normal u₁, u₂ reproduces ⟨x²⟩ = εβ, ⟨xx'⟩ = −εα,
        ⟨x'²⟩ = εγ_T (Courant and Snyder 1958). Dispersion adds D δ and
        D' δ. Arrival times: Gaussian with rms ``sigma_t``, or inverse-CDF
        sampling of the tabulated profile (linear density between samples).
        """
        if (
            isinstance(n_particles, bool)
            or not isinstance(n_particles, int | np.integer)
            or n_particles < 1
        ):
            raise InputError(
                f"n_particles must be a positive integer, got {n_particles!r}",
                location="n_particles",
            )
        rng = make_rng(seed)
        m = int(n_particles)
        u = rng.standard_normal((5, m))
        delta = self.energy_spread * u[4]

        def plane(eps, beta, alpha, disp, disp_p, u1, u2):
            pos = math.sqrt(eps * beta) * u1 + disp * delta
            ang = math.sqrt(eps / beta) * (u2 - alpha * u1) + disp_p * delta
            return pos, ang

        x, xp = plane(
            self.emittance_x,
            self.beta_x,
            self.alpha_x,
            self.dispersion_x,
            self.dispersion_xp,
            u[0],
            u[1],
        )
        y, yp = plane(
            self.emittance_y,
            self.beta_y,
            self.alpha_y,
            self.dispersion_y,
            self.dispersion_yp,
            u[2],
            u[3],
        )
        t = self._sample_times(rng, m)
        n_per_bunch = self.particles_per_bunch
        weights = np.full(m, 1.0 if n_per_bunch is None else n_per_bunch / m)
        return MacroParticles(x=x, xp=xp, y=y, yp=yp, delta=delta, t=t, weights=weights)

    def _sample_times(self, rng, m):
        if self.longitudinal_profile is not None:
            t, rho = self.longitudinal_profile
            # exact inverse of the CDF of a piecewise-linear density (a quadratic per interval)
            seg = 0.5 * (rho[1:] + rho[:-1]) * np.diff(t)
            cdf = np.concatenate(([0.0], np.cumsum(seg)))
            target = rng.random(m) * cdf[-1]
            k = np.clip(np.searchsorted(cdf, target, side="right") - 1, 0, len(seg) - 1)
            h = t[k + 1] - t[k]
            slope = (rho[k + 1] - rho[k]) / h
            rest = target - cdf[k]
            a0 = rho[k]
            # solve a0 s + slope s²/2 = rest for s in [0, h] without cancellation
            disc = np.sqrt(np.maximum(a0 * a0 + 2.0 * slope * rest, 0.0))
            denom = a0 + disc
            s = np.divide(2.0 * rest, denom, out=np.zeros_like(rest), where=denom > 0)
            return t[k] + np.clip(s, 0.0, h)
        sigma_t = self.sigma_t
        return np.zeros(m) if sigma_t is None else sigma_t * rng.standard_normal(m)

    # -- plain data -------------------------------------------------------------
    _KEYS = {
        # key: (dimension, default unit, constraint)
        "energy": ("energy", "eV", "positive"),
        "current": ("current", "A", "positive"),
        "emittance_x": ("emittance", "m*rad", "non_negative"),
        "emittance_y": ("emittance", "m*rad", "non_negative"),
        "beta_x": ("length", "m", "positive"),
        "beta_y": ("length", "m", "positive"),
        "alpha_x": ("dimensionless", "1", None),
        "alpha_y": ("dimensionless", "1", None),
        "energy_spread": ("dimensionless", "1", "non_negative"),
        "bunch_length": ("length", "m", "positive"),
        "dispersion_x": ("length", "m", None),
        "dispersion_xp": ("angle", "rad", None),
        "dispersion_y": ("length", "m", None),
        "dispersion_yp": ("angle", "rad", None),
        "bunch_charge": ("charge", "C", "positive"),
    }

    @classmethod
    def from_dict(cls, data: dict, *, source=None, prefix: str = "beam") -> ElectronBeam:
        """Build a beam from plain data (a job file's table), values with unit strings.

        Parameters
        ----------
        data : dict
            Keys as the constructor's arguments; values numbers in the
            default unit (eV, A, m·rad, m, rad, C, dimensionless) or strings
            such as ``"2.5 GeV"``, ``"1.2 nm*rad"``, ``"0.1 %"``.
            ``bunch_length`` also accepts a time (``"10 ps"``), converted
            with the beam's speed. ``longitudinal_profile`` is a table
            ``{"t": [...] (s, or "t_unit": "ps"), "density": [...]}``;
            ``particle`` a name.
        source : str, optional
            The job file, for error messages.
        prefix : str
            Key prefix for error messages (``"beam.energy"``).

        Raises
        ------
        InputError
            Unknown or missing keys (with a suggestion), bad units or values.
        """
        from lwrad.units import parse_quantity, split_quantity, unit_factor

        if not isinstance(data, dict):
            raise InputError(
                f"{prefix} must be a table of keys, got {type(data).__name__}",
                source=source,
                location=prefix,
            )
        allowed = set(cls._KEYS) | {"longitudinal_profile", "particle"}
        for key in data:
            if key not in allowed:
                hint = difflib.get_close_matches(str(key), sorted(allowed), n=1)
                extra = (
                    f"; did you mean {hint[0]!r}?"
                    if hint
                    else f"; known keys: {', '.join(sorted(allowed))}"
                )
                raise InputError(
                    f"unknown key {key!r}{extra}", source=source, location=f"key {prefix}.{key}"
                )
        for key in ("energy", "current", "emittance_x", "emittance_y", "beta_x", "beta_y"):
            if key not in data:
                raise InputError(
                    f"missing required key {key!r}", source=source, location=f"key {prefix}.{key}"
                )
        kwargs = {}
        particle = data.get("particle", "electron")
        _, mass = particle_properties(particle)
        for key, (dim, unit, constraint) in cls._KEYS.items():
            if key not in data:
                continue
            where = f"key {prefix}.{key}"
            value = data[key]
            if key == "bunch_length":
                number, u = split_quantity(value, source=source, location=where)
                if u is not None and u.strip() in _time_units():
                    speed = (
                        float(np.sqrt(1.0 - 1.0 / gamma_from_energy(kwargs["energy"], mass) ** 2))
                        * c
                    )
                    value = number * unit_factor(u, "time", source=source, location=where) * speed
                    if not value > 0:
                        raise InputError(
                            f"{data[key]!r} must be positive", source=source, location=where
                        )
                    kwargs[key] = value
                    continue
            kwargs[key] = parse_quantity(
                value,
                dim,
                default_unit=unit,
                source=source,
                location=where,
                allow_negative=constraint is None,
                allow_zero=constraint != "positive",
            )
            if dim == "energy":  # the parser gives joules; the beam takes eV
                kwargs[key] /= e
        if "longitudinal_profile" in data:
            prof = data["longitudinal_profile"]
            where = f"key {prefix}.longitudinal_profile"
            if (
                not isinstance(prof, dict)
                or set(prof) - {"t", "density", "t_unit"}
                or not {"t", "density"} <= set(prof)
            ):
                raise InputError(
                    "longitudinal_profile must be a table with 't', 'density' and optionally 't_unit'",
                    source=source,
                    location=where,
                )
            factor = unit_factor(prof.get("t_unit", "s"), "time", source=source, location=where)
            try:
                t = np.asarray(prof["t"], dtype=float) * factor
                rho = np.asarray(prof["density"], dtype=float)
            except (TypeError, ValueError):
                raise InputError(
                    "profile values must be numbers", source=source, location=where
                ) from None
            kwargs["longitudinal_profile"] = (t, rho)
        try:
            return cls(**kwargs, particle=particle)
        except InputError as exc:
            raise InputError(
                exc.detail, source=source, location=f"key {prefix}.{exc.location or ''}".rstrip(".")
            ) from None

    def to_dict(self) -> dict:
        """Plain data in SI/eV (numbers), for provenance and HDF5 attributes."""
        out = {key: getattr(self, key) for key in self._KEYS if getattr(self, key) is not None}
        out["particle"] = self.particle if isinstance(self.particle, str) else list(self.particle)
        if self.longitudinal_profile is not None:
            t, rho = self.longitudinal_profile
            out["longitudinal_profile"] = {"t": t.tolist(), "density": rho.tolist(), "t_unit": "s"}
        return out

    def __repr__(self) -> str:
        return (
            f"ElectronBeam(energy={self.energy:.6g} eV, current={self.current:.6g} A, "
            f"emittance=({self.emittance_x:.4g}, {self.emittance_y:.4g}) m·rad, "
            f"beta=({self.beta_x:.4g}, {self.beta_y:.4g}) m, energy_spread={self.energy_spread:.4g})"
        )


def _time_units():
    from lwrad.units import UNITS

    return {k for k, (d, _) in UNITS.items() if d == "time"}


# -- trajectories of off-reference particles ------------------------------------------------
def _rotation_to(direction):
    """Rotation matrix taking +z onto the unit vector ``direction`` (minimal rotation)."""
    d = np.asarray(direction, dtype=float)
    d = d / np.linalg.norm(d)
    z = np.array([0.0, 0.0, 1.0])
    v = np.cross(z, d)
    s = np.linalg.norm(v)
    cz = float(d[2])
    if s == 0.0:
        return np.eye(3)
    vx = np.array([[0.0, -v[2], v[1]], [v[2], 0.0, -v[0]], [-v[1], v[0], 0.0]])
    # Rodrigues' formula with (1 − cos)/sin² written as 1/(1 + cos): no cancellation for small angles
    return np.eye(3) + vx + vx @ vx / (1.0 + cz)


def _reference_point(trajectory, z_ref):
    z = trajectory.r[:, 2]
    if z_ref is None:
        return 0.5 * (z[0] + z[-1])
    return _number("z_ref", z_ref)


def rigid_offset(
    trajectory: Trajectory, *, x=0.0, xp=0.0, y=0.0, yp=0.0, t=0.0, z_ref=None
) -> Trajectory:
    """Move and rotate a whole trajectory as a rigid body.

    The path is rotated about the point of the reference trajectory at
    ``z = z_ref`` so that +z turns into the direction (x', y', 1)/norm, then
    shifted by (x, y) and delayed by t.

    Parameters
    ----------
    trajectory : Trajectory
        The reference (on-orbit) path.
    x, y : float
        Offsets, m.
    xp, yp : float
        Angles, rad (tangent-plane, as :class:`~lwrad.observers.AngularGrid` uses).
    t : float
        Delay, s.
    z_ref : float, optional
        Pivot plane, m; default the middle of the trajectory's z range.

    Returns
    -------
    Trajectory

    Notes
    -----
    Exact for field-free motion and, for far-field patterns, whenever the
    magnet may be thought rotated with the particle; inside a fixed magnet
    it is an approximation of third order in the small angles (see the
    module notes). It cannot represent an energy deviation.
    """
    x, xp, y, yp, t = (
        _number(n, v) for n, v in (("x", x), ("xp", xp), ("y", y), ("yp", yp), ("t", t))
    )
    z0 = _reference_point(trajectory, z_ref)
    rot = _rotation_to([xp, yp, 1.0])
    z = trajectory.r[:, 2]
    if np.all(np.diff(z) > 0) and z[0] <= z0 <= z[-1]:
        pivot = np.array(
            [np.interp(z0, z, trajectory.r[:, 0]), np.interp(z0, z, trajectory.r[:, 1]), z0]
        )
    else:  # a path that turns back in z: pivot on the nearest sample
        k = int(np.argmin(np.abs(z - z0)))
        pivot = np.array([trajectory.r[k, 0], trajectory.r[k, 1], z0])
    r = (trajectory.r - pivot) @ rot.T + pivot + np.array([x, y, 0.0])
    return trajectory.replace(
        t=trajectory.t + t, r=r, beta=trajectory.beta @ rot.T, beta_dot=trajectory.beta_dot @ rot.T
    )


def _integral_from(z, f, z0):
    """∫_{z0}^{z} f dz at every sample, from a not-a-knot cubic spline (error O(h⁴))."""
    from scipy.interpolate import CubicSpline

    if len(z) < 4:
        cum = np.concatenate(([0.0], np.cumsum(0.5 * (f[1:] + f[:-1]) * np.diff(z))))
        return cum - np.interp(z0, z, cum)
    anti = CubicSpline(z, f, bc_type="not-a-knot").antiderivative()
    return anti(z) - anti(z0)


def offset_in_longitudinal_field(
    reference: Trajectory, *, x=0.0, xp=0.0, y=0.0, yp=0.0, delta=0.0, t=0.0, z_ref=None
) -> Trajectory:
    """Path of an off-reference particle through a static field that depends on z only.

    Parameters
    ----------
    reference : Trajectory
        The on-orbit particle's path in static magnetic fields, moving
        forward in z throughout.
    x, y : float
        Offsets at ``z_ref``, m.
    xp, yp : float
        Angles Δp_x/p, Δp_y/p at ``z_ref``, rad (p of this particle).
    delta : float
        Relative energy deviation ΔE/E (> −1).
    t : float
        Arrival-time offset at ``z_ref``, s.
    z_ref : float, optional
        Reference plane, m; default the middle of the z range.

    Returns
    -------
    Trajectory
        Sampled at the reference's z positions.

    Notes
    -----
    For B = (B_x(z), B_y(z), 0) the Lorentz force gives dp_x/dz = −q B_y(z),
    dp_y/dz = q B_x(z) for every particle (Jackson 3rd ed. eq. 12.1 divided
    by v_z), so p_⊥(z) = p_⊥,ref(z) + (p x', p y') exactly while |p| is
    fixed by the energy. Then p_z = sqrt(p² − p_⊥²),
    t(z) = ∫ dz/(c β_z), x(z) = ∫ p_x/p_z dz; the differences from the
    reference are integrated with a cubic spline (error O(h⁴)) and
    1/β_z − 1 = (m²c⁴ + c²p_⊥²)/(c p_z (E + c p_z)) is formed without
    cancellation. Off-axis field dependence of real magnets is neglected
    (relative error of order (k_u y)²/2 in an undulator).
    """
    x, xp, y, yp, delta, t = (
        _number(n, v)
        for n, v in (("x", x), ("xp", xp), ("y", y), ("yp", yp), ("delta", delta), ("t", t))
    )
    if not delta > -1.0:
        raise InputError(f"delta must be > -1, got {delta!r}", location="delta")
    z = reference.r[:, 2]
    if not np.all(np.diff(z) > 0):
        raise InputError(
            "the reference must move forward in z throughout; use tracking for paths that turn back",
            source=reference.source,
        )
    z0 = _reference_point(reference, z_ref)
    if not z[0] <= z0 <= z[-1]:
        raise InputError(
            f"z_ref = {z0!r} m lies outside the trajectory's z range [{z[0]!r}, {z[-1]!r}] m",
            location="z_ref",
        )
    gamma_ref = reference.gamma
    gamma = gamma_ref * (1.0 + delta)
    if not np.all(gamma > 1.0):
        raise InputError(
            f"delta = {delta!r} leaves the particle below its rest energy", location="delta"
        )
    # momenta in units of m c
    p_ref = gamma_ref[:, None] * reference.beta
    p_abs = np.sqrt((gamma - 1.0) * (gamma + 1.0))
    p_perp = p_ref[:, :2] + p_abs[:, None] * np.array([xp, yp])[None, :]
    perp2 = np.einsum("ij,ij->i", p_perp, p_perp)
    pz2 = (p_abs - np.sqrt(perp2)) * (p_abs + np.sqrt(perp2))
    if np.any(pz2 <= 0):
        raise InputError("the offset particle would not move forward in z", source=reference.source)
    pz = np.sqrt(pz2)
    ref_perp2 = np.einsum("ij,ij->i", p_ref[:, :2], p_ref[:, :2])
    pz_ref = p_ref[:, 2]
    # 1/β_z − 1 in both cases without cancellation (γ = E/mc², p in mc)
    u_new = (1.0 + perp2) / (pz * (gamma + pz))
    u_ref = (1.0 + ref_perp2) / (pz_ref * (gamma_ref + pz_ref))
    t_new = reference.t + _integral_from(z, u_new - u_ref, z0) / c + t
    slope_diff = p_perp / pz[:, None] - p_ref[:, :2] / pz_ref[:, None]
    r_new = np.array(reference.r, dtype=float)
    r_new[:, 0] += _integral_from(z, slope_diff[:, 0], z0) + x
    r_new[:, 1] += _integral_from(z, slope_diff[:, 1], z0) + y
    p_new = np.column_stack([p_perp, pz])
    beta_new = p_new / gamma[:, None]
    # dp/dz of the transverse part is the reference's (the force per unit length is the same);
    # dp_z/dz follows from |p| = const.
    dpdt_ref = gamma_ref[:, None] * reference.beta_dot  # d(γβ)/dt for constant γ, 1/s
    vz_ref = c * reference.beta[:, 2]
    dperp_dz = dpdt_ref[:, :2] / vz_ref[:, None]
    dpz_dz = -np.einsum("ij,ij->i", p_perp, dperp_dz) / pz
    vz_new = c * beta_new[:, 2]
    beta_dot_new = np.column_stack([dperp_dz, dpz_dz]) * (vz_new / gamma)[:, None]
    return Trajectory(
        t_new,
        r_new,
        beta_new,
        beta_dot_new,
        reference.charge,
        reference.mass,
        gamma=gamma,
        source=reference.source,
    )

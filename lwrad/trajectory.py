"""Particle trajectories: the input of every radiation calculation.

A :class:`Trajectory` holds the path of one charged particle as samples in
laboratory time, in SI units:

========  =======  ======================================================
name      shape    unit and meaning
========  =======  ======================================================
t         (N,)     s, laboratory time, strictly increasing
r         (N, 3)   m, position (x, y, z); z is the main direction of flight
beta      (N, 3)   1, velocity over c
beta_dot  (N, 3)   1/s, time derivative of ``beta``
gamma     (N,)     1, Lorentz factor (kept separately so 1 − β stays exact
                   for ultrarelativistic particles)
charge    scalar   C (electron: −e)
mass      scalar   kg
========  =======  ======================================================

Trajectories are immutable: arrays are read-only and every operation
returns a new object. A :class:`Bunch` collects many trajectories with
weights (the number of real particles each one stands for).
"""

from __future__ import annotations

from collections.abc import Iterable, Iterator, Sequence

import numpy as np

from lwrad.constants import c, e, m_e
from lwrad.errors import InputError

__all__ = ["Trajectory", "Bunch", "hermite_interpolate", "spline_derivative"]

# |β| from the stored arrays and the one implied by γ may differ by rounding of
# the writer; beyond this relative difference in γ²β² the input is inconsistent.
_GAMMA_CONSISTENCY_RTOL = 1e-6


def _as_float_array(name, value, shape_tail, source):
    try:
        arr = np.array(value, dtype=np.float64, copy=True)
    except (TypeError, ValueError) as exc:
        raise InputError(f"{name} must be numeric: {exc}", source=source, location=name) from None
    if arr.ndim != 1 + len(shape_tail) or arr.shape[1:] != shape_tail:
        want = "(N,)" if not shape_tail else f"(N, {', '.join(map(str, shape_tail))})"
        raise InputError(
            f"{name} must have shape {want}, got {arr.shape}", source=source, location=name
        )
    bad = ~np.isfinite(arr)
    if bad.any():
        index = int(np.argwhere(bad)[0][0])
        raise InputError(
            f"{name} has a non-finite value at sample {index}", source=source, location=name
        )
    return arr


def hermite_interpolate(t, y, dydt, t_new):
    """Cubic Hermite interpolation of samples with known derivatives.

    Parameters
    ----------
    t : ndarray, shape (N,)
        Strictly increasing sample times.
    y, dydt : ndarray, shape (N, ...)
        Values and their time derivatives at ``t``.
    t_new : ndarray, shape (M,)
        Times to interpolate at, inside ``[t[0], t[-1]]``.

    Returns
    -------
    y_new, dydt_new : ndarray, shape (M, ...)
        Interpolated values and the derivative of the same cubic, so that a
        position interpolated with its velocity stays consistent with it.
    """
    t_new = np.asarray(t_new, dtype=float)
    k = np.clip(np.searchsorted(t, t_new, side="right") - 1, 0, len(t) - 2)
    h = t[k + 1] - t[k]
    s = (t_new - t[k]) / h
    extra = (slice(None),) + (None,) * (y.ndim - 1)
    s_ = s[extra]
    h_ = h[extra]
    s2 = s_ * s_
    s3 = s2 * s_
    h00 = 2 * s3 - 3 * s2 + 1
    h10 = s3 - 2 * s2 + s_
    h01 = -2 * s3 + 3 * s2
    h11 = s3 - s2
    y0, y1, d0, d1 = y[k], y[k + 1], dydt[k], dydt[k + 1]
    y_new = h00 * y0 + h10 * h_ * d0 + h01 * y1 + h11 * h_ * d1
    dh00 = (6 * s2 - 6 * s_) / h_
    dh10 = 3 * s2 - 4 * s_ + 1
    dh01 = (-6 * s2 + 6 * s_) / h_
    dh11 = 3 * s2 - 2 * s_
    dydt_new = dh00 * y0 + dh10 * d0 + dh01 * y1 + dh11 * d1
    return y_new, dydt_new


def spline_derivative(x, y, *, what: str, source=None):
    """First derivative of a not-a-knot cubic spline through ``y(x)`` at the samples.

    Sample spacings so uneven that the spline's linear system is singular or
    ill-conditioned give an :class:`InputError` (naming ``what``) instead of a
    SciPy warning and a derivative of no accuracy.
    """
    import warnings

    from scipy.interpolate import CubicSpline
    from scipy.linalg import LinAlgWarning

    with warnings.catch_warnings():
        warnings.simplefilter("error", LinAlgWarning)
        try:
            with np.errstate(all="ignore"):
                return CubicSpline(x, y, axis=0, bc_type="not-a-knot")(x, 1)
        except (LinAlgWarning, np.linalg.LinAlgError, ValueError) as exc:
            raise InputError(
                f"cannot derive {what}: the sample spacing is too uneven for a spline ({exc})",
                source=source,
                location=what,
            ) from None


class Trajectory:
    """The path of one charged particle, sampled in laboratory time (SI).

    Parameters
    ----------
    t : array_like, shape (N,)
        Laboratory time, s; finite and strictly increasing, N ≥ 2.
    r : array_like, shape (N, 3)
        Position, m.
    beta : array_like, shape (N, 3)
        Velocity over the speed of light; |beta| < 1.
    beta_dot : array_like, shape (N, 3), optional
        d(beta)/dt, 1/s. When absent it is derived from ``beta`` by the
        derivative of a not-a-knot cubic spline through the samples.
    charge : float, optional
        Charge, C. Default: the electron's, −e.
    mass : float, optional
        Rest mass, kg. Default: the electron's.
    gamma : array_like, shape (N,), optional
        Lorentz factor. Give it when it is known exactly (from momentum or
        energy): for γ ≳ 1e4, 1 − |β| computed from ``beta`` alone has lost
        most of its digits. When absent it is computed from ``beta``.
    source : str, optional
        Where the trajectory came from (a file name, ``"tracking"``), for
        error messages and provenance.

    Raises
    ------
    InputError
        Wrong shapes, non-finite values, non-increasing time, |beta| ≥ 1,
        ``gamma`` inconsistent with ``beta``, zero charge or non-positive mass.
    """

    __slots__ = ("_t", "_r", "_beta", "_beta_dot", "_gamma", "_charge", "_mass", "_source")

    def __init__(
        self,
        t,
        r,
        beta,
        beta_dot=None,
        charge: float = -e,
        mass: float = m_e,
        *,
        gamma=None,
        source: str | None = None,
    ):
        src = source
        t = _as_float_array("t", t, (), src)
        n = t.shape[0]
        if n < 2:
            raise InputError(
                f"a trajectory needs at least 2 samples, got {n}", source=src, location="t"
            )
        dt = np.diff(t)
        if not np.all(dt > 0):
            index = int(np.argmin(dt > 0)) + 1
            raise InputError(
                f"time must be strictly increasing; sample {index} has t={t[index]!r} after "
                f"t={t[index - 1]!r}",
                source=src,
                location="t",
            )
        r = _as_float_array("r", r, (3,), src)
        beta = _as_float_array("beta", beta, (3,), src)
        for name, arr in (("r", r), ("beta", beta)):
            if arr.shape[0] != n:
                raise InputError(
                    f"{name} has {arr.shape[0]} samples but t has {n}", source=src, location=name
                )
        speed2 = np.einsum("ij,ij->i", beta, beta)
        if np.any(speed2 >= 1.0):
            index = int(np.argmax(speed2 >= 1.0))
            raise InputError(
                f"|beta| must be < 1; sample {index} has |beta| = {np.sqrt(speed2[index])!r}",
                source=src,
                location="beta",
            )
        if gamma is None:
            gamma = 1.0 / np.sqrt((1.0 - np.sqrt(speed2)) * (1.0 + np.sqrt(speed2)))
        else:
            gamma = _as_float_array("gamma", gamma, (), src)
            if gamma.shape[0] != n:
                raise InputError(
                    f"gamma has {gamma.shape[0]} samples but t has {n}",
                    source=src,
                    location="gamma",
                )
            if np.any(gamma < 1.0):
                raise InputError("gamma must be >= 1", source=src, location="gamma")
            implied = gamma * gamma * speed2  # = γ²β², equals γ² − 1 when consistent
            mismatch = (
                np.abs(implied - (gamma * gamma - 1.0))
                > _GAMMA_CONSISTENCY_RTOL * np.maximum(gamma * gamma - 1.0, 1e-300) + 1e-12
            )
            if np.any(mismatch):
                index = int(np.argmax(mismatch))
                raise InputError(
                    f"gamma={gamma[index]!r} is inconsistent with |beta|={np.sqrt(speed2[index])!r} "
                    f"at sample {index}",
                    source=src,
                    location="gamma",
                )
        if beta_dot is None:
            with np.errstate(all="ignore"):
                beta_dot = self._derive_beta_dot(t, beta)
            if not np.all(np.isfinite(beta_dot)):
                raise InputError(
                    "beta_dot derived from beta is not finite (time steps too close for the "
                    "derivative); give beta_dot explicitly",
                    source=src,
                    location="beta_dot",
                )
        else:
            beta_dot = _as_float_array("beta_dot", beta_dot, (3,), src)
            if beta_dot.shape[0] != n:
                raise InputError(
                    f"beta_dot has {beta_dot.shape[0]} samples but t has {n}",
                    source=src,
                    location="beta_dot",
                )
        try:
            charge = float(charge)
            mass = float(mass)
        except (TypeError, ValueError):
            raise InputError("charge and mass must be numbers (C, kg)", source=src) from None
        if not np.isfinite(charge) or charge == 0.0:
            raise InputError(f"charge must be finite and non-zero, got {charge!r}", source=src)
        if not np.isfinite(mass) or mass <= 0.0:
            raise InputError(f"mass must be finite and positive, got {mass!r}", source=src)
        for arr in (t, r, beta, beta_dot, gamma):
            arr.setflags(write=False)
        self._t, self._r, self._beta, self._beta_dot, self._gamma = t, r, beta, beta_dot, gamma
        self._charge, self._mass, self._source = charge, mass, source

    @staticmethod
    def _derive_beta_dot(t, beta):
        if len(t) < 4:
            return np.gradient(beta, t, axis=0)
        return spline_derivative(t, beta, what="beta_dot")

    # -- read-only data -------------------------------------------------------
    t = property(lambda self: self._t, doc="Laboratory time, s, shape (N,).")
    r = property(lambda self: self._r, doc="Position, m, shape (N, 3).")
    beta = property(lambda self: self._beta, doc="Velocity over c, shape (N, 3).")
    beta_dot = property(lambda self: self._beta_dot, doc="d(beta)/dt, 1/s, shape (N, 3).")
    gamma = property(lambda self: self._gamma, doc="Lorentz factor, shape (N,).")
    charge = property(lambda self: self._charge, doc="Charge, C.")
    mass = property(lambda self: self._mass, doc="Rest mass, kg.")
    source = property(lambda self: self._source, doc="Where the trajectory came from.")

    def __len__(self) -> int:
        return self._t.shape[0]

    @property
    def n_samples(self) -> int:
        """Number of samples N."""
        return self._t.shape[0]

    @property
    def duration(self) -> float:
        """t[-1] − t[0], s."""
        return float(self._t[-1] - self._t[0])

    @property
    def energy(self) -> np.ndarray:
        """Total energy γ m c², J, shape (N,)."""
        return self._gamma * self._mass * c**2

    @property
    def energy_ev(self) -> np.ndarray:
        """Total energy, eV, shape (N,)."""
        return self.energy / e

    @property
    def inv_gamma_sq(self) -> np.ndarray:
        """1/γ² = 1 − β², computed without cancellation, shape (N,)."""
        return 1.0 / (self._gamma * self._gamma)

    @property
    def momentum(self) -> np.ndarray:
        """Momentum γ m c β, kg m/s, shape (N, 3)."""
        return (self._gamma * self._mass * c)[:, None] * self._beta

    def __repr__(self) -> str:
        return (
            f"Trajectory(n_samples={len(self)}, t=[{self._t[0]:.6g}, {self._t[-1]:.6g}] s, "
            f"gamma≈{np.median(self._gamma):.6g}, charge={self._charge:.6g} C"
            + (f", source={self._source!r})" if self._source else ")")
        )

    # -- operations -----------------------------------------------------------
    def gamma_dot(self) -> np.ndarray:
        """dγ/dt, 1/s, shape (N,), from a cubic spline through ``gamma``.

        Not from γ³ β·β̇: for γ ≳ 1e4 the rounding of β·β̇ times γ³ would
        swamp an energy that is in fact constant.
        """
        return self._derive_beta_dot(self._t, self._gamma[:, None])[:, 0]

    def interpolate(self, t_new) -> Trajectory:
        """Resample at new times with cubic Hermite interpolants.

        Position uses velocity ``beta c`` as its derivative, ``beta`` uses
        ``beta_dot`` and ``gamma`` uses dγ/dt, so position and velocity stay
        consistent to the order of the interpolant (errors O(h⁴) in r).

        Parameters
        ----------
        t_new : array_like, shape (M,)
            Strictly increasing times inside ``[t[0], t[-1]]``, s.

        Returns
        -------
        Trajectory
        """
        t_new = _as_float_array("t_new", t_new, (), self._source)
        span = self._t[-1] - self._t[0]
        slack = 1e-12 * span
        if t_new.size and (t_new[0] < self._t[0] - slack or t_new[-1] > self._t[-1] + slack):
            raise InputError(
                f"interpolation times [{t_new[0]:.6g}, {t_new[-1]:.6g}] s leave the trajectory's "
                f"span [{self._t[0]:.6g}, {self._t[-1]:.6g}] s",
                source=self._source,
            )
        t_new = np.clip(t_new, self._t[0], self._t[-1])
        r_new, _ = hermite_interpolate(self._t, self._r, self._beta * c, t_new)
        beta_new, beta_dot_new = hermite_interpolate(self._t, self._beta, self._beta_dot, t_new)
        gamma_new, _ = hermite_interpolate(self._t, self._gamma, self.gamma_dot(), t_new)
        # γ is authoritative for the speed: rescale |β| to match it exactly.
        speed = np.linalg.norm(beta_new, axis=1)
        target = np.sqrt(1.0 - 1.0 / (gamma_new * gamma_new))
        scale = np.divide(target, speed, out=np.ones_like(speed), where=speed > 0)
        beta_new = beta_new * scale[:, None]
        return Trajectory(
            t_new,
            r_new,
            beta_new,
            beta_dot_new,
            self._charge,
            self._mass,
            gamma=gamma_new,
            source=self._source,
        )

    def slice(self, t_start: float | None = None, t_end: float | None = None) -> Trajectory:
        """The part of the trajectory between two times (s), ends interpolated exactly."""
        t0 = self._t[0] if t_start is None else float(t_start)
        t1 = self._t[-1] if t_end is None else float(t_end)
        if not (self._t[0] <= t0 < t1 <= self._t[-1]):
            raise InputError(
                f"slice [{t0:.6g}, {t1:.6g}] s must lie inside [{self._t[0]:.6g}, {self._t[-1]:.6g}] s "
                "and have t_start < t_end",
                source=self._source,
            )
        inner = self._t[(self._t > t0) & (self._t < t1)]
        return self.interpolate(np.concatenate(([t0], inner, [t1])))

    def resample(self, n_samples: int) -> Trajectory:
        """Resample uniformly in time with ``n_samples`` samples (Hermite interpolants)."""
        if int(n_samples) < 2:
            raise InputError("n_samples must be >= 2")
        return self.interpolate(np.linspace(self._t[0], self._t[-1], int(n_samples)))

    def replace(self, **changes) -> Trajectory:
        """A copy with some constructor arguments replaced (validated again)."""
        args = dict(
            t=self._t,
            r=self._r,
            beta=self._beta,
            beta_dot=self._beta_dot,
            charge=self._charge,
            mass=self._mass,
            gamma=self._gamma,
            source=self._source,
        )
        args.update(changes)
        return Trajectory(**args)

    def __eq__(self, other) -> bool:
        if not isinstance(other, Trajectory):
            return NotImplemented
        return (
            self._charge == other._charge
            and self._mass == other._mass
            and all(
                np.array_equal(a, b)
                for a, b in zip(
                    (self._t, self._r, self._beta, self._beta_dot, self._gamma),
                    (other._t, other._r, other._beta, other._beta_dot, other._gamma),
                    strict=True,
                )
            )
        )

    __hash__ = None  # mutable-looking numpy content; compare with ==


class Bunch(Sequence):
    """Many trajectories with weights, for macro-particle bunches.

    Parameters
    ----------
    trajectories : iterable of Trajectory
        At least one.
    weights : array_like, shape (M,), optional
        Number of real particles each trajectory stands for (≥ 0, finite,
        not all zero). Default: 1 each.
    source : str, optional
        Where the bunch came from.

    Notes
    -----
    Incoherent sums add weighted intensities, coherent sums add weighted
    complex fields; see :func:`lwrad.radiate`.
    """

    __slots__ = ("_trajectories", "_weights", "_source")

    def __init__(
        self, trajectories: Iterable[Trajectory], weights=None, *, source: str | None = None
    ):
        trajs = tuple(trajectories)
        if not trajs:
            raise InputError("a bunch needs at least one trajectory", source=source)
        for i, tr in enumerate(trajs):
            if not isinstance(tr, Trajectory):
                raise InputError(
                    f"bunch member {i} is a {type(tr).__name__}, not a Trajectory", source=source
                )
        if weights is None:
            w = np.ones(len(trajs))
        else:
            w = _as_float_array("weights", weights, (), source)
            if w.shape[0] != len(trajs):
                raise InputError(
                    f"{w.shape[0]} weights for {len(trajs)} trajectories",
                    source=source,
                    location="weights",
                )
            if np.any(w < 0):
                raise InputError("weights must be >= 0", source=source, location="weights")
            if not w.sum() > 0:
                raise InputError("weights must not all be zero", source=source, location="weights")
        w.setflags(write=False)
        self._trajectories, self._weights, self._source = trajs, w, source

    weights = property(lambda self: self._weights, doc="Particles per trajectory, shape (M,).")
    source = property(lambda self: self._source, doc="Where the bunch came from.")

    def __len__(self) -> int:
        return len(self._trajectories)

    def __getitem__(self, index):
        if isinstance(index, slice):
            return Bunch(self._trajectories[index], self._weights[index], source=self._source)
        return self._trajectories[index]

    def __iter__(self) -> Iterator[Trajectory]:
        return iter(self._trajectories)

    @property
    def total_weight(self) -> float:
        """Sum of the weights (number of real particles)."""
        return float(self._weights.sum())

    @property
    def total_charge(self) -> float:
        """Total charge Σ w_j q_j, C."""
        return float(
            sum(w * tr.charge for w, tr in zip(self._weights, self._trajectories, strict=True))
        )

    def __repr__(self) -> str:
        return f"Bunch({len(self)} trajectories, total weight {self.total_weight:.6g})"

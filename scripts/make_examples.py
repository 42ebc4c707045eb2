"""Write the example trajectories in ``trajectories/`` in every format lwrad reads.

The scenario is invented for demonstration (see ``trajectories/README.md``):
the "Saltmarsh" 2.5 GeV storage ring, its planar undulator SM-U25 (25 mm
period, 80 periods, K = 1.4) and its bending magnet SM-B1 (1.2 T, 0.9 m).
Nothing here describes a real facility.

Both paths are analytic (no tracking), with β̇ exact:

* SM-U25: β_x(t) = (K/γ) sin(ω t) w(t), β_y = 0, |β| = β0 constant (a
  magnetic field does no work), β_z = sqrt(β0² − β_x²). The envelope w rises
  as sin²(ω t/4) over the first period and falls the same way over the last
  (β_x and β̇ vanish at both ends: the path leaves parallel to z). ω is chosen
  so one central period advances z by exactly λu: the period-mean of β_z is
  β0 · 2E(m)/π with m = (K/(γβ0))² and E the complete elliptic integral of
  the second kind (Abramowitz & Stegun 17.3.3, cited from memory; scipy.special.ellipe). Positions are integrals of β
  by 8-point Gauss–Legendre quadrature on every sample interval; the sample
  grid has a node at each junction of the envelope, so each interval sees a
  smooth integrand and the quadrature is exact to rounding.
* SM-B1: uniform circular motion of radius ρ = p/(eB) (Jackson 3rd ed.
  sec. 12.4, motion in a uniform magnetic field; cited from memory), hard-edged, the electron bending towards +x in
  a field +B ŷ.

Run ``python scripts/make_examples.py [--out DIR] [--overwrite]``.
"""

from __future__ import annotations

import argparse
import math
import os
import sys

import numpy as np
from scipy.special import ellipe

from lwrad.constants import c, e, m_e
from lwrad.io import write_trajectory
from lwrad.trajectory import Bunch, Trajectory

__all__ = ["undulator_trajectory", "arc_trajectory", "main"]

INVENTED = (
    "Invented demo scenario ('Saltmarsh' ring); no real facility. Made by scripts/make_examples.py."
)
ENERGY_EV = 2.5e9  # Saltmarsh ring (invented)
PERIOD = 0.025  # SM-U25 period, m (invented)
N_PERIODS = 80
K = 1.4
BEND_FIELD = 1.2  # SM-B1, T (invented)
BEND_LENGTH = 0.9  # m


def _gamma_beta(energy_ev, mass=m_e):
    gamma = energy_ev * e / (mass * c * c)
    return gamma, math.sqrt((gamma - 1.0) * (gamma + 1.0)) / gamma


def undulator_trajectory(
    samples_per_period: int = 48, n_periods: int = N_PERIODS, keep_periods=None
) -> Trajectory:
    """The analytic SM-U25 path (module docstring), centred at t = 0, z = 0.

    Parameters
    ----------
    samples_per_period : int
        Samples per undulator period (uniform in time).
    n_periods : int
        Periods of the device, the first and last being the ramps.
    keep_periods : int, optional
        Return only the first ``keep_periods`` periods (a short excerpt).
    """
    gamma, beta0 = _gamma_beta(ENERGY_EV)
    amp = K / gamma
    m = (amp / beta0) ** 2
    mean_beta_z = beta0 * 2.0 * ellipe(m) / math.pi
    omega = 2.0 * math.pi * c * mean_beta_z / PERIOD
    t_period = 2.0 * math.pi / omega
    t_total = n_periods * t_period
    t = np.arange(n_periods * samples_per_period + 1) * (t_period / samples_per_period)

    def beta_x(tt):
        w = np.ones_like(tt)
        rise, fall = tt < t_period, tt > t_total - t_period
        w[rise] = np.sin(omega * tt[rise] / 4.0) ** 2
        w[fall] = np.sin(omega * (t_total - tt[fall]) / 4.0) ** 2
        return amp * np.sin(omega * tt) * w

    def beta_x_dot(tt):
        w, dw = np.ones_like(tt), np.zeros_like(tt)
        rise, fall = tt < t_period, tt > t_total - t_period
        w[rise] = np.sin(omega * tt[rise] / 4.0) ** 2
        dw[rise] = (omega / 4.0) * np.sin(omega * tt[rise] / 2.0)
        w[fall] = np.sin(omega * (t_total - tt[fall]) / 4.0) ** 2
        dw[fall] = -(omega / 4.0) * np.sin(omega * (t_total - tt[fall]) / 2.0)
        return amp * (omega * np.cos(omega * tt) * w + np.sin(omega * tt) * dw)

    def beta_z(tt):
        bx = beta_x(tt)
        return np.sqrt((beta0 - bx) * (beta0 + bx))

    # 8-point Gauss–Legendre on each interval: x = c∫β_x, z = c β0 t − c∫β_x²/(β0 + β_z)
    nodes, weights = np.polynomial.legendre.leggauss(8)
    a, b = t[:-1, None], t[1:, None]
    tq = 0.5 * (b - a) * nodes[None, :] + 0.5 * (a + b)
    half = 0.5 * (t[1:] - t[:-1])
    bxq = beta_x(tq.ravel()).reshape(tq.shape)
    bzq = beta_z(tq.ravel()).reshape(tq.shape)
    dx = c * half * (bxq @ weights)
    dz_slip = c * half * ((bxq * bxq / (beta0 + bzq)) @ weights)
    x = np.concatenate(([0.0], np.cumsum(dx)))
    slip = np.concatenate(([0.0], np.cumsum(dz_slip)))
    z = c * beta0 * t - slip
    bx, bz = beta_x(t), beta_z(t)
    bxd = beta_x_dot(t)
    bzd = -bx * bxd / bz  # d/dt of β_x² + β_z² = β0² (constant)
    # centre: t = 0 and z = 0 in the middle of the device, x = 0 on the mean of the central periods
    centre = t.size // 2
    # whole periods, the end sample not counted twice
    central = slice(samples_per_period, t.size - samples_per_period - 1)
    x = x - np.mean(x[central])
    t, z = t - t[centre], z - z[centre]
    n = t.size if keep_periods is None else keep_periods * samples_per_period + 1
    zeros = np.zeros(n)
    return Trajectory(
        t[:n],
        np.column_stack([x[:n], zeros, z[:n]]),
        np.column_stack([bx[:n], zeros, bz[:n]]),
        np.column_stack([bxd[:n], zeros, bzd[:n]]),
        gamma=np.full(n, gamma),
        source="SM-U25 analytic (invented demo)",
    )


def arc_trajectory(n_samples: int = 451, x_offset: float = 0.0) -> Trajectory:
    """The SM-B1 arc: uniform circular motion over the 0.9 m magnet, centred at s = 0.

    Parameters
    ----------
    n_samples : int
        Samples, uniform in time (and path length).
    x_offset : float
        Parallel displacement in x, m (for the bunch example).
    """
    gamma, beta0 = _gamma_beta(ENERGY_EV)
    momentum = gamma * beta0 * m_e * c
    rho = momentum / (e * BEND_FIELD)  # ρ = p/(eB), Jackson 3rd ed. sec. 12.4
    s = np.linspace(-BEND_LENGTH / 2, BEND_LENGTH / 2, n_samples)
    phi = s / rho
    t = s / (beta0 * c)
    zeros = np.zeros(n_samples)
    r = np.column_stack([rho * (1.0 - np.cos(phi)) + x_offset, zeros, rho * np.sin(phi)])
    beta = beta0 * np.column_stack([np.sin(phi), zeros, np.cos(phi)])
    beta_dot = (beta0 * beta0 * c / rho) * np.column_stack([np.cos(phi), zeros, -np.sin(phi)])
    return Trajectory(
        t,
        r,
        beta,
        beta_dot,
        gamma=np.full(n_samples, gamma),
        source="SM-B1 analytic (invented demo)",
    )


def _s_form_rows(tr: Trajectory):
    """Exact path length along the arc (uniform speed: s = |β| c (t − t0)), for the s, x, y, z example."""
    speed = np.linalg.norm(tr.beta, axis=1)
    return speed * c * (tr.t - tr.t[0])


def main(argv=None) -> int:
    """Write every example file; returns an exit code."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    here = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
    parser.add_argument(
        "--out", default=os.path.join(here, "trajectories"), help="output directory"
    )
    parser.add_argument("--overwrite", action="store_true", help="replace existing files")
    args = parser.parse_args(argv)
    out = args.out
    os.makedirs(out, exist_ok=True)
    ow = args.overwrite

    def path(name):
        return os.path.join(out, name)

    und = undulator_trajectory()
    arc = arc_trajectory()
    note = INVENTED
    write_trajectory(
        und,
        path("sm_u25_time_si.csv"),
        overwrite=ow,
        comment=note + "\nSM-U25 undulator, time form, SI",
    )
    write_trajectory(
        und,
        path("sm_u25_momentum_mm.txt"),
        overwrite=ow,
        form="momentum",
        delimiter=" ",
        time_unit="ns",
        length_unit="mm",
        momentum_unit="MeV/c",
        comment=note + "\nSM-U25 undulator, momentum columns, mm and ns",
    )
    write_trajectory(
        und,
        path("sm_u25_pathlength_z.dat"),
        overwrite=ow,
        form="path",
        delimiter="\t",
        angle_unit="mrad",
        energy_column="energy",
        energy_unit="GeV",
        comment=note + "\nSM-U25 undulator, path-length form (z, x, x', y, y', energy)",
    )
    write_trajectory(und, path("sm_u25.h5"), overwrite=ow)
    write_trajectory(und, path("sm_u25.npz"), overwrite=ow)
    write_trajectory(
        arc,
        path("sm_b1_arc_time_si.csv"),
        overwrite=ow,
        comment=note + "\nSM-B1 bending-magnet arc, time form, SI",
    )
    write_trajectory(
        arc,
        path("sm_b1_arc_pathlength_z.txt"),
        overwrite=ow,
        form="path",
        delimiter=" ",
        energy_column="delta",
        reference_energy=ENERGY_EV,
        comment=note + "\nSM-B1 arc, path-length form (z, x, x', y, y', delta)",
    )
    _write_s_form(arc, path("sm_b1_arc_pathlength_s.csv"), ow)
    write_trajectory(arc, path("sm_b1_arc.h5"), overwrite=ow)
    write_trajectory(arc, path("sm_b1_arc.npz"), overwrite=ow)
    # openPMD files carry ~12 kB of metadata per iteration: short excerpts and coarse sampling
    bunch = Bunch([arc_trajectory(16, dx) for dx in (-1e-4, 0.0, 1e-4)], weights=[0.5, 1.0, 0.5])
    write_trajectory(bunch, path("sm_b1_bunch.h5"), overwrite=ow)
    write_trajectory(bunch, path("sm_b1_bunch_openpmd.h5"), format="openpmd", overwrite=ow)
    os.makedirs(path("sm_u25_excerpt_openpmd"), exist_ok=True)
    excerpt = undulator_trajectory(samples_per_period=8, keep_periods=2)
    write_trajectory(
        excerpt, path(os.path.join("sm_u25_excerpt_openpmd", "sm_u25_%T.h5")), overwrite=ow
    )
    total = sum(os.path.getsize(os.path.join(d, f)) for d, _, files in os.walk(out) for f in files)
    print(f"wrote examples to {out} ({total / 1e6:.2f} MB)")
    return 0


def _write_s_form(arc, target, overwrite):
    """The s, x, y, z (curved path) text form, which the writer does not produce itself."""
    from lwrad.io._common import atomic_write

    s = _s_form_rows(arc)
    rows = np.column_stack([s, arc.r, arc.energy_ev / 1e9])
    lines = [f"# {line}" for line in INVENTED.splitlines()]
    lines += [
        "# SM-B1 arc, path-length form along the curved path (s, x, y, z, energy)",
        "# particle: electron",
    ]
    lines.append("s,x,y,z,energy[GeV]")
    lines += [",".join(f"{v:.17g}" for v in row) for row in rows.tolist()]

    def _write(tmp):
        with open(tmp, "w", encoding="utf-8", newline="\n") as fh:
            fh.write("\n".join(lines) + "\n")

    atomic_write(target, _write, overwrite=overwrite)


if __name__ == "__main__":
    sys.exit(main())

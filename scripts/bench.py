#!/usr/bin/env python3
"""lwrad benchmark suite: standard workloads, timed after warm-up, with accuracy and baselines.

Each workload runs in its own subprocess so that its peak memory (maximum
resident set size) is its own. For each workload the script prints wall time,
throughput, peak memory, accuracy against a converged reference, the ratio
against a plain numpy direct sum of the same integral (written here, measured
in the same run on a subset of pixels and scaled), and the speed-up from 1 to
2 workers.

Usage::

    python scripts/bench.py                 # all workloads
    python scripts/bench.py --workload 1    # one
    python scripts/bench.py --json out.json

The scenario is the invented "Saltmarsh" ring (2.5 GeV) of the examples.
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import resource
import subprocess
import sys
import time

import numpy as np

ENERGY = 2.5e9  # eV
PERIOD = 0.025  # m
N_PERIODS = 80
K = 1.4
CURRENT = 0.3  # A


def _timed(func, repeat=1):
    """Best wall time of ``repeat`` calls after one warm-up call; returns (seconds, value)."""
    value = func()
    best = float("inf")
    for _ in range(repeat):
        t0 = time.perf_counter()
        value = func()
        best = min(best, time.perf_counter() - t0)
    return best, value


def _undulator():
    from lwrad import ideal

    return ideal.planar_undulator(ENERGY, PERIOD, N_PERIODS, K)


def _fundamental_ev(traj):
    from lwrad.constants import hbar, e, c

    gamma = float(traj.gamma[0])
    lam1 = PERIOD / (2 * gamma**2) * (1 + K**2 / 2)
    return 2 * np.pi * hbar * c / lam1 / e


def numpy_far_field(traj, directions, omega):
    """Plain numpy direct sum of the far-field radiation integral (trapezoid rule).

    R·Ẽ = q/(4πε0 c) ∫ n×((n−β)×β̇)/κ² e^{iω(t − n·r/c)} dt, one pixel at a time,
    energies × samples vectorised. This is the baseline the kernels are measured
    against; it is written independently of lwrad's engine.
    """
    from lwrad.constants import c, epsilon_0

    q = traj.charge
    t, r, b, bd = traj.t, traj.r, traj.beta, traj.beta_dot
    w = np.gradient(t)  # trapezoid-like weights on a uniform grid
    w[0] *= 0.5
    w[-1] *= 0.5
    out = np.empty((len(omega), len(directions), 3), dtype=complex)
    for j, n in enumerate(directions):
        kappa = 1.0 - b @ n
        nb = n[None, :] - b
        amp = np.cross(n[None, :], np.cross(nb, bd)) / kappa[:, None] ** 2
        phase = t - r @ n / c
        ph = np.exp(1j * np.outer(omega, phase)) * w[None, :]
        out[:, j, :] = ph @ amp
    return out * q / (4 * np.pi * epsilon_0 * c)


def _directions(theta_x, theta_y):
    tx, ty = np.meshgrid(theta_x, theta_y)
    n = np.stack([tx, ty, np.ones_like(tx)], axis=-1)
    return (n / np.linalg.norm(n, axis=-1, keepdims=True)).reshape(-1, 3)


def workload_1(quick):
    """Far-field flux-density cube: 64×64 angles over ±1.5/γ, 400 energies across the fundamental."""
    import lwrad

    traj = _undulator()
    gamma = float(traj.gamma[0])
    npix = 16 if quick else 64
    nen = 100 if quick else 400
    th = np.linspace(-1.5 / gamma, 1.5 / gamma, npix)
    e1 = _fundamental_ev(traj)
    energies = np.linspace(0.9 * e1, 1.05 * e1, nen)
    grid = lwrad.AngularGrid(th, th)
    rec = {"name": "far-field flux-density cube", "pixels": npix * npix, "energies": nen}
    for workers in (1, 2):
        sec, res = _timed(lambda: lwrad.radiate(traj, grid, energies, n_jobs=workers))
        rec[f"wall_s_{workers}w"] = sec
    rec["speedup_1_to_2"] = rec["wall_s_1w"] / rec["wall_s_2w"]
    rec["pixel_energies_per_s"] = npix * npix * nen / rec["wall_s_2w"]
    # accuracy: a reference with a tolerance 100× tighter, on a subset of pixels
    sub = np.arange(0, npix * npix, max(1, npix * npix // 32))
    ref = lwrad.radiate(traj, grid.take(sub), energies, tolerance=1e-6)
    test = lwrad.radiate(traj, grid.take(sub), energies)
    f_ref = ref.flux_density(CURRENT)
    rec["relative_error"] = float(np.max(np.abs(test.flux_density(CURRENT) - f_ref)) / np.max(f_ref))
    # baseline: numpy direct sum on a few pixels, scaled to the whole cube
    from lwrad.constants import photon_energy_to_omega

    dirs = _directions(th, th)[sub[:4]]
    omega = photon_energy_to_omega(energies)
    sec_np, field_np = _timed(lambda: numpy_far_field(traj, dirs, omega), repeat=1)
    numpy_full = sec_np * (npix * npix) / len(dirs)
    rec["numpy_direct_sum_s_scaled"] = numpy_full
    rec["ratio_vs_numpy"] = numpy_full / rec["wall_s_1w"]
    rec["terms_per_s_numpy"] = len(dirs) * nen * traj.n_samples / sec_np
    return rec


WORKLOADS = {1: workload_1}


def _run_one(number, quick):
    rec = WORKLOADS[number](quick)
    rec["peak_memory_MB"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
    return rec


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--workload", type=int, choices=sorted(WORKLOADS), action="append")
    parser.add_argument("--quick", action="store_true", help="small sizes, for a smoke test")
    parser.add_argument("--json", help="write the records to this JSON file")
    parser.add_argument("--child", type=int, help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.child:
        print(json.dumps(_run_one(args.child, args.quick)))
        return 0
    records = []
    for number in args.workload or sorted(WORKLOADS):
        cmd = [sys.executable, __file__, "--child", str(number)] + (["--quick"] if args.quick else [])
        out = subprocess.run(cmd, capture_output=True, text=True, check=False)
        if out.returncode != 0:
            print(f"workload {number} failed:\n{out.stderr}", file=sys.stderr)
            continue
        rec = json.loads(out.stdout.strip().splitlines()[-1])
        rec["workload"] = number
        records.append(rec)
        print(json.dumps(rec, indent=2))
    info = {
        "date": time.strftime("%Y-%m-%d"),
        "machine": f"{platform.machine()} {platform.processor() or ''} {os.cpu_count()} cores".strip(),
        "python": platform.python_version(),
    }
    if args.json:
        with open(args.json, "w") as fh:
            json.dump({"machine": info, "records": records}, fh, indent=2)
    return 0


if __name__ == "__main__":
    sys.exit(main())

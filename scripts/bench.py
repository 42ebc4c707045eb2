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
    python scripts/bench.py --workload 1 --profile   # where one worker's time goes

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
    from lwrad.constants import c, e, hbar

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


REPEAT = 3  # best of 3 per worker count: a shared machine's interference only adds time
PROFILE = False  # set by --profile: one more one-worker run under cProfile
PROFILE_TOP = 8


def _profile(func):
    """Top functions by own time of one ``func()`` call: ["share  seconds  file:function"]."""
    import cProfile
    import pstats

    prof = cProfile.Profile()
    prof.enable()
    func()
    prof.disable()
    stats = pstats.Stats(prof).stats  # {(file, line, name): (cc, nc, tottime, cumtime, callers)}
    total = sum(v[2] for v in stats.values())
    top = sorted(stats.items(), key=lambda kv: -kv[1][2])[:PROFILE_TOP]
    return [
        f"{100 * v[2] / total:5.1f} %  {v[2]:7.3f} s  {os.path.basename(k[0])}:{k[2]}"
        for k, v in top
    ]


def _timed_workers(func, warm):
    """Warm up (numba compile, caches) with ``warm()``, then time ``func(workers)`` for 1 and 2.

    Runs alternate 1 and 2 workers, ``REPEAT`` times each, and keep the best of each.
    """
    warm()
    rec = {"wall_s_1w": float("inf"), "wall_s_2w": float("inf")}
    value = None
    for _ in range(REPEAT):
        for workers in (1, 2):
            t0 = time.perf_counter()
            value = func(workers)
            rec[f"wall_s_{workers}w"] = min(rec[f"wall_s_{workers}w"], time.perf_counter() - t0)
    rec["speedup_1_to_2"] = rec["wall_s_1w"] / rec["wall_s_2w"]
    rec["wall_s"] = min(rec["wall_s_1w"], rec["wall_s_2w"])
    # the workload's own peak, before the accuracy reference and the baseline run
    rec["peak_memory_MB"] = _peak_mb()
    if PROFILE:
        rec["profile_1w"] = _profile(lambda: func(1))
    return rec, value


def _peak_mb():
    # ru_maxrss is in kB on Linux: this process's peak resident set (one process per workload)
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def numpy_equal_accuracy(targets, omega, ref_field, tolerance, near=False):
    """Cost of the plain numpy sum at the coarsest input density that meets ``tolerance``.

    The numpy trapezoid sum is run on the ideal undulator sampled at increasing
    densities (samples per period) for the given pixels; its flux-density error
    (|E|², relative to the peak) against the converged reference is recorded for
    each, and the first density reaching ``tolerance`` — the goal the engine
    was given — sets the baseline at equal accuracy. Returns
    (seconds per pixel, samples per period, {density: error}).
    """
    import lwrad.ideal

    fn = numpy_near_field if near else numpy_far_field
    ref_i = np.sum(np.abs(ref_field) ** 2, axis=-1)
    errors = {}
    for spp in (8, 10, 12, 14, 16, 20, 24, 32, 48, 64, 96):
        tr = lwrad.ideal.planar_undulator(ENERGY, PERIOD, N_PERIODS, K, samples_per_period=spp)
        t0 = time.perf_counter()
        got = fn(tr, targets, omega)
        sec = (time.perf_counter() - t0) / len(targets)
        got_i = np.sum(np.abs(got) ** 2, axis=-1)  # (n_e, pixels) like the reference
        errors[spp] = float(np.max(np.abs(got_i - ref_i)) / np.max(ref_i))
        if errors[spp] <= tolerance:
            return sec, spp, errors
    return None, None, errors


def _subset(n, count):
    return np.unique(np.linspace(0, n - 1, count).round().astype(int))


def _rel_err(test, ref):
    return float(np.max(np.abs(test - ref)) / np.max(np.abs(ref)))


def numpy_near_field(traj, points, omega):
    """Plain numpy direct sum of the near-field radiation integral (trapezoid rule, no tails).

    Ẽ = q/(4πε0) ∫ [(n−β)/(γ²κ²R²) + n×((n−β)×β̇)/(cκ²R)] e^{iω(t + R/c)} dt, one point
    at a time, energies × samples vectorised (the baseline; independent of lwrad's engine).
    """
    from lwrad.constants import c, epsilon_0

    t, r, b, bd = traj.t, traj.r, traj.beta, traj.beta_dot
    ig2 = 1.0 / traj.gamma**2
    w = np.gradient(t)
    w[0] *= 0.5
    w[-1] *= 0.5
    out = np.empty((len(omega), len(points), 3), dtype=complex)
    for j, x in enumerate(points):
        d = x[None, :] - r
        rr = np.linalg.norm(d, axis=1)
        n = d / rr[:, None]
        kappa = 1.0 - np.sum(n * b, axis=1)
        nb = n - b
        amp = nb * (ig2 / (kappa**2 * rr**2))[:, None]
        amp += np.cross(n, np.cross(nb, bd)) / (c * kappa**2 * rr)[:, None]
        ph = np.exp(1j * np.outer(omega, t + rr / c)) * w[None, :]
        out[:, j, :] = ph @ amp
    return out * traj.charge / (4 * np.pi * epsilon_0)


def numpy_power_density(traj, points):
    """Plain numpy ∫ |E_rad|² n_z κ dt per point (trapezoid), W/mm² per A of current."""
    from lwrad.constants import c, epsilon_0

    t, r, b, bd = traj.t, traj.r, traj.beta, traj.beta_dot
    w = np.gradient(t)
    w[0] *= 0.5
    w[-1] *= 0.5
    q = abs(traj.charge)
    out = np.empty(len(points))
    for j, x in enumerate(points):
        d = x[None, :] - r
        rr = np.linalg.norm(d, axis=1)
        n = d / rr[:, None]
        kappa = 1.0 - np.sum(n * b, axis=1)
        e_rad = np.cross(n, np.cross(n - b, bd)) / (c * kappa**3 * rr)[:, None]
        out[j] = np.sum(w * np.sum(e_rad**2, axis=1) * n[:, 2] * kappa)
    return out * epsilon_0 * c * (q / (4 * np.pi * epsilon_0)) ** 2 / q * 1e-6


def numpy_fields(traj, points, t_obs):
    """Plain numpy Liénard–Wiechert E at points × times: retarded time by linear interpolation.

    t_obs(t_r) = t_r + R/c is monotone, so t_r is found by np.interp of the sampled map;
    r, β, β̇ are linearly interpolated there (the baseline; no straight-line continuation).
    """
    from lwrad.constants import c, epsilon_0

    out = np.empty((len(t_obs), len(points), 3))
    ig2_s = 1.0 / traj.gamma**2
    for j, x in enumerate(points):
        tob = traj.t + np.linalg.norm(x[None, :] - traj.r, axis=1) / c
        tr = np.interp(t_obs, tob, traj.t)
        r = np.stack([np.interp(tr, traj.t, traj.r[:, i]) for i in range(3)], axis=1)
        b = np.stack([np.interp(tr, traj.t, traj.beta[:, i]) for i in range(3)], axis=1)
        bd = np.stack([np.interp(tr, traj.t, traj.beta_dot[:, i]) for i in range(3)], axis=1)
        ig2 = np.interp(tr, traj.t, ig2_s)
        d = x[None, :] - r
        rr = np.linalg.norm(d, axis=1)
        n = d / rr[:, None]
        kappa = 1.0 - np.sum(n * b, axis=1)
        nb = n - b
        e = nb * (ig2 / (kappa**3 * rr**2))[:, None]
        e += np.cross(n, np.cross(nb, bd)) / (c * kappa**3 * rr)[:, None]
        out[:, j, :] = e
    return out * traj.charge / (4 * np.pi * epsilon_0)


def _far_cube(quick):
    traj = _undulator()
    gamma = float(traj.gamma[0])
    npix = 16 if quick else 64
    nen = 100 if quick else 400
    th = np.linspace(-1.5 / gamma, 1.5 / gamma, npix)
    e1 = _fundamental_ev(traj)
    return traj, th, np.linspace(0.9 * e1, 1.05 * e1, nen)


def workload_1(quick):
    """Far-field flux-density cube: 64×64 angles over ±1.5/γ, 400 energies across the fundamental."""
    import lwrad
    import lwrad.ideal
    from lwrad.constants import photon_energy_to_omega

    traj, th, energies = _far_cube(quick)
    npix, nen = th.size, energies.size
    grid = lwrad.AngularGrid(th, th)
    rec = {"name": "far-field flux-density cube", "pixels": npix * npix, "energies": nen}
    timing, res = _timed_workers(
        lambda w: lwrad.radiate(traj, grid, energies, n_jobs=w),
        lambda: lwrad.radiate(traj, grid.take(np.arange(4)), energies[:8]),
    )
    rec.update(timing)
    rec["samples"] = res.diagnostics.get("n_samples")
    rec["pixel_energies_per_s"] = npix * npix * nen / rec["wall_s"]
    # accuracy: tolerance 100× tighter and the input path 4× denser, on a subset of pixels
    sub = _subset(npix * npix, 32)
    fine = lwrad.ideal.planar_undulator(ENERGY, PERIOD, N_PERIODS, K, samples_per_period=256)
    ref_res = lwrad.radiate(fine, grid.take(sub), energies, tolerance=1e-6)
    ref = ref_res.flux_density(CURRENT)
    got = res.flux_density(CURRENT).reshape(nen, -1)[:, sub]
    rec["relative_error"] = _rel_err(got, ref.reshape(nen, -1))
    # baseline at equal accuracy: the coarsest numpy input density meeting the engine's 1e-4
    few = np.arange(4)
    sec, spp, errs = numpy_equal_accuracy(
        _directions(th, th)[sub[few]],
        photon_energy_to_omega(energies),
        ref_res.field.reshape(nen, -1, 3)[:, few],
        1e-4,
    )
    rec["numpy_error_by_samples_per_period"] = errs
    if sec is not None:
        rec["numpy_equal_accuracy_samples_per_period"] = spp
        rec["ratio_vs_numpy_equal_accuracy"] = sec * npix * npix / rec["wall_s_1w"]
    # baseline: numpy direct sum on the same (input) samples, a few pixels, scaled
    dirs = _directions(th, th)[sub[:4]]
    omega = photon_energy_to_omega(energies)
    t0 = time.perf_counter()
    numpy_far_field(traj, dirs, omega)
    sec_np = time.perf_counter() - t0
    rec["numpy_direct_sum_s_scaled"] = sec_np * npix * npix / len(dirs)
    rec["ratio_vs_numpy"] = rec["numpy_direct_sum_s_scaled"] / rec["wall_s_1w"]
    rec["terms_per_s_numpy"] = len(dirs) * nen * len(traj) / sec_np
    return rec


def workload_2(quick):
    """The same cube on a screen at 15 m (near field, straight-line tails)."""
    import lwrad
    import lwrad.ideal
    from lwrad.constants import photon_energy_to_omega

    traj, th, energies = _far_cube(quick)
    npix, nen = th.size, energies.size
    dist = 15.0
    screen = lwrad.Screen(dist, dist * th, dist * th)  # even count: no pixel on the axis
    rec = {"name": "near-field cube, screen at 15 m", "pixels": npix * npix, "energies": nen}
    timing, res = _timed_workers(
        lambda w: lwrad.radiate(traj, screen, energies, n_jobs=w),
        lambda: lwrad.radiate(traj, screen.take(np.arange(2)), energies[:8]),
    )
    rec.update(timing)
    rec["samples"] = res.diagnostics.get("n_samples")
    rec["pixel_energies_per_s"] = npix * npix * nen / rec["wall_s"]
    sub = _subset(npix * npix, 8)
    fine = lwrad.ideal.planar_undulator(ENERGY, PERIOD, N_PERIODS, K, samples_per_period=256)
    ref_res = lwrad.radiate(fine, screen.take(sub), energies, tolerance=1e-6)
    ref = ref_res.flux_density(CURRENT)
    got = res.flux_density(CURRENT).reshape(nen, -1)[:, sub]
    rec["relative_error"] = _rel_err(got, ref.reshape(nen, -1))
    few = np.arange(2)
    sec, spp, errs = numpy_equal_accuracy(
        screen.points()[sub[few]],
        photon_energy_to_omega(energies),
        ref_res.field.reshape(nen, -1, 3)[:, few],
        1e-4,
        near=True,
    )
    rec["numpy_error_by_samples_per_period"] = errs
    if sec is not None:
        rec["numpy_equal_accuracy_samples_per_period"] = spp
        rec["ratio_vs_numpy_equal_accuracy"] = sec * npix * npix / rec["wall_s_1w"]
    pts = screen.points()[sub[:2]]
    t0 = time.perf_counter()
    numpy_near_field(traj, pts, photon_energy_to_omega(energies))
    sec_np = time.perf_counter() - t0
    rec["numpy_direct_sum_s_scaled"] = sec_np * npix * npix / len(pts)
    rec["ratio_vs_numpy"] = rec["numpy_direct_sum_s_scaled"] / rec["wall_s_1w"]
    rec["terms_per_s_numpy"] = len(pts) * nen * len(traj) / sec_np
    return rec


def workload_3(quick):
    """Power-density map 201×201 on a screen at 15 m, ±3 K/γ horizontally, ±3/γ vertically."""
    import lwrad
    import lwrad.ideal

    traj = _undulator()
    gamma = float(traj.gamma[0])
    npix = 51 if quick else 201
    dist = 15.0
    x = np.linspace(-3 * K / gamma, 3 * K / gamma, npix) * dist
    y = np.linspace(-3 / gamma, 3 / gamma, npix) * dist
    screen = lwrad.Screen(dist, x, y)
    rec = {"name": "power-density map on a screen at 15 m", "pixels": npix * npix}
    timing, res = _timed_workers(
        lambda w: lwrad.power_density(traj, screen, CURRENT, n_jobs=w),
        lambda: lwrad.power_density(traj, screen.take(np.arange(4)), CURRENT),
    )
    rec.update(timing)
    rec["pixels_per_s"] = npix * npix / rec["wall_s"]
    sub = _subset(npix * npix, 64)
    fine = lwrad.ideal.planar_undulator(ENERGY, PERIOD, N_PERIODS, K, samples_per_period=256)
    ref = lwrad.power_density(fine, screen.take(sub), CURRENT).ravel()
    rec["relative_error"] = _rel_err(res.ravel()[sub], ref)
    pts = screen.points()[sub[:16]]
    t0 = time.perf_counter()
    base = numpy_power_density(traj, pts) * CURRENT
    sec_np = time.perf_counter() - t0
    rec["numpy_relative_error"] = _rel_err(base, ref[:16])
    rec["numpy_direct_sum_s_scaled"] = sec_np * npix * npix / len(pts)
    rec["ratio_vs_numpy"] = rec["numpy_direct_sum_s_scaled"] / rec["wall_s_1w"]
    return rec


def workload_4(quick):
    """Time-domain fields at 1000 points × 2000 observer times (screen at 15 m)."""
    import lwrad
    import lwrad.ideal
    from lwrad.constants import c

    traj = _undulator()
    gamma = float(traj.gamma[0])
    nx, ny = (10, 10) if quick else (40, 25)
    nt = 200 if quick else 2000
    dist = 15.0
    x = np.linspace(-1.5 / gamma, 1.5 / gamma, nx) * dist
    y = np.linspace(-1.5 / gamma, 1.5 / gamma, ny) * dist
    xx, yy = np.meshgrid(x, y)
    pts = np.stack([xx.ravel(), yy.ravel(), np.full(xx.size, dist)], axis=1)
    # the pulse seen on axis: first to last sample, with 10 % margin
    tob = traj.t + np.linalg.norm(np.array([0, 0, dist]) - traj.r, axis=1) / c
    span = tob[-1] - tob[0]
    t_obs = np.linspace(tob[0] - 0.1 * span, tob[-1] + 0.1 * span, nt)
    rec = {"name": "time-domain fields", "points": len(pts), "times": nt}
    timing, (e_field, _) = _timed_workers(
        lambda w: lwrad.fields(traj, pts, t_obs, n_jobs=w),
        lambda: lwrad.fields(traj, pts[:2], t_obs[:16]),
    )
    rec.update(timing)
    rec["point_times_per_s"] = len(pts) * nt / rec["wall_s"]
    sub = _subset(len(pts), 16)
    fine = lwrad.ideal.planar_undulator(ENERGY, PERIOD, N_PERIODS, K, samples_per_period=256)
    ref, _ = lwrad.fields(fine, pts[sub], t_obs)
    rec["relative_error"] = _rel_err(e_field[:, sub], ref)
    t0 = time.perf_counter()
    base = numpy_fields(traj, pts[sub], t_obs)
    sec_np = time.perf_counter() - t0
    rec["numpy_relative_error"] = _rel_err(base, ref)
    rec["numpy_s_scaled"] = sec_np * len(pts) / len(sub)
    rec["ratio_vs_numpy"] = rec["numpy_s_scaled"] / rec["wall_s_1w"]
    # equal accuracy: numpy's linear interpolation on denser inputs until it meets 1e-4
    errors = {}
    for spp in (48, 96, 192, 288, 384, 512, 640, 768, 1024, 1536):
        dense = lwrad.ideal.planar_undulator(ENERGY, PERIOD, N_PERIODS, K, samples_per_period=spp)
        t0 = time.perf_counter()
        base = numpy_fields(dense, pts[sub], t_obs)
        sec = time.perf_counter() - t0
        errors[spp] = _rel_err(base, ref)
        if errors[spp] <= 1e-4:
            rec["numpy_equal_accuracy_samples_per_period"] = spp
            rec["ratio_vs_numpy_equal_accuracy"] = sec * len(pts) / len(sub) / rec["wall_s_1w"]
            break
    rec["numpy_error_by_samples_per_period"] = errors
    return rec


def workload_5(quick):
    """Bending-magnet spectrum on the orbit plane, 10 eV to 10 εc, 1000 energies (SM-B1)."""
    import lwrad
    import lwrad.ideal
    from lwrad.constants import c, e, hbar, m_e, photon_energy_to_omega

    field, length = 1.2, 0.9  # T, m (invented SM-B1)
    gamma = ENERGY * e / (m_e * c**2)
    p = np.sqrt(gamma**2 - 1) * m_e * c
    rho = p / (e * field)
    eps_c = 1.5 * hbar * gamma**3 * c / rho / e  # eV, X-ray Data Booklet 2.1
    arc = lwrad.ideal.circular_arc(ENERGY, rho, 0.5 * length / rho, n_samples=4001)
    nen = 100 if quick else 1000
    energies = np.geomspace(10.0, 10 * eps_c, nen)
    grid = lwrad.AngularGrid(0.0, 0.0)
    rec = {"name": "bending-magnet spectrum", "energies": nen, "critical_energy_eV": eps_c}
    timing, res = _timed_workers(
        lambda w: lwrad.radiate(arc, grid, energies, n_jobs=w),
        lambda: lwrad.radiate(arc, grid, energies[:8]),
    )
    rec.update(timing)
    rec["samples"] = res.diagnostics.get("n_samples")
    rec["energies_per_s"] = nen / rec["wall_s"]
    ref_res = lwrad.radiate(arc, grid, energies, tolerance=1e-6)
    rec["relative_error"] = _rel_err(res.flux_density(CURRENT), ref_res.flux_density(CURRENT))
    # baseline on the engine's own nodes (its top band's, at the refinement factor it chose):
    # the input arc is far too coarse for a trapezoid sum at 50 keV; a subset of energies, scaled
    from lwrad.engine import frequency as F

    factor = float(res.diagnostics["refinement_factor"])
    w_top = float(photon_energy_to_omega(energies.max()))
    t_nodes = F.sample_times(arc, grid, w_top, factor)
    dense = arc.interpolate(t_nodes)
    sub = _subset(nen, 20)
    t0 = time.perf_counter()
    numpy_far_field(dense, np.array([[0.0, 0.0, 1.0]]), photon_energy_to_omega(energies[sub]))
    sec_np = time.perf_counter() - t0
    rec["numpy_direct_sum_s_scaled"] = sec_np * nen / len(sub)
    rec["ratio_vs_numpy"] = rec["numpy_direct_sum_s_scaled"] / rec["wall_s_1w"]
    # equal accuracy: the trapezoid on the engine's node placement made 2×, 4×, … denser
    # (than at refinement factor 1) until its flux density on the energy subset meets 1e-4
    ref_field = ref_res.field.reshape(nen, 1, 3)[sub]
    ref_i = np.sum(np.abs(ref_field) ** 2, axis=-1)
    errors = {}
    for dens in (1, 2, 4, 8, 16, 32):
        t_nodes = F.sample_times(arc, grid, w_top, dens)
        dense = arc.interpolate(t_nodes)
        t0 = time.perf_counter()
        got = np.concatenate(
            [
                numpy_far_field(dense, np.array([[0.0, 0.0, 1.0]]), photon_energy_to_omega(e4))
                for e4 in np.array_split(energies[sub], 5)  # 4 energies at a time: bounded memory
            ]
        )
        sec = time.perf_counter() - t0
        errors[dens] = float(
            np.max(np.abs(np.sum(np.abs(got) ** 2, axis=-1) - ref_i)) / ref_i.max()
        )
        if errors[dens] <= 1e-4:
            rec["numpy_equal_accuracy_nodes"] = int(t_nodes.size)
            rec["numpy_equal_accuracy_vs_engine_nodes"] = int(t_nodes.size) / rec["samples"]
            rec["ratio_vs_numpy_equal_accuracy"] = sec * nen / len(sub) / rec["wall_s_1w"]
            break
    rec["numpy_error_by_node_density"] = errors
    return rec


WORKLOADS = {1: workload_1, 2: workload_2, 3: workload_3, 4: workload_4, 5: workload_5}


def _run_one(number, quick):
    rec = WORKLOADS[number](quick)
    rec["peak_memory_with_checks_MB"] = _peak_mb()
    return rec


def main(argv=None):
    parser = argparse.ArgumentParser(
        description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter
    )
    parser.add_argument("--workload", type=int, choices=sorted(WORKLOADS), action="append")
    parser.add_argument("--quick", action="store_true", help="small sizes, for a smoke test")
    parser.add_argument("--json", help="write the records to this JSON file")
    parser.add_argument(
        "--profile", action="store_true", help="add the top functions of a one-worker run"
    )
    parser.add_argument("--child", type=int, help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.child:
        global PROFILE
        PROFILE = args.profile
        print(json.dumps(_run_one(args.child, args.quick)))
        return 0
    records = []
    for number in args.workload or sorted(WORKLOADS):
        cmd = (
            [sys.executable, __file__, "--child", str(number)]
            + (["--quick"] if args.quick else [])
            + (["--profile"] if args.profile else [])
        )
        out = subprocess.run(cmd, capture_output=True, text=True, check=False)
        if out.returncode != 0:
            print(f"workload {number} failed:\n{out.stderr}", file=sys.stderr)
            continue
        rec = json.loads(out.stdout.strip().splitlines()[-1])
        rec["workload"] = number
        records.append(rec)
        print(json.dumps(rec, indent=2))
    info = {
        "date": time.strftime("%Y-%m-%d %H:%M"),
        "load_average": os.getloadavg(),
        "machine": f"{platform.machine()} {platform.processor() or ''} {os.cpu_count()} cores".strip(),
        "python": platform.python_version(),
    }
    if args.json:
        with open(args.json, "w") as fh:
            json.dump({"machine": info, "records": records}, fh, indent=2)
    return 0


if __name__ == "__main__":
    sys.exit(main())

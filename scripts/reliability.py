"""Reliability measurements of lwrad: fuzzing, kill/resume, memory estimate, determinism, sampling.

Writes ``scripts/reliability_out/reliability.json`` and two small figures
(``memory.png``, ``sampling.png``). Every section can run on its own::

    python scripts/reliability.py                 # all sections, quick sizes
    python scripts/reliability.py --full          # 10,000 fuzz examples per property, more trials
    python scripts/reliability.py --only memory sampling

Sections
--------
fuzz         the property-based fuzz tests of the importers (tests/test_io_fuzz.py) and
             the job parser (tests/test_jobs_schema.py), run by pytest with
             LWRAD_FULL_VALIDATION set by ``--full``; examples and outcome per property
             from hypothesis' statistics.
kill         ``lwrad run`` subprocesses killed with SIGKILL after a random number of
             checkpointed chunks (seed 20261202), resumed, compared bit for bit.
memory       the planner's estimate against the peak RSS of ``lwrad run`` subprocesses.
determinism  the same job twice and with other chunk sizes: every dataset bit for bit.
sampling     the input-path resolution gap: error of the 9th-harmonic field of an ideal
             undulator against the points per period of the input path, what lwrad
             reports, and a midpoint phase-error estimator (cubic vs quintic Hermite).

Invented test scenarios only (a short 2.5 GeV planar undulator). Timings are not
reported as results: this is about correctness under stress, not speed.
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import re
import signal
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
REPO = HERE.parent
OUT = HERE / "reliability_out"
SEED = 20261202

TESTS = REPO / "tests"


def _jobkit():
    """The tests' shared job-file helpers (tests/jobkit.py)."""
    if str(TESTS) not in sys.path:
        sys.path.insert(0, str(TESTS))
    import jobkit

    return jobkit


def _job_text(**sizes):
    return _jobkit().angular_maps_job(samples_per_period=16, **sizes)


def _lwrad_run(job, out, *extra):
    return _jobkit().lwrad_run_argv(job, out, *extra)


# ----------------------------------------------------------------------------- fuzz


def fuzz(full: bool) -> dict:
    """Run the fuzz tests; examples and outcome per property."""
    env = dict(os.environ, LWRAD_FULL_VALIDATION="1" if full else "0")
    selection = [
        "tests/test_io_fuzz.py",
        "tests/test_jobs_schema.py::test_fuzz_mutated_jobs_raise_only_input_error",
        "tests/test_jobs_schema.py::test_fuzz_random_text_raises_only_input_error",
    ]
    t0 = time.monotonic()
    proc = subprocess.run(
        [
            sys.executable,
            "-m",
            "pytest",
            "-q",
            "-p",
            "no:cacheprovider",
            "--hypothesis-show-statistics",
            "-rA",
            *selection,
        ],
        cwd=REPO,
        env=env,
        capture_output=True,
        text=True,
    )
    text = proc.stdout
    props = {}
    # hypothesis statistics: a header line "tests/...::name:" then "- during generate phase
    # (...): N passing examples, M failing examples, K invalid examples"
    current = None
    for line in text.splitlines():
        head = re.match(r"^(tests/\S+::\S+?):\s*$", line.strip())
        if head:
            current = head.group(1)
            props.setdefault(current, {"passing": 0, "failing": 0, "invalid": 0})
            continue
        m = re.search(r"(\d+) passing examples?, (\d+) failing examples?, (\d+) invalid", line)
        if m and current:
            p = props[current]
            p["passing"] += int(m.group(1))
            p["failing"] += int(m.group(2))
            p["invalid"] += int(m.group(3))
    outcomes = {}
    for line in text.splitlines():
        m = re.match(r"^(PASSED|FAILED|ERROR|SKIPPED|XFAIL|XPASS)\s+(\S+)", line)
        if m:
            outcomes[m.group(2).split(" ")[0]] = m.group(1)
    for name, p in props.items():
        p["outcome"] = outcomes.get(name, "unknown")
    summary = text.strip().splitlines()[-1] if text.strip() else proc.stderr[-500:]
    return {
        "full": full,
        "command": ("LWRAD_FULL_VALIDATION=1 " if full else "")
        + "python -m pytest -q --hypothesis-show-statistics "
        + " ".join(selection),
        "pytest_summary": summary,
        "returncode": proc.returncode,
        "wall_seconds": round(time.monotonic() - t0, 1),
        "properties": props,
    }


# ----------------------------------------------------------------------------- kill / resume


def _arrays(path):
    return _jobkit().maps_arrays(path)


def kill_resume(trials: int) -> dict:
    from lwrad.jobs.runner import run_job

    rng = np.random.default_rng(SEED)
    d = Path(tempfile.mkdtemp(prefix="lwrad-rel-kill-"))
    job = d / "job.toml"
    job.write_text(_job_text(n_periods=20, ne=12, n=8, chunk=2))
    n_chunks = 32
    ref = _arrays(run_job(job, d / "ref.h5", workers=1, quiet=True))
    rows = []
    for k in range(trials):
        out = d / f"out{k}.h5"
        parts = out.with_name(out.name + ".parts")
        kill_after = int(rng.integers(1, n_chunks - 1))
        proc = subprocess.Popen(
            _lwrad_run(job, out, "--workers", "1"),
            stdout=subprocess.DEVNULL,
            stderr=subprocess.DEVNULL,
        )
        while (len(list(parts.glob("chunk_*.h5"))) if parts.exists() else 0) < kill_after:
            if proc.poll() is not None:
                break
            time.sleep(0.002)
        os.kill(proc.pid, signal.SIGKILL)
        proc.wait()
        done = len(list(parts.glob("chunk_*.h5"))) if parts.exists() else 0
        left_final = out.exists()
        resumed = run_job(job, out, workers=2, resume=True, quiet=True)
        same = all(np.array_equal(v, ref[name]) for name, v in _arrays(resumed).items())
        rows.append(
            {
                "kill_after_chunks": kill_after,
                "chunks_on_disk": done,
                "killed": proc.returncode == -signal.SIGKILL,
                "final_file_after_kill": left_final,
                "identical_after_resume": same,
            }
        )
    return {
        "seed": SEED,
        "trials": trials,
        "chunks_per_run": n_chunks,
        "identical": sum(r["identical_after_resume"] for r in rows),
        "final_file_left_by_kill": sum(r["final_file_after_kill"] for r in rows),
        "rows": rows,
        "command": "python scripts/reliability.py --only kill" + (" --full" if trials > 5 else ""),
    }


# ----------------------------------------------------------------------------- memory


def memory(sizes) -> dict:
    from lwrad.jobs.planning import estimate_memory
    from lwrad.jobs.runner import prepare
    from lwrad.jobs.schema import load_job

    d = Path(tempfile.mkdtemp(prefix="lwrad-rel-mem-"))
    rows = []
    for ne, n, chunk in sizes:
        job = d / f"job_{ne}_{n}.toml"
        job.write_text(_job_text(n_periods=5, ne=ne, n=n, chunk=chunk))
        prep = prepare(load_job(job))
        est = estimate_memory(prep.plan, prep.n_samples, workers=1, backend="serial")
        proc = subprocess.Popen(
            _lwrad_run(job, d / f"out_{ne}_{n}.h5", "--workers", "1", "--backend", "serial")
        )
        _, status, usage = os.wait4(proc.pid, 0)
        peak = usage.ru_maxrss * 1024
        rows.append(
            {
                "photon_energies": ne,
                "pixels": n * n,
                "chunk_pixels": chunk,
                "estimate_bytes": est.total,
                "breakdown": est.breakdown,
                "peak_rss_bytes": peak,
                "ratio": round(est.total / peak, 3),
                "exit_code": os.waitstatus_to_exitcode(status),
            }
        )
    base = rows[0]["peak_rss_bytes"]
    for r in rows:  # the part above the smallest run, against the estimate's job-dependent part
        r["measured_above_smallest"] = r["peak_rss_bytes"] - base
        r["estimated_job_part"] = r["estimate_bytes"] - r["breakdown"]["process baseline"]
    return {"rows": rows, "command": "python scripts/reliability.py --only memory"}


# ----------------------------------------------------------------------------- determinism


def determinism() -> dict:
    _jobkit()  # puts tests/ on sys.path
    from test_robust_determinism import JOB as DJOB
    from test_robust_determinism import RUN_ONLY, h5_inventory

    from lwrad.jobs.runner import run_job

    d = Path(tempfile.mkdtemp(prefix="lwrad-rel-det-"))
    job = d / "job.toml"
    job.write_text(DJOB)
    ref = run_job(job, d / "a.h5", workers=1, quiet=True)
    inv_ref = h5_inventory(ref, skip_provenance_attrs=RUN_ONLY + ("extra",))
    rows = []
    for label, kw in [
        ("same job again", {}),
        ("chunk_pixels=1", {"chunk_pixels": 1}),
        ("chunk_pixels=5", {"chunk_pixels": 5}),
        ("chunk_pixels=64", {"chunk_pixels": 64}),
        ("2 threads", {"workers": 2, "backend": "threads"}),
    ]:
        kw = {"workers": 1, **kw}
        other = run_job(job, d / f"{len(rows)}.h5", quiet=True, **kw)
        inv = h5_inventory(other, skip_provenance_attrs=RUN_ONLY + ("extra",))
        differ = sorted(
            k for k in inv_ref if inv_ref[k] != inv.get(k) and not k.startswith("provenance@")
        )
        rows.append({"run": label, "items_compared": len(inv_ref), "differing": differ})
    return {"rows": rows, "command": "python scripts/reliability.py --only determinism"}


# ----------------------------------------------------------------------------- sampling


def sampling() -> dict:
    import warnings

    from lwrad.constants import c
    from lwrad.errors import ConvergenceWarning
    from lwrad.ideal import planar_undulator
    from lwrad.observers import AngularGrid
    from lwrad.radiation import radiate

    energy, period, n_periods, k = 2.5e9, 0.025, 5, 1.4
    e1 = 0.950 * (energy / 1e9) ** 2 / (period * 100) / (1 + k**2 / 2) * 1e3  # XDB 2.1
    photon = np.linspace(0.9, 1.05, 7) * 9 * e1
    grid = AngularGrid(np.array([0.0, 2e-5]), np.array([0.0]))
    omega_max = photon.max() * 1.602176634e-19 / 1.054571817e-34
    ref = radiate(
        planar_undulator(energy, period, n_periods, k, samples_per_period=256), grid, photon
    ).field
    rows = []
    for spp in (4, 6, 8, 12, 16, 24, 32, 64, 128):
        traj = planar_undulator(energy, period, n_periods, k, samples_per_period=spp)
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            res = radiate(traj, grid, photon)
        err = float(np.max(np.abs(res.field - ref)) / np.max(np.abs(ref)))
        # midpoint phase-error estimate: cubic Hermite (r, v) against quintic (r, v, a)
        t, r, v, a = traj.t, traj.r, traj.beta * c, traj.beta_dot * c
        h = np.diff(t)[:, None]
        cubic = (r[:-1] + r[1:]) / 2 + h * (v[:-1] - v[1:]) / 8
        quintic = (
            (r[:-1] + r[1:]) / 2 + 5 * h / 32 * (v[:-1] - v[1:]) + h * h / 64 * (a[:-1] + a[1:])
        )
        phase = float(omega_max * np.max(np.abs(cubic[:, 2] - quintic[:, 2])) / c)
        advance = float(np.max(omega_max * (1 - traj.beta[:-1, 2]) * np.diff(t)))
        rows.append(
            {
                "samples_per_period": spp,
                "true_relative_error": err,
                "reported_estimated_error": res.diagnostics.get("estimated_relative_error"),
                "reported_converged": res.diagnostics.get("converged"),
                "warned": any(issubclass(w.category, ConvergenceWarning) for w in caught),
                "midpoint_phase_error_rad": phase,
                "phase_advance_per_input_sample_rad": advance,
            }
        )
    return {
        "scenario": "ideal planar undulator 2.5 GeV, 25 mm, 5 periods, K=1.4, 9th harmonic",
        "rows": rows,
        "command": "python scripts/reliability.py --only sampling",
    }


# ----------------------------------------------------------------------------- figures


def figures(data: dict) -> list[str]:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    written = []
    if "memory" in data:
        rows = data["memory"]["rows"]
        fig, ax = plt.subplots(figsize=(5, 3.6))
        x = [r["photon_energies"] * r["pixels"] for r in rows]
        ax.loglog(x, [r["peak_rss_bytes"] / 1e6 for r in rows], "o-", label="measured peak RSS")
        ax.loglog(x, [r["estimate_bytes"] / 1e6 for r in rows], "s--", label="planner estimate")
        ax.set_xlabel("pixels × photon energies")
        ax.set_ylabel("memory (MB)")
        ax.set_title("Memory estimate vs measured peak (1 worker)")
        ax.legend()
        fig.tight_layout()
        fig.savefig(OUT / "memory.png", dpi=90)
        plt.close(fig)
        written.append("memory.png")
    if "sampling" in data:
        rows = data["sampling"]["rows"]
        fig, ax = plt.subplots(figsize=(5, 3.6))
        spp = [r["samples_per_period"] for r in rows]
        ax.loglog(
            spp,
            [max(r["true_relative_error"], 1e-9) for r in rows],
            "o-",
            label="true error vs converged path",
        )
        ax.loglog(
            spp,
            [max(r["reported_estimated_error"] or 0, 1e-9) for r in rows],
            "s--",
            label="error lwrad reports",
        )
        ax.loglog(
            spp,
            [max(r["midpoint_phase_error_rad"], 1e-9) for r in rows],
            "^:",
            label="midpoint phase-error estimate (rad)",
        )
        ax.axhline(1e-4, color="gray", lw=0.8)
        ax.set_xlabel("input samples per undulator period")
        ax.set_ylabel("relative field error (9th harmonic)")
        ax.set_title("Coarse input paths: true vs reported error")
        ax.legend(fontsize=7)
        fig.tight_layout()
        fig.savefig(OUT / "sampling.png", dpi=90)
        plt.close(fig)
        written.append("sampling.png")
    return written


def main(argv=None) -> int:
    sections = ("fuzz", "kill", "memory", "determinism", "sampling")
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--full", action="store_true", help="full sizes (10,000 fuzz examples)")
    parser.add_argument("--only", nargs="+", choices=sections, default=list(sections))
    args = parser.parse_args(argv)
    OUT.mkdir(exist_ok=True)
    path = OUT / "reliability.json"
    data = json.loads(path.read_text()) if path.exists() else {}
    data["machine"] = {
        "platform": platform.platform(),
        "python": platform.python_version(),
        "cpus": os.cpu_count(),
        "date": time.strftime("%Y-%m-%d"),
    }
    for name in args.only:
        print(f"reliability: {name} ...", flush=True)
        if name == "fuzz":
            data["fuzz"] = fuzz(args.full)
        elif name == "kill":
            data["kill"] = kill_resume(10 if args.full else 3)
        elif name == "memory":
            sizes = [(4, 4, 4), (40, 16, 256), (100, 32, 1024)]
            if args.full:
                sizes += [(400, 32, 1024), (200, 64, 4096)]
            data["memory"] = memory(sizes)
        elif name == "determinism":
            data["determinism"] = determinism()
        else:
            data["sampling"] = sampling()
        path.write_text(json.dumps(data, indent=1, default=str))
    data["figures"] = figures(data)
    path.write_text(json.dumps(data, indent=1, default=str))
    print(f"reliability: wrote {path} and {', '.join(data['figures'])}")
    return 0


if __name__ == "__main__":
    sys.exit(main())

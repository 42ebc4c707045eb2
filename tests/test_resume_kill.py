"""A run killed with SIGKILL mid-way resumes to the identical result.

The run is a real ``lwrad run`` subprocess; it is killed once its checkpoint
holds a few chunks, at a chunk count drawn from a seeded generator (seed
20261202). CI kills at one point; LWRAD_FULL_VALIDATION=1 at three.
"""

import os
import signal
import subprocess
import time

import numpy as np
import pytest
from jobkit import angular_maps_job, lwrad_run_argv, maps_arrays

from lwrad.jobs.runner import run_job
from lwrad.results import load
from lwrad.testing import scaled

# 8 × 8 pixels in chunks of 2 → 32 chunks of roughly 0.05 s each on the development machine.
KILL_JOB = angular_maps_job(n_periods=20, ne=12, n=8, chunk=2)
N_CHUNKS = 32


def _chunks_done(parts):
    return len(list(parts.glob("chunk_*.h5"))) if parts.exists() else 0


def _start_and_kill(job, out, kill_after):
    env = dict(os.environ)
    proc = subprocess.Popen(
        lwrad_run_argv(job, out, "--workers", "1"),
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        env=env,
    )
    parts = out.with_name(out.name + ".parts")
    deadline = time.monotonic() + 300
    try:
        while _chunks_done(parts) < kill_after:
            if proc.poll() is not None:
                pytest.fail(f"run ended before it could be killed: {proc.stderr.read().decode()}")
            if time.monotonic() > deadline:  # pragma: no cover - a hung run
                pytest.fail("run made no progress")
            time.sleep(0.005)
        os.kill(proc.pid, signal.SIGKILL)
    finally:
        proc.wait()
        proc.stdout.close()
        proc.stderr.close()
    assert proc.returncode == -signal.SIGKILL
    return _chunks_done(parts)


@pytest.fixture(scope="module")
def reference(tmp_path_factory):
    d = tmp_path_factory.mktemp("ref")
    (d / "job.toml").write_text(KILL_JOB)
    return maps_arrays(run_job(d / "job.toml", d / "ref.h5", workers=1, quiet=True))


def test_sigkill_then_resume_identical(tmp_path, reference):
    rng = np.random.default_rng(20261202)
    n_kills = scaled(1, 3)
    for k in range(n_kills):
        job = tmp_path / f"job{k}.toml"
        job.write_text(KILL_JOB)
        out = tmp_path / f"out{k}.h5"
        kill_after = int(rng.integers(2, N_CHUNKS // 2))
        done = _start_and_kill(job, out, kill_after)
        assert 0 < done < N_CHUNKS
        # nothing that looks finished is left behind
        assert not out.exists()
        # resume (with another number of workers than the killed run) and compare
        resumed = run_job(job, out, workers=2, resume=True, quiet=True)
        result = maps_arrays(resumed)
        for name in reference:
            np.testing.assert_array_equal(result[name], reference[name], err_msg=name)
        prov = load(resumed).provenance
        assert prov.extra["chunks_resumed"] == done
        assert not out.with_name(out.name + ".parts").exists()

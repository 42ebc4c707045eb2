"""A ``dask.distributed`` worker killed mid-job: the job completes with the identical result.

Setup: a ``LocalCluster`` with two worker *processes* (``processes=True``, one
thread each, each under a nanny). The job runs through :func:`run_job` with the
cluster's scheduler; when the runner has checkpointed ``KILL_AFTER`` chunks, the
test sends SIGKILL to the process of a worker that is busy with a chunk at that
moment. The scheduler sees the connection drop, the nanny starts a new worker,
and the lost chunks are computed again. The result file must equal an
undisturbed serial run bit for bit (every dataset and attribute, provenance
times, host, workers and back end aside).
"""

import os
import signal
import time

import pytest
from jobkit import angular_maps_job
from test_robust_determinism import RUN_ONLY, assert_same_files

from lwrad.jobs import runner
from lwrad.jobs.runner import run_job

distributed = pytest.importorskip(
    "distributed", reason="dask.distributed is not installed (pip install 'lwrad[cluster]')"
)

# invented test scenario: 6 × 6 angles in chunks of 2 pixels → 18 chunks of a few 10 ms each
JOB = angular_maps_job(n_periods=10, ne=24, n=6, chunk=2)
N_CHUNKS = 18
KILL_AFTER = 4


def _slow(work):
    """The real chunk computation, slowed so that the kill lands while chunks are in flight."""
    from lwrad.jobs.tasks import compute

    time.sleep(0.1)
    return compute(work)


def test_worker_killed_mid_job_same_result(tmp_path, monkeypatch):
    job = tmp_path / "job.toml"
    job.write_text(JOB)
    reference = run_job(job, tmp_path / "ref.h5", workers=1, quiet=True)

    killed = {}
    with (
        distributed.LocalCluster(
            n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None
        ) as cluster,
        distributed.Client(cluster) as client,
    ):
        pids_before = client.run(os.getpid)

        class KillingProgress(runner.Progress):
            def update(self, chunk):
                super().update(chunk)
                if self.chunks_done == KILL_AFTER and not killed:
                    busy = [w for w, keys in client.processing().items() if keys]
                    victim = busy[0] if busy else next(iter(pids_before))
                    killed["pid"] = pids_before[victim]
                    killed["in_flight"] = len(client.processing().get(victim, ()))
                    os.kill(killed["pid"], signal.SIGKILL)

        monkeypatch.setattr(runner, "Progress", KillingProgress)
        monkeypatch.setattr(runner, "compute", _slow)
        out = run_job(job, tmp_path / "dask.h5", scheduler=client, quiet=True)
        # the nanny replaced the killed process: a pid disappeared
        client.wait_for_workers(2, timeout=60)
        pids_after = set(client.run(os.getpid).values())

    assert killed, "the worker was never killed (the run finished too fast?)"
    assert KILL_AFTER < N_CHUNKS
    assert killed["in_flight"] >= 1  # a chunk was being computed by the killed worker
    assert killed["pid"] not in pids_after
    # identical to the undisturbed serial run: every number, every unit, the job text
    assert_same_files(
        reference,
        out,
        skip_provenance_attrs=RUN_ONLY + ("workers", "backend", "scheduler", "extra"),
    )

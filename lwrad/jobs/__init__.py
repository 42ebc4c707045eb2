"""Jobs: a TOML job file → validated plan → chunked, checkpointed run → one HDF5 result.

=================  ==========================================================
module             concern
=================  ==========================================================
``schema``         read and validate job files (the key table lives there)
``planning``       chunk plan, memory and time estimates, memory limits
``build``          turn validated specs into lwrad objects (sources, observers)
``tasks``          the work of one chunk (picklable, runs in any worker)
``beams``          electron-beam studies: convolution at assembly, Monte Carlo per chunk
``progress``       progress bar or plain log lines
``runner``         run a job: estimates, parallel chunks, checkpoint, resume
=================  ==========================================================
"""

from __future__ import annotations

import importlib

__all__ = ["load_job", "parse_job", "Job", "plan_job", "run_job", "JobPlan"]

_EXPORTS = {
    "load_job": "lwrad.jobs.schema",
    "parse_job": "lwrad.jobs.schema",
    "Job": "lwrad.jobs.schema",
    "plan_job": "lwrad.jobs.planning",
    "JobPlan": "lwrad.jobs.planning",
    "run_job": "lwrad.jobs.runner",
}


def __getattr__(name: str):
    if name in _EXPORTS:
        value = getattr(importlib.import_module(_EXPORTS[name]), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'lwrad.jobs' has no attribute {name!r}")

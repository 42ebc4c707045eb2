"""``lwrad run JOB -o OUT.h5``: run a job file to one HDF5 result.

Examples
--------
::

    lwrad run study.toml -o study.h5                    # all cores, threads
    lwrad run study.toml -o study.h5 --workers 4 --backend processes
    lwrad run study.toml -o study.h5 --resume           # after an interruption
    lwrad run study.toml -o study.h5 --scheduler tcp://10.0.0.5:8786 --quiet

The batch-cluster recipe (dask-jobqueue) is in :mod:`lwrad.jobs.runner`.
"""

from __future__ import annotations

__all__ = ["register", "main"]


def register(subparsers) -> None:
    """Add the ``run`` subcommand."""
    p = subparsers.add_parser(
        "run",
        help="run a job file (TOML) to an HDF5 result",
        description=(
            "Run a job file to one HDF5 result. The job is validated, the output checked and the memory "
            "estimated before any work; finished chunks are checkpointed in OUT.parts/ so an interrupted "
            "run continues with --resume and gives the same numbers."
        ),
    )
    p.add_argument("job", metavar="JOB", help="job file (TOML)")
    p.add_argument(
        "-o", "--output", metavar="OUT", required=True, help="result file (HDF5) to write"
    )
    p.add_argument(
        "--workers",
        type=int,
        metavar="N",
        help="workers on this node (default: job's run.workers, else all cores)",
    )
    p.add_argument(
        "--backend",
        choices=("serial", "threads", "processes"),
        help="local parallel back end (default: job's run.backend; threads for several workers)",
    )
    p.add_argument(
        "--scheduler",
        metavar="ADDRESS",
        help="run the chunks on a dask.distributed scheduler (tcp://host:port)",
    )
    p.add_argument(
        "--resume", action="store_true", help="continue an interrupted run from its checkpoint"
    )
    p.add_argument(
        "--force",
        action="store_true",
        help="replace an existing result and discard an old checkpoint",
    )
    p.add_argument(
        "--quiet", action="store_true", help="no estimates, progress or summary (errors only)"
    )
    p.add_argument(
        "--chunk-pixels",
        type=int,
        metavar="N",
        help="pixels per chunk (default: job's run.chunk_pixels)",
    )
    p.add_argument(
        "--memory-limit",
        metavar="SIZE",
        help="refuse the job above this memory estimate, e.g. '8 GB' (default: job's run.memory_limit, "
        "else $LWRAD_MEMORY_LIMIT, else the memory available)",
    )
    p.add_argument(
        "--no-calibration",
        action="store_true",
        help="skip the one-pixel timing run (no time estimate)",
    )
    p.set_defaults(handler=main)


def main(args) -> int:
    """Handler of ``lwrad run``."""
    from lwrad.jobs.runner import run_job

    run_job(
        args.job,
        args.output,
        workers=args.workers,
        backend=args.backend,
        scheduler=args.scheduler,
        resume=args.resume,
        force=args.force,
        quiet=args.quiet,
        memory_limit_override=args.memory_limit,
        chunk_pixels=args.chunk_pixels,
        calibration=not args.no_calibration,
    )
    return 0

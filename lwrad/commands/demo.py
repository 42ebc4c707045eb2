"""``lwrad demo [DIR]``: run the bundled demo end to end.

The demo is the **"Saltmarsh" 2.5 GeV storage ring — an invented scenario**
(no real facility): the undulator SM-U25 (planar, 25 mm period, 80 periods,
K = 1.4) seen on an angular grid (spectrum, flux-density and polarization
maps) and as power density on a screen, and the bending magnet SM-B1
(1.2 T, 0.9 m) seen on axis (spectrum). It writes into DIR:

* ``job.toml`` — the job it ran (``lwrad run DIR/job.toml -o other.h5`` repeats it);
* ``saltmarsh.h5`` — the result (``lwrad info DIR/saltmarsh.h5``);
* PNG figures (spectra, maps, power density).

``--quick`` runs small grids (seconds; used by the tests and CI).
"""

from __future__ import annotations

import sys
from importlib import resources
from pathlib import Path

from lwrad.errors import InputError

__all__ = ["register", "main", "demo_job_text", "run_demo", "DEFAULT_DIR", "RESULT_NAME"]

DEFAULT_DIR = "lwrad-demo"
RESULT_NAME = "saltmarsh.h5"


def register(subparsers) -> None:
    """Add the ``demo`` subcommand."""
    p = subparsers.add_parser(
        "demo",
        help="run the bundled demo (invented 'Saltmarsh' ring) and write a result and figures",
        description=(
            "Run the bundled demo — the invented 'Saltmarsh' 2.5 GeV ring with undulator SM-U25 and "
            "bending magnet SM-B1 — and write DIR/job.toml, DIR/saltmarsh.h5 and PNG figures."
        ),
    )
    p.add_argument(
        "dir",
        metavar="DIR",
        nargs="?",
        default=DEFAULT_DIR,
        help=f"output folder (default ./{DEFAULT_DIR})",
    )
    p.add_argument("--quick", action="store_true", help="small grids: finishes in seconds")
    p.add_argument(
        "--force", action="store_true", help="replace the files of an earlier demo in DIR"
    )
    p.add_argument("--workers", type=int, metavar="N", help="workers (default all cores)")
    p.add_argument("--quiet", action="store_true", help="no progress output")
    p.set_defaults(handler=main)


def demo_job_text(quick: bool = False) -> str:
    """The bundled demo job file (``lwrad/data/demo_job.toml`` or its quick variant)."""
    name = "demo_job_quick.toml" if quick else "demo_job.toml"
    return (resources.files("lwrad") / "data" / name).read_text(encoding="utf-8")


def run_demo(
    directory, *, quick=False, force=False, workers=None, quiet=False, stream=None
) -> dict:
    """Run the demo into ``directory``; returns the paths written.

    Returns
    -------
    dict
        ``{"job": Path, "result": Path, "figures": [Path, ...]}``.

    Raises
    ------
    InputError
        ``directory`` exists and is not empty (without ``force``), or is not
        a writable folder.
    """
    from lwrad.jobs.runner import run_job
    from lwrad.plots import plot_all
    from lwrad.results import load

    stream = sys.stderr if stream is None else stream
    out = Path(directory)
    if out.exists() and not out.is_dir():
        raise InputError("demo output path exists and is not a folder", source=str(out))
    if out.is_dir() and any(out.iterdir()) and not force:
        raise InputError(
            "folder is not empty; choose another or use --force to replace the demo's files",
            source=str(out),
        )
    out.mkdir(parents=True, exist_ok=True)
    job_path = out / "job.toml"
    tmp = out / ".job.toml.tmp"
    tmp.write_text(demo_job_text(quick), encoding="utf-8")
    tmp.replace(job_path)
    result = run_job(
        job_path, out / RESULT_NAME, workers=workers, force=force, quiet=quiet, stream=stream
    )
    import matplotlib

    if "matplotlib.pyplot" not in sys.modules:
        matplotlib.use("Agg")  # files only; never open a window
    figures = plot_all(load(result), out, overwrite=force)
    if not quiet:
        print(
            f"lwrad demo: wrote {job_path}, {result} and {len(figures)} figures in {out}",
            file=stream,
        )
        print(
            "lwrad demo: the 'Saltmarsh' ring is invented. Results are estimates; shielding, radiation safety "
            "and thermal design follow local codes and licensed practice.",
            file=stream,
        )
    return {"job": job_path, "result": result, "figures": list(figures)}


def main(args) -> int:
    """Handler of ``lwrad demo``."""
    run_demo(args.dir, quick=args.quick, force=args.force, workers=args.workers, quiet=args.quiet)
    return 0

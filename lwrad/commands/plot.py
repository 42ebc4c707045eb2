"""``lwrad plot OUT.h5 [-o DIR]``: figures of a result file as PNGs."""

from __future__ import annotations

from pathlib import Path

__all__ = ["register", "run"]


def register(subparsers) -> None:
    """Add the ``plot`` subcommand."""
    parser = subparsers.add_parser(
        "plot",
        help="draw the figures of a result file (PNG)",
        description=(
            "Draw every figure a result file supports (spectra, flux-density and polarization "
            "maps, power density, time traces) as PNG files."
        ),
    )
    parser.add_argument(
        "result", metavar="OUT.h5", help="result file written by 'lwrad run' or 'lwrad demo'"
    )
    parser.add_argument(
        "-o", "--output", metavar="DIR", default=None,
        help="directory for the PNGs (default: <result name>-figures beside the file)",
    )  # fmt: skip
    parser.add_argument(
        "--energy", metavar="EV", type=float, action="append", default=None,
        help="photon energy (eV) for the maps; repeat for several (default: brightest on axis)",
    )  # fmt: skip
    parser.add_argument(
        "--force", action="store_true", help="replace existing figures of the same name"
    )
    parser.set_defaults(handler=run)


def run(args) -> int:
    """Load the result, write the figures, print their paths."""
    from lwrad.plots import plot_all
    from lwrad.results import load

    path = Path(args.result)
    result = load(path)
    out_dir = Path(args.output) if args.output else path.with_name(path.stem + "-figures")
    written = plot_all(result, out_dir, photon_energies=args.energy, overwrite=args.force)
    for p in written:
        print(p)
    if not written:
        print(f"{path}: no quantity in this file can be drawn")
    return 0

"""``lwrad estimate undulator|wiggler|bend …``: quick design estimates from the standard formulas.

Examples
--------
::

    lwrad estimate undulator --energy "2.5 GeV" --current "0.3 A" --period "25 mm" --periods 80 --K 1.4
    lwrad estimate undulator --energy 2.5 --current 0.3 --period 25 --periods 80 --field "0.6 T" \\
        --emittance-x "4 nm*rad" --emittance-y "40 pm*rad" --beta-x "10 m" --beta-y "3 m" \\
        --photon-energy "8 keV" --plot tuning.png --csv und.csv --hdf5 und.h5
    lwrad estimate wiggler --energy "2.5 GeV" --current "0.3 A" --period "150 mm" --periods 10 --field "1.5 T"
    lwrad estimate bend --energy "2.5 GeV" --current "0.3 A" --field "1.2 T" --photon-energy "10 keV"

Bare numbers take the default unit named in each option's help. Output files are written
atomically and never replace an existing file unless ``--force`` is given.
"""

from __future__ import annotations

import os

from lwrad.errors import InputError

__all__ = ["register", "run"]

_UNITS = (
    'values take a unit, e.g. "2.5 GeV"; bare numbers use the default unit in each option\'s help'
)


def _add_common(p, *, periodic: bool) -> None:
    p.add_argument(
        "--energy", required=True, help='total beam energy (default unit GeV), e.g. "2.5 GeV"'
    )
    p.add_argument("--current", required=True, help='beam current (default unit A), e.g. "300 mA"')
    if periodic:
        p.add_argument("--period", required=True, help='period λu (default unit mm), e.g. "25 mm"')
        p.add_argument("--periods", required=True, help="number of periods N")
        group = p.add_mutually_exclusive_group(required=True)
        group.add_argument("--K", dest="K", help="deflection parameter K")
        group.add_argument("--field", help='peak field B0 (default unit T), e.g. "0.6 T"')
    else:
        p.add_argument(
            "--field", required=True, help='magnetic field (default unit T), e.g. "1.2 T"'
        )
    p.add_argument("--csv", metavar="FILE", help="also write the table as CSV")
    p.add_argument("--hdf5", metavar="FILE", help="also write the table and curves as HDF5")
    p.add_argument("--force", action="store_true", help="replace existing output files")


def register(subparsers) -> None:
    """Add the ``estimate`` subcommand and its three devices."""
    parser = subparsers.add_parser(
        "estimate",
        help="quick design estimates for undulators, wigglers and bending magnets",
        description=(
            "Standard-formula estimates (X-ray Data Booklet sec. 2.1): photon energies, flux, "
            "brightness, critical energy, power. " + _UNITS + ". Power figures are estimates; "
            "shielding, radiation safety and thermal design follow local codes and licensed practice."
        ),
    )
    sub = parser.add_subparsers(dest="device", metavar="DEVICE", required=True)

    u = sub.add_parser(
        "undulator", help="planar undulator", description="Planar undulator. " + _UNITS + "."
    )
    _add_common(u, periodic=True)
    u.add_argument(
        "--harmonics",
        default="1,3,5",
        help="harmonics to tabulate, comma-separated (default 1,3,5)",
    )
    u.add_argument(
        "--K-range",
        dest="K_range",
        help="K range of the tuning curves, 'KMIN,KMAX' (default 0.1 K to K)",
    )
    u.add_argument(
        "--emittance-x", dest="emittance_x", help="horizontal emittance (default unit nm*rad)"
    )
    u.add_argument(
        "--emittance-y", dest="emittance_y", help="vertical emittance (default unit nm*rad)"
    )
    u.add_argument(
        "--beta-x", dest="beta_x", help="horizontal β-function at the centre (default unit m)"
    )
    u.add_argument(
        "--beta-y", dest="beta_y", help="vertical β-function at the centre (default unit m)"
    )
    u.add_argument("--alpha-x", dest="alpha_x", default="0", help="horizontal Twiss α (default 0)")
    u.add_argument("--alpha-y", dest="alpha_y", default="0", help="vertical Twiss α (default 0)")
    u.add_argument(
        "--photon-energy",
        dest="photon_energy",
        help="report the K that tunes each odd harmonic here (default unit eV)",
    )
    u.add_argument("--plot", metavar="FILE.png", help="write the tuning-curve figure (PNG)")
    u.set_defaults(handler=run)

    w = sub.add_parser(
        "wiggler",
        help="planar wiggler (K ≫ 1)",
        description="Planar wiggler (K ≫ 1). " + _UNITS + ".",
    )
    _add_common(w, periodic=True)
    w.add_argument(
        "--photon-energy", dest="photon_energy", action="append",
        help="photon energy for the flux rows (default unit eV; repeat for several; default εc)",
    )  # fmt: skip
    w.set_defaults(handler=run)

    b = sub.add_parser(
        "bend", help="bending magnet", description="Bending magnet (uniform field). " + _UNITS + "."
    )
    _add_common(b, periodic=False)
    b.add_argument(
        "--photon-energy", dest="photon_energy", action="append",
        help="photon energy for the flux rows (default unit eV; repeat for several; default εc)",
    )  # fmt: skip
    b.set_defaults(handler=run)


def _q(value, dimension, default_unit, option, **kw):
    from lwrad.units import parse_quantity

    return parse_quantity(value, dimension, default_unit=default_unit, location=option, **kw)


def _number(text: str, option: str) -> float:
    from lwrad.units import split_quantity

    value, unit = split_quantity(text, location=option)
    if unit not in (None, "1"):
        raise InputError(f"{option} is a pure number, got {text!r}", location=option)
    return value


def _list(text: str, option: str) -> list[float]:
    parts = [p for p in text.replace(";", ",").split(",") if p.strip()]
    if not parts:
        raise InputError(f"{option} needs comma-separated numbers, got {text!r}", location=option)
    return [_number(p.strip(), option) for p in parts]


def _check_output(path, force: bool, option: str) -> None:
    # before any work: a missing directory or an existing file fails now, not after the table
    target = os.path.abspath(path)
    if not os.path.isdir(os.path.dirname(target)):
        raise InputError("the output directory does not exist", source=path, location=option)
    if os.path.isdir(target):
        raise InputError("the output path is a directory", source=path, location=option)
    if os.path.exists(target) and not force:
        raise InputError(
            "the file exists; not overwritten (use --force to replace it)",
            source=path,
            location=option,
        )


def _build(args):
    from lwrad import constants as k
    from lwrad.estimate import Bend, Undulator, Wiggler

    energy = (
        _q(args.energy, "energy", "GeV", "--energy", allow_negative=False, allow_zero=False) / k.e
    )
    current = _q(args.current, "current", "A", "--current", allow_negative=False, allow_zero=False)
    if args.device == "bend":
        return Bend(
            energy,
            current,
            _q(args.field, "field", "T", "--field", allow_negative=False, allow_zero=False),
        )
    period = _q(args.period, "length", "mm", "--period", allow_negative=False, allow_zero=False)
    n_periods = _number(args.periods, "--periods")
    kw = {}
    if args.K is not None:
        kw["K"] = _number(args.K, "--K")
    else:
        kw["peak_field"] = _q(
            args.field, "field", "T", "--field", allow_negative=False, allow_zero=False
        )
    if args.device == "wiggler":
        return Wiggler(energy, current, period, n_periods, **kw)
    beam = None
    optics = [args.emittance_x, args.emittance_y, args.beta_x, args.beta_y]
    if any(v is not None for v in optics):
        if any(v is None for v in optics):
            raise InputError(
                "brightness with a beam needs all of --emittance-x, --emittance-y, --beta-x, --beta-y",
                location="--emittance-x",
            )
        beam = {
            "emittance_x": _q(
                args.emittance_x, "emittance", "nm*rad", "--emittance-x", allow_negative=False
            ),
            "emittance_y": _q(
                args.emittance_y, "emittance", "nm*rad", "--emittance-y", allow_negative=False
            ),
            "beta_x": _q(
                args.beta_x, "length", "m", "--beta-x", allow_negative=False, allow_zero=False
            ),
            "beta_y": _q(
                args.beta_y, "length", "m", "--beta-y", allow_negative=False, allow_zero=False
            ),
            "alpha_x": _number(args.alpha_x, "--alpha-x"),
            "alpha_y": _number(args.alpha_y, "--alpha-y"),
        }
    return Undulator(energy, current, period, n_periods, beam=beam, **kw)


def _photon_energy_ev(text, option="--photon-energy"):
    from lwrad import constants as k

    return _q(text, "energy", "eV", option, allow_negative=False, allow_zero=False) / k.e


def run(args) -> int:
    """Compute the estimate, print the table, write the requested files."""
    outputs = [(args.csv, "--csv"), (args.hdf5, "--hdf5"), (getattr(args, "plot", None), "--plot")]
    for path, option in outputs:
        if path:
            _check_output(path, args.force, option)
    device = _build(args)
    if args.device == "undulator":
        harmonics = _list(args.harmonics, "--harmonics")
        k_range = None
        if args.K_range:
            k_range = _list(args.K_range, "--K-range")
            if len(k_range) != 2:
                raise InputError(
                    f"--K-range takes 'KMIN,KMAX', got {args.K_range!r}", location="--K-range"
                )
        target = None if args.photon_energy is None else _photon_energy_ev(args.photon_energy)
        table = device.to_table(harmonics, K_range=k_range, target_photon_energy=target)
    else:
        energies = (
            None if not args.photon_energy else [_photon_energy_ev(t) for t in args.photon_energy]
        )
        table = device.to_table(energies)
    print(table)
    if args.csv:
        print(f"wrote {table.to_csv(args.csv, overwrite=args.force)}")
    if args.hdf5:
        print(f"wrote {table.to_hdf5(args.hdf5, overwrite=args.force)}")
    if getattr(args, "plot", None):
        print(f"wrote {_save_tuning_plot(device, harmonics, k_range, args.plot, args.force)}")
    return 0


def _save_tuning_plot(device, harmonics, k_range, path, force) -> str:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from lwrad.atomic import atomic_write

    odd = [int(n) for n in harmonics if n % 2 == 1]
    if not odd:
        raise InputError(
            "the tuning-curve figure needs at least one odd harmonic", location="--harmonics"
        )
    curves = device.tuning_curves(odd, k_range)
    fig = curves.plot(quantity=("central_cone_flux", "peak_flux_density", "brightness"))
    fig.suptitle(f"Tuning curves, λu = {device.period * 1e3:.4g} mm, N = {device.n_periods}")
    fig.tight_layout()
    try:
        return atomic_write(
            path,
            lambda tmp: fig.savefig(tmp, format="png", dpi=120),
            overwrite=force,
            suffix=".png",
        )
    finally:
        plt.close(fig)

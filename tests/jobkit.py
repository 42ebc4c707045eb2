"""Job-file pieces shared by the tests that run whole jobs (and by scripts/reliability.py).

Invented test scenario: a short planar undulator (2.5 GeV, 0.3 A, period 25 mm,
K = 1.4; 5 periods put the first harmonic near 1.2 keV), seen on small grids.
Tests import this plain module as ``import jobkit``: ``tests/`` has no
``__init__.py``, so pytest's default (prepend) import mode puts it on ``sys.path``.
"""

import sys

__all__ = [
    "angular_maps_job",
    "fields_at_points_study",
    "lwrad_run_argv",
    "maps_arrays",
    "undulator_source",
]


def undulator_source(n_periods=5, samples_per_period=48):
    """The ``[sources.u]`` table of the invented planar undulator, as job-file text.

    Parameters
    ----------
    n_periods : int
        Number of undulator periods (dimensionless).
    samples_per_period : int
        Path samples per undulator period (dimensionless).

    Returns
    -------
    str
        TOML lines, ending in a newline.
    """
    return f"""[sources.u]
kind = "magnets"
energy = "2.5 GeV"
current = "0.3 A"
samples_per_period = {samples_per_period}
[[sources.u.magnet]]
type = "planar_undulator"
period = "25 mm"
n_periods = {n_periods}
k = 1.4
"""


def angular_maps_job(*, n_periods, ne, n, chunk, samples_per_period=48):
    """A whole job: the undulator and one study "maps" of flux density and Stokes parameters.

    Parameters
    ----------
    n_periods : int
        Number of undulator periods (dimensionless).
    ne : int
        Number of photon energies from 1 keV to 1.3 keV (dimensionless).
    n : int
        Angles per axis, from -0.1 mrad to 0.1 mrad on both axes (dimensionless).
    chunk : int
        ``chunk_pixels`` of the ``[run]`` table (pixels).
    samples_per_period : int
        Path samples per undulator period (dimensionless).

    Returns
    -------
    str
        The job-file text, starting with a newline.
    """
    return (
        "\n"
        + undulator_source(n_periods, samples_per_period)
        + f"""[[study]]
name = "maps"
quantities = ["flux_density", "stokes"]
photon_energy = {{ start = "1 keV", stop = "1.3 keV", count = {ne} }}
[study.observer]
kind = "angular"
theta_x = {{ start = -0.1, stop = 0.1, count = {n} }}
theta_y = {{ start = -0.1, stop = 0.1, count = {n} }}
[run]
chunk_pixels = {chunk}
"""
    )


def fields_at_points_study(n_times):
    """A ``[[study]]`` "td": time-domain fields at three points 5 m downstream.

    Parameters
    ----------
    n_times : int
        Number of observer times over 0.02 ps from the first arrival (dimensionless).

    Returns
    -------
    str
        TOML lines, ending in a newline.
    """
    return f"""[[study]]
name = "td"
quantities = ["fields"]
time = {{ start = "0 ps", stop = "0.02 ps", count = {n_times} }}
time_origin = "first_arrival"
[study.observer]
kind = "points"
points = [["0.5 mm", 0, 5], ["1 mm", 0, "5 m"], [0, "1 mm", 5]]
"""


def maps_arrays(path):
    """The arrays of study "maps" of a result file (see :func:`angular_maps_job`), by name."""
    from lwrad.results import load

    case = load(path).cases["maps"]
    return {
        "flux_density": case.flux_density.values,
        "stokes": case.stokes.values,
        "field": case.spectra.field,
    }


def lwrad_run_argv(job, out, *extra):
    """The argument list of an ``lwrad run`` child process (quiet, no calibration)."""
    return [
        sys.executable,
        "-m",
        "lwrad",
        "run",
        str(job),
        "-o",
        str(out),
        *extra,
        "--quiet",
        "--no-calibration",
    ]

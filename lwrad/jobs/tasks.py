"""The work of one chunk: a small, picklable description and the function that does it.

A job is cut into chunks of consecutive pixels (row-major over the
observer's ``(ny, nx)``), separately for each study and each *group* of
quantities computed by one solver call:

==========  ====================================================  ==========================
group       solver call                                           payload (checkpointed)
==========  ====================================================  ==========================
spectra     ``radiate(source, observer.take(chunk), E, n_jobs=1)``  the ``Result``
power       ``power_density(source, observer.take(chunk), I)``      ``{"power_density": ...}``
fields      ``fields(traj, points[chunk], t_obs, n_jobs=1)``        ``{"E": ..., "B": ...}`` + counts
beam        ``monte_carlo(beam, observer.take(chunk), E, ...)``     ``{"incoherent_moments": ...}``
==========  ====================================================  ==========================

The solvers give per-pixel results that do not depend on the chunking, and
the chunks are assembled in chunk order, so every number is the same for any
number of workers and any back end. The ``beam`` group (Monte Carlo studies
of a beam source only) samples a fixed number of particles from a fixed
seed, so every chunk sees the same particles and a pixel's sum does not
depend on the chunk it falls in (see :mod:`lwrad.jobs.beams`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["Chunk", "Work", "compute", "GROUPS", "groups_of", "RETARDED_TIME_FIGURES"]

GROUPS = ("spectra", "power", "fields", "beam")
#: counts of :func:`lwrad.timedomain.fields` kept per ``fields`` chunk (``max_iterations``
#: is merged by maximum, the others by sum)
RETARDED_TIME_FIGURES = ("n_not_converged", "max_iterations", "n_inside", "n_before", "n_after")


def groups_of(quantities, beam_method: str | None = None) -> list[str]:
    """Solver groups a study's quantities need, in a fixed order.

    ``beam_method`` is the study's resolved beam method (``"monte_carlo"``
    adds the ``beam`` group; the convolution works on the assembled
    ``spectra``).
    """
    out = []
    if any(q in ("flux_density", "flux", "stokes") for q in quantities):
        out.append("spectra")
        if beam_method == "monte_carlo":
            out.append("beam")
    if "power_density" in quantities:
        out.append("power")
    if "fields" in quantities:
        out.append("fields")
    return out


@dataclass(frozen=True)
class Chunk:
    """Pixels ``start:stop`` (row-major flat indices) of one study and group."""

    study: str
    group: str
    index: int
    start: int
    stop: int

    @property
    def key(self) -> str:
        """Checkpoint key, e.g. ``"u25_maps.spectra.000012"``."""
        return f"{self.study}.{self.group}.{self.index:06d}"

    @property
    def n_pixels(self) -> int:
        return self.stop - self.start


@dataclass(frozen=True)
class Work:
    """Everything a worker needs for one chunk (picklable).

    Attributes
    ----------
    chunk : Chunk
    source : Trajectory or Bunch
    observer : AngularGrid, Screen or Points
        Only the chunk's pixels (``observer.take``).
    photon_energy : ndarray or None
        eV (spectra).
    current : float or None
        A (power).
    time : ndarray or None
        Observer times, s (fields).
    method, tolerance, coherent
        Solver options (spectra).
    refinement : float or None
        Sampling refinement factor chosen once for the whole study
        (:func:`lwrad.engine.frequency.choose_refinement`), so no chunk repeats
        the convergence probe and every chunk samples the path alike; None:
        each chunk chooses its own.
    beam : ElectronBeam or None
        The beam (``beam`` group).
    beam_options : dict or None
        ``particles``, ``seed``, ``offsets``, ``z_ref``, ``coherent`` (``beam`` group).
    """

    chunk: Chunk
    source: object
    observer: object
    photon_energy: np.ndarray | None = None
    current: float | None = None
    time: np.ndarray | None = None
    method: str = "auto"
    tolerance: float = 1e-4
    coherent: bool = False
    refinement: float | None = None
    beam: object = None
    beam_options: dict | None = None


def compute(work: Work):
    """Do one chunk; returns the payload to checkpoint (see the module table)."""
    group = work.chunk.group
    if group == "spectra":
        from lwrad.radiation import radiate

        return radiate(
            work.source,
            work.observer,
            work.photon_energy,
            method=work.method,
            n_jobs=1,
            tolerance=work.tolerance,
            coherent=work.coherent,
            refinement=work.refinement,
        )
    if group == "power":
        from lwrad.radiation import power_density
        from lwrad.results import UNIT_TABLE

        values = power_density(work.source, work.observer, work.current, n_jobs=1)
        return {
            "power_density": (
                np.asarray(values, dtype=np.float64),
                UNIT_TABLE["power_density"][work.observer.kind],
            )
        }
    if group == "fields":
        from lwrad.timedomain import fields

        e_field, b_field, info = fields(
            work.source, work.observer.points(), work.time, n_jobs=1, return_info=True
        )
        out = {
            "E": (np.asarray(e_field, dtype=np.float64), "V/m"),
            "B": (np.asarray(b_field, dtype=np.float64), "T"),
        }
        # the retarded-time solver's figures travel with the chunk, so that a non-converged
        # pair is reported in the result file and never silent (merged by the runner)
        for name in RETARDED_TIME_FIGURES:
            if name in info:
                out[name] = (np.array([int(info[name])], dtype=np.int64), "1")
        return out
    if group == "beam":
        from lwrad.jobs.beams import monte_carlo_chunk

        return monte_carlo_chunk(work)
    raise ValueError(
        f"unknown chunk group {group!r}"
    )  # pragma: no cover - planner makes the groups

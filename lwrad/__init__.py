"""lwrad: electromagnetic radiation of charged-particle beams from their trajectories.

The public API is re-exported here and imported lazily, so ``import lwrad``
stays quick; each name lives in the module listed in ``_EXPORTS``.

Data flow: io / tracking → :class:`Trajectory` → engine (retarded time,
Liénard–Wiechert fields, radiation integral) → :class:`Result` → HDF5 files
and figures.
"""

from __future__ import annotations

import importlib

from lwrad._version import __version__
from lwrad.errors import ConvergenceError, ConvergenceWarning, InputError

# public name → module that defines it
_EXPORTS: dict[str, str] = {
    "Trajectory": "lwrad.trajectory",
    "Bunch": "lwrad.trajectory",
    "read_trajectory": "lwrad.io",
    "write_trajectory": "lwrad.io",
    "read_bunch": "lwrad.io",
    "PlanarUndulator": "lwrad.magnets",
    "EllipticalUndulator": "lwrad.magnets",
    "HelicalUndulator": "lwrad.magnets",
    "Dipole": "lwrad.magnets",
    "FieldMap": "lwrad.magnets",
    "OnAxisFieldMap": "lwrad.magnets",
    "MagnetSequence": "lwrad.magnets",
    "track": "lwrad.tracking",
    "summarize": "lwrad.summary",
    "fields": "lwrad.timedomain",
    "observer_times": "lwrad.timedomain",
    "observer_time_grid": "lwrad.timedomain",
    "AngularGrid": "lwrad.observers",
    "Screen": "lwrad.observers",
    "Points": "lwrad.observers",
    "radiate": "lwrad.radiation",
    "power_density": "lwrad.radiation",
    "total_power": "lwrad.radiation",
    "Result": "lwrad.radiation",
    "RectangularAperture": "lwrad.observers",
    "CircularAperture": "lwrad.observers",
    "ElectronBeam": "lwrad.beam",
    "BeamResult": "lwrad.beam_radiation",
    "monte_carlo": "lwrad.beam_radiation",
    "convolve_beam": "lwrad.beam_radiation",
    "radiate_bunch": "lwrad.beam_radiation",
    "form_factor": "lwrad.coherence",
    "gaussian_form_factor": "lwrad.coherence",
    "profile_form_factor": "lwrad.coherence",
    "load": "lwrad.results",
    "save": "lwrad.results",
    "load_job": "lwrad.jobs",
    "run_job": "lwrad.jobs",
}

_SUBMODULES = {
    "estimate",
    "special",
    "constants",
    "units",
    "testing",
    "plots",
    "io",
    "magnets",
    "engine",
}

__all__ = ["__version__", "InputError", "ConvergenceWarning", "ConvergenceError", *_EXPORTS]


def __getattr__(name: str):
    if name in _EXPORTS:
        value = getattr(importlib.import_module(_EXPORTS[name]), name)
        globals()[name] = value
        return value
    if name in _SUBMODULES:
        return importlib.import_module(f"lwrad.{name}")
    raise AttributeError(f"module 'lwrad' has no attribute {name!r}")


def __dir__():
    return sorted(set(__all__) | _SUBMODULES)

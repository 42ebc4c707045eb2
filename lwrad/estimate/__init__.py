"""Quick design estimates from the standard formulas (X-ray Data Booklet sec. 2.1; Jackson ch. 14).

Before any trajectory exists: which K reaches a photon energy on a harmonic, the central-cone
flux and brightness of an undulator, the critical energy and flux of a bend or wiggler, the
power on the front end. Every estimate gives a table (``str()`` / ``to_table()``) that exports
to CSV and HDF5.

=================  ==========================================================
module             concern
=================  ==========================================================
``undulator``      :class:`Undulator`, :class:`TuningCurves`
``wiggler``        :class:`Wiggler` (K ≫ 1, 2N bending-magnet poles)
``bend``           :class:`Bend`
``table``          :class:`EstimateTable` (rows with units, curves, caution)
``export``         CSV and HDF5 writers (atomic, no silent overwrite)
``plots``          :func:`plot_tuning_curves`
=================  ==========================================================

Special functions and the exact handbook coefficients live in :mod:`lwrad.special`.
Power and heat-load numbers are estimates: see :data:`CAUTION`.
"""

from __future__ import annotations

from lwrad.estimate._inputs import CAUTION, BeamOptics
from lwrad.estimate.bend import Bend
from lwrad.estimate.plots import plot_tuning_curves
from lwrad.estimate.table import EstimateTable, Row
from lwrad.estimate.undulator import TuningCurves, Undulator
from lwrad.estimate.wiggler import Wiggler

__all__ = [
    "CAUTION",
    "BeamOptics",
    "Bend",
    "EstimateTable",
    "Row",
    "TuningCurves",
    "Undulator",
    "Wiggler",
    "plot_tuning_curves",
]

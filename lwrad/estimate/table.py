"""A table of estimated quantities with units, and curves that go with it.

:class:`EstimateTable` is what every estimate's ``to_table()`` returns: rows of (key, label,
value, unit, note), optional 1-D/2-D arrays (tuning curves, spectra) with units, the inputs
and the caution on power figures. ``str(table)`` prints it; :meth:`EstimateTable.to_csv` and
:meth:`EstimateTable.to_hdf5` write it (atomically, never over an existing file unless told).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

__all__ = ["Row", "EstimateTable", "array_entry"]


@dataclass(frozen=True)
class Row:
    """One estimated quantity.

    Attributes
    ----------
    key : str
        Machine name (an HDF5 dataset name, a CSV key), e.g. ``"photon_energy_n3"``.
    label : str
        Human label, e.g. ``"photon energy, harmonic 3"``.
    value : float
        The value, in ``unit``.
    unit : str
        Unit string (``"eV"``, ``"ph/s/mrad^2/0.1%BW"``, ``"1"`` for pure numbers).
    note : str
        Convention or source, short.
    """

    key: str
    label: str
    value: float
    unit: str
    note: str = ""


def _format_value(value: float) -> str:
    if value == 0.0 or not math.isfinite(value):
        return f"{value:g}"
    magnitude = abs(value)
    if 1e-3 <= magnitude < 1e5:
        return f"{value:.5g}"
    return f"{value:.4e}"


@dataclass(frozen=True)
class EstimateTable:
    """Estimated quantities of one device, with the inputs and curves.

    Attributes
    ----------
    title : str
        What was estimated.
    rows : tuple of Row
        The quantities.
    inputs : dict
        The inputs, as plain ``{name: (value, unit)}``.
    arrays : dict
        ``{name: (ndarray, unit)}`` curves (tuning curves, spectra); may be empty.
    caution : str
        Printed under the table and stored with every export.
    """

    title: str
    rows: tuple[Row, ...]
    inputs: dict = field(default_factory=dict)
    arrays: dict = field(default_factory=dict)
    caution: str = ""

    def __getitem__(self, key: str) -> Row:
        for row in self.rows:
            if row.key == key:
                return row
        raise KeyError(key)

    def keys(self) -> list[str]:
        """Row keys in order."""
        return [row.key for row in self.rows]

    def as_dict(self) -> dict:
        """Plain data: ``{"title", "inputs", "rows": [{key, label, value, unit, note}], "caution"}``."""
        return {
            "title": self.title,
            "inputs": {k: [float(v), u] for k, (v, u) in self.inputs.items()},
            "rows": [
                {
                    "key": r.key,
                    "label": r.label,
                    "value": float(r.value),
                    "unit": r.unit,
                    "note": r.note,
                }
                for r in self.rows
            ],
            "caution": self.caution,
        }

    def __str__(self) -> str:
        labels = [r.label for r in self.rows]
        values = [_format_value(r.value) for r in self.rows]
        units = ["" if r.unit == "1" else r.unit for r in self.rows]
        wl = max(len(s) for s in labels) if labels else 0
        wv = max(len(s) for s in values) if values else 0
        wu = max(len(s) for s in units) if units else 0
        lines = [self.title, "=" * len(self.title)]
        if self.inputs:
            given = ", ".join(
                f"{k} = {_format_value(v)} {'' if u == '1' else u}".rstrip()
                for k, (v, u) in self.inputs.items()
            )
            lines.append(f"inputs: {given}")
            lines.append("")
        for row, label, value, unit in zip(self.rows, labels, values, units, strict=True):
            text = f"{label:<{wl}}  {value:>{wv}}  {unit:<{wu}}"
            if row.note:
                text += f"  [{row.note}]"
            lines.append(text.rstrip())
        if self.caution:
            lines.append("")
            lines.append(f"Caution: {self.caution}")
        return "\n".join(lines)

    def to_csv(self, path, *, overwrite: bool = False) -> str:
        """Write the rows as CSV (``key,label,value,unit,note``); see :func:`lwrad.estimate.export.write_csv`."""
        from lwrad.estimate.export import write_csv

        return write_csv(self, path, overwrite=overwrite)

    def to_hdf5(self, path, *, overwrite: bool = False) -> str:
        """Write rows and curves to HDF5; see :func:`lwrad.estimate.export.write_hdf5`."""
        from lwrad.estimate.export import write_hdf5

        return write_hdf5(self, path, overwrite=overwrite)


def array_entry(values, unit: str) -> tuple[np.ndarray, str]:
    """A curve for :attr:`EstimateTable.arrays`: float64 array and its unit."""
    return np.asarray(values, dtype=float), unit

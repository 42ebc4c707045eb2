"""CSV and HDF5 export of an :class:`~lwrad.estimate.table.EstimateTable`.

Both writers go through a temporary file in the target directory and a rename, so a crash
never leaves a file that looks finished; an existing file is never replaced unless
``overwrite=True`` (the command line's ``--force``).

CSV layout: ``#`` comment lines (title, inputs, caution), then the header
``key,label,value,unit,note`` and one line per quantity. Curves are not in the CSV.

HDF5 layout (our own; plain h5py reads it):

* root attributes ``title``, ``caution``, ``lwrad_version``, ``inputs`` (JSON text);
* ``/quantities/<key>``: scalar float64 datasets with attributes ``unit``, ``label``, ``note``;
* ``/curves/<name>``: float64 arrays with attribute ``unit``.
"""

from __future__ import annotations

import csv
import json
import os

from lwrad.errors import InputError

__all__ = ["write_csv", "write_hdf5"]


def _write_new(path, write, *, overwrite: bool, suffix: str) -> str:
    """Refuse an existing ``path`` (unless ``overwrite``), then ``write(tmp)`` atomically."""
    from lwrad.atomic import atomic_write

    # Checked here too, so the message names the command-line option, not the Python one.
    if not overwrite and os.path.exists(os.fspath(path)):
        raise InputError(
            "the file exists; not overwritten (use --force or overwrite=True)",
            source=os.fspath(path),
        )
    return atomic_write(path, write, overwrite=overwrite, suffix=suffix)


def write_csv(table, path, *, overwrite: bool = False) -> str:
    """Write ``table``'s rows to a CSV file.

    Parameters
    ----------
    table : EstimateTable
        What to write.
    path : str or os.PathLike
        Target file.
    overwrite : bool
        Replace an existing file.

    Returns
    -------
    str
        The absolute path written.
    """

    def write(tmp: str) -> None:
        with open(tmp, "w", newline="", encoding="utf-8") as fh:
            fh.write(f"# {table.title}\n")
            for name, (value, unit) in table.inputs.items():
                fh.write(f"# input {name} = {value!r} {unit}\n")
            if table.caution:
                fh.write(f"# caution: {table.caution}\n")
            writer = csv.writer(fh)
            writer.writerow(["key", "label", "value", "unit", "note"])
            for row in table.rows:
                writer.writerow([row.key, row.label, repr(float(row.value)), row.unit, row.note])

    return _write_new(path, write, overwrite=overwrite, suffix=".csv")


def write_hdf5(table, path, *, overwrite: bool = False) -> str:
    """Write ``table``'s rows and curves to an HDF5 file (layout in the module docstring).

    Parameters
    ----------
    table : EstimateTable
        What to write.
    path : str or os.PathLike
        Target file.
    overwrite : bool
        Replace an existing file.

    Returns
    -------
    str
        The absolute path written.
    """
    import h5py

    from lwrad._version import __version__

    def write(tmp: str) -> None:
        with h5py.File(tmp, "w") as fh:
            fh.attrs["title"] = table.title
            fh.attrs["caution"] = table.caution
            fh.attrs["lwrad_version"] = __version__
            fh.attrs["inputs"] = json.dumps(
                {k: [float(v), u] for k, (v, u) in table.inputs.items()}
            )
            quantities = fh.create_group("quantities")
            for row in table.rows:
                ds = quantities.create_dataset(row.key, data=float(row.value))
                ds.attrs["unit"] = row.unit
                ds.attrs["label"] = row.label
                ds.attrs["note"] = row.note
            curves = fh.create_group("curves")
            for name, (values, unit) in table.arrays.items():
                ds = curves.create_dataset(name, data=values)
                ds.attrs["unit"] = unit

    return _write_new(path, write, overwrite=overwrite, suffix=".h5")

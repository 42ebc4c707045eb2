"""Figures of the estimates: undulator tuning curves."""

from __future__ import annotations

import numpy as np

from lwrad.errors import InputError

__all__ = ["plot_tuning_curves", "TUNING_QUANTITIES"]

#: quantity → axis label (with units)
TUNING_QUANTITIES = {
    "brightness": "brightness (ph/s/mm²/mrad²/0.1%BW)",
    "central_cone_flux": "central-cone flux (ph/s/0.1%BW)",
    "peak_flux_density": "on-axis flux density (ph/s/mrad²/0.1%BW)",
}


def plot_tuning_curves(curves, quantity="brightness", ax=None):
    """Plot undulator tuning curves: ``quantity`` against photon energy, one line per harmonic.

    Parameters
    ----------
    curves : TuningCurves
        From :meth:`lwrad.estimate.Undulator.tuning_curves`.
    quantity : str or sequence of str
        One or more of :data:`TUNING_QUANTITIES`; several give one panel each.
    ax : matplotlib.axes.Axes or sequence of Axes, optional
        Where to draw (one per quantity); a new figure when omitted.

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib.pyplot as plt

    quantities = [quantity] if isinstance(quantity, str) else list(quantity)
    for q in quantities:
        if q not in TUNING_QUANTITIES:
            raise InputError(
                f"unknown quantity {q!r}; choose from {sorted(TUNING_QUANTITIES)}",
                location="quantity",
            )
    if ax is None:
        fig, axes = plt.subplots(
            len(quantities), 1, figsize=(6.4, 3.2 * len(quantities)), squeeze=False
        )
        axes = list(axes[:, 0])
    else:
        axes = [ax] if not isinstance(ax, list | tuple | np.ndarray) else list(np.ravel(ax))
        if len(axes) != len(quantities):
            raise InputError(
                f"{len(quantities)} quantities need as many axes, got {len(axes)}", location="ax"
            )
        fig = axes[0].figure
    for a, q in zip(axes, quantities, strict=True):
        values = getattr(curves, q)
        for i, n in enumerate(curves.harmonics):
            a.plot(curves.photon_energy[i] * 1e-3, values[i], label=f"n = {n}")
        a.set_yscale("log")
        a.set_xlabel("photon energy (keV)")
        a.set_ylabel(TUNING_QUANTITIES[q])
        a.grid(True, which="both", alpha=0.3)
        a.legend(title=f"K {curves.K.min():.3g}–{curves.K.max():.3g}", fontsize="small")
    fig.tight_layout()
    return fig

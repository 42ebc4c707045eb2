"""Figures of lwrad results (matplotlib, no pyplot state).

Every function takes an optional ``ax`` (a matplotlib ``Axes``; a new figure
when None) and returns the figure. Figures are built on
:class:`matplotlib.figure.Figure` directly, never through ``pyplot``, so they
work without a display, in threads and in batch jobs, and nothing stays open.
Axis labels and colour bars carry units; angles are shown in mrad, screen
positions in mm, observer times in ps.

Inputs are the :class:`lwrad.results.Case` objects of a
:class:`lwrad.results.RunResult` (from a run or from :func:`lwrad.results.load`)
and, for :func:`plot_trajectory`, a :class:`lwrad.trajectory.Trajectory`.
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

import numpy as np
from matplotlib.figure import Figure

from lwrad.errors import InputError
from lwrad.results import Case, RunResult, atomic_output, check_writable

__all__ = [
    "plot_spectrum",
    "plot_flux",
    "plot_flux_density_map",
    "plot_beam_vs_single",
    "plot_power_density",
    "plot_polarization",
    "plot_fields",
    "plot_trajectory",
    "plot_all",
    "unit_label",
    "HEAT_LOAD_CAUTION",
]

HEAT_LOAD_CAUTION = "Estimate only: heat-load and thermal design need\nengineering review (local codes, licensed practice)."

# axis name → (label, stored unit, display unit, factor stored → display)
_AXIS_DISPLAY = {
    "theta_x": ("θx", "rad", "mrad", 1e3),
    "theta_y": ("θy", "rad", "mrad", 1e3),
    "x": ("x", "m", "mm", 1e3),
    "y": ("y", "m", "mm", 1e3),
    "photon_energy": ("photon energy", "eV", "eV", 1.0),
    "time": ("observer time", "s", "ps", 1e12),
}


def unit_label(unit: str) -> str:
    """A stored unit string as shown on a figure (``"^2"`` → ``"²"``, photons as ``ph``)."""
    return unit.replace("^2", "²").replace("^3", "³").replace("*", "·")


def _new_axes(ax, figsize=(6.4, 4.6)):
    if ax is not None:
        return ax.figure, ax
    fig = Figure(figsize=figsize, layout="constrained")
    return fig, fig.add_subplot()


def _need(case: Case, name: str):
    q = case.get(name)
    if q is None:
        raise InputError(f"case {case.name!r} holds no {name.replace('_', ' ')}")
    return q


def _axis(case: Case, name: str) -> tuple[np.ndarray, str]:
    """Axis values in display units and their label."""
    label, stored, shown, factor = _AXIS_DISPLAY[name]
    q = case.axes[name]
    if q.unit != stored:
        raise InputError(f"case {case.name!r}: axis {name!r} in {q.unit!r}, expected {stored!r}")
    return np.asarray(q.values, dtype=float) * factor, f"{label} ({shown})"


def _grid_names(case: Case) -> tuple[str, str]:
    if case.kind == "angular":
        return "theta_x", "theta_y"
    if case.kind == "screen":
        return "x", "y"
    raise InputError(f"case {case.name!r} is not a grid (kind {case.kind!r})")


def _energy_index(case: Case, photon_energy) -> int:
    energies = np.asarray(case.axes["photon_energy"].values, dtype=float)
    if photon_energy is None:  # the energy where the central pixel is brightest
        fd = case.get("flux_density")
        if fd is None:
            return 0
        iy, ix = _central_pixel(case)
        return int(np.argmax(fd.values[:, iy, ix]))
    return int(np.argmin(np.abs(energies - float(photon_energy))))


def _central_pixel(case: Case) -> tuple[int, int]:
    xn, yn = _grid_names(case)
    x = np.asarray(case.axes[xn].values, dtype=float)
    y = np.asarray(case.axes[yn].values, dtype=float)
    return int(np.argmin(np.abs(y))), int(np.argmin(np.abs(x)))


def _log_or_linear(ax, values):
    # a log axis needs positive data (matplotlib warns otherwise)
    if np.any(np.asarray(values) > 0):
        ax.set_yscale("log")


def _energy_axis(ax, energies):
    # spectra over more than a decade (bending magnets, wigglers) read better on a log axis
    e = np.asarray(energies, dtype=float)
    if e.size > 1 and e.min() > 0 and e.max() / e.min() > 20:
        ax.set_xscale("log")


def _map(fig, ax, case: Case, values, cbar_label, title, **kw):
    xn, yn = _grid_names(case)
    x, xlabel = _axis(case, xn)
    y, ylabel = _axis(case, yn)
    mesh = ax.pcolormesh(x, y, values, shading="nearest", **kw)
    cbar = fig.colorbar(mesh, ax=ax)
    cbar.set_label(cbar_label)
    ax.set_xlabel(xlabel)
    ax.set_ylabel(ylabel)
    ax.set_title(title)
    ax.set_aspect("auto")
    return mesh


def plot_spectrum(case: Case, *, pixel: tuple[int, int] | None = None, ax=None) -> Figure:
    """Flux density against photon energy at one pixel (log y axis).

    Parameters
    ----------
    case : Case
        A case with ``flux_density`` (ph/s/0.1%BW/mrad² or /mm²).
    pixel : (int, int), optional
        (iy, ix); default the pixel nearest the axis (θ = 0 or x = y = 0).
    ax : matplotlib Axes, optional
    """
    fd = _need(case, "flux_density")
    iy, ix = _central_pixel(case) if pixel is None else (int(pixel[0]), int(pixel[1]))
    ny, nx = fd.values.shape[1:]
    if not (0 <= iy < ny and 0 <= ix < nx):
        raise InputError(f"pixel {(iy, ix)} outside the grid of shape {(ny, nx)}")
    e, elabel = _axis(case, "photon_energy")
    xn, yn = _grid_names(case)
    px, _ = _axis(case, xn)
    py, _ = _axis(case, yn)
    shown = _AXIS_DISPLAY[xn][2]
    fig, ax = _new_axes(ax)
    values = fd.values[:, iy, ix]
    ax.plot(e, values, marker="." if e.size < 40 else None)
    _log_or_linear(ax, values)
    _energy_axis(ax, e)
    ax.set_xlabel(elabel)
    ax.set_ylabel(f"flux density ({unit_label(fd.unit)})")
    ax.set_title(f"{case.name}: spectrum at ({px[ix]:.4g}, {py[iy]:.4g}) {shown}")
    ax.grid(True, which="both", alpha=0.3)
    return fig


def plot_beam_vs_single(case: Case, *, pixel: tuple[int, int] | None = None, ax=None) -> Figure:
    """An electron beam's flux density beside the single electron's (log y axis).

    Several photon energies: spectra at one pixel; one photon energy: a
    horizontal cut through the map at the pixel's row. The beam (incoherent
    sum) is drawn solid with its Monte Carlo standard error as a band when
    stored, the single reference electron dashed, a coherent part dotted.

    Parameters
    ----------
    case : Case
        A beam study's case: ``flux_density`` and ``flux_density_single``
        (optionally ``flux_density_se``, ``flux_density_coherent``), see
        :mod:`lwrad.jobs.beams`.
    pixel : (int, int), optional
        (iy, ix); default the pixel nearest the axis.
    ax : matplotlib Axes, optional
    """
    beam = _need(case, "flux_density")
    single = _need(case, "flux_density_single")
    iy, ix = _central_pixel(case) if pixel is None else (int(pixel[0]), int(pixel[1]))
    ny, nx = beam.values.shape[1:]
    if not (0 <= iy < ny and 0 <= ix < nx):
        raise InputError(f"pixel {(iy, ix)} outside the grid of shape {(ny, nx)}")
    xn, yn = _grid_names(case)
    px, xlabel = _axis(case, xn)
    py, _ = _axis(case, yn)
    shown = _AXIS_DISPLAY[xn][2]
    e, elabel = _axis(case, "photon_energy")
    if e.size > 1:
        x, take, label = e, (lambda v: v[:, iy, ix]), elabel
        where = f"at ({px[ix]:.4g}, {py[iy]:.4g}) {shown}"
    else:
        x, take, label = px, (lambda v: v[0, iy, :]), xlabel
        where = f"at {e[0]:.6g} eV, {_AXIS_DISPLAY[yn][0]} = {py[iy]:.4g} {shown}"
    fig, ax = _new_axes(ax)
    marker = "." if x.size < 40 else None
    b = take(beam.values)
    ax.plot(x, b, marker=marker, label="beam (incoherent)")
    se = case.get("flux_density_se")
    if se is not None:
        s = take(se.values)
        ax.fill_between(x, b - s, b + s, alpha=0.3, label="± Monte Carlo standard error")
    ax.plot(x, take(single.values), linestyle="--", label="single electron")
    coherent = case.get("flux_density_coherent")
    if coherent is not None:
        ax.plot(x, take(coherent.values), linestyle=":", label="coherent part")
    _log_or_linear(ax, np.concatenate([b, take(single.values)]))
    if e.size > 1:
        _energy_axis(ax, e)
    ax.set_xlabel(label)
    ax.set_ylabel(f"flux density ({unit_label(beam.unit)})")
    ax.set_title(f"{case.name}: beam and single electron {where}")
    ax.legend()
    ax.grid(True, which="both", alpha=0.3)
    return fig


def plot_flux(case: Case, *, ax=None) -> Figure:
    """Flux integrated over the grid (or the job's aperture) against photon energy (log y)."""
    flux = _need(case, "flux")
    e, elabel = _axis(case, "photon_energy")
    fig, ax = _new_axes(ax)
    ax.plot(e, flux.values, marker="." if e.size < 40 else None)
    _log_or_linear(ax, flux.values)
    _energy_axis(ax, e)
    where = "aperture" if "flux_aperture" in case.attrs else "grid"
    ax.set_xlabel(elabel)
    ax.set_ylabel(f"flux through {where} ({unit_label(flux.unit)})")
    ax.set_title(f"{case.name}: flux integrated over the {where}")
    ax.grid(True, which="both", alpha=0.3)
    return fig


def plot_flux_density_map(case: Case, photon_energy: float | None = None, *, ax=None) -> Figure:
    """Angular or spatial flux-density map at the photon energy nearest ``photon_energy`` (eV).

    Default energy: where the central pixel is brightest.
    """
    fd = _need(case, "flux_density")
    k = _energy_index(case, photon_energy)
    energy = float(case.axes["photon_energy"].values[k])
    fig, ax = _new_axes(ax)
    _map(
        fig, ax, case, fd.values[k], f"flux density ({unit_label(fd.unit)})",
        f"{case.name}: flux density at {energy:.6g} eV", cmap="viridis",
    )  # fmt: skip
    return fig


def plot_power_density(case: Case, *, ax=None) -> Figure:
    """Power-density map with its peak marked and the heat-load caution on the figure."""
    pd = _need(case, "power_density")
    fig, ax = _new_axes(ax, figsize=(6.4, 5.0))
    _map(
        fig,
        ax,
        case,
        pd.values,
        f"power density ({unit_label(pd.unit)})",
        f"{case.name}: power density",
        cmap="inferno",
    )
    xn, yn = _grid_names(case)
    x, _ = _axis(case, xn)
    y, _ = _axis(case, yn)
    iy, ix = np.unravel_index(int(np.argmax(pd.values)), pd.values.shape)
    peak = float(pd.values[iy, ix])
    shown = _AXIS_DISPLAY[xn][2]
    ax.plot([x[ix]], [y[iy]], marker="+", color="cyan", markersize=12)
    ax.annotate(
        f"peak {peak:.4g} {unit_label(pd.unit)}\nat ({x[ix]:.3g}, {y[iy]:.3g}) {shown}",
        (x[ix], y[iy]), xytext=(0.03, 0.97), textcoords="axes fraction", va="top",
        color="white", fontsize=8, bbox={"facecolor": "black", "alpha": 0.5, "lw": 0},
    )  # fmt: skip
    # below the x label, as an axes annotation so that the layout engine keeps room for it
    ax.annotate(
        HEAT_LOAD_CAUTION, xy=(0.0, 0.0), xycoords="axes fraction", xytext=(0, -40),
        textcoords="offset points", ha="left", va="top", fontsize=7, annotation_clip=False,
    )  # fmt: skip
    return fig


def plot_polarization(
    case: Case, photon_energy: float | None = None, *, kind: str = "circular", ax=None
) -> Figure:
    """Degree of circular (S3/S0) or linear (√(S1²+S2²)/S0) polarization at one photon energy.

    Pixels where S0 is below 1e-9 of its maximum carry no light and are left blank.
    The sign convention of S3 is the radiation module's (see ``lwrad.radiation``).
    """
    st = _need(case, "stokes")
    if kind not in ("circular", "linear"):
        raise InputError(f"polarization kind {kind!r}: use 'circular' or 'linear'")
    k = _energy_index(case, photon_energy)
    energy = float(case.axes["photon_energy"].values[k])
    s0, s1, s2, s3 = (np.asarray(st.values[i, k], dtype=float) for i in range(4))
    lit = s0 > 1e-9 * float(np.max(s0)) if np.max(s0) > 0 else np.zeros_like(s0, dtype=bool)
    safe = np.where(lit, s0, 1.0)
    if kind == "circular":
        degree = np.where(lit, s3 / safe, np.nan)
        label, vmin, cmap = "circular degree S3/S0 (1)", -1.0, "RdBu_r"
    else:
        degree = np.where(lit, np.hypot(s1, s2) / safe, np.nan)
        label, vmin, cmap = "linear degree √(S1²+S2²)/S0 (1)", 0.0, "viridis"
    fig, ax = _new_axes(ax)
    _map(
        fig,
        ax,
        case,
        degree,
        label,
        f"{case.name}: {kind} polarization at {energy:.6g} eV",
        vmin=vmin,
        vmax=1.0,
        cmap=cmap,
    )
    return fig


def plot_fields(case: Case, *, point: int = 0, ax=None) -> Figure:
    """Electric-field components at one observer point against observer time (ps)."""
    fields = case.fields
    if fields is None:
        raise InputError(f"case {case.name!r} holds no time-domain fields")
    if not 0 <= point < fields.E.shape[1]:
        raise InputError(f"point {point} outside 0..{fields.E.shape[1] - 1}")
    t, tlabel = _axis(case, "time")
    fig, ax = _new_axes(ax)
    for i, comp in enumerate("xyz"):
        ax.plot(t, fields.E[:, point, i], label=f"E{comp}")
    xyz_mm = np.asarray(fields.points[point]) * 1e3
    ax.set_xlabel(tlabel)
    ax.set_ylabel(f"electric field ({unit_label(case.quantities['E'].unit)})")
    ax.set_title(f"{case.name}: fields at ({xyz_mm[0]:.4g}, {xyz_mm[1]:.4g}, {xyz_mm[2]:.4g}) mm")
    ax.legend()
    ax.grid(True, alpha=0.3)
    return fig


def plot_trajectory(traj, *, ax=None) -> Figure:
    """Transverse position (mm) and angle (mrad) against z (m).

    Parameters
    ----------
    traj : Trajectory
    ax : pair of matplotlib Axes, optional
        Axes for positions and for angles; a new two-panel figure when None.
    """
    if ax is None:
        fig = Figure(figsize=(6.4, 6.0), layout="constrained")
        ax_pos, ax_ang = fig.subplots(2, 1, sharex=True)
    else:
        ax_pos, ax_ang = ax
        fig = ax_pos.figure
    r = np.asarray(traj.r, dtype=float)
    beta = np.asarray(traj.beta, dtype=float)
    z = r[:, 2]
    ax_pos.plot(z, r[:, 0] * 1e3, label="x")
    ax_pos.plot(z, r[:, 1] * 1e3, label="y")
    ax_pos.set_ylabel("position (mm)")
    ax_pos.legend()
    # angles as dx/dz, dy/dz: the slopes a tracking code reports
    ax_ang.plot(z, beta[:, 0] / beta[:, 2] * 1e3, label="x′")
    ax_ang.plot(z, beta[:, 1] / beta[:, 2] * 1e3, label="y′")
    ax_ang.set_ylabel("angle (mrad)")
    ax_ang.set_xlabel("z (m)")
    ax_ang.legend()
    for a in (ax_pos, ax_ang):
        a.grid(True, alpha=0.3)
    ax_pos.set_title("trajectory")
    return fig


def _save(fig: Figure, path: Path, overwrite: bool, dpi: int) -> Path:
    with atomic_output(path, overwrite=overwrite) as tmp:
        fig.savefig(tmp, format="png", dpi=dpi)
    return path


def plot_all(
    run: RunResult, out_dir, *, photon_energies=None, overwrite: bool = False, dpi: int = 110
) -> list[Path]:
    """Write every figure the run's cases support as PNG files; return their paths.

    File names: ``<case>-spectrum.png``, ``<case>-flux.png``, ``<case>-beam-vs-single.png``,
    ``<case>-flux-density-<E>eV.png``, ``<case>-circular-<E>eV.png``,
    ``<case>-linear-<E>eV.png``, ``<case>-power-density.png``, ``<case>-fields.png``.

    Parameters
    ----------
    run : RunResult
    out_dir : str or Path
        Existing or creatable directory (its parent must exist).
    photon_energies : sequence of float, optional
        Photon energies (eV) for maps; default the case attribute
        ``plot_photon_energies`` if present, else the brightest energy of the
        central pixel.
    overwrite : bool
        Replace existing PNGs of the same name (otherwise an :class:`InputError`).
    dpi : int
        Resolution of the PNGs.
    """
    out_dir = Path(out_dir)
    if not out_dir.exists():
        check_writable(out_dir)
        out_dir.mkdir()
    elif not out_dir.is_dir():
        raise InputError("figure output path is not a directory", source=str(out_dir))
    figures: list[tuple[str, Callable[[], Figure]]] = []
    for case in run.cases.values():
        n = case.name
        grid = case.kind in ("angular", "screen")
        many_pixels = grid and all(len(case.axes[a].values) > 1 for a in _grid_names(case))
        if grid and case.get("flux_density") is not None:
            figures.append((f"{n}-spectrum.png", lambda c=case: plot_spectrum(c)))
        if grid and case.get("flux") is not None:
            figures.append((f"{n}-flux.png", lambda c=case: plot_flux(c)))
        if grid and case.get("flux_density_single") is not None:
            figures.append((f"{n}-beam-vs-single.png", lambda c=case: plot_beam_vs_single(c)))
        if many_pixels and case.get("flux_density") is not None:
            chosen = (
                photon_energies
                if photon_energies is not None
                else case.attrs.get("plot_photon_energies")
            )
            indices = (
                sorted({_energy_index(case, e) for e in chosen})
                if chosen
                else [_energy_index(case, None)]
            )
            for k in indices:
                energy = float(case.axes["photon_energy"].values[k])
                tag = f"{energy:.6g}eV"
                figures.append(
                    (
                        f"{n}-flux-density-{tag}.png",
                        lambda c=case, e=energy: plot_flux_density_map(c, e),
                    )
                )
                if case.get("stokes") is not None:
                    for kind in ("circular", "linear"):
                        figures.append(
                            (
                                f"{n}-{kind}-{tag}.png",
                                lambda c=case, e=energy, k=kind: plot_polarization(c, e, kind=k),
                            )
                        )
        if many_pixels and case.get("power_density") is not None:
            figures.append((f"{n}-power-density.png", lambda c=case: plot_power_density(c)))
        if case.fields is not None:
            figures.append((f"{n}-fields.png", lambda c=case: plot_fields(c)))
    paths = [out_dir / name for name, _ in figures]
    if not overwrite:  # refuse before drawing anything
        existing = [p for p in paths if p.exists()]
        if existing:
            raise InputError(
                f"figure exists; not overwritten (use --force): {existing[0].name}",
                source=str(out_dir),
            )
    return [_save(make(), out_dir / name, overwrite, dpi) for name, make in figures]

"""Figures: labelled axes with units, colour bars with units, the heat-load caution, PNG files."""

import numpy as np
import pytest
from matplotlib.figure import Figure
from test_results import FakeResult, make_run

from lwrad import plots, results
from lwrad.constants import gamma_from_energy
from lwrad.errors import InputError
from lwrad.ideal import planar_undulator
from lwrad.observers import AngularGrid
from lwrad.results import Case, RunResult


@pytest.fixture(autouse=True)
def _fake_result_class(monkeypatch):
    monkeypatch.setattr(results, "_result_class", lambda: FakeResult)


@pytest.fixture
def run(rng):
    return make_run(rng)


def _colorbar_label(fig):
    # the colour bar is the last axes matplotlib adds to the figure
    return fig.axes[-1].get_ylabel()


def test_spectrum_at_pixel(run):
    case = run.cases["undulator"]
    fig = plots.plot_spectrum(case)
    ax = fig.axes[0]
    assert ax.get_xlabel() == "photon energy (eV)"
    assert ax.get_ylabel() == "flux density (ph/s/0.1%BW/mrad²)"
    assert ax.get_yscale() == "log"
    # default pixel: nearest the axis; the line is that pixel's spectrum
    iy, ix = plots._central_pixel(case)
    x, y = ax.lines[0].get_data()
    assert np.array_equal(x, case.axes["photon_energy"].values)
    assert np.array_equal(y, case.flux_density.values[:, iy, ix])
    assert ax.get_xscale() == "linear"  # 100..900 eV: less than a decade and a half
    fig2 = plots.plot_spectrum(case, pixel=(0, 0))
    assert np.array_equal(fig2.axes[0].lines[0].get_data()[1], case.flux_density.values[:, 0, 0])
    with pytest.raises(InputError, match="outside"):
        plots.plot_spectrum(case, pixel=(99, 0))


def test_flux_and_given_axes(run):
    fig = Figure()
    ax = fig.add_subplot()
    out = plots.plot_flux(run.cases["undulator"], ax=ax)
    assert out is fig
    assert ax.get_ylabel() == "flux through grid (ph/s/0.1%BW)"
    assert ax.get_yscale() == "log"
    assert np.array_equal(ax.lines[0].get_data()[1], run.cases["undulator"].flux.values)


def test_wide_spectrum_on_log_energy_axis():
    grid = AngularGrid([0.0], [0.0])
    energies = np.geomspace(10.0, 1e5, 9)
    case = Case.from_observer("bend", grid)
    case.add_spectra(FakeResult(energies, np.ones((9, 1, 1, 3), complex)), current=0.3)
    for fig in (plots.plot_spectrum(case), plots.plot_flux(case)):
        assert fig.axes[0].get_xscale() == "log"


def test_flux_density_map(run):
    case = run.cases["undulator"]
    energies = case.axes["photon_energy"].values
    fig = plots.plot_flux_density_map(case, photon_energy=energies[2] + 1.0)
    ax = fig.axes[0]
    assert (ax.get_xlabel(), ax.get_ylabel()) == ("θx (mrad)", "θy (mrad)")
    assert _colorbar_label(fig) == "flux density (ph/s/0.1%BW/mrad²)"
    assert f"{energies[2]:.6g} eV" in ax.get_title()
    mesh = ax.collections[0]
    assert np.array_equal(
        np.asarray(mesh.get_array()).reshape(case.flux_density.values[2].shape),
        case.flux_density.values[2],
    )
    # angles shown in mrad: the plotted extent is the stored rad range times 1e3
    tx = case.axes["theta_x"].values
    xmin, xmax = ax.get_xlim()
    assert xmin < tx.min() * 1e3 and xmax > tx.max() * 1e3 and xmax < 2e3 * tx.max()


def test_power_density_peak_and_caution(run):
    case = run.cases["screen_power"]
    fig = plots.plot_power_density(case)
    ax = fig.axes[0]
    assert (ax.get_xlabel(), ax.get_ylabel()) == ("x (mm)", "y (mm)")
    assert _colorbar_label(fig) == "power density (W/mm²)"
    peak = float(case.power_density.values.max())
    texts = [t.get_text() for t in ax.texts]
    assert any(f"peak {peak:.4g} W/mm²" in t for t in texts)
    assert any("engineering review" in t for t in texts)


def test_polarization_degrees(tmp_path):
    # Pure circular light (Ey = i·Ex) has |S3|/S0 = 1 and no linear part; pure linear light
    # (Ey = 0) the reverse (Stokes parameters, Jackson 3rd ed. sec. 7.2).
    grid = AngularGrid(np.linspace(-1e-4, 1e-4, 3), np.linspace(-1e-4, 1e-4, 2))
    field = np.zeros((2, 2, 3, 3), complex)
    field[0, ..., 0], field[0, ..., 1] = 1.0, 1j
    field[1, ..., 0] = 2.0
    case = Case.from_observer("pol", grid)
    case.add_spectra(FakeResult([100.0, 200.0], field), current=0.1)
    circ = plots.plot_polarization(case, 100.0)
    assert _colorbar_label(circ) == "circular degree S3/S0 (1)"
    values = np.asarray(circ.axes[0].collections[0].get_array())
    np.testing.assert_allclose(np.abs(values), 1.0, rtol=1e-15)  # exact arithmetic up to rounding
    lin = plots.plot_polarization(case, 100.0, kind="linear")
    np.testing.assert_allclose(np.asarray(lin.axes[0].collections[0].get_array()), 0.0, atol=1e-15)
    lin2 = plots.plot_polarization(case, 200.0, kind="linear")
    np.testing.assert_allclose(np.asarray(lin2.axes[0].collections[0].get_array()), 1.0, rtol=1e-15)
    assert lin2.axes[0].get_xlabel() == "θx (mrad)"
    with pytest.raises(InputError, match="polarization kind"):
        plots.plot_polarization(case, kind="elliptic")


def test_fields_trace(run):
    case = run.cases["thz_points"]
    fig = plots.plot_fields(case, point=1)
    ax = fig.axes[0]
    assert ax.get_xlabel() == "observer time (ps)"
    assert ax.get_ylabel() == "electric field (V/m)"
    assert len(ax.lines) == 3
    t, ex = ax.lines[0].get_data()
    np.testing.assert_allclose(t, case.axes["time"].values * 1e12, rtol=1e-15)
    assert np.array_equal(ex, case.fields.E[:, 1, 0])
    with pytest.raises(InputError):
        plots.plot_fields(run.cases["undulator"])


def test_trajectory_plot():
    # Peak angle K/γ of an ideal planar undulator (X-ray Data Booklet sec. 2.1); the
    # trajectory is built exactly, so the plotted maximum is K/γ up to rounding.
    energy, K = 2.5e9, 1.4
    traj = planar_undulator(energy, 0.025, 4, K)
    fig = plots.plot_trajectory(traj)
    ax_pos, ax_ang = fig.axes
    assert ax_pos.get_ylabel() == "position (mm)"
    assert ax_ang.get_ylabel() == "angle (mrad)" and ax_ang.get_xlabel() == "z (m)"
    peak_mrad = np.max(np.abs(ax_ang.lines[0].get_data()[1]))
    expected = K / gamma_from_energy(energy) * 1e3
    # dx/dz = βx/βz exceeds βx by 1/βz − 1 ≈ (K/γ)²/2 ≈ 4e-8 at the peak; tolerance 1e-6
    assert abs(peak_mrad / expected - 1) < 1e-6


def test_plot_all_writes_pngs(tmp_path, run):
    paths = plots.plot_all(run, tmp_path / "figs")
    names = sorted(p.name for p in paths)
    assert "undulator-spectrum.png" in names and "undulator-flux.png" in names
    assert "screen_power-power-density.png" in names and "thz_points-fields.png" in names
    assert any(n.startswith("undulator-flux-density-") for n in names)
    assert any(n.startswith("undulator-circular-") for n in names)
    assert len(paths) >= 7
    for p in paths:
        data = p.read_bytes()
        assert data[:8] == b"\x89PNG\r\n\x1a\n" and len(data) > 5000
    assert sorted(p.name for p in (tmp_path / "figs").iterdir()) == names  # no temporaries left
    with pytest.raises(InputError, match="--force"):
        plots.plot_all(run, tmp_path / "figs")
    # (smaller runs below: every PNG costs a fraction of a second)
    small = RunResult()
    small.add(run.cases["thz_points"])
    before = (tmp_path / "figs" / "thz_points-fields.png").stat().st_mtime_ns
    assert [p.name for p in plots.plot_all(small, tmp_path / "figs", overwrite=True)] == [
        "thz_points-fields.png"
    ]
    assert (tmp_path / "figs" / "thz_points-fields.png").stat().st_mtime_ns >= before
    maps = RunResult()
    maps.add(run.cases["undulator"]).quantities.pop("stokes")
    chosen = plots.plot_all(maps, tmp_path / "two", photon_energies=[100.0, 900.0])
    assert sorted(p.name for p in chosen if "flux-density" in p.name) == [
        "undulator-flux-density-100eV.png",
        "undulator-flux-density-900eV.png",
    ]
    with pytest.raises(InputError, match="does not exist"):
        plots.plot_all(run, tmp_path / "no" / "such")
    assert plots.plot_all(RunResult(), tmp_path / "empty") == []


def test_missing_quantity_is_an_input_error(run):
    with pytest.raises(InputError, match="no power density"):
        plots.plot_power_density(run.cases["undulator"])

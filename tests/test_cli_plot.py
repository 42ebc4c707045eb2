"""``lwrad plot OUT.h5 [-o DIR]`` on a saved result file."""

import h5py
import numpy as np
import pytest

from lwrad.cli import main
from lwrad.constants import e
from lwrad.observers import AngularGrid, Points, Screen
from lwrad.radiation import Result
from lwrad.results import Case, Provenance, RunResult, save


@pytest.fixture
def result_file(tmp_path, rng):
    """A result file with the real Result class, filled with invented numbers."""
    grid = AngularGrid(np.linspace(-2e-4, 2e-4, 5), np.linspace(-1e-4, 1e-4, 3))
    field = rng.normal(size=(4, 3, 5, 3)) + 1j * rng.normal(size=(4, 3, 5, 3))
    run = RunResult(provenance=Provenance.start(job_text="# invented\n"))
    run.add(Case.from_observer("maps", grid)).add_spectra(
        Result(np.linspace(1e3, 4e3, 4), grid, field=field, charge=e), 0.3
    )
    screen = Screen(10.0, np.linspace(-5e-3, 5e-3, 6), np.linspace(-2e-3, 2e-3, 4))
    run.add(Case.from_observer("heat", screen)).add_power_density(rng.uniform(size=(4, 6)))
    pts = np.array([[0.0, 0.01, 5.0]])
    run.add(Case.from_observer("thz", Points(pts))).add_fields(
        np.linspace(0, 2e-12, 7), pts, rng.normal(size=(7, 1, 3)), rng.normal(size=(7, 1, 3))
    )
    return save(tmp_path / "run.h5", run)


def test_plot_command_writes_figures(result_file, tmp_path, capsys):
    out = tmp_path / "figs"
    assert main(["plot", str(result_file), "-o", str(out), "--energy", "2000"]) == 0
    printed = capsys.readouterr().out.split()
    names = sorted(p.name for p in out.iterdir())
    assert sorted(p.rsplit("/", 1)[-1] for p in printed) == names
    assert {
        "maps-spectrum.png",
        "maps-flux.png",
        "heat-power-density.png",
        "thz-fields.png",
    } <= set(names)
    assert "maps-flux-density-2000eV.png" in names and "maps-circular-2000eV.png" in names
    for p in out.iterdir():
        assert p.read_bytes()[:4] == b"\x89PNG" and p.stat().st_size > 1000
    # again without --force: refused before drawing, files untouched
    before = {p.name: p.stat().st_mtime_ns for p in out.iterdir()}
    assert main(["plot", str(result_file), "-o", str(out), "--energy", "2000"]) == 2
    assert "--force" in capsys.readouterr().err
    assert {p.name: p.stat().st_mtime_ns for p in out.iterdir()} == before


def test_plot_command_default_directory(tmp_path, rng):
    pts = np.array([[0.0, 0.01, 5.0]])
    run = RunResult()
    run.add(Case.from_observer("thz", Points(pts))).add_fields(
        np.linspace(0, 2e-12, 7), pts, rng.normal(size=(7, 1, 3)), rng.normal(size=(7, 1, 3))
    )
    path = save(tmp_path / "small.h5", run)
    assert main(["plot", str(path)]) == 0
    assert [p.name for p in (tmp_path / "small-figures").iterdir()] == ["thz-fields.png"]
    assert main(["plot", str(path), "--force"]) == 0


def test_plot_command_refuses_foreign_file(tmp_path, capsys):
    foreign = tmp_path / "foreign.h5"
    with h5py.File(foreign, "w") as f:
        f["x"] = np.arange(3.0)
    assert main(["plot", str(foreign)]) == 2
    err = capsys.readouterr().err
    assert str(foreign) in err and "not an lwrad result" in err
    assert not (tmp_path / "foreign-figures").exists()

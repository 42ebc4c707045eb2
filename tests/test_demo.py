"""``lwrad demo --quick``: the bundled invented scenario runs end to end."""

import tomllib
from pathlib import Path

import numpy as np
import pytest

from lwrad.cli import main
from lwrad.commands.demo import RESULT_NAME, demo_job_text
from lwrad.jobs.schema import load_job, parse_job
from lwrad.results import load

QUICK_STUDIES = {"u25_spectrum", "u25_maps", "u25_power", "b1_spectrum"}


def test_bundled_jobs_are_valid_and_marked_invented():
    for quick in (False, True):
        text = demo_job_text(quick)
        assert "INVENTED SCENARIO" in text
        job = parse_job(text, base_dir=".")
        # the full demo adds a beam study (the undulator seen by the whole invented beam)
        expected = QUICK_STUDIES if quick else QUICK_STUDIES | {"u25_beam"}
        assert {s.name for s in job.studies} == expected
    full_job = parse_job(demo_job_text(False), base_dir=".")
    assert full_job.study("u25_beam").beam_method == "convolution"
    assert full_job.sources["sm_u25_beam"].beam is not None
    full, quick = (tomllib.loads(demo_job_text(q)) for q in (False, True))
    beam_source = full["sources"].pop("sm_u25_beam")
    assert (
        "invented" in demo_job_text(False).split("[sources.sm_u25_beam]")[0].rsplit("\n\n", 1)[-1]
    )
    assert full["sources"] == quick["sources"]  # otherwise the quick form changes grids only
    # the beam's reference electron is SM-U25 itself
    assert beam_source["magnet"] == full["sources"]["sm_u25"]["magnet"]


def test_demo_quick_writes_job_result_and_figures(tmp_path, capsys):
    out = tmp_path / "demo"
    assert main(["demo", str(out), "--quick", "--workers", "2", "--quiet"]) == 0
    assert (out / "job.toml").read_text() == demo_job_text(quick=True)
    pngs = sorted(out.glob("*.png"))
    assert len(pngs) >= 3
    assert all(p.stat().st_size > 1000 for p in pngs)
    run = load(out / RESULT_NAME)
    assert set(run.cases) == {"u25_spectrum", "u25_maps", "u25_power", "b1_spectrum"}
    assert run.provenance.job_text == demo_job_text(quick=True)
    # the undulator's first harmonic: the on-axis flux density peaks near
    # E1 = 2 γ² h c / (λu (1 + K²/2)) ≈ 1.199 keV (X-ray Data Booklet sec. 2.1);
    # with 40 energies spaced 146 eV apart the peak sample lies within one spacing.
    spec = run.cases["u25_spectrum"]
    e = spec.axes["photon_energy"].values
    on_axis = spec.flux_density.values[:, 1, 1]
    low = e < 2000
    assert abs(e[low][np.argmax(on_axis[low])] - 1199.0) < (e[1] - e[0])
    # power density positive with its peak on axis
    pd = run.cases["u25_power"].power_density.values
    assert pd.max() > 0 and np.unravel_index(np.argmax(pd), pd.shape) == (3, 4)
    # a second demo into the same folder is refused without --force
    capsys.readouterr()
    assert main(["demo", str(out), "--quick", "--quiet"]) == 2
    assert "not empty" in capsys.readouterr().err


def test_demo_refuses_a_file_as_folder(tmp_path, capsys):
    target = tmp_path / "afile"
    target.write_text("x")
    assert main(["demo", str(target), "--quick", "--quiet"]) == 2
    assert "not a folder" in capsys.readouterr().err
    assert target.read_text() == "x"


def test_demo_job_reruns_from_its_copy(tmp_path):
    """DIR/job.toml is self-contained: it validates from any folder (no input files)."""
    path = tmp_path / "job.toml"
    path.write_text(demo_job_text(quick=False))
    job = parse_job(path.read_text(), path=path)
    assert job.input_files == ()


EXAMPLES = sorted((Path(__file__).resolve().parents[1] / "trajectories" / "jobs").glob("*.toml"))


@pytest.mark.parametrize("path", EXAMPLES, ids=[p.name for p in EXAMPLES])
def test_example_jobs_validate_and_are_marked_invented(path):
    text = path.read_text()
    assert "INVENTED SCENARIO" in text
    job = load_job(path)
    assert job.studies


def test_examples_exist():
    assert len(EXAMPLES) >= 3

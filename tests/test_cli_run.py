"""The ``lwrad run`` and ``lwrad info`` commands (arguments, exit codes, messages)."""

import numpy as np
import pytest
from jobkit import undulator_source

from lwrad.cli import build_parser, main
from lwrad.results import load

JOB = (
    '\ntitle = "cli test"\n'
    + undulator_source()
    + """[[study]]
name = "spec"
quantities = ["flux_density", "power_density"]
photon_energy = ["1.1 keV", "1.2 keV"]
[study.observer]
kind = "angular"
theta_x = [-0.05, 0, 0.05]
theta_y = 0
[run]
chunk_pixels = 2
"""
)


@pytest.fixture
def job(tmp_path):
    path = tmp_path / "job.toml"
    path.write_text(JOB)
    return path


def test_help_lists_the_run_options(capsys):
    with pytest.raises(SystemExit):
        build_parser().parse_args(["run", "--help"])
    text = capsys.readouterr().out
    for option in (
        "--workers",
        "--resume",
        "--force",
        "--scheduler",
        "--quiet",
        "--memory-limit",
        "--chunk-pixels",
    ):
        assert option in text


def test_run_writes_result_and_logs(job, tmp_path, capsys):
    out = tmp_path / "out.h5"
    assert main(["run", str(job), "-o", str(out), "--workers", "1"]) == 0
    err = capsys.readouterr().err
    assert "memory estimate" in err and "time estimate" in err and f"wrote {out}" in err
    assert "lwrad run: chunk 4/4 done" in err  # 3 pixels in chunks of 2, spectra and power
    case = load(out).cases["spec"]
    assert case.flux_density.values.shape == (2, 1, 3)
    assert np.all(case.flux_density.values > 0)


def test_quiet_prints_nothing(job, tmp_path, capsys):
    assert main(["run", str(job), "-o", str(tmp_path / "q.h5"), "--workers", "1", "--quiet"]) == 0
    captured = capsys.readouterr()
    assert captured.err == "" and captured.out == ""


def test_refuses_overwrite_then_force(job, tmp_path, capsys):
    out = tmp_path / "out.h5"
    out.write_text("keep me")
    assert main(["run", str(job), "-o", str(out), "--quiet"]) == 2
    err = capsys.readouterr().err
    assert "lwrad run: error:" in err and "--force" in err
    assert out.read_text() == "keep me"
    assert main(["run", str(job), "-o", str(out), "--quiet", "--force", "--workers", "1"]) == 0
    assert "spec" in load(out).cases


def test_invalid_job_exit_code_and_message(tmp_path, capsys):
    bad = tmp_path / "bad.toml"
    bad.write_text(JOB.replace("n_periods = 5", "n_periodz = 5"))
    assert main(["run", str(bad), "-o", str(tmp_path / "x.h5")]) == 2
    err = capsys.readouterr().err
    assert str(bad) in err and "did you mean 'n_periods'" in err
    assert not (tmp_path / "x.h5").exists()


def test_memory_limit_option_refuses(job, tmp_path, capsys):
    assert main(["run", str(job), "-o", str(tmp_path / "x.h5"), "--memory-limit", "10 MB"]) == 2
    err = capsys.readouterr().err
    assert "estimated memory" in err and "--memory-limit" in err


def test_resume_on_a_finished_run_is_refused(job, tmp_path, capsys):
    out = tmp_path / "out.h5"
    assert main(["run", str(job), "-o", str(out), "--quiet", "--workers", "1"]) == 0
    assert main(["run", str(job), "-o", str(out), "--quiet", "--resume"]) == 2
    assert "exists" in capsys.readouterr().err


def test_info_on_job_result_and_trajectory(job, tmp_path, capsys):
    assert main(["info", str(job), "--no-calibration"]) == 0
    text = capsys.readouterr().out
    assert "(valid)" in text and "plan" in text and "memory" in text and "fits" in text
    out = tmp_path / "out.h5"
    main(["run", str(job), "-o", str(out), "--quiet", "--workers", "1"])
    capsys.readouterr()
    assert main(["info", str(out)]) == 0
    text = capsys.readouterr().out
    assert (
        "case         spec (angular)" in text
        and "flux_density" in text
        and "ph/s/0.1%BW/mrad^2" in text
    )
    assert "Results are estimates" in text
    from lwrad.io import write_trajectory
    from lwrad.magnets import PlanarUndulator
    from lwrad.tracking import track

    traj_file = tmp_path / "t.h5"
    write_trajectory(track(PlanarUndulator(0.025, 5, 0.6), 2.5e9, samples_per_period=48), traj_file)
    assert main(["info", str(traj_file)]) == 0
    assert capsys.readouterr().out.strip()


def test_info_on_nonsense_is_a_clear_error(tmp_path, capsys):
    junk = tmp_path / "junk.bin"
    junk.write_bytes(b"\x00\x01\x02 nothing")
    assert main(["info", str(junk)]) == 2
    err = capsys.readouterr().err
    assert "not a job, result, trajectory or field-map file" in err
    assert main(["info", str(tmp_path / "absent.toml")]) == 2

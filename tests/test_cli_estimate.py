"""Tests of ``lwrad estimate``: parsing values with units, table output, exports, refusals.

The numbers themselves are checked in test_estimate.py against the X-ray Data Booklet sec. 2.1;
here the command must give the same numbers as the Python API for the same inputs.
"""

import csv

import h5py
import pytest

from lwrad.cli import main
from lwrad.estimate import Bend, Undulator, Wiggler

# Demo scenario of our own invention ("Saltmarsh" ring, SM-U25, SM-B1): invented.
UND = [
    "estimate",
    "undulator",
    "--energy",
    "2.5 GeV",
    "--current",
    "0.3 A",
    "--period",
    "25 mm",
    "--periods",
    "80",
]


def _csv_values(path):
    with open(path, encoding="utf-8") as fh:
        rows = list(csv.DictReader(ln for ln in fh if not ln.startswith("#")))
    return {r["key"]: (float(r["value"]), r["unit"]) for r in rows}


def test_undulator_command_matches_api(tmp_path, capsys):
    out = tmp_path / "u.csv"
    assert main([*UND, "--K", "1.4", "--csv", str(out)]) == 0
    text = capsys.readouterr().out
    assert "licensed practice" in text and "ph/s/mrad^2/0.1%BW" in text
    ref = Undulator(2.5e9, 0.3, 0.025, 80, K=1.4)
    values = _csv_values(out)
    assert values["photon_energy_n1"][0] == pytest.approx(float(ref.photon_energy(1)), rel=1e-14)
    assert values["central_cone_flux_n3"] == (
        pytest.approx(float(ref.central_cone_flux(3)), rel=1e-14),
        "ph/s/0.1%BW",
    )
    assert values["total_power"][1] == "W"


def test_undulator_field_bare_numbers_and_beam(tmp_path, capsys):
    # bare numbers take the documented default units: GeV, A, mm, T, nm*rad, m
    h5 = tmp_path / "u.h5"
    png = tmp_path / "tuning.png"
    args = [
        "estimate", "undulator", "--energy", "2.5", "--current", "0.3", "--period", "25", "--periods", "80",
        "--field", "0.6", "--emittance-x", "4", "--emittance-y", "40 pm*rad", "--beta-x", "10", "--beta-y", "3",
        "--photon-energy", "5 keV", "--K-range", "0.5,2", "--hdf5", str(h5), "--plot", str(png),
    ]  # fmt: skip
    assert main(args) == 0
    ref = Undulator(
        2.5e9,
        0.3,
        0.025,
        80,
        peak_field=0.6,
        beam=dict(emittance_x=4e-9, emittance_y=40e-12, beta_x=10, beta_y=3),
    )
    with h5py.File(h5, "r") as fh:
        assert fh["quantities/brightness_n1"][()] == pytest.approx(
            float(ref.brightness(1)), rel=1e-13
        )
        assert fh["quantities/K"][()] == pytest.approx(ref.K, rel=1e-14)
        assert fh["curves/tuning_K"][0] == pytest.approx(0.5) and fh["curves/tuning_K"][
            -1
        ] == pytest.approx(2.0)
        assert "K_for_target_n5" in fh["quantities"]
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_wiggler_and_bend_commands(tmp_path, capsys):
    w_csv, b_csv = tmp_path / "w.csv", tmp_path / "b.csv"
    args = ["estimate", "wiggler", "--energy", "2.5 GeV", "--current", "300 mA", "--period", "150 mm",
            "--periods", "10", "--field", "1.5 T", "--photon-energy", "10 keV", "--csv", str(w_csv)]  # fmt: skip
    assert main(args) == 0
    w = Wiggler(2.5e9, 0.3, 0.15, 10, peak_field=1.5)
    assert _csv_values(w_csv)["flux_per_mrad_10000eV"][0] == pytest.approx(
        float(w.flux_per_mrad(1e4)), rel=1e-14
    )
    args = ["estimate", "bend", "--energy", "2.5 GeV", "--current", "0.3", "--field", "1.2 T",
            "--photon-energy", "1 keV", "--photon-energy", "20000", "--csv", str(b_csv)]  # fmt: skip
    assert main(args) == 0
    b = Bend(2.5e9, 0.3, 1.2)
    values = _csv_values(b_csv)
    assert values["critical_energy"][0] == pytest.approx(b.critical_energy, rel=1e-14)
    assert values["flux_density_20000eV"][0] == pytest.approx(float(b.flux_density(2e4)), rel=1e-14)
    assert "licensed practice" in capsys.readouterr().out


def test_never_overwrites_without_force(tmp_path, capsys):
    out = tmp_path / "b.csv"
    out.write_text("precious\n")
    args = [
        "estimate",
        "bend",
        "--energy",
        "2.5 GeV",
        "--current",
        "0.3 A",
        "--field",
        "1.2 T",
        "--csv",
        str(out),
    ]
    assert main(args) == 2
    assert "--force" in capsys.readouterr().err
    assert out.read_text() == "precious\n"
    assert main([*args, "--force"]) == 0
    assert "critical_energy" in out.read_text()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["b.csv"]  # no temporary leftovers


@pytest.mark.parametrize(
    "extra",
    [
        ["--K", "1.4", "--energy", "2.5 parsecs"],
        ["--K", "1.4", "--current", "0.3 T"],
        ["--K", "one"],
        ["--K", "1.4", "--harmonics", "0"],
        ["--K", "1.4", "--harmonics", "1,x"],
        ["--K", "1.4", "--K-range", "2,1"],
        ["--K", "1.4", "--K-range", "1"],
        ["--K", "1.4", "--emittance-x", "4"],  # beam needs all four optics options
        ["--K", "1.4", "--photon-energy", "-3 keV"],
        ["--K", "1.4", "--csv", "/nonexistent-dir/x.csv"],
        ["--K", "1.4", "--periods", "2.5"],
    ],
)
def test_bad_input_is_a_clear_error(extra, capsys):
    assert main([*UND, *extra]) == 2
    err = capsys.readouterr().err
    assert err.startswith("lwrad estimate: error:") and "Traceback" not in err


def test_k_and_field_are_exclusive(capsys):
    with pytest.raises(SystemExit) as exc:
        main([*UND, "--K", "1.4", "--field", "0.6 T"])
    assert exc.value.code == 2

"""Delimited-text trajectories: forms, units, exact kinematics, path-length conversion, errors."""

import math
import os
from pathlib import Path

import numpy as np
import pytest

import lwrad
from lwrad.constants import c, e, m_e, m_p
from lwrad.io import detect_format, read_trajectory, write_trajectory

GAMMA = 4892.0  # about 2.5 GeV electrons


def arc(n=41, rho=7.0, gamma=GAMMA, length=0.9):
    """Uniform circular motion (exact): x = ρ(1 − cos φ), z = ρ sin φ, φ = βct/ρ."""
    beta = math.sqrt((gamma - 1) * (gamma + 1)) / gamma
    t = np.linspace(0.0, length / (beta * c), n)
    phi = beta * c * t / rho
    zero = np.zeros(n)
    r = np.column_stack([rho * (1 - np.cos(phi)), zero, rho * np.sin(phi)])
    b = beta * np.column_stack([np.sin(phi), zero, np.cos(phi)])
    bd = beta * beta * c / rho * np.column_stack([np.cos(phi), zero, -np.sin(phi)])
    return lwrad.Trajectory(t, r, b, bd, gamma=np.full(n, gamma))


def write_text(tmp_path, text, name="traj.csv"):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return str(path)


def test_minimal_si_columns_load_without_options(tmp_path):
    # t, x, y, z, beta in SI with no options: electron, beta_dot derived, gamma from beta
    path = write_text(
        tmp_path,
        "t,x,y,z,beta_x,beta_y,beta_z\n"
        + "".join(f"{k * 1e-9},{0.0},{0.0},{0.25 * k},0,0,0.5\n" for k in range(5)),
    )
    tr = read_trajectory(path)
    assert isinstance(tr, lwrad.Trajectory)
    np.testing.assert_array_equal(tr.t, np.arange(5) * 1e-9)
    np.testing.assert_array_equal(tr.r[:, 2], 0.25 * np.arange(5))
    assert tr.charge == -e and tr.mass == m_e
    # γ for β = 1/2 is 2/√3 (exact to rounding)
    np.testing.assert_allclose(tr.gamma, 2 / math.sqrt(3), rtol=1e-15)
    np.testing.assert_allclose(
        tr.beta_dot, 0.0, atol=1e-6
    )  # straight line: derived β̇ is rounding only


@pytest.mark.parametrize("delimiter", [",", " ", "\t"])
def test_time_form_round_trip_is_exact(tmp_path, delimiter):
    tr = arc()
    path = write_trajectory(tr, tmp_path / "a.txt", delimiter=delimiter)
    back = read_trajectory(path)
    # 17 significant digits reproduce every float64 exactly
    assert back == tr


def test_momentum_form_with_units_round_trip(tmp_path):
    tr = arc()
    path = write_trajectory(
        tr,
        tmp_path / "m.dat",
        form="momentum",
        delimiter=" ",
        time_unit="ns",
        length_unit="mm",
        momentum_unit="MeV/c",
    )
    header = [line for line in Path(path).read_text().splitlines() if not line.startswith("#")][0]
    assert header.split() == [
        "t[ns]",
        "x[mm]",
        "y[mm]",
        "z[mm]",
        "px[MeV/c]",
        "py[MeV/c]",
        "pz[MeV/c]",
    ]
    back = read_trajectory(path)
    # unit factors cost a few ulps: 1e-14 relative
    np.testing.assert_allclose(back.t, tr.t, rtol=1e-14, atol=1e-14 * tr.t[-1])
    np.testing.assert_allclose(back.r, tr.r, rtol=0, atol=1e-14 * np.abs(tr.r).max())
    np.testing.assert_allclose(back.gamma, tr.gamma, rtol=1e-14)
    np.testing.assert_allclose(back.beta, tr.beta, rtol=0, atol=1e-15)
    np.testing.assert_allclose(back.inv_gamma_sq, tr.inv_gamma_sq, rtol=1e-13)


def test_momentum_gamma_is_exact_at_gamma_1e5(tmp_path):
    # u = p/(mc) with γ = 1e5: γ = sqrt(1 + u²) exactly; 1/γ² must keep its digits (from |β| it would not)
    gamma = 1.0e5
    u = math.sqrt((gamma - 1) * (gamma + 1))
    lines = ["t,x,y,z,px,py,pz"] + [
        f"{k * 1e-10!r},0,0,{k * 1e-10 * c!r},0,0,{u!r}" for k in range(4)
    ]
    tr = read_trajectory(write_text(tmp_path, "\n".join(lines)))
    np.testing.assert_allclose(tr.gamma, gamma, rtol=2e-16)
    np.testing.assert_allclose(tr.inv_gamma_sq, 1e-10, rtol=1e-15)


def test_momentum_units_agree(tmp_path):
    # the same momentum in mc, eV/c and kg*m/s gives the same γ (CODATA factors from scipy.constants)
    u = 3000.0
    values = {"": u, "[eV/c]": u * m_e * c * c / e, "[kg*m/s]": u * m_e * c}
    gammas = []
    for i, (suffix, p) in enumerate(values.items()):
        text = (
            f"t,x,y,z,px{suffix},py{suffix},pz{suffix}\n0,0,0,0,0,0,{p!r}\n1e-9,0,0,0.3,0,0,{p!r}\n"
        )
        gammas.append(read_trajectory(write_text(tmp_path, text, f"u{i}.csv")).gamma[0])
    np.testing.assert_allclose(gammas, math.sqrt(1 + u * u), rtol=1e-15)


def test_particle_from_option_and_header(tmp_path):
    u = 2.0
    body = f"t,x,y,z,px,py,pz\n0,0,0,0,0,0,{u}\n1e-9,0,0,0.2,0,0,{u}\n"
    by_option = read_trajectory(write_text(tmp_path, body, "a.csv"), particle="proton")
    by_header = read_trajectory(write_text(tmp_path, "# particle: proton\n" + body, "b.csv"))
    for tr in (by_option, by_header):
        assert tr.mass == m_p and tr.charge == e
        np.testing.assert_allclose(tr.gamma, math.sqrt(5.0), rtol=1e-15)
    with pytest.raises(lwrad.InputError, match="particle"):
        read_trajectory(
            write_text(tmp_path, "# particle: proton\n" + body, "c.csv"), particle="electron"
        )
    with pytest.raises(lwrad.InputError, match="unknown particle"):
        read_trajectory(write_text(tmp_path, "# particle: gluon\n" + body, "d.csv"))


def _z_form_arc(n, rho=1.0, z_end=0.8, gamma=GAMMA):
    """Circle x = ρ − sqrt(ρ² − z²) in the z, x, x′ form; exact time t(z) = ρ asin(z/ρ)/(βc)."""
    z = np.linspace(0.0, z_end, n)
    root = np.sqrt(rho * rho - z * z)
    x, xp = rho - root, z / root
    lines = ["# reference arc", "z,x,xp,y,yp,gamma"]
    lines += [
        f"{a!r},{b!r},{d!r},0,0,{gamma!r}"
        for a, b, d in zip(z.tolist(), x.tolist(), xp.tolist(), strict=True)
    ]
    beta = math.sqrt((gamma - 1) * (gamma + 1)) / gamma
    return "\n".join(lines) + "\n", rho * np.arcsin(z / rho) / (beta * c), beta


def test_path_length_z_form_against_circular_arc(tmp_path):
    # t(z) = ∫dz/(cβ_z) on a circle of radius ρ is ρ·asin(z/ρ)/(βc) (exact; elementary integral)
    errors = []
    for n in (17, 33, 65):
        text, t_exact, beta = _z_form_arc(n)
        tr = read_trajectory(write_text(tmp_path, text, f"z{n}.csv"))
        errors.append(np.max(np.abs(tr.t - t_exact)) / t_exact[-1])
        # direction of β: (sin φ, 0, cos φ) with sin φ = z/ρ, speed β (exact to rounding)
        z = tr.r[:, 2]
        np.testing.assert_allclose(tr.beta[:, 0], beta * z, rtol=1e-14, atol=1e-16)
        np.testing.assert_allclose(np.linalg.norm(tr.beta, axis=1), beta, rtol=1e-15)
    # fourth-order spline integral: each halving of the spacing divides the error by ≥ 16 (measured 23;
    # 10 leaves margin); at 65 samples over this tight 53° arc (ρ = 1 m, x′ up to 1.33) the error is
    # 1.7e-8 of the duration, bound 5e-8. Undulator-like slopes (1e-4) give errors far below rounding.
    assert errors[1] < errors[0] / 10 and errors[2] < errors[1] / 10, errors
    assert errors[2] < 5e-8, errors


def test_path_length_s_form_along_curved_arc(tmp_path):
    # s is the path length along the circle: t = s/(βc) exactly (constant integrand), β along the tangent
    rho, gamma = 7.0, GAMMA
    beta = math.sqrt((gamma - 1) * (gamma + 1)) / gamma
    results = []
    for n in (46, 91):
        s = np.linspace(0.0, 0.9, n)
        phi = s / rho
        rows = np.column_stack([s, rho * (1 - np.cos(phi)), np.zeros(n), rho * np.sin(phi)])
        energy_gev = gamma * m_e * c * c / e / 1e9
        text = "# particle: electron\ns,x,y,z,energy[GeV]\n" + "".join(
            f"{a!r},{b!r},{cc!r},{d!r},{energy_gev!r}\n" for a, b, cc, d in rows.tolist()
        )
        tr = read_trajectory(write_text(tmp_path, text, f"s{n}.csv"))
        np.testing.assert_allclose(tr.t, s / (beta * c), rtol=1e-14, atol=1e-25)
        np.testing.assert_allclose(tr.gamma, gamma, rtol=1e-14)  # via GeV: one unit factor
        direction = np.column_stack([np.sin(phi), np.zeros(n), np.cos(phi)])
        results.append(np.max(np.abs(tr.beta / beta - direction)))
    # tangent from a not-a-knot spline derivative (third order): error < 1e-8 at 2 cm spacing on ρ = 7 m,
    # and it shrinks when the spacing halves
    assert results[0] < 1e-8 and results[1] < results[0] / 4, results


def test_s_without_z_is_a_straight_reference(tmp_path):
    text, t_exact, _ = _z_form_arc(33)
    as_s = text.replace("z,x,xp", "s,x,xp")
    a = read_trajectory(write_text(tmp_path, text, "z.csv"))
    b = read_trajectory(write_text(tmp_path, as_s, "s.csv"))
    assert a == b


def test_delta_form_with_reference_energy(tmp_path):
    tr = arc()
    path = write_trajectory(
        tr,
        tmp_path / "d.txt",
        form="path",
        energy_column="delta",
        reference_energy="2.5 GeV",
        angle_unit="mrad",
    )
    back = read_trajectory(path)
    np.testing.assert_allclose(back.gamma, tr.gamma, rtol=1e-14)
    # time recomputed from ∫dz/(cβ_z), starting at 0. Fourth-order spline quadrature error ≈
    # h⁴/720 · L · |f⁗|/f with f ∝ sec(z/ρ): (2.25 cm)⁴/720 · 0.9 m · 5/ρ⁴ ≈ 7e-13 of the duration
    # (measured 1.1e-12); bound 1e-11. The z-form convergence test above shows the order.
    np.testing.assert_allclose(back.t - back.t[0], tr.t - tr.t[0], rtol=0, atol=1e-11 * tr.t[-1])
    np.testing.assert_allclose(back.beta, tr.beta, rtol=0, atol=1e-15)
    # the option must agree with the header comment the writer put in the file
    read_trajectory(path, reference_energy=2.5e9)
    with pytest.raises(lwrad.InputError, match="reference_energy"):
        read_trajectory(path, reference_energy=3e9)
    stripped = "".join(
        line for line in Path(path).read_text().splitlines(True) if "reference_energy" not in line
    )
    with pytest.raises(lwrad.InputError, match="reference energy"):
        read_trajectory(write_text(tmp_path, stripped, "nodelta.txt"))


def test_energy_column_form(tmp_path):
    tr = arc()
    back = read_trajectory(
        write_trajectory(
            tr, tmp_path / "e.csv", form="path", energy_column="energy", energy_unit="GeV"
        )
    )
    np.testing.assert_allclose(back.gamma, tr.gamma, rtol=1e-14)


GOOD = (
    "t,x,y,z,beta_x,beta_y,beta_z\n0,0,0,0,0,0,0.5\n1e-9,0,0,0.15,0,0,0.5\n2e-9,0,0,0.3,0,0,0.5\n"
)


@pytest.mark.parametrize(
    ("text", "fragments"),
    [
        ("", ["empty"]),
        ("# only a comment\n", ["no header"]),
        ("t,x,y,z,beta_x,beta_y,beta_z\n", ["no data"]),
        ("0,0,0,0,0,0,0.5\n1,0,0,0,0,0,0.5\n", ["line 1", "found numbers"]),
        (GOOD.replace("beta_z\n", "beta_q\n"), ["line 1", "unknown column"]),
        (GOOD.replace("t,x", "t,x,x"), ["line 1", "twice"]),
        ("t,x,y,z,beta_x,beta_y\n0,0,0,0,0,0\n1e-9,0,0,1,0,0\n", ["line 1", "missing beta_z"]),
        ("t,x,y,beta_x,beta_y,beta_z\n0,0,0,0,0,0.5\n1e-9,0,0,0,0,0.5\n", ["column z"]),
        (GOOD.replace("t,x", "t[fortnight],x"), ["line 1", "column t[fortnight]", "unknown unit"]),
        (GOOD.replace("t,x", "t[mm],x"), ["line 1", "length, expected time"]),
        (GOOD.replace("1e-9,0,0,0.15,", "1e-9,0,0.15,"), ["line 3", "6 values"]),
        (GOOD.replace("1e-9,0,0,0.15", "1e-9,0,abc,0.15"), ["line 3", "column y", "'abc'"]),
        (GOOD.replace("1e-9,0,0,0.15", "1e-9,0,nan,0.15"), ["line 3", "column y", "finite"]),
        (GOOD.replace("2e-9", "inf"), ["line 4", "column t", "finite"]),
        (GOOD.replace("2e-9", "0.5e-9"), ["line 4", "column t", "increase"]),
        (GOOD.replace("0.15,0,0,0.5", "0.15,0.8,0,0.7"), ["line 3", "beta", "not below 1"]),
        ("t,x,y,z,beta_x,beta_y,beta_z,px,py,pz\n0,0,0,0,0,0,0.5,0,0,1\n", ["exactly one"]),
        ("z,x,xp,y,yp\n0,0,0,0,0\n1,0,0,0,0\n", ["energy, gamma or delta"]),
        ("z,x,xp,y,yp,gamma\n0,0,0,0,0,1\n1,0,0,0,0,1\n", ["line 2", "gamma > 1"]),
        ("z,x,xp,y,yp,gamma\n0,0,0,0,0,10\n0,0,0,0,0,10\n", ["line 3", "increase"]),
        ("s,x,y,z,gamma\n0,0,0,0,10\n1,0,0,2,10\n2,0,0,4,10\n", ["s is not the path length"]),
        ("t,x,y,z,beta_x,beta_y,beta_z,beta_dot_x[1/ns],beta_dot_y,beta_dot_z\n", ["must be 1/s"]),
    ],
)
def test_bad_files_name_file_line_and_column(tmp_path, text, fragments):
    path = write_text(tmp_path, text)
    with pytest.raises(lwrad.InputError) as info:
        read_trajectory(path)
    message = str(info.value)
    assert "traj.csv" in message
    for fragment in fragments:
        assert fragment in message, (fragment, message)


def test_binary_and_non_utf8_are_input_errors(tmp_path):
    binary = tmp_path / "garbage.csv"
    binary.write_bytes(bytes(range(256)) * 4)
    with pytest.raises(lwrad.InputError, match="garbage.csv"):
        read_trajectory(binary)
    latin = tmp_path / "latin.csv"
    latin.write_bytes(GOOD.encode() + "# caf\xe9\n".encode("latin-1"))
    with pytest.raises(lwrad.InputError, match="UTF-8"):
        read_trajectory(latin)
    with pytest.raises(lwrad.InputError, match="no such file"):
        read_trajectory(tmp_path / "missing.csv")
    with pytest.raises(lwrad.InputError, match="unknown option"):
        read_trajectory(write_text(tmp_path, GOOD), species="electrons")


def test_content_wins_over_extension(tmp_path):
    path = write_text(tmp_path, GOOD, name="looks_binary.h5")
    assert detect_format(path) == "text"
    assert read_trajectory(path).n_samples == 3
    odd = write_text(tmp_path, GOOD, name="noext")
    assert read_trajectory(odd).n_samples == 3


def test_writer_never_overwrites_without_permission(tmp_path):
    tr = arc()
    path = write_trajectory(tr, tmp_path / "w.csv")
    before = Path(path).read_text()
    with pytest.raises(lwrad.InputError, match="exists"):
        write_trajectory(arc(n=11), path)
    assert Path(path).read_text() == before
    write_trajectory(arc(n=11), path, overwrite=True)
    assert read_trajectory(path).n_samples == 11
    assert sorted(os.listdir(tmp_path)) == ["w.csv"]  # no temporary file left behind


def test_comments_and_inline_comments(tmp_path):
    text = "# written by hand\n\n" + GOOD.replace(
        "0,0,0,0,0,0,0.5\n", "0,0,0,0,0,0,0.5   # first sample\n", 1
    )
    assert read_trajectory(write_text(tmp_path, text)).n_samples == 3


EXAMPLES = Path(__file__).resolve().parent.parent / "trajectories"


@pytest.mark.skipif(not (EXAMPLES / "sm_u25.h5").exists(), reason="examples not generated")
def test_bundled_examples_load_and_match_the_invented_scenario():
    # invented demo scenario: 2.5 GeV electrons, SM-U25 (25 mm, K = 1.4), SM-B1 (1.2 T)
    ref = read_trajectory(EXAMPLES / "sm_u25.h5")
    gamma = 2.5e9 * e / (m_e * c * c)
    np.testing.assert_allclose(ref.gamma, gamma, rtol=1e-15)
    # peak angle K/γ of an ideal planar undulator (X-ray Data Booklet sec. 2.1); the analytic path has it exactly
    np.testing.assert_allclose(np.max(np.abs(ref.beta[:, 0])) * gamma, 1.4, rtol=1e-12)
    # one central period advances z by λu = 25 mm: zero crossings of β_x from linear interpolation
    # (exact at a crossing up to the curvature of β_x between samples, < 1e-6 m at 12 samples per period, looser than the 48 now used)
    bx, z = ref.beta[:, 0], ref.r[:, 2]
    i = np.flatnonzero((bx[:-1] < 0) & (bx[1:] >= 0))
    crossings = z[i] - bx[i] * (z[i + 1] - z[i]) / (bx[i + 1] - bx[i])
    np.testing.assert_allclose(np.diff(crossings)[5:-5], 0.025, rtol=0, atol=1e-6)
    # the stored β̇ and r belong to the stored β: a spline derivative of β (48 samples per period; the bound was set at 12) agrees
    # with β̇ inside the device to 7.5e-4 of the peak (measured; bound 2e-3), and the spline integral of
    # βc agrees with r to 5e-10 m in x (amplitude 1.1e-6 m) and 2e-13 m in z (measured; bounds 4x)
    from scipy.interpolate import CubicSpline

    derived = lwrad.Trajectory(ref.t, ref.r, ref.beta, gamma=ref.gamma).beta_dot
    inner = slice(12, -12)
    peak = np.max(np.abs(ref.beta_dot))
    assert np.max(np.abs(derived[inner] - ref.beta_dot[inner])) < 2e-3 * peak
    for k, bound in ((0, 2e-9), (2, 8e-13)):
        path = CubicSpline(ref.t, ref.beta[:, k] * c).antiderivative()(ref.t)
        assert np.max(np.abs(path - (ref.r[:, k] - ref.r[0, k]))) < bound
    for name in ("sm_u25_time_si.csv", "sm_u25.npz"):
        assert read_trajectory(EXAMPLES / name) == ref
    for name in ("sm_u25_momentum_mm.txt", "sm_u25_pathlength_z.dat"):
        other = read_trajectory(EXAMPLES / name)
        # momentum form: unit conversions (mm, ns, MeV/c) cost rounding only (measured 8e-25 s).
        # path form (clock restarts at 0): spline quadrature of the 2k_u ripple of 1/β_z at 12 samples per (since raised to 48)
        # period, measured 4.4e-22 s; bound 1e-21 s, i.e. 2e-3 rad of phase at the 1.2 keV fundamental
        np.testing.assert_allclose(other.t - other.t[0], ref.t - ref.t[0], rtol=0, atol=1e-21)
        np.testing.assert_allclose(other.r, ref.r, rtol=0, atol=1e-15)
        np.testing.assert_allclose(other.gamma, ref.gamma, rtol=1e-14)
    arc_ref = read_trajectory(EXAMPLES / "sm_b1_arc.h5")
    rho = math.sqrt((gamma - 1) * (gamma + 1)) * m_e * c / (e * 1.2)  # ρ = p/(eB)
    speed = np.linalg.norm(arc_ref.beta, axis=1)
    # curvature |β̇|/(β² c) = 1/ρ on the exact arc
    np.testing.assert_allclose(
        np.linalg.norm(arc_ref.beta_dot, axis=1) / (speed**2 * c), 1 / rho, rtol=1e-14
    )
    for name in (
        "sm_b1_arc_time_si.csv",
        "sm_b1_arc.npz",
        "sm_b1_arc_pathlength_s.csv",
        "sm_b1_arc_pathlength_z.txt",
    ):
        other = read_trajectory(EXAMPLES / name)
        np.testing.assert_allclose(other.r, arc_ref.r, rtol=0, atol=1e-15)
        # path forms: spline quadrature over a 0.13 rad arc at 2 mm spacing, far below 1e-12 of the duration
        np.testing.assert_allclose(
            other.t - other.t[0], arc_ref.t - arc_ref.t[0], rtol=0, atol=1e-12 * arc_ref.duration
        )
    for name in ("sm_b1_bunch.h5", "sm_b1_bunch_openpmd.h5"):
        bunch = read_trajectory(EXAMPLES / name)
        assert isinstance(bunch, lwrad.Bunch) and list(bunch.weights) == [0.5, 1.0, 0.5]
    excerpt = read_trajectory(EXAMPLES / "sm_u25_excerpt_openpmd" / "sm_u25_%T.h5")
    # the excerpt (8 samples per period) is the same analytic path: compare where both grids have
    # samples (every quarter period); quadrature on other intervals differs by rounding only
    assert excerpt.n_samples == 17
    np.testing.assert_allclose(excerpt.t[::2], ref.t[:97:12], rtol=0, atol=1e-24)
    np.testing.assert_allclose(excerpt.r[::2], ref.r[:97:12], rtol=0, atol=1e-15)

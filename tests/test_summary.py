"""The designer's summary: K, field integrals, phase error, deflection."""

import math

import numpy as np
import pytest

from lwrad import InputError, Trajectory
from lwrad.constants import c, e, m_e
from lwrad.magnets import Dipole, PlanarUndulator
from lwrad.summary import Summary, summarize
from lwrad.tracking import track

ENERGY = 2.5e9  # invented Saltmarsh ring
GAMMA = ENERGY * e / (m_e * c**2)


@pytest.fixture(scope="module")
def sm_u25_summary():
    return summarize(PlanarUndulator.from_K(0.025, 80, 1.4), ENERGY)


def test_undulator_summary(sm_u25_summary):
    s = sm_u25_summary
    # K from the path equals the field's K (X-ray Data Booklet 2.1); trapezoid over
    # 64 samples per period of a sinusoid: error (2π/64)²/12·... measured ~1e-9
    assert s["K_eff"] == pytest.approx(1.4, rel=1e-6)
    assert s["K_y"] == pytest.approx(1.4, rel=1e-6)
    assert s["K_x"] == 0.0
    assert s["period"] == pytest.approx(0.025, rel=1e-6)
    assert s["n_periods_seen"] == pytest.approx(77.5)  # 80 minus the terminations
    # an ideal device: no phase error beyond interpolation of the slippage (~1e-5°)
    assert s["phase_error_rms"] < 1e-3
    assert abs(s["deflection_x"]) < 1e-9 and abs(s["offset_x"]) < 1e-9
    assert abs(s["I1_y"]) < 1e-12 and abs(s["I2_y"]) < 1e-12
    assert s["gamma"] == pytest.approx(GAMMA, rel=1e-15)
    # X-ray Data Booklet 2.1: maximum angle K/γ
    assert s["max_angle_x"] == pytest.approx(1.4 / GAMMA, rel=1e-6)


def test_summary_table_and_dict(sm_u25_summary):
    text = str(sm_u25_summary)
    assert "rms phase error" in text and "deg" in text and "T m^2" in text
    lines = text.splitlines()[2:]
    # aligned: every value column ends at the same place
    assert len({len(line.split("  ")[0]) for line in lines}) >= 1
    d = sm_u25_summary.as_dict()
    assert all(v is None or isinstance(v, int | float | str) for v in d.values())
    assert sm_u25_summary.units()["I1_y"] == "T m"


def test_phase_error_of_a_known_timing_error():
    # a sinusoidal path built here, with the exact slippage plus a known timing error:
    # phase error at the poles = A sin(2π z/L) → rms A/√2 (over whole cycles), in degrees
    gamma, k_param, period, n = 5000.0, 1.0, 0.02, 40
    beta = math.sqrt(1 - 1 / gamma**2)
    ku = 2 * math.pi / period
    # ends a quarter period off the crossings, so the pole list is unambiguous
    z = np.linspace(-n * period / 2 - period / 4, n * period / 2 + period / 4, n * 128 + 65)
    amp = k_param / (gamma * beta)
    ux = amp * np.sin(ku * z)
    uz = np.sqrt(1 - ux**2)
    beta_vec = beta * np.column_stack([ux, np.zeros_like(z), uz])
    # slippage rate (1 − β uz)/(β uz c), integrated exactly enough by a fine cumulative sum
    rate = (1 - beta * uz) / (beta * uz * c)
    slip = np.concatenate([[0.0], np.cumsum(0.5 * (rate[1:] + rate[:-1]) * np.diff(z))])
    t1 = float(np.mean(rate)) * period  # slippage per period
    a_rad = math.radians(5.0)
    slip_err = slip + a_rad / (2 * math.pi) * t1 * np.sin(2 * math.pi * z / (n * period / 2))
    x = -amp / ku * np.cos(ku * z)
    r = np.column_stack([x, np.zeros_like(z), z])
    traj = Trajectory(slip_err + z / c, r, beta_vec, gamma=np.full(z.size, gamma))
    s = summarize(traj)
    # the definition (module docstring) applied by hand: poles at the zeros of sin(ku z),
    # the two at each end left out, the injected phase minus its straight-line fit
    poles = np.arange(-n, n + 1) * period / 2
    poles = poles[2:-2]
    injected = a_rad * np.sin(2 * math.pi * poles / (n * period / 2))
    resid = injected - np.polyval(np.polyfit(poles, injected, 1), poles)
    expected = math.degrees(math.sqrt(np.mean(resid**2)))
    # tolerance 1 %: linear interpolation of the slippage at the poles and the slope
    # of the perturbed fit (which sets T_1) differ from the exact values by < 1e-3
    assert s["phase_error_rms"] == pytest.approx(expected, rel=0.01)
    assert 2.5 < expected < 3.6  # about 5°/√2, less what the line fit removes
    assert s["K_y"] == pytest.approx(k_param, rel=1e-4)


def test_pole_errors_raise_the_phase_error():
    und = PlanarUndulator.from_K(0.025, 30, 1.4, pole_error_rms=0.005, seed=11)
    s = summarize(und, ENERGY)
    # a 0.5 % random pole error (seed 11) gives a phase error well above the ideal 1e-5°
    assert s["phase_error_rms"] > 0.1
    assert abs(s["I1_y"]) > 1e-7  # and the first integral no longer cancels


def test_dipole_summary():
    s = summarize(Dipole(1.2, 0.9), ENERGY)
    p = GAMMA * m_e * c * math.sqrt(1 - 1 / GAMMA**2)
    rho = p / (e * 1.2)
    assert s["min_bend_radius"] == pytest.approx(rho, rel=1e-10)
    assert math.sin(s["deflection_x"]) == pytest.approx(0.9 / rho, rel=1e-10)
    assert s["I1_y"] == pytest.approx(1.08, rel=1e-12)
    assert s["K_eff"] is None  # not periodic
    # the trajectory summary gives the equivalent integral from the path: sin θ = (q/p)·I1
    t = summarize(track(Dipole(1.2, 0.9), ENERGY))
    assert t["I1_y"] == pytest.approx(1.08, rel=1e-9)


def test_bad_calls():
    with pytest.raises(InputError, match="energy"):
        summarize(Dipole(1.0, 1.0))
    traj = track(Dipole(1.0, 0.1), 1e9)
    with pytest.raises(InputError):
        summarize(traj, energy=1e9)
    with pytest.raises(InputError):
        summarize("not a magnet")
    assert isinstance(summarize(traj), Summary)

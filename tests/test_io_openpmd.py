"""openPMD particle series written by openpmd-api itself: units, offsets, ids, species, round trips."""

import math
import os

import numpy as np
import pytest

import lwrad
from lwrad.constants import c, e, m_e
from lwrad.io import detect_format, read_trajectory, write_trajectory

io = pytest.importorskip("openpmd_api")

GAMMA = 4892.0
RHO = 7.0
IDS = np.array([7, 42, 1000], dtype=np.uint64)
X0 = np.array([0.0, 1e-4, -2e-4])  # m, parallel displacement of each particle
WEIGHTS = np.array([1.0, 2.0, 3.0])
MEV_C = 1e6 * e / c  # kg m/s per MeV/c
SPEED = math.sqrt((GAMMA - 1) * (GAMMA + 1)) / GAMMA


def exact(t, x0):
    """Circular motion: position (m), u = γβ at times t (s)."""
    phi = SPEED * c * t / RHO
    zero = np.zeros_like(t)
    r = np.column_stack([RHO * (1 - np.cos(phi)) + x0, zero, RHO * np.sin(phi)])
    u = GAMMA * SPEED * np.column_stack([np.sin(phi), zero, np.cos(phi)])
    return r, u


def times(n=11):
    return np.linspace(0.0, 0.9 / (SPEED * c), n)


def write_series(
    path,
    n=11,
    *,
    species=("electrons",),
    macro_weighted=False,
    momentum_half_step=False,
    position_dims=None,
    with_id=True,
    nan_at=None,
    drop_particle_after=None,
):
    """Write three electrons on parallel arcs with openpmd-api, in deliberately awkward units:
    position in µm relative to a per-particle positionOffset in mm, momentum in MeV/c, time in fs,
    iterations numbered 100, 200, …, particles in a different order in each iteration."""
    t = times(n)
    dt = t[1] - t[0]
    series = io.Series(str(path), io.Access.create)
    rng = np.random.default_rng(20261202)  # seed stated: particle order per iteration
    for k in range(n):
        it = series.iterations[100 * (k + 1)]
        it.time = t[k] / 1e-15
        it.dt = dt / 1e-15
        it.time_unit_SI = 1e-15
        for name in species:
            order = rng.permutation(3)
            if drop_particle_after is not None and k > drop_particle_after:
                order = order[order != 0]
            m = order.size
            ps = it.particles[name]
            r = np.empty((m, 3))
            u = np.empty((m, 3))
            for j, i in enumerate(order):
                r[j], _ = (a[0] for a in exact(np.array([t[k]]), X0[i]))
                t_mom = t[k] - 0.5 * dt if momentum_half_step else t[k]
                u[j] = exact(np.array([t_mom]), X0[i])[1][0]
            offset_mm = np.floor(r / 1e-3)  # whole millimetres
            pos_um = (r - offset_mm * 1e-3) / 1e-6
            p_mev = u * m_e * c / MEV_C
            w = WEIGHTS[order]
            if macro_weighted:
                p_mev = p_mev * w[:, None]
            if nan_at is not None and k == nan_at:
                pos_um[0, 1] = np.nan
            for j, comp in enumerate("xyz"):
                for rec, data, unit in (
                    ("position", pos_um[:, j], 1e-6),
                    ("positionOffset", offset_mm[:, j], 1e-3),
                    ("momentum", p_mev[:, j], MEV_C),
                ):
                    rc = ps[rec][comp]
                    rc.reset_dataset(io.Dataset(np.dtype("float64"), [m]))
                    rc.store_chunk(np.ascontiguousarray(data))
                    rc.unit_SI = unit
            ps["position"].unit_dimension = position_dims or {io.Unit_Dimension.L: 1}
            ps["positionOffset"].unit_dimension = {io.Unit_Dimension.L: 1}
            ps["momentum"].unit_dimension = {
                io.Unit_Dimension.L: 1,
                io.Unit_Dimension.M: 1,
                io.Unit_Dimension.T: -1,
            }
            if momentum_half_step:
                ps["momentum"].set_time_offset(-0.5 * dt / 1e-15)
            ps["momentum"].set_attribute("macroWeighted", np.uint32(1 if macro_weighted else 0))
            ps["momentum"].set_attribute("weightingPower", 1.0)
            if with_id:
                rc = ps["id"][io.Record_Component.SCALAR]
                rc.reset_dataset(io.Dataset(np.dtype("uint64"), [m]))
                rc.store_chunk(np.ascontiguousarray(IDS[order]))
            rc = ps["weighting"][io.Record_Component.SCALAR]
            rc.reset_dataset(io.Dataset(np.dtype("float64"), [m]))
            rc.store_chunk(np.ascontiguousarray(w))
            for rec, value, dims in (
                ("mass", m_e, {io.Unit_Dimension.M: 1}),
                ("charge", -e, {io.Unit_Dimension.I: 1, io.Unit_Dimension.T: 1}),
            ):
                rc = ps[rec][io.Record_Component.SCALAR]
                rc.reset_dataset(io.Dataset(np.dtype("float64"), [m]))
                rc.make_constant(value)
                ps[rec].unit_dimension = dims
        it.close()
    series.close()
    return t


def check_bunch(bunch, t):
    assert isinstance(bunch, lwrad.Bunch) and len(bunch) == 3
    np.testing.assert_array_equal(bunch.weights, WEIGHTS)  # ids sorted: 7, 42, 1000
    for i, tr in enumerate(bunch):
        r, u = exact(t, X0[i])
        # fs and MeV/c and µm + mm unit factors: each value a few ulps off
        np.testing.assert_allclose(tr.t, t, rtol=1e-14, atol=1e-14 * t[-1])
        np.testing.assert_allclose(tr.r, r, rtol=0, atol=1e-15)
        np.testing.assert_allclose(tr.gamma, GAMMA, rtol=1e-14)
        np.testing.assert_allclose(tr.gamma[:, None] * tr.beta, u, rtol=0, atol=1e-14 * GAMMA)
        assert tr.charge == -e and tr.mass == m_e


def test_group_based_series(tmp_path):
    path = tmp_path / "run.h5"
    t = write_series(path)
    assert detect_format(path) == "openpmd"
    check_bunch(read_trajectory(path), t)
    one = read_trajectory(path, particle_id=42)
    assert isinstance(one, lwrad.Trajectory)
    np.testing.assert_allclose(one.r, exact(t, X0[1])[0], rtol=0, atol=1e-15)
    two = read_trajectory(path, particle_id=[7, 1000])
    assert len(two) == 2


def test_file_based_series_by_pattern_and_by_one_file(tmp_path):
    t = write_series(tmp_path / "run_%T.h5")
    assert len(os.listdir(tmp_path)) == t.size
    check_bunch(read_trajectory(tmp_path / "run_%T.h5"), t)
    check_bunch(read_trajectory(tmp_path / "run_300.h5"), t)  # any one file names the series


def test_macro_weighted_momentum(tmp_path):
    # openPMD 1.1: a macroWeighted record holds w^weightingPower times the per-particle value
    t = write_series(tmp_path / "mw.h5", macro_weighted=True)
    check_bunch(read_trajectory(tmp_path / "mw.h5"), t)


def test_momentum_half_step_is_moved_to_position_times(tmp_path):
    # momentum stored half a step early (timeOffset = −dt/2): the reader interpolates it with a cubic
    # spline in time; its error falls with the step (fourth order inside, lower at the ends)
    errors = []
    for n in (11, 21):
        path = tmp_path / f"half{n}.h5"
        t = write_series(path, n=n, momentum_half_step=True)
        tr = read_trajectory(path, particle_id=7)
        u_exact = exact(t, X0[0])[1]
        errors.append(np.max(np.abs(tr.gamma[:, None] * tr.beta - u_exact)) / GAMMA)
    # the bend angle is 0.13 rad in 10 or 20 steps: spline error below 1e-7 of |u| and shrinking ≥ 4×
    assert errors[0] < 1e-7 and errors[1] < errors[0] / 4, errors
    # without the correction the error would be the half-step rotation, 0.13/20/2 ≈ 3e-3 of |u|
    assert errors[1] < 1e-3 * 3e-3


def test_species_choice(tmp_path):
    path = tmp_path / "two.h5"
    write_series(path, species=("electrons", "witness"))
    with pytest.raises(lwrad.InputError, match="electrons, witness"):
        read_trajectory(path)
    assert len(read_trajectory(path, species="witness")) == 3
    with pytest.raises(lwrad.InputError, match="no species 'photons'"):
        read_trajectory(path, species="photons")


@pytest.mark.parametrize(
    ("kwargs", "fragments"),
    [
        ({"with_id": False}, ["record electrons/id", "missing record"]),
        (
            {"position_dims": {io.Unit_Dimension.T: 1}},
            ["record electrons/position", "unitDimension"],
        ),
        ({"nan_at": 3}, ["iteration 400", "position/y", "finite"]),
        ({"drop_particle_after": 0}, ["particle id", "1 iteration"]),
    ],
)
def test_bad_series_name_iteration_and_record(tmp_path, kwargs, fragments):
    path = tmp_path / "bad.h5"
    write_series(path, **kwargs)
    with pytest.raises(lwrad.InputError) as info:
        read_trajectory(path)
    message = str(info.value)
    assert "bad.h5" in message
    for fragment in fragments:
        assert fragment in message, (fragment, message)


def test_missing_series_and_bad_options(tmp_path):
    with pytest.raises(lwrad.InputError, match="no files"):
        read_trajectory(tmp_path / "none_%T.h5")
    path = tmp_path / "ok.h5"
    write_series(path, n=5)
    with pytest.raises(lwrad.InputError, match="no particle with id 5"):
        read_trajectory(path, particle_id=5)
    with pytest.raises(lwrad.InputError, match="unknown option"):
        read_trajectory(path, reference_energy=1.0)
    with pytest.raises(lwrad.InputError, match="particle"):
        read_trajectory(path, particle="proton")  # the file's mass record says electron


def arc_trajectory(n=31, x0=0.0):
    t = times(n)
    r, u = exact(t, x0)
    gamma = np.full(n, GAMMA)
    return lwrad.Trajectory(t, r, u / gamma[:, None], gamma=gamma)


@pytest.mark.parametrize("name", ["single.h5", "single_%T.h5", "single.json"])
def test_writer_round_trip(tmp_path, name):
    tr = arc_trajectory()
    write_trajectory(tr, tmp_path / name, format="openpmd")
    back = read_trajectory(tmp_path / name, format="openpmd")
    np.testing.assert_array_equal(back.t, tr.t)
    np.testing.assert_array_equal(back.r, tr.r)
    # momentum stored as u = γβ with unitSI = m c: γ = sqrt(1 + u²) comes back to an ulp or two
    np.testing.assert_allclose(back.gamma, tr.gamma, rtol=4e-16)
    np.testing.assert_allclose(back.beta, tr.beta, rtol=0, atol=4e-16)
    # β̇ is not stored; the reader's spline derivative matches β² c/ρ to 1e-6 relative at 31 samples
    np.testing.assert_allclose(np.linalg.norm(back.beta_dot, axis=1), SPEED**2 * c / RHO, rtol=1e-6)


def test_writer_bunch_and_overwrite(tmp_path):
    bunch = lwrad.Bunch([arc_trajectory(x0=x) for x in X0], weights=WEIGHTS)
    path = write_trajectory(bunch, tmp_path / "b_%T.h5")
    back = read_trajectory(path)
    np.testing.assert_array_equal(back.weights, WEIGHTS)
    for a, b in zip(back, bunch, strict=True):
        np.testing.assert_array_equal(a.r, b.r)
    with pytest.raises(lwrad.InputError, match="exists"):
        write_trajectory(bunch, tmp_path / "b_%T.h5")
    write_trajectory(bunch, tmp_path / "b_%T.h5", overwrite=True)
    assert not [f for f in os.listdir(tmp_path) if f.startswith(".")]  # no temporary left
    uneven = lwrad.Bunch([arc_trajectory(21), arc_trajectory(31)])
    with pytest.raises(lwrad.InputError, match="time"):
        write_trajectory(uneven, tmp_path / "u.h5", format="openpmd")

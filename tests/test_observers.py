"""Observers: grids, chunks (take), plain-data round trips and apertures."""

import numpy as np
import pytest

from lwrad.errors import InputError
from lwrad.observers import (
    AngularGrid,
    CircularAperture,
    Points,
    RectangularAperture,
    Screen,
    observer_from_dict,
)


def test_angular_grid_directions_are_unit_and_row_major():
    obs = AngularGrid(np.linspace(-1e-3, 1e-3, 5), [-2e-4, 0.0, 2e-4])
    assert obs.shape == (3, 5) and obs.n_pixels == 15 and obs.kind == "angular"
    n = obs.directions()
    np.testing.assert_allclose(np.linalg.norm(n, axis=1), 1.0, rtol=0, atol=1e-15)
    # pixel (iy=2, ix=4) is flat index 14: tangent-plane angles (θx, θy) = n_xy / n_z
    np.testing.assert_allclose(n[14, :2] / n[14, 2], [1e-3, 2e-4], rtol=1e-14)
    assert set(obs.axes()) == {"theta_x", "theta_y"}


def test_take_keeps_envelope_and_kind():
    obs = Screen(15.0, np.linspace(-1e-3, 1e-3, 4), np.linspace(-2e-3, 2e-3, 3))
    part = obs.take([1, 5, 11])
    assert part.kind == "screen" and part.shape == (1, 3) and part.distance == 15.0
    assert part.envelope == obs.envelope  # sampling decisions are the full grid's
    np.testing.assert_array_equal(part.points(), obs.points()[[1, 5, 11]])
    again = part.take([2])
    np.testing.assert_array_equal(again.points(), obs.points()[[11]])
    assert not part.is_grid and obs.is_grid


@pytest.mark.parametrize(
    "obs",
    [
        AngularGrid([0.0, 1e-4], [2e-4]),
        Screen(20.0, [0.0, 1e-3], [0.0]),
        Screen(20.0, [0.0, 1e-3], [0.0, 2e-3]).take([3, 0]),
        Points([[0, 0, 1.0], [1e-3, 0, 2.0]]),
    ],
)
def test_plain_data_round_trip(obs):
    d = obs.to_dict()
    back = observer_from_dict(d)
    assert back == obs
    assert type(obs).from_dict(d) == obs


def test_bad_observers():
    with pytest.raises(InputError):
        AngularGrid([], [0.0])  # empty grid
    with pytest.raises(InputError):
        Screen(np.nan, 0.0, 0.0)
    with pytest.raises(InputError):
        AngularGrid([[0.0, 1.0]], 0.0)  # 2-D axis
    with pytest.raises(InputError):
        Points(np.zeros((2, 2)))
    with pytest.raises(InputError):
        AngularGrid(0.0, 0.0).take([1])
    with pytest.raises(InputError):
        observer_from_dict({"kind": "sphere"})


def test_aperture_cell_fractions():
    # cells [0, 1] × [0, 1]: a rectangle over half of x and all of y covers one half
    one = np.array([0.0])
    full = np.array([1.0])
    rect = RectangularAperture(-1.0, 0.5, -5.0, 5.0)
    assert rect.fraction(one, full, one, full)[0] == pytest.approx(0.5, abs=1e-15)
    # a disc of radius 1 centred on a corner covers π/4 of the unit cell (16×16 sub-cells:
    # the sub-sampling error of the quarter-circle area is below 2 %, common practice, no source)
    disc = CircularAperture(1.0, center=(0.0, 0.0))
    assert disc.fraction(one, full, one, full)[0] == pytest.approx(np.pi / 4, rel=0.02)
    with pytest.raises(InputError):
        RectangularAperture(1.0, 0.0, 0.0, 1.0)
    with pytest.raises(InputError):
        CircularAperture(-1.0)

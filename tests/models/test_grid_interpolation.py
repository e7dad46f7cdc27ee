"""Trilinear grid interpolation against scipy's RegularGridInterpolator (reference
library), on even and uneven, periodic and bounded axes."""
import numpy as np
import pytest
from scipy.interpolate import RegularGridInterpolator

from uvdose.models.grid_interpolation import GridAxis, TrilinearGrid

RNG = np.random.default_rng(20260610)


def _scipy_reference(axes, values, points):
    """scipy on the same grid with periodic axes padded by their first slice and the
    points wrapped or clamped as TrilinearGrid documents."""
    nodes, wrapped = [], []
    for dim, (axis, x) in enumerate(zip(axes, points)):
        if axis.period is None:
            nodes.append(axis.nodes)
            wrapped.append(np.clip(x, axis.nodes[0], axis.nodes[-1]))
        else:
            nodes.append(np.append(axis.nodes, axis.nodes[0] + axis.period))
            values = np.concatenate([values, values.take([0], axis=dim)], axis=dim)
            wrapped.append(axis.nodes[0] + np.mod(x - axis.nodes[0], axis.period))
    return RegularGridInterpolator(nodes, values)(np.column_stack(wrapped))


@pytest.mark.parametrize("dtype", [np.float32, np.float64])
@pytest.mark.parametrize("even", [True, False])
def test_matches_scipy_on_periodic_and_bounded_axes(dtype, even):
    if even:
        day = np.arange(1.0, 366.0, 5.0)
        lat = np.arange(-88.75, 90.0, 2.5)
        lon = np.arange(-177.5, 180.0, 5.0)
    else:
        day = np.sort(RNG.choice(np.arange(1.0, 365.0), 40, replace=False))
        lat = np.sort(RNG.uniform(-89.0, 89.0, 30))
        lon = np.sort(RNG.uniform(-180.0, 179.0, 50))
    axes = (GridAxis(day, 365.0), GridAxis(lat), GridAxis(lon, 360.0))
    values = RNG.uniform(200.0, 450.0, (day.size, lat.size, lon.size)).astype(dtype)
    n = 20_000
    points = (RNG.uniform(-400.0, 800.0, n), RNG.uniform(-90.0, 90.0, n),
              RNG.uniform(-540.0, 720.0, n))
    got = TrilinearGrid(axes, values).interpolate(*points)
    want = _scipy_reference(axes, values.astype(float), points)
    assert got.dtype == np.float64
    assert np.max(np.abs(got - want)) < 1e-10  # DU: rounding only


def test_node_values_come_back_exactly_and_bounded_axes_hold_their_ends():
    time = np.array([0.0, 10.0, 30.0])
    lat = np.array([40.0, 42.5, 45.0, 47.5])
    lon = np.array([-10.0, -5.0, 0.0, 2.5])
    values = RNG.uniform(50.0, 700.0, (3, 4, 4))
    grid = TrilinearGrid((GridAxis(time), GridAxis(lat), GridAxis(lon)), values)
    k, j, i = (a.ravel() for a in np.meshgrid(range(3), range(4), range(4), indexing="ij"))
    assert np.array_equal(grid.interpolate(time[k], lat[j], lon[i]), values[k, j, i])
    assert np.array_equal(grid.interpolate([-5.0, 99.0], [30.0, 60.0], [-20.0, 10.0]),
                          [values[0, 0, 0], values[-1, -1, -1]])


def test_a_periodic_axis_closes_the_circle():
    lon = np.arange(0.0, 360.0, 90.0)
    values = np.arange(8.0).reshape(1, 2, 4)
    grid = TrilinearGrid((GridAxis(np.array([0.0])), GridAxis(np.array([0.0, 1.0])),
                          GridAxis(lon, 360.0)), values)
    # Half-way from the last node (270°) to the first one a circle later (360° = 0°).
    assert grid.interpolate([0.0], [0.0], [315.0])[0] == pytest.approx(1.5)
    assert grid.interpolate([0.0], [0.0], [-45.0])[0] == pytest.approx(1.5)
    assert grid.interpolate([0.0], [0.0], [315.0 + 720.0])[0] == pytest.approx(1.5)


def test_bad_grids_are_refused():
    nodes = GridAxis(np.array([0.0, 1.0]))
    with pytest.raises(ValueError, match="do not match"):
        TrilinearGrid((nodes, nodes, nodes), np.zeros((2, 2, 3)))
    with pytest.raises(ValueError, match="strictly increasing"):
        TrilinearGrid((nodes, nodes, GridAxis(np.array([1.0, 0.0]))), np.zeros((2, 2, 2)))
    with pytest.raises(ValueError, match="less than its period"):
        TrilinearGrid((nodes, nodes, GridAxis(np.array([0.0, 360.0]), 360.0)), np.zeros((2, 2, 2)))

"""Mapping fields to the phase indicator c in [0, 1]."""

import warnings

import numpy as np
import pytest

from phasegauge.errors import (FieldNotFoundError, FieldShapeError, NonFiniteWarning, OptionError,
                               RangeWarning)
from phasegauge.model.indicator import make_indicator, map_to_indicator, parse_range
from phasegauge.io import StepFields
from phasegauge.meshgen import grid_mesh


def test_mapping_order_parameter_and_sides():
    phi = np.array([-1.0, 0.0, 1.0])
    assert np.allclose(map_to_indicator(phi, (-1, 1)), [0, 0.5, 1])
    assert np.allclose(map_to_indicator(phi, (-1, 1), "lower"), [1, 0.5, 0])
    # not clipped: overshoots stay visible to the boundedness check
    assert map_to_indicator(np.array([1.2]), (0, 1))[0] == pytest.approx(1.2)


@pytest.mark.parametrize("text,expected", [("-1,1", (-1.0, 1.0)), ("0, 1", (0.0, 1.0)), ((2, 5), (2.0, 5.0))])
def test_parse_range(text, expected):
    assert parse_range(text) == expected


@pytest.mark.parametrize("text", ["1", "a,b", "1,1", "0,inf"])
def test_parse_range_rejects(text):
    with pytest.raises(OptionError, match="range"):
        parse_range(text)


def test_point_and_cell_data_use_consistent_conversions():
    m = grid_mesh((4, 4), kind="triangle")
    phi = 2 * m.points[:, 0] - 1
    ind = make_indicator(m, StepFields(point_data={"phi": phi}), "phi", range=(-1, 1))
    assert ind.location == "point"
    assert np.allclose(ind.point, m.points[:, 0])
    assert np.allclose(ind.cell, m.cell_centroids[:, 0])  # linear field: corner mean = centroid value
    cell = make_indicator(m, StepFields(cell_data={"alpha": m.cell_centroids[:, 0]}), "alpha")
    assert cell.location == "cell" and np.allclose(cell.cell, m.cell_centroids[:, 0])
    assert cell.point.shape == (m.n_points,)


def test_nonfinite_counted_and_kept_out():
    m = grid_mesh((2, 2))
    alpha = np.array([0.0, np.nan, 1.0, np.inf])
    with pytest.warns(NonFiniteWarning, match="2 NaN or Inf"):
        ind = make_indicator(m, StepFields(cell_data={"alpha": alpha}), "alpha")
    assert ind.nonfinite == 2
    assert np.isnan(ind.cell[[1, 3]]).all()
    assert np.isfinite(ind.point).any()


def test_range_warning_for_order_parameter_mapped_as_fraction():
    m = grid_mesh((2, 2))
    phi = np.linspace(-1, 1, m.n_points)
    with pytest.warns(RangeWarning, match="--range -1,1; to compare, --range-a or --range-b for the run it is"):
        make_indicator(m, StepFields(point_data={"phi": phi}), "phi", range=(0, 1))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        make_indicator(m, StepFields(point_data={"phi": phi}), "phi", range=(-1, 1))


@pytest.mark.parametrize("low, high, suggested", [(1.69e-8, 100.0, "0,100"), (0.0, 99.97, "0,100"),
                                                  (1.7e-8, 99.9, "0,100"), (-1e-9, 100.0, "0,100"),
                                                  (0.0, 255.0, "0,255"), (300.0, 1000.0, "300,1000"),
                                                  (-3.456, 12.34, "-3.5,12.4")])
def test_range_warning_suggests_the_scale_not_the_extremes(low, high, suggested):
    # a percentage whose smallest value is a solver's round-off (1.69e-8): the scale is [0, 100]
    # (the mapping it gives is checked by hand: c = value / 100 at the two ends)
    m = grid_mesh((2, 2))
    values = np.linspace(low, high, m.n_points)
    with pytest.warns(RangeWarning, match=f"for example --range {suggested};"):
        make_indicator(m, StepFields(point_data={"v": values}), "v", range=(0, 1))
    lo, hi = (float(x) for x in suggested.split(","))
    assert np.allclose(map_to_indicator(np.array([lo, hi]), (lo, hi)), [0.0, 1.0])


def test_field_errors_name_the_fix():
    m = grid_mesh((2, 2))
    fields = StepFields(point_data={"U": np.zeros((m.n_points, 3)), "p": np.zeros(m.n_points)})
    with pytest.raises(FieldNotFoundError, match="field 'phi' not found; fields there: U, p"):
        make_indicator(m, fields, "phi", where="a.vtu, step 0")
    with pytest.raises(FieldShapeError, match=r"3 components.*'U\[0\]'"):
        make_indicator(m, fields, "U")
    ind = make_indicator(m, fields, "U[1]")
    assert ind.point.shape == (m.n_points,)
    with pytest.raises(OptionError, match="phase"):
        make_indicator(m, fields, "p", phase="middle")


def test_a_field_on_cells_and_points_reads_the_cell_copy_by_default():
    # a field written twice under one name (cell values and an interpolated point copy):
    # integrals must see the solver's cell values; reference: the arrays handed in, compared exactly
    m = grid_mesh((4, 3), kind="quad")
    cell = np.linspace(0.0, 1.0, m.n_cells)
    point = np.full(m.n_points, 0.25)
    fields = StepFields(point_data={"alpha": point}, cell_data={"alpha": cell})
    c = make_indicator(m, fields, "alpha")
    assert c.location == "cell" and c.copies == ("cell", "point")
    assert np.array_equal(c.cell, cell)
    assert np.array_equal(c.point, m.cell_to_point(cell))  # contours: the reconstruction from the cells
    assert "cell data, the solver's own values" in c.source and "point copy exists too" in c.source
    p = make_indicator(m, fields, "alpha", field_location="point")
    assert p.location == "point" and np.array_equal(p.point, point)
    assert np.array_equal(p.cell, m.point_to_cell(point))
    assert "point data, as chosen" in p.source
    assert make_indicator(m, fields, "alpha", field_location="cell").location == "cell"


def test_field_location_errors_say_where_the_field_is():
    m = grid_mesh((3, 3), kind="quad")
    only_points = StepFields(point_data={"c": np.zeros(m.n_points)})
    with pytest.raises(FieldNotFoundError, match="no cell data here .*on the points only"):
        make_indicator(m, only_points, "c", field_location="cell")
    assert make_indicator(m, only_points, "c").source == "'c': point data"
    with pytest.raises(OptionError, match="field location must be 'cell' or 'point'"):
        make_indicator(m, only_points, "c", field_location="faces")


def test_old_range_keyword_warns_and_gives_the_same_indicator():
    from phasegauge.errors import OldNameWarning, OptionError

    m = grid_mesh((4, 4), kind="quad")
    phi = np.linspace(-1, 1, m.n_points)
    fields = StepFields(point_data={"phi": phi})
    new = make_indicator(m, fields, "phi", range=(-1, 1))
    with pytest.warns(OldNameWarning, match="make_indicator\\(\\): 'value_range' is the old name of 'range'"):
        old = make_indicator(m, fields, "phi", value_range=(-1, 1))
    np.testing.assert_array_equal(old.point, new.point)
    assert new.range == (-1.0, 1.0)
    with pytest.warns(OldNameWarning, match="map_to_indicator"):
        np.testing.assert_array_equal(map_to_indicator(phi, value_range=(-1, 1)), map_to_indicator(phi, range=(-1, 1)))
    with pytest.raises(OptionError, match="got 'range' and its old name 'value_range'"):
        make_indicator(m, fields, "phi", range=(-1, 1), value_range=(-1, 1))
    with pytest.raises(OptionError, match="no option 'rang'; did you mean 'range'"):
        make_indicator(m, fields, "phi", rang=(-1, 1))

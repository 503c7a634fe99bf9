"""One set of field checks for every analysis and the run (model/fields.py): same messages everywhere."""

import numpy as np
import pytest

from phasegauge.errors import FieldNotFoundError, FieldShapeError, OptionError
from phasegauge.io import StepFields
from phasegauge.meshgen import grid_mesh
from phasegauge.model.fields import (cell_values, field_location, named_field, vector_field, vector_values,
                                     velocity_name)
from phasegauge.model.indicator import make_indicator


def test_named_field_lists_the_fields_there():
    fields = StepFields(point_data={"p": np.zeros(4)}, cell_data={"c": np.zeros(2), "p": np.ones(2)})
    assert named_field(fields, "p")[1] == "point"
    assert named_field(fields, "p", order=("cell", "point"))[1] == "cell"
    with pytest.raises(FieldNotFoundError, match="velocity field 'U' not found; fields there: c, p"):
        named_field(fields, "U", role="velocity field", where="s.vtu, step 0")


def test_vector_field_pads_two_components_and_refuses_scalars():
    fields = StepFields(cell_data={"U": np.ones((3, 2)), "c": np.zeros(3)})
    values, location = vector_field(fields, "U")
    assert location == "cell" and values.shape == (3, 3) and not values[:, 2].any()
    with pytest.raises(FieldShapeError, match="velocity field 'c' must have 2 or 3 components"):
        vector_field(fields, "c")


def test_velocity_name_keeps_one_text_for_the_components():
    assert velocity_name(None) is None and velocity_name("U") == "U"
    assert velocity_name(("u.x", "u.y")) == velocity_name(["u.x", "u.y"]) == velocity_name(" u.x , u.y") == "u.x,u.y"
    assert velocity_name(["U"]) == "U"
    for bad in ("u.x,", "a,b,c,d", ("u.x", 3)):
        with pytest.raises(OptionError, match="velocity"):
            velocity_name(bad)


def test_vector_field_stacks_scalar_components_in_the_order_named():
    fields = StepFields(cell_data={"u.x": np.full(3, 1.0), "u.y": np.full((3, 1), 2.0), "w": np.full(3, 3.0)},
                        point_data={"u.x": np.zeros(5), "u.y": np.zeros(5), "P": np.zeros((5, 3))})
    values, location = vector_field(fields, "u.x,u.y")  # cells where each has a copy on both
    assert location == "cell" and values.tolist() == [[1.0, 2.0, 0.0]] * 3
    values, location = vector_field(fields, "u.y,w,u.x", dimension=3)
    assert location == "cell" and values.tolist() == [[2.0, 3.0, 1.0]] * 3
    assert vector_field(fields, "u.x,u.y,w", dimension=2)[0].tolist() == [[1.0, 2.0, 3.0]] * 3  # a slab's three
    values, _ = vector_field(fields, "u.x,u.y", plane_axes=(0, 2))  # a 2D mesh in the x-z plane
    assert values.tolist() == [[1.0, 0.0, 2.0]] * 3
    with pytest.raises(FieldShapeError, match=r"component 'P' must be a scalar field, found shape \(5, 3\)"):
        vector_field(fields, "u.x,P")
    with pytest.raises(FieldNotFoundError, match=r"velocity field 'u.x,v': component 'v' not found; fields there"):
        vector_field(fields, "u.x,v")


def test_array_checks_say_what_shape_was_expected():
    mesh = grid_mesh((3, 2), kind="quad")  # 6 cells, 12 points
    assert field_location(mesh, np.zeros(12), "c")[1] == "point"
    assert field_location(mesh, np.zeros(6), "c")[1] == "cell"
    with pytest.raises(OptionError, match=r"one value per point \(12\) or per cell \(6\)"):
        field_location(mesh, np.zeros(7), "c")
    with pytest.raises(OptionError, match=r"c must have shape \(6,\): one value per cell \(6\)"):
        cell_values(mesh, np.zeros(12))
    with pytest.raises(OptionError, match=r"velocity must have shape \(6, 2\) or \(6, 3\)"):
        vector_values(mesh, np.zeros((6, 4)), "velocity", "cell")
    fields = StepFields(point_data={"phi": np.linspace(0, 1, 12)})
    ind = make_indicator(mesh, fields, "phi")
    np.testing.assert_array_equal(cell_values(mesh, ind), ind.cell)
    assert field_location(mesh, ind, "c")[1] == "point"

"""A folder holding a 'time,path' listing beside its files uses it for order and times.

Outside check: the times written in the listing by hand (not read from the files) and the
order they give, against the files' names in reverse.
"""

import numpy as np

from phasegauge.io import Series
from phasegauge.io.describe import describe_series, format_description
from phasegauge.meshgen import grid_mesh, to_meshio


def _folder(tmp_path, listing_text=None, extra=None):
    folder = tmp_path / "run"
    folder.mkdir()
    mesh = grid_mesh((4, 4))
    for i in range(3):
        to_meshio(mesh, point_data={"c": np.full(mesh.n_points, 0.1 * i)}).write(str(folder / f"out_{i}.vtu"))
    if listing_text is not None:
        (folder / "times.csv").write_text(listing_text)
    if extra is not None:
        (folder / "probes.csv").write_text(extra)
    return str(folder)


def test_folder_listing_gives_order_and_times(tmp_path):
    folder = _folder(tmp_path, "time,path\n0.5,out_2.vtu\n1.25,out_1.vtu\n2.0,out_0.vtu\n",
                     extra="name,x,y\np,0.5,0.5\n")
    series = Series(folder)
    assert [s.time for s in series.steps] == [0.5, 1.25, 2.0]
    assert [s.path.rsplit("_", 1)[1] for s in series.steps] == ["2.vtu", "1.vtu", "0.vtu"]
    assert series.time_origins == ["listing"] or "listing" in "+".join(series.time_origins)
    desc = describe_series(folder)
    assert desc["listing_file"].endswith("times.csv")
    assert "step listing times.csv gives the steps' order and times" in format_description(desc)


def test_folder_without_listing_or_with_other_csv_is_unchanged(tmp_path):
    folder = _folder(tmp_path, extra="name,x,y\np,0.5,0.5\n")
    series = Series(folder)
    assert series.listing_file is None
    assert [s.path.rsplit("_", 1)[1] for s in series.steps] == ["0.vtu", "1.vtu", "2.vtu"]


def test_folder_listing_naming_some_files_warns_of_the_others(tmp_path):
    # regression: the files the listing leaves out were dropped without a word
    import warnings

    folder = _folder(tmp_path, "time,path\n0.5,out_0.vtu\n1.0,out_2.vtu\n")
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        series = Series(folder)
    assert [s.time for s in series.steps] == [0.5, 1.0]
    texts = [str(w.message) for w in caught if "listing" in str(w.message)]
    assert len(texts) == 1 and "\n" not in texts[0], texts
    assert "1 mesh file in the folder is not in the step listing times.csv (out_1.vtu)" in texts[0], texts[0]
    assert "add it to the listing" in texts[0]
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # a listing naming every file warns of nothing
        (tmp_path / "all").mkdir()
        Series(_folder(tmp_path / "all", "time,path\n0,out_0.vtu\n1,out_1.vtu\n2,out_2.vtu\n"))


def test_patch_files_beside_listed_steps_are_no_missing_steps(tmp_path):
    # regression: a solver's boundary patches written beside the volume files (wall_0000.vtp, and
    # as .vtu files too) were named in the warning as steps the listing left out
    import warnings

    import meshio
    import pyvista

    folder = tmp_path / "run"
    folder.mkdir()
    mesh = grid_mesh((3, 3))
    for i in range(4):
        to_meshio(mesh, point_data={"c": np.full(mesh.n_points, 0.1 * i)}).write(str(folder / f"out_{i:04d}.vtu"))
    corners = np.array([[0.0, 0.0, 0.0], [1.0, 0.0, 0.0], [0.0, 1.0, 0.0]])
    patch = meshio.Mesh(corners, [("triangle", [[0, 1, 2]])])
    for i in range(4):
        for name in (f"wall_{i:04d}.vtu", f"inlet_{i:04d}.vtk"):
            patch.write(str(folder / name))
        pyvista.PolyData(corners, faces=[3, 0, 1, 2]).save(str(folder / f"wall_{i:04d}.vtp"))
    (folder / "times.csv").write_text("time,path\n0.0,out_0000.vtu\n0.1,out_0001.vtu\n0.3,out_0003.vtu\n")
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        series = Series(str(folder))
    assert [s.time for s in series.steps] == [0.0, 0.1, 0.3]
    texts = [str(w.message) for w in caught if "listing" in str(w.message)]
    assert len(texts) == 1, texts  # the step left out, named; no patch file
    assert "1 mesh file in the folder is not in the step listing times.csv (out_0002.vtu)" in texts[0], texts[0]
    (folder / "times.csv").write_text("time,path\n" + "".join(f"{0.1 * i},out_{i:04d}.vtu\n" for i in range(4)))
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # every step listed: the patch files beside them warn of nothing
        Series(str(folder))


def test_steps_named_by_time_left_out_of_the_listing_are_named(tmp_path):
    # regression: steps named by their time (c_0.500.vtu, c_1.250.vtu; sol_1.500e-01.vtu; t_1.vtu beside
    # t_0.5.vtu) differ in more than their last number, or in how their numbers are written; one left
    # out of the listing was passed over as if it were a patch file
    import warnings

    for stem, times in (("c_{:.3f}.vtu", (0.5, 1.25, 2.0)), ("sol_{:.3e}.vtu", (0.15, 2.5, 35.0)),
                        ("t_{:g}.vtu", (0.5, 1.0, 1.5))):
        folder = tmp_path / stem[:3]
        folder.mkdir()
        mesh = grid_mesh((3, 3))
        names = [stem.format(t) for t in times]
        for name in names:
            to_meshio(mesh, point_data={"c": np.full(mesh.n_points, 0.5)}).write(str(folder / name))
        (folder / "times.csv").write_text(f"time,path\n{times[0]},{names[0]}\n{times[2]},{names[2]}\n")
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            Series(str(folder))
        texts = [str(w.message) for w in caught if "listing" in str(w.message)]
        assert len(texts) == 1 and f"({names[1]})" in texts[0], texts

"""A compare run's reference table: every droplets.csv column of the largest droplet is checkable, a name
neither table has is refused before either run is measured, and the verdicts read back from the CSV.

Outside reference: an ellipse of area pi R^2 (R = 0.25) centred at x = 0.5 in the 1 x 2 box, rising at a
known speed (the geometry of Hysing et al. 2009, case 1): its centroid x is 0.5 and its equivalent
diameter 2R = 0.5 at every step (analytic), its mean velocity (0, V) as written.
"""

import html

import numpy as np
import pandas as pd
import pytest

from phasegauge.errors import OptionError
from phasegauge.meshgen import grid_mesh, to_meshio
from phasegauge.run.compare import RunSpec, compare_runs

TIMES = (0.0, 0.5, 1.0, 1.5)
R = 0.25


def _bubble(folder, nx=32, sub=8):
    """Exact cell fractions (sub x sub samples a cell) of an ellipse of area pi R^2 rising at 0.2 - 0.05 t."""
    folder.mkdir()
    mesh = grid_mesh((nx, 2 * nx), [(0, 1), (0, 2)], kind="quad")
    h = 1.0 / nx
    offsets = (np.arange(sub) + 0.5) / sub * h - 0.5 * h
    dx, dy = (a.ravel() for a in np.meshgrid(offsets, offsets))
    x = mesh.cell_centroids[:, :1] + dx
    y = mesh.cell_centroids[:, 1:2] + dy
    for k, t in enumerate(TIMES):
        aspect = 1.0 + 0.1 * t
        a, b = R * np.sqrt(aspect), R / np.sqrt(aspect)
        yc = 0.5 + 0.2 * t - 0.025 * t * t
        c = (((x - 0.5) / a) ** 2 + ((y - yc) / b) ** 2 < 1).mean(axis=1)
        u = np.zeros((mesh.n_cells, 3))
        u[:, 1] = 0.2 - 0.05 * t
        to_meshio(mesh, cell_data={"alpha": c, "U": u}).write(folder / f"b_{k}.vtu")
    (folder / "run.steps").write_text("".join(f"{t},b_{k}.vtu\n" for k, t in enumerate(TIMES)))
    return str(folder / "run.steps")


def test_droplet_columns_of_the_largest_droplet_are_checked(tmp_path):
    run = _bubble(tmp_path / "run")
    table = tmp_path / "ref.csv"
    table.write_text("quantity,time,value,tolerance,low,high,source\n"
                     "centroid_x,1.0,0.5,1e-9,,,symmetry\n"  # exact by symmetry (to round-off)
                     "equivalent_diameter,1.0,0.5,0.005,,,2R (our threshold: 1 % for the cells' sampling)\n"
                     "velocity_x,0.5,0.0,1e-12,,,as written\n"
                     "velocity_y,0.5,0.175,1e-9,,,0.2 - 0.05 t as written\n"
                     "centroid_y,9.0,1.0,0.1,,,after the run\n")
    out = tmp_path / "out"
    result = compare_runs(RunSpec(run, "alpha", velocity="U"), RunSpec(run, "alpha"), reference_table=str(table),
                          out=str(out))
    checks = result.reference_checks
    assert checks["verdict"].tolist() == ["pass"] * 4 + ["not_applicable"], checks
    back = pd.read_csv(out / "reference_checks.csv")  # pandas' default reading
    assert back["verdict"].tolist() == checks["verdict"].tolist()
    assert back["note"].iloc[-1] == "the run's outputs of centroid_y (t = 0 to 1.5) do not reach t = 9"
    page = html.unescape((out / "report.html").read_text())
    assert "centroid_y not applicable: the run's outputs of centroid_y" in page


def test_a_column_neither_table_has_is_refused_before_measuring(tmp_path, monkeypatch):
    import phasegauge.run.measure as measure_module

    measured = []
    monkeypatch.setattr(measure_module, "measure", lambda *a, **k: measured.append(a[0]))
    run = _bubble(tmp_path / "run")
    table = tmp_path / "ref.csv"
    table.write_text("quantity,time,value,tolerance\ncentroid_x,1.0,0.5,0.01\nmax:bubble_speed,,0.24,0.01\n")
    with pytest.raises(OptionError, match="names 'bubble_speed', neither a steps.csv column nor a droplets.csv one"):
        compare_runs(RunSpec(run, "alpha"), RunSpec(run, "alpha"), reference_table=str(table),
                     out=str(tmp_path / "out"))
    assert measured == [] and not (tmp_path / "out").exists()
    # the mixing length's status is a steps.csv column of words: no number to check (pandas would not read
    # 'reached' as a float)
    table.write_text("quantity,time,value,tolerance\nmixing_length_status,1.0,0.5,0.01\n")
    with pytest.raises(OptionError, match="names 'mixing_length_status', a steps.csv column of words"):
        compare_runs(RunSpec(run, "alpha"), RunSpec(run, "alpha"), reference_table=str(table))
    table.write_text("quantity,time,value,tolerance,low\nmax:velocity_y,,0.24,0.01,0.23\n")
    with pytest.raises(OptionError, match="row 1 \\(max:velocity_y\\): only one of low and high given") as err:
        compare_runs(RunSpec(run, "alpha"), RunSpec(run, "alpha"), reference_table=str(table))
    assert err.value.where == str(table) and measured == []


def test_the_known_steps_columns_are_the_ones_a_run_writes_and_the_readme_lists(tmp_path):
    import pathlib
    import re

    from phasegauge import measure
    from phasegauge.run._mixture import MIXTURE_COLUMNS, SOLUTE_COLUMNS
    from phasegauge.run.options import MORE_STEP_COLUMNS, STEP_COLUMNS

    mesh = grid_mesh((24, 24), kind="quad")
    x, y = mesh.cell_centroids[:, 0], mesh.cell_centroids[:, 1]
    u = np.zeros((mesh.n_cells, 3))
    u[:, 0] = 1.0
    for k in range(3):
        c = 0.5 * (1 - np.tanh((np.hypot(x - 0.4 - 0.05 * k, y - 0.5) - 0.2) / 0.03))
        to_meshio(mesh, cell_data={"alpha": c, "U": u}).write(tmp_path / f"s_{k}.vtu")
    (tmp_path / "run.steps").write_text("".join(f"{0.5 * k},s_{k}.vtu\n" for k in range(3)))
    with pytest.warns():
        result = measure(str(tmp_path / "run.steps"), "alpha", velocity="U", section_axis="x", section_count=4,
                         densities=(2.0, 1.0), coarsening=True, segregation_scale=True, contours=False)
    known = set(STEP_COLUMNS + MORE_STEP_COLUMNS + MIXTURE_COLUMNS + SOLUTE_COLUMNS)
    assert set(result.steps.columns) <= known, set(result.steps.columns) - known
    readme = (pathlib.Path(__file__).parents[2] / "README.md").read_text()
    table = readme.split("### steps.csv", 1)[1].split("\n\n", 2)[1]
    listed = set(re.findall(r"`([a-z0-9_]+)`", table)) | {"widest_x", "widest_y", "widest_z"}
    assert set(STEP_COLUMNS + MORE_STEP_COLUMNS) <= listed, set(STEP_COLUMNS + MORE_STEP_COLUMNS) - listed

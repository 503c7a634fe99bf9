"""Probes, lines and measured values in a measure run: tables, plots, warnings, command line."""

import os
import warnings

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner
from conftest import write_listing

from phasegauge import measure
from phasegauge.cli import main
from phasegauge.errors import InputError, MeshWarning, OptionError
from phasegauge.io import read_line_file, read_measured_file, read_probe_file
from phasegauge.meshgen import grid_mesh
from phasegauge.run.options import MeasureOptions

TIMES = (0.0, 0.5, 1.0)


def _field(x, y, t):
    return 0.2 + 0.3 * x + 0.4 * y + 0.1 * t  # linear in space and time, within [0, 1]


def _series(folder, *, kind="triangle", on="point", n=10):
    mesh = grid_mesh((n, n), kind=kind, jitter=0.2, seed=1)
    x, centre = mesh.points, mesh.cell_centroids  # a linear field's cell mean is its value at the centroid
    return write_listing(folder, ((t, f"s_{k}.vtu", mesh,
                                   {"f": _field(centre[:, 0], centre[:, 1], t)} if on != "point" else None,
                                   {"f": _field(x[:, 0], x[:, 1], t)} if on == "point" else None)
                                  for k, t in enumerate(TIMES)))


def _write(path, text):
    with open(path, "w") as f:
        f.write(text)
    return str(path)


@pytest.mark.parametrize("kind", ["triangle", "quad", "polygon", "mixed"])
def test_probes_and_lines_exact_for_a_linear_field(tmp_path, kind):
    listing = _series(str(tmp_path), kind=kind)
    options = MeasureOptions(field="f", analyses=("conservation",),
                             probes=(("a", 0.25, 0.5, 0.0), ("b", 0.7, 0.1)),
                             lines=(("diag", 0.0, 0.0, 1.0, 1.0, 11),))
    result = measure(listing, options=options, out=tmp_path / "out", contours=False)
    probes = pd.read_csv(tmp_path / "out" / "probes.csv")
    assert list(probes.columns) == ["step", "time", "probe", "x", "y", "z", "value", "c"]
    assert len(probes) == 2 * len(TIMES)
    # analytic: the linear interpolant of a linear field is the field (point data)
    exact = _field(result.probes["x"], result.probes["y"], result.probes["time"])
    assert np.abs(result.probes["value"] - exact).max() <= 1e-12
    lines = result.lines
    assert list(lines.columns) == ["step", "time", "line", "distance", "x", "y", "z", "value", "c"]
    assert lines["distance"].max() == pytest.approx(np.sqrt(2))
    assert np.abs(lines["value"] - _field(lines["x"], lines["y"], lines["time"])).max() <= 1e-12
    for name in ("probe_histories.png", "line_profiles.png", "lines.csv"):
        assert (tmp_path / "out" / name).exists()


def test_cell_data_goes_through_the_indicator_point_values(tmp_path):
    # cell data: the point values are the indicator's least-squares linear fit, exact for a linear
    # field at points inside the mesh, so probes away from the boundary cells are exact too
    listing = _series(str(tmp_path), kind="quad", on="cell", n=10)
    probes = tuple((f"p{i}", x, y) for i, (x, y) in enumerate([(0.3, 0.3), (0.55, 0.42), (0.7, 0.8)]))
    result = measure(listing, options=MeasureOptions(field="f", analyses=("conservation",), probes=probes))
    p = result.probes
    assert np.abs(p["value"] - _field(p["x"], p["y"], p["time"])).max() <= 1e-12


def test_points_outside_the_mesh_named_in_one_warning(tmp_path):
    listing = _series(str(tmp_path))
    options = MeasureOptions(field="f", analyses=("conservation",),
                             probes=(("inside", 0.5, 0.5), ("far", 3.0, 0.5)),
                             lines=(("long", 0.0, 0.5, 2.0, 0.5, 5),))
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        result = measure(listing, options=options)
    texts = [str(w.message) for w in caught if issubclass(w.category, MeshWarning) and "outside" in str(w.message)]
    assert len(texts) == 1 and "far" in texts[0] and "line long (2 of 5 points)" in texts[0]
    far = result.probes[result.probes["probe"] == "far"]
    assert far["value"].isna().all()


def test_measured_values_give_validation_tables(tmp_path):
    listing = _series(str(tmp_path))
    # measured = exact + offsets: at t = 0.25 (between steps, interpolated linearly in time: exact here),
    # +0.01 and -0.03; a value without a time stands for every step with offset +0.02
    measured = _write(tmp_path / "m.csv", "x,y,value,time,uncertainty\n"
                      f"0.5,0.5,{_field(0.5, 0.5, 0.25) - 0.01},0.25,0.02\n"
                      f"0.2,0.6,{_field(0.2, 0.6, 0.25) + 0.03},0.25,0.02\n"
                      f"0.8,0.3,{_field(0.8, 0.3, 0.0) - 0.02},,\n")
    options = MeasureOptions(field="f", analyses=("conservation",), measured=read_measured_file(measured))
    result = measure(listing, options=options, out=tmp_path / "out", contours=False)
    table = pd.read_csv(tmp_path / "out" / "validation.csv")
    assert list(table.columns) == ["step", "time", "x", "y", "z", "measured", "simulated", "difference", "uncertainty",
                                   "within_uncertainty", "every_step"]
    assert len(table) == 2 + len(TIMES)
    # t = 0.25 lies between steps 0 and 1: no step; the untimed value is compared at every step
    assert table["step"].isna().sum() == 2
    assert table.loc[table["x"] == 0.8, "step"].tolist() == list(range(len(TIMES)))
    assert list(pd.read_csv(tmp_path / "out" / "validation_summary.csv").columns[:3]) == ["step", "time", "scope"]
    summary = result.validation_summary
    at = summary[summary["time"] == 0.25].iloc[0]
    # analytic figures of the offsets +0.01 and -0.03
    assert at["rms_error"] == pytest.approx(np.sqrt((0.01 ** 2 + 0.03 ** 2) / 2), abs=1e-12)
    assert at["bias"] == pytest.approx(-0.01, abs=1e-12)
    assert at["largest_error"] == pytest.approx(0.03, abs=1e-12)
    assert at["within_uncertainty"] == pytest.approx(0.5)
    untimed = result.validation[result.validation["x"] == 0.8]
    # the untimed value was measured at t = 0; the field rises by 0.1 t, so the difference is 0.02 + 0.1 t
    assert untimed["difference"].to_numpy() == pytest.approx(0.02 + 0.1 * np.array(TIMES), abs=1e-12)
    overall = summary.iloc[-1]
    # each measured value once: the two timed ones and the untimed one at the last step
    assert overall["scope"] == "overall" and overall["points"] == 3
    assert (tmp_path / "out" / "validation_overlay.png").exists()


def test_cli_reads_the_three_files(tmp_path):
    listing = _series(str(tmp_path))
    probes = _write(tmp_path / "p.csv", "name,x,y\nmid,0.5,0.5\n")
    lines = _write(tmp_path / "l.csv", "name,x0,y0,x1,y1,points\nacross,0,0.5,1,0.5,21\n")
    measured = _write(tmp_path / "m.csv", "x,y,value\n0.5,0.5,0.55\n")
    out = tmp_path / "out"
    res = CliRunner().invoke(main, ["measure", listing, "--field", "f", "--analyses", "conservation", "-o", str(out),
                                    "-q", "--probes", probes, "--lines", lines, "--measured", measured])
    assert res.exit_code == 0, res.output
    assert len(pd.read_csv(out / "lines.csv")) == 21 * len(TIMES)
    bad = _write(tmp_path / "bad.csv", "name,x\nmid,0.5\n")
    res = CliRunner().invoke(main, ["measure", listing, "--field", "f", "-o", str(tmp_path / "o2"), "--probes", bad])
    assert res.exit_code == 2 and "name, x, y" in res.output


def test_file_and_option_errors(tmp_path):
    with pytest.raises(InputError, match="repeat"):
        read_probe_file(_write(tmp_path / "a.csv", "name,x,y\na,0,0\na,1,1\n"))
    with pytest.raises(InputError, match="at least 2 points"):
        read_line_file(_write(tmp_path / "b.csv", "name,x0,y0,x1,y1,points\nl,0,0,1,1,1\n"))
    with pytest.raises(InputError, match="negative"):
        read_measured_file(_write(tmp_path / "c.csv", "x,y,value,uncertainty\n0,0,1,-1\n"))
    with pytest.raises(OptionError, match="finite"):
        MeasureOptions(field="f", probes=(("a", float("nan"), 0.0),))
    (probe,) = read_probe_file(_write(tmp_path / "d.csv", "name, x, y\n# a comment\nq,1,2\n"))
    assert probe[:3] == ("q", 1.0, 2.0) and np.isnan(probe[3])  # z not given (a mesh in the x-y plane takes 0)


def test_recipe_validation_table(tmp_path):
    from phasegauge.recipes import load_recipe, run_recipe

    listing = _series(str(tmp_path))
    _write(tmp_path / "p.csv", "name,x,y\nmid,0.5,0.5\n")
    _write(tmp_path / "l.csv", "name,x0,y0,x1,y1,points\nacross,0,0.5,1,0.5,5\n")
    _write(tmp_path / "m.csv", "x,y,value\n0.5,0.5,0.55\n")
    recipe = _write(tmp_path / "r.toml", f'[input]\npath = "{os.path.basename(listing)}"\nfield = "f"\n'
                    '[run]\nanalyses = ["conservation"]\n[output]\nfolder = "out"\n'
                    '[validation]\nprobes = "p.csv"\nlines = "l.csv"\nmeasured = "m.csv"\n')
    result = run_recipe(recipe)
    assert len(result.probes) == len(TIMES) and len(result.lines) == 5 * len(TIMES)
    assert (tmp_path / "out" / "validation.csv").exists()
    typo = _write(tmp_path / "t.toml", f'[input]\npath = "{os.path.basename(listing)}"\nfield = "f"\n'
                  '[output]\nfolder = "out2"\n[validation]\nprobe = "p.csv"\n')
    with pytest.raises(OptionError, match="did you mean 'probes'"):
        load_recipe(typo)
    missing = _write(tmp_path / "u.toml", f'[input]\npath = "{os.path.basename(listing)}"\nfield = "f"\n'
                     '[output]\nfolder = "out3"\n[validation]\nprobes = "nope.csv"\n')
    with pytest.raises(FileNotFoundError, match="probe file not found"):
        load_recipe(missing)

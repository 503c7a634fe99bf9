"""Campaigns: a recipe with [[runs]], campaign.csv against the parameter, resume, and an analytic trend."""

import os

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner

from phasegauge.cli import main
from phasegauge.errors import OptionError
from phasegauge.meshgen import grid_mesh, to_meshio
from phasegauge.recipes import load_recipe, run_recipe

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
SAMPLES = os.path.join(ROOT, "sample_fields")

WIDTH = 1.0
TARGET = 0.9
# Plug flow of two equal streams (c = 1 below the middle, 0 above) mixing by diffusion across a channel of
# width w: c = 1/2 + sum over odd n of a_n cos(n pi y / w) exp(-n^2 pi^2 x / (Pe w)), a_n = 2 sin(n pi / 2) / (n pi),
# Pe = U w / D (the series solution of U dc/dx = D d2c/dy2 with closed walls). Far downstream (x > 0.05 Pe w) only
# n = 1 counts: the standard deviation over a section is (sqrt(2) / pi) exp(-pi^2 x / (Pe w)), and the mixing
# index 1 - sqrt(var / (m (1 - m))) = 1 - 2 sigma (m = 1/2) reaches M at
#     L = ln(2 sqrt(2) / (pi (1 - M))) / pi^2 * Pe w  ->  0.22266 Pe w for M = 0.9
# (the n = 3 term there is exp(-8 * 2.2) smaller: negligible). Source: the solution of the diffusion equation
# by separation of variables, e.g. Crank, The Mathematics of Diffusion, 2nd ed. 1975, ch. 4 (from memory),
# with x / U in place of the time (plug flow).
PREFACTOR = np.log(2 * np.sqrt(2) / (np.pi * (1 - TARGET))) / np.pi ** 2


def _channel(folder, peclet, *, nx=120, ny=40):
    length = 0.35 * peclet * WIDTH
    mesh = grid_mesh((nx, ny), bounds=[(0.0, length), (0.0, WIDTH)], kind="quad")
    x, y = mesh.points[:, 0], mesh.points[:, 1]
    c = np.full(len(x), 0.5)
    for n in range(1, 80, 2):
        a = 2 * np.sin(n * np.pi / 2) / (n * np.pi)
        c += a * np.cos(n * np.pi * y / WIDTH) * np.exp(-n * n * np.pi ** 2 * x / (peclet * WIDTH))
    velocity = np.column_stack([np.ones(len(x)), np.zeros(len(x)), np.zeros(len(x))])
    path = os.path.join(folder, f"pe_{peclet:g}.vtu")
    to_meshio(mesh, point_data={"c": np.clip(c, 0, 1), "U": velocity}).write(path)
    return os.path.basename(path)


def _recipe(folder, pecletes, extra=""):
    runs = "".join(f'[[runs]]\npath = "{_channel(folder, pe)}"\nparameter = {pe}\nlabel = "pe{pe:g}"\n'
                   for pe in pecletes)
    text = ('[input]\nfield = "c"\nvelocity = "U"\n[mixing]\nsection_axis = "x"\nsection_count = 80\n'
            f'mixing_target = {TARGET}\n[run]\nanalyses = ["mixing", "conservation"]\n[output]\nfolder = "camp"\n'
            '[interface]\ncontours = false\n[campaign]\nparameter = "Peclet"\nunit = "-"\n' + extra + runs)
    path = os.path.join(folder, "campaign.toml")
    with open(path, "w") as f:
        f.write(text)
    return path


def test_mixing_length_grows_as_peclet_times_width(tmp_path):
    recipe = _recipe(str(tmp_path), (20, 40, 80))
    result = run_recipe(recipe)
    table = pd.read_csv(tmp_path / "camp" / "campaign.csv")
    assert list(table["parameter"]) == [20, 40, 80]
    assert list(table["folder"]) == ["run_pe20", "run_pe40", "run_pe80"]
    pe_w = table["parameter"].to_numpy() * WIDTH
    length = table["mixing_length"].to_numpy()
    slope = float(pe_w @ length / (pe_w @ pe_w))  # least squares through the origin
    # 2e-3: the field is linear on each cell's split, and the mixing index is interpolated linearly between
    # the 80 sections (each run's channel is 0.35 Pe w long, so the sections sit alike in x / (Pe w))
    assert slope == pytest.approx(PREFACTOR, rel=2e-3)
    assert (tmp_path / "camp" / "campaign.png").exists()
    assert (tmp_path / "camp" / "run_pe40" / "steps.csv").exists()
    assert len(result.runs) == 3


def test_resume_reuses_finished_runs_and_cli_summary(tmp_path):
    recipe = _recipe(str(tmp_path), (20, 40))
    runner = CliRunner()
    first = runner.invoke(main, ["run", recipe, "-q"])
    assert first.exit_code == 0, first.output
    again = runner.invoke(main, ["run", recipe])
    assert again.exit_code == 2 and "--overwrite" in again.output
    resumed = runner.invoke(main, ["run", recipe, "--resume"])
    assert resumed.exit_code == 0 and "measured 2 runs" in resumed.output
    before = pd.read_csv(tmp_path / "camp" / "campaign.csv")
    result = run_recipe(recipe, resume=True)
    assert result.runs == [None, None]  # both taken from their finished folders
    assert np.allclose(result.table["mixing_length"], before["mixing_length"])


def test_campaign_recipe_errors(tmp_path):
    base = str(tmp_path)
    bad = _recipe(base, (20,), extra="")
    text = open(bad).read().replace("parameter = 20", 'parameter = "fast"')
    with open(bad, "w") as f:
        f.write(text)
    with pytest.raises(OptionError, match="parameter must be a number"):
        load_recipe(bad)
    text = text.replace('parameter = "fast"', "paramter = 20")
    with open(bad, "w") as f:
        f.write(text)
    with pytest.raises(OptionError, match="did you mean 'parameter'"):
        load_recipe(bad)
    with_path = _recipe(base, (20,))
    text = open(with_path).read().replace('[input]\n', '[input]\npath = "x.vtu"\n')
    with open(with_path, "w") as f:
        f.write(text)
    with pytest.raises(OptionError, match="has no path"):
        load_recipe(with_path)


# ---------------------------------------------------------------- runs side by side, resume
def _tables(folder):
    """campaign.csv and every run's steps.csv and profiles.csv of a campaign folder, as DataFrames."""
    out = {"campaign.csv": pd.read_csv(folder / "campaign.csv")}
    for run in sorted(out["campaign.csv"]["folder"]):
        for name in ("steps.csv", "profiles.csv"):
            out[f"{run}/{name}"] = pd.read_csv(folder / run / name)
    return out


def _assert_same_tables(a, b):
    assert sorted(a) == sorted(b)
    for name in a:
        pd.testing.assert_frame_equal(a[name], b[name], check_exact=True, obj=name)


def test_runs_side_by_side_give_the_tables_of_runs_one_after_another(tmp_path, capsys):
    recipe = _recipe(str(tmp_path), (20, 40, 80))
    serial = run_recipe(recipe, workers=1, progress=True)
    assert "run pe40 (2/3)" in capsys.readouterr().err  # the progress line names the run
    os.rename(tmp_path / "camp", tmp_path / "serial")
    side = run_recipe(recipe, workers=2, progress=True)
    err = capsys.readouterr().err
    assert "runs (measuring pe20" in err and "runs 3/3" in err  # the line names the runs being measured
    assert all(r is not None and r.mesh is None for r in side.runs)
    _assert_same_tables(_tables(tmp_path / "serial"), _tables(tmp_path / "camp"))
    pd.testing.assert_frame_equal(serial.table, side.table, check_exact=True)
    for a, b in zip(serial.runs, side.runs):
        pd.testing.assert_frame_equal(a.steps, b.steps, check_exact=True)
    # the command line's -j is the same option
    cli = CliRunner().invoke(main, ["run", recipe, "-j", "2", "-q", "--overwrite"])
    assert cli.exit_code == 0 and "measured 3 runs" in cli.output, cli.output
    _assert_same_tables(_tables(tmp_path / "serial"), _tables(tmp_path / "camp"))


def _interrupt(folder):
    """Leave ``folder`` (a run's measure folder) as an interrupted run leaves it: marker 'running', no tables."""
    import json

    from phasegauge.report._files import RUN_MARKER

    marker = folder / RUN_MARKER
    state = json.loads(marker.read_text())
    marker.write_text(json.dumps({**state, "state": "running"}))
    for name in ("steps.csv", "profiles.csv", "report.html", "manifest.json"):
        (folder / name).unlink()


def test_resume_skips_finished_runs_and_finishes_interrupted_ones(tmp_path):
    recipe = _recipe(str(tmp_path), (20, 40, 80))
    text = open(recipe).read().replace('folder = "camp"\n', 'folder = "camp"\nkeep_cache = true\n')
    with open(recipe, "w") as f:
        f.write(text)
    first = run_recipe(recipe, workers=2)
    before = _tables(tmp_path / "camp")
    assert (tmp_path / "camp" / "run_pe40" / ".cache").is_dir()
    _interrupt(tmp_path / "camp" / "run_pe40")            # stopped after its steps were cached
    _interrupt(tmp_path / "camp" / "run_pe80")
    import shutil

    shutil.rmtree(tmp_path / "camp" / "run_pe80" / ".cache")  # stopped before any step finished
    (tmp_path / "camp" / "campaign.csv").unlink()
    refused = CliRunner().invoke(main, ["run", recipe, "-q"])
    assert refused.exit_code == 2 and "--resume" in refused.output
    resumed = run_recipe(recipe, resume=True, workers=2)
    assert resumed.runs[0] is None                        # taken from its finished folder
    assert resumed.runs[1] is not None and resumed.runs[2] is not None
    _assert_same_tables(before, _tables(tmp_path / "camp"))
    # a reused run's figures are read back from its steps.csv (10 significant digits)
    pd.testing.assert_frame_equal(first.table, resumed.table, check_exact=False, rtol=1e-9)
    # a run folder removed altogether is measured again; one after another as side by side
    shutil.rmtree(tmp_path / "camp" / "run_pe20")
    again = run_recipe(recipe, resume=True, workers=1)
    assert [r is None for r in again.runs] == [False, True, True]
    _assert_same_tables(before, _tables(tmp_path / "camp"))


def test_a_failed_run_keeps_the_finished_ones_for_resume(tmp_path):
    recipe = _recipe(str(tmp_path), (20, 40, 80))
    good = (tmp_path / "pe_80.vtu").read_bytes()
    (tmp_path / "pe_80.vtu").write_text("not a mesh")
    result = CliRunner().invoke(main, ["run", recipe, "-j", "2", "-q"])
    assert result.exit_code == 2, result.output
    assert "pe_80.vtu" in result.output
    assert (tmp_path / "camp" / "run_pe20" / "steps.csv").exists()  # finished runs stay
    (tmp_path / "pe_80.vtu").write_bytes(good)
    resumed = run_recipe(recipe, resume=True, workers=2)
    assert resumed.runs[0] is None or resumed.runs[1] is None      # at least one finished before the error
    assert list(pd.read_csv(tmp_path / "camp" / "campaign.csv")["run"]) == ["pe20", "pe40", "pe80"]


def test_a_run_whose_series_is_missing_is_refused_before_any_run(tmp_path):
    # the third run's file is gone: refused with its label before the first two are measured
    recipe = _recipe(str(tmp_path), (20, 40, 80))
    (tmp_path / "pe_80.vtu").unlink()
    result = CliRunner().invoke(main, ["run", recipe, "-q"])
    assert result.exit_code == 2, result.output
    assert "[[runs]] 'pe80'" in result.output and "pe_80.vtu" in result.output and "file not found" in result.output
    assert not (tmp_path / "camp").exists()


def test_a_resumed_campaign_does_not_look_for_a_finished_runs_series(tmp_path):
    # the finished runs' series moved away after the run: a resume keeps their tables and reads nothing
    recipe = _recipe(str(tmp_path), (20, 40))
    run_recipe(recipe)
    (tmp_path / "pe_20.vtu").rename(tmp_path / "archived.vtu")
    resumed = run_recipe(recipe, resume=True)
    assert list(resumed.table["run"]) == ["pe20", "pe40"]


# ---------------------------------------------------------------- the shipped channel campaign
def test_channel_campaign_recipe_runs_on_the_sample(tmp_path):
    """recipes/channel_mixing.toml: one run per inlet flow rate of sample_fields/channel_mixing/."""
    path = os.path.join(ROOT, "recipes", "channel_mixing.toml")
    recipe = load_recipe(path)
    assert recipe["kind"] == "campaign" and recipe["campaign"]["parameter"] == "flow_rate"
    assert all(os.path.exists(r["path"]) for r in recipe["runs"])
    text = open(path).read().replace('"../sample_fields/', f'"{SAMPLES}/')
    text = text.replace('"../out/channel_mixing"', f'"{tmp_path}/o"')
    (tmp_path / "r.toml").write_text(text)
    res = CliRunner().invoke(main, ["run", str(tmp_path / "r.toml"), "--quiet", "-j", "2"])
    assert res.exit_code == 0, res.output
    table = pd.read_csv(tmp_path / "o" / "campaign.csv")
    flow_rate = table["parameter"].to_numpy()
    assert list(flow_rate) == [0.5, 1.0, 1.5, 2.0]
    # u(y) dc/dx = D d2c/dy2 with u = Q / H f(y): c depends on x D H / Q only, so at one diffusivity the
    # mixing length is proportional to the flow rate (the similarity of the equation; 1 % for the
    # piecewise-linear field on the triangles and the 41 sections)
    ratio = table["mixing_length"].to_numpy() / flow_rate
    assert np.all(np.isfinite(ratio)) and np.ptp(ratio) < 0.01 * ratio.mean()
    for run, q in zip(table["folder"], flow_rate):
        profiles = pd.read_csv(tmp_path / "o" / run / "profiles.csv")
        # the flow rate through every section is the parameter: int_0^H 6 U y (H - y) / H^2 dy = U H = Q
        # (0.2 %: the parabola linear on each triangle, stored as float32)
        assert np.allclose(profiles["flow_rate"], q, rtol=2e-3)
        assert (tmp_path / "o" / run / "mixing_profile.png").exists()
    assert (tmp_path / "o" / "campaign.png").exists()


def _drifting_series(folder, shift):
    """Three steps of a diffuse disc moving along x on triangles (VTU files with their time as field data)."""
    import meshio

    mesh = grid_mesh((24, 24), bounds=[(0.0, 1.0), (0.0, 1.0)], kind="triangle")
    os.makedirs(folder)
    for k in range(3):
        r = np.hypot(mesh.points[:, 0] - 0.3 - shift * k, mesh.points[:, 1] - 0.5)
        phi = np.tanh((0.2 - r) / 0.04)
        meshio.write(os.path.join(folder, f"disc_{k}.vtu"),
                     to_meshio(mesh, point_data={"phi": phi}, field_data={"TimeValue": np.array([0.1 * k])}))
    return folder


def test_spare_workers_go_to_the_runs(tmp_path):
    # 2 runs on 4 workers: side by side, each run's steps on 2 processes (a step worker forked inside a
    # campaign worker); the tables are those of one process
    runs = "".join(f'[[runs]]\npath = "{_drifting_series(str(tmp_path / f"s{k}"), shift)}"\nparameter = {shift}\n'
                   for k, shift in enumerate((0.05, 0.1)))
    recipe = tmp_path / "discs.toml"
    recipe.write_text('[input]\nfield = "phi"\nrange = [-1, 1]\n[run]\nanalyses = ["interface", "conservation"]\n'
                      '[interface]\ncontours = false\n[campaign]\nparameter = "speed"\n[output]\nfolder = "o"\n'
                      + runs)
    one = run_recipe(str(recipe), workers=1)
    os.rename(tmp_path / "o", tmp_path / "one")
    four = run_recipe(str(recipe), workers=4)
    assert [len(r.steps) for r in four.runs] == [3, 3]
    for a, b in zip(one.runs, four.runs):
        pd.testing.assert_frame_equal(a.steps, b.steps, check_exact=True)
    for name in ("campaign.csv", "run_000/steps.csv", "run_001/steps.csv"):
        assert (tmp_path / "one" / name).read_bytes() == (tmp_path / "o" / name).read_bytes(), name

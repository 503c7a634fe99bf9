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

WIDTH = 1.0
TARGET = 0.9
# Plug flow of two equal streams (c = 1 below the middle, 0 above) mixing by diffusion across a channel of
# width w: c = 1/2 + sum over odd n of a_n cos(n pi y / w) exp(-n^2 pi^2 x / (Pe w)), a_n = 2 sin(n pi / 2) / (n pi),
# Pe = U w / D (the series solution of U dc/dx = D d2c/dy2 with closed walls). Beyond the first metres only
# n = 1 counts: the standard deviation over a section is (sqrt(2) / pi) exp(-pi^2 x / (Pe w)), and the mixing
# index 1 - sqrt(var / (m (1 - m))) = 1 - 2 sigma (m = 1/2) reaches M at
#     L = ln(2 sqrt(2) / (pi (1 - M))) / pi^2 * Pe w  ->  0.22266 Pe w for M = 0.9
# (the n = 3 term there is exp(-8 * 2.2) smaller: negligible).
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

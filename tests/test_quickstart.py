"""The README's main command: the quick-start recipe on the shipped samples, and the samples command."""

import json
import os

import numpy as np
import pandas as pd
from click.testing import CliRunner

from phasegauge.cli import main

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


def test_quickstart_recipe_builds_the_report(tmp_path):
    text = open(os.path.join(ROOT, "recipes", "quickstart.toml")).read()
    text = text.replace('"../sample_fields/', f'"{ROOT}/sample_fields/').replace('"../out/quickstart"',
                                                                                 f'"{tmp_path}/q"')
    (tmp_path / "q.toml").write_text(text)
    res = CliRunner().invoke(main, ["run", str(tmp_path / "q.toml"), "--overwrite"])
    assert res.exit_code == 0, res.output
    out = tmp_path / "q"
    steps = pd.read_csv(out / "steps.csv")
    events = pd.read_csv(out / "events.csv")
    assert len(steps) == 40
    # the filament pinches into droplets which later coarsen (sample_fields/README.md)
    assert steps["droplet_count"].max() >= 3 and steps["droplet_count"].iloc[-1] == 1
    assert "breakup" in set(events["kind"])
    # the Cahn-Hilliard model conserves mean phi (Cahn & Hilliard 1958); interpolation to the triangle
    # mesh adds a small error, so the drift stays well under one per cent
    assert np.nanmax(np.abs(steps["phase_volume_drift"])) < 1e-2
    html = (out / "report.html").read_text()
    for section in ("Findings", "Key figures", "Plots", "Droplet events", "What was run"):
        assert section in html
    manifest = json.loads((out / "manifest.json").read_text())
    assert manifest["series"]["steps"] == 40 and manifest["execution"]["workers"] == 2


def test_samples_command(tmp_path):
    res = CliRunner().invoke(main, ["samples", str(tmp_path), "--only", "vortex_upwind"])
    assert res.exit_code == 0, res.output
    assert len([f for f in os.listdir(tmp_path / "vortex_upwind") if f.endswith(".vtu")]) == 17
    res = CliRunner().invoke(main, ["samples", str(tmp_path), "--only", "vortex_upwind"])
    assert res.exit_code == 2 and "--overwrite" in res.output
    res = CliRunner().invoke(main, ["samples", str(tmp_path), "--only", "nonsense"])
    assert res.exit_code == 2 and "choose from" in res.output

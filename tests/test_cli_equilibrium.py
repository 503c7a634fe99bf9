"""The equilibrium command: a model file at one temperature, or its phase diagram into a new folder."""

import json
import pathlib

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner

from phasegauge.cli import main

DEMO = pathlib.Path(__file__).resolve().parents[1] / "sample_fields" / "solvent_pair.toml"


def _run(*args):
    return CliRunner().invoke(main, [str(a) for a in args])


def _regular(tmp_path, a="2.5"):
    path = tmp_path / "regular.toml"
    path.write_text(f'[model]\nkind = "regular"\ncomponent = "B"\nA_a = {a}\n')
    return path


def test_json_at_one_temperature_gives_the_analytic_regular_solution(tmp_path):
    # regular solution A = 2.5: binodal 0.144794 / 0.855206, spinodal 0.276393 (REFERENCES.md, analytic)
    result = _run("equilibrium", _regular(tmp_path), "--temperature", 300, "--json")
    assert result.exit_code == 0, result.output
    record = json.loads(result.output)
    assert record["binodal_lean"] == pytest.approx(0.144794, abs=1e-6)
    assert record["binodal_rich"] == pytest.approx(0.855206, abs=1e-6)
    assert record["spinodal_lean"] == pytest.approx(0.276393, abs=1e-6)
    assert record["state"] == "two phases"
    assert record["critical_temperature"] is None     # A constant: no critical point in any range


def test_text_output_of_the_demo_model():
    result = _run("equilibrium", DEMO, "--temperature", 298.15)
    assert result.exit_code == 0, result.output
    assert "binodal_lean 0.1186" in result.output and "(UCST)" in result.output
    mixed = _run("equilibrium", DEMO, "--temperature", 370)
    assert mixed.exit_code == 0 and "one stable phase" in mixed.output


def test_phase_diagram_folder_and_refusal_to_overwrite(tmp_path):
    out = tmp_path / "diagram"
    result = _run("equilibrium", DEMO, "--temperatures", "280,380", "--count", 50, "-o", out)
    assert result.exit_code == 0, result.output
    table = pd.read_csv(out / "phase_diagram.csv")
    assert list(table.columns) == ["temperature", "binodal_lean", "binodal_rich", "spinodal_lean", "spinodal_rich"]
    assert len(table) == 50
    assert np.isfinite(table["binodal_lean"].iloc[0]) and np.isnan(table["binodal_lean"].iloc[-1])
    assert (out / "phase_diagram.png").read_bytes()[:4] == b"\x89PNG"
    again = _run("equilibrium", DEMO, "--temperatures", "280,380", "-o", out)
    assert again.exit_code == 2 and "--overwrite" in again.output
    assert _run("equilibrium", DEMO, "--temperatures", "280,380", "-o", out, "--overwrite").exit_code == 0


def test_no_split_in_the_range_is_a_finding_not_an_error(tmp_path):
    result = _run("equilibrium", _regular(tmp_path, "1.5"), "--temperatures", "280,380", "-o", tmp_path / "d")
    assert result.exit_code == 0, result.output
    assert "one stable phase at every temperature" in result.output


@pytest.mark.parametrize("args, message", [
    (("--temperature", "300", "--temperatures", "1,2"), "either --temperature"),
    (("--temperatures", "280,380"), "needs an output folder"),
    (("--temperature", "-5"), "temperature > 0"),
])
def test_bad_options_give_one_line(tmp_path, args, message):
    result = _run("equilibrium", DEMO, *args)
    assert result.exit_code == 2
    assert message in result.output and result.output.count("\n") == 1


def test_bad_model_file_gives_one_line_naming_the_key(tmp_path):
    path = tmp_path / "bad.toml"
    path.write_text('[model]\nkind = "nrtl"\ntau_a = [1, 1]\nalpha = -0.2\n')
    result = _run("equilibrium", path, "--temperature", 300)
    assert result.exit_code == 2
    assert "alpha must be a number >= 0" in result.output and str(path) in result.output


@pytest.mark.parametrize("value", ["{ x = 0.3 }", "1979-05-27", "[0.3]", '"0.3"', "true"])
def test_nrtl_alpha_that_is_no_number_gives_one_line_naming_the_key(tmp_path, value):
    # regression: a table or a date as alpha escaped as a TypeError (a failure inside, exit 1)
    path = tmp_path / "bad.toml"
    path.write_text(f'[model]\nkind = "nrtl"\ntau_a = [1, 1]\nalpha = {value}\n')
    result = _run("equilibrium", path, "--temperature", 300)
    assert result.exit_code == 2, result.output
    assert "[model] alpha must be a number" in result.output and str(path) in result.output
    assert "alpha = 0.3" in result.output and result.output.count("\n") == 1


def test_nrtl_alpha_that_is_no_number_is_an_option_error_in_the_api():
    from phasegauge.errors import OptionError
    from phasegauge.model.mixture_models import NrtlModel

    with pytest.raises(OptionError, match="alpha must be a number, found 'abc'"):  # was a bare ValueError
        NrtlModel(tau_a=(1.0, 1.0), alpha="abc")


@pytest.mark.parametrize("component, b", [("n-decane", "[2098.2665771665065, 4978.434198553327]"),
                                          ("water", "[4978.434198553327, 2098.2665771665065]")])
def test_text_output_keeps_six_significant_digits_near_a_pure_component(tmp_path, component, b):
    # an NRTL pair like n-decane + water: 1e-8 of decane in water (regression: printed 0.000000); named
    # the other way round the rich phase is 1 - 1e-8, printed with its distance from 1. Reference: the
    # --json values, which Python's float() and round-trip repr carry exactly
    import re

    path = tmp_path / "pair.toml"
    path.write_text(f'[model]\nkind = "nrtl"\ncomponent = "{component}"\ntau_b = {b}\nalpha = 0.2\n')
    text = _run("equilibrium", path, "--temperature", 298.15).output
    record = json.loads(_run("equilibrium", path, "--temperature", 298.15, "--json").output)
    for name in ("binodal_lean", "binodal_rich"):
        shown = re.search(rf"{name} ([0-9.e+-]+)( \(1 - ([0-9.e+-]+)\))?", text)
        assert float(shown.group(1)) == pytest.approx(record[name], rel=5e-6)     # six significant digits
        if record[name] > 1 - 1e-4:
            assert float(shown.group(3)) == pytest.approx(1 - record[name], rel=5e-3)   # three of 1 - x
    assert "0.000000" not in text


def test_a_phase_diagram_with_temperatures_beyond_double_precision_is_written_with_them_empty(tmp_path):
    # regular solution A = 10500 / T: the binodal is 6.3e-16 at 300 K (ln(x/(1-x)) = A (2x - 1), analytic);
    # below about 290 K a phase is purer than a float carries: those rows are empty, one warning names why
    path = tmp_path / "immiscible.toml"
    path.write_text('[model]\nkind = "regular"\nA_b = 10500.0\n')
    result = _run("equilibrium", path, "--temperatures", "250,400", "--count", 16, "-o", tmp_path / "d")
    assert result.exit_code == 0, result.output
    table = pd.read_csv(tmp_path / "d" / "phase_diagram.csv")
    assert table["binodal_lean"].isna().to_numpy().tolist() == [True] * 5 + [False] * 11
    assert result.output.count("within about 2e-16 of a pure component") == 1
    findings = json.loads((tmp_path / "d" / "phase_diagram.json").read_text())["findings"]
    assert any("not solved at 5 temperature(s) from 250 to 290 K" in f for f in findings)

"""Model files: TOML [model] tables read into mixture models; bad ones refused in one line."""

import pytest

from phasegauge.errors import InputFileNotFound, OptionError
from phasegauge.io import read_mixture_model
from phasegauge.model.mixture_models import DoubleWellModel, NrtlModel, RegularSolutionModel


def _write(tmp_path, text):
    path = tmp_path / "model.toml"
    path.write_text(text)
    return path


def test_each_kind_reads(tmp_path):
    nrtl = read_mixture_model(_write(tmp_path, '[model]\nkind = "nrtl"\ncomponent = "water"\n'
                                               'tau_a = [0.5, 1.0]\ntau_b = [600, 500]\nalpha = 0.3\n'))
    assert nrtl == NrtlModel(tau_a=(0.5, 1.0), tau_b=(600.0, 500.0), alpha=0.3, component="water")
    regular = read_mixture_model(_write(tmp_path, '[model]\nkind = "regular"\nA_a = 0.5\nA_b = 600\n'))
    assert regular == RegularSolutionModel(A_a=0.5, A_b=600.0)
    chi = read_mixture_model(_write(tmp_path, '[model]\nkind = "regular"\nchi = 2.5\n'))
    assert chi.interaction(300.0) == 2.5
    well = read_mixture_model(_write(tmp_path, '[model]\nkind = "double-well"\nlean = 0.1\nrich = 0.9\n'))
    assert well == DoubleWellModel(lean=0.1, rich=0.9)


def test_the_shipped_demo_model_separates_and_mixes():
    import pathlib

    from phasegauge.analysis.thermo import critical_points, equilibrium_at

    root = pathlib.Path(__file__).resolve().parents[2]
    model = read_mixture_model(root / "sample_fields" / "solvent_pair.toml")
    assert equilibrium_at(model, 298.15).separates
    assert not equilibrium_at(model, 370.0).separates
    assert [p.kind for p in critical_points(model, temperatures=(250.0, 450.0))] == ["UCST"]


@pytest.mark.parametrize("text, message", [
    ('[model]\nkind = "nrtl"\ntau_a = [1, 1]\nalpha = -0.1\n', r"\[model\] alpha must be a number >= 0"),
    ('[model]\nkind = "nrtl"\ntau_a = [1, 1]\nalfa = 0.3\n', r"unknown key 'alfa' .*did you mean 'alpha'"),
    ('[model]\nkind = "nrtl"\ntau_a = [1]\n', r"tau_a must be two finite numbers"),
    ('[model]\nkind = "nrtl"\nalpha = 0.3\n', r"needs tau_a"),
    ('[model]\nkind = "nrlt"\n', r"kind 'nrlt' is not known; did you mean 'nrtl'"),
    ('[model]\ncomponent = "x"\n', r"no 'kind'"),
    ('[model]\nkind = "regular"\nchi = 2\nA_b = 3\n', r"either chi or A_a"),
    ('[model]\nkind = "regular"\nA_a = "big"\n', r"A_a must be a number"),
    ('[model]\nkind = "double-well"\nlean = 0.9\nrich = 0.1\n', r"lean < rich"),
    ('[model]\nkind = "double-well"\nlean = 0.1\n', r"needs 'rich'"),
    ('[modle]\nkind = "nrtl"\n', r"no \[model\] table"),
    ('[model\nkind = "nrtl"\n', r"not valid TOML"),
])
def test_bad_model_files_name_the_key_and_the_fix(tmp_path, text, message):
    path = _write(tmp_path, text)
    with pytest.raises(OptionError, match=message) as info:
        read_mixture_model(path)
    line = info.value.one_line()
    assert "\n" not in line and str(path) in line and info.value.fix


def test_missing_model_file(tmp_path):
    with pytest.raises(InputFileNotFound, match="model file not found"):
        read_mixture_model(tmp_path / "none.toml")

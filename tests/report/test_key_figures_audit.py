"""The audit's key figures: the interface kind and verdict always, D_num only when it means something."""

from types import SimpleNamespace

import pandas as pd

from phasegauge.report._measure_report import _key_figures


def _labels(audit):
    result = SimpleNamespace(steps=pd.DataFrame({"time": [0.0, 1.0]}), audit=audit)
    return dict(_key_figures(result))


# The quickstart's fit before this change: D_num 9.9e-5 with standard error 9.0e-4 (r^2 0.0003).
def test_an_insignificant_diffusivity_is_no_key_figure():
    figures = _labels({"interface_kind": "diffuse", "cells_across": 6.5, "D_num": 9.863e-05,
                       "D_num_stderr": 9.0e-4, "significant": False, "widening": False, "r_squared": 0.0003,
                       "verdict": "no significant widening: ..."})
    assert not any(label.startswith("numerical diffusivity") for label in figures)
    assert figures["diffusion audit"].startswith("no significant widening")
    assert figures["interface kind"].startswith("diffuse")


def test_a_widening_diffusivity_is_a_key_figure():
    figures = _labels({"interface_kind": "diffuse", "cells_across": 8.5, "D_num": 1.35e-3, "D_num_stderr": 1.6e-4,
                       "significant": True, "widening": True, "r_squared": 0.84, "verdict": "interface keeps widening"})
    assert figures["numerical diffusivity (length²/time)"] == 1.35e-3


def test_a_sharp_run_shows_its_kind_and_no_diffusivity():
    figures = _labels({"interface_kind": "sharp", "cells_across": 3.1, "D_num": float("nan"), "significant": False,
                       "widening": False, "verdict": "sharp interface ..."})
    assert figures["interface kind"].startswith("sharp")
    assert not any(label.startswith("numerical diffusivity") for label in figures)


def test_the_fitted_steps_and_a_per_step_unit_are_shown():
    # the page names which steps the verdict's widths come from, and a diffusivity of steps storing no
    # times is per step
    figures = _labels({"interface_kind": "diffuse", "cells_across": 8.5, "D_num": 1e-5, "D_num_stderr": 1e-6,
                       "significant": True, "widening": True, "r_squared": 0.9, "fit_from_time": 3.0, "n_fit": 7,
                       "n_steps": 10, "note": "the steps store no times", "verdict": "interface keeps widening"})
    assert figures["diffusion audit fitted"] == "7 of 10 steps, from t = 3"
    assert figures["numerical diffusivity (length²/step)"] == 1e-5


def test_the_mixing_length_is_given_with_its_status():
    # a length met at the first section is an upper bound: the key figures say so beside the number
    steps = pd.DataFrame({"time": [0.0, 1.0], "mixing_length": [0.5, 0.5],
                          "mixing_length_status": ["upper_bound", "upper_bound"]})
    figures = dict(_key_figures(SimpleNamespace(steps=steps, audit={})))
    assert figures["mixing length, last step"] == 0.5
    assert figures["mixing length status, last step"] == "upper_bound"
    assert "mixing length status, last step" not in _labels({})

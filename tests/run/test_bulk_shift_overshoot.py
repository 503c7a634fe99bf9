"""A bulk off its well is the Gibbs-Thomson shift only where both bulks moved alike and by little.

Outside checks: the overshoot volume of point data against numpy's lumped integral of max(0, c - 1, -c)
(trapezoid weights on the uniform grid: each point a quarter of each cell it is a corner of); the
Gibbs-Thomson shift of a Cahn-Hilliard drop moves both coexisting bulk values by mu / f'' (Cahn & Hilliard
1958, linearised), equal at the two wells of a symmetric double well, here written as an analytic tanh drop
with both plateaus moved by the same amount.
"""

import numpy as np
import pandas as pd
import pytest

from phasegauge import measure
from phasegauge.meshgen import grid_mesh, to_meshio
from phasegauge.run._bulk_findings import MAX_SHIFT
from phasegauge.run.assemble import findings
from phasegauge.run.options import MeasureOptions
from test_findings_plateaus import _shifted


def _drop(folder, n, width, shift):
    """A tanh drop of radius 0.25 on the points of an n x n unit square (c = 1 inside), through ``shift``
    (c -> the shifted field); returns the folder and the field."""
    folder.mkdir()
    mesh = grid_mesh((n, n))
    x, y = mesh.points[:, 0], mesh.points[:, 1]
    base = 0.5 * (1 - np.tanh((np.hypot(x - 0.5, y - 0.5) - 0.25) / width))
    c = shift(base)
    for k in range(3):
        to_meshio(mesh, point_data={"c": c}, field_data={"TimeValue": np.array([0.1 * k])}).write(
            str(folder / f"s_{k}.vtu"))
    return str(folder), mesh, c


def _lumped_overshoot(mesh, c, n):
    """numpy: sum of max(0, c - 1, -c) times the point's trapezoid weight on the uniform unit grid."""
    x, y = mesh.points[:, 0], mesh.points[:, 1]
    edge = np.isclose(x, 0) | np.isclose(x, 1), np.isclose(y, 0) | np.isclose(y, 1)
    weight = np.where(edge[0], 0.5, 1.0) * np.where(edge[1], 0.5, 1.0) / n ** 2
    return float((np.maximum(0, np.maximum(c - 1, -c)) * weight).sum())


def _checks(result):
    return {c["check"]: c for c in result.standing_checks}


@pytest.mark.parametrize("shift, share, why", [
    pytest.param(lambda b: b - 0.02 * (1 - b), 0.0119, "one sits on its well", id="matrix-only"),  # drop at 1
    pytest.param(lambda b: b - 0.1, 0.0673, "beyond 0.03 of the gap", id="whole-field")])  # matrix -0.1, drop 0.9
def test_one_bulk_on_its_well_or_a_large_shift_is_overshoot(tmp_path, shift, share, why):
    """Regression: both were noted as "physics, not overshoot" (shift -0.02 and +0; -0.1 and -0.1) and the
    standing check read "indicator bounded"; the overshoot is 1.2 % and 6.7 % of the domain."""
    n = 64
    path, mesh, c = _drop(tmp_path / "run", n, np.sqrt(2) * 2 / n, shift)
    result = measure(path, field="c", analyses=("conservation", "interface"))
    kinds = [f.kind for f in result.findings]
    assert "indicator_overshoot" in kinds and "bulk_plateaus" not in kinds
    warning = result.findings[kinds.index("indicator_overshoot")]
    reference = _lumped_overshoot(mesh, c, n)  # numpy, trapezoid point weights
    assert reference == pytest.approx(share, abs=1e-4)
    assert warning.figures["overshoot_volume"] == pytest.approx(reference, rel=1e-9)
    assert why in warning.text and "not a Gibbs-Thomson shift" in warning.text
    assert _checks(result)["indicator_bounds"]["passed_as"] == "indicator bounded"


@pytest.mark.parametrize("delta", [0.008, -0.008])
def test_both_bulks_shifted_alike_by_little_are_noted(tmp_path, delta):
    """Both plateaus moved by the same small amount (a symmetric well's Gibbs-Thomson shift, Cahn & Hilliard
    1958): the note, no warning, and the standing check names the note."""
    path, _, _ = _drop(tmp_path / "run", 80, np.sqrt(2) * 0.02, lambda b: b + delta)
    result = measure(path, field="c", analyses=("conservation", "interface"))
    kinds = [f.kind for f in result.findings]
    assert "bulk_plateaus" in kinds and "indicator_overshoot" not in kinds
    note = result.findings[kinds.index("bulk_plateaus")]
    assert note.figures["bulk_c_low"] == pytest.approx(delta, abs=1e-4)  # the matrix: far from the drop
    assert note.figures["bulk_c_high"] == pytest.approx(1 + delta, abs=1e-3)  # the drop's plateau: its tail
    assert _checks(result)["indicator_bounds"]["passed_as"] == "bulk off 0 and 1 (note)"


@pytest.mark.parametrize("low, high, why", [
    (0.002, 1.009, "one moved over 3 times the other"),  # more than SHIFT_FACTOR (3, our threshold)
    (0.006, 1.009, None),  # 1.5 times apart
    (-0.02, 1.0, "one sits on its well"),
    (-0.01, 1.01, "they spread apart"),
    (MAX_SHIFT + 0.005, 1 + MAX_SHIFT + 0.005, "beyond 0.03 of the gap"),  # without a model
    (MAX_SHIFT - 0.005, 1 + MAX_SHIFT - 0.005, None)])
def test_shifts_not_alike_or_beyond_the_cap_are_overshoot(low, high, why):
    """Without a free energy: the two shifts of one sign, within SHIFT_FACTOR of each other and at most
    MAX_SHIFT (0.03 of the gap, our threshold) each; else the overshoot warning says which."""
    found = {f.kind: f for f in findings(_shifted(low, high), pd.DataFrame(), {"interface_kind": "diffuse"},
                                         MeasureOptions(field="c"), [], dimension=2)}
    if why is None:
        assert "bulk_plateaus" in found and "indicator_overshoot" not in found
    else:
        assert "indicator_overshoot" in found and "bulk_plateaus" not in found
        assert why in found["indicator_overshoot"].text


def _cahn_hilliard_drop(n=128, width_cells=3.0, radius=0.25, height=1.0):
    """A drop relaxed to equilibrium by the Cahn-Hilliard equation c_t = lap(f'(c) - kappa lap c),
    f = height c^2 (1 - c)^2, on the cell centres of a periodic unit square (numpy FFT, semi-implicit with
    the stabiliser 2 height); the tanh width w = sqrt(2 kappa / height) set to ``width_cells`` cells."""
    kappa = (width_cells / n) ** 2 * height / 2
    x = (np.arange(n) + 0.5) / n
    r = np.hypot(*np.meshgrid(x - 0.5, x - 0.5, indexing="ij"))
    c = 0.5 * (1 - np.tanh((r - radius) / (width_cells / n)))
    k = 2 * np.pi * np.fft.fftfreq(n, 1 / n)
    k2 = k[:, None] ** 2 + k[None, :] ** 2
    stabiliser, dt = 2 * height, 1e-3
    for _ in range(800):  # to t = 0.8: the bulks settled to 1e-8
        force = np.fft.fft2(2 * height * c * (1 - c) * (1 - 2 * c)) - stabiliser * np.fft.fft2(c)
        c = np.fft.ifft2((np.fft.fft2(c) - dt * k2 * force) / (1 + dt * k2 * (kappa * k2 + stabiliser))).real
    return c, kappa


@pytest.mark.parametrize("with_model", [False, True])
def test_a_cahn_hilliard_equilibrium_drop_is_noted(tmp_path, with_model):
    """Both bulks of a relaxed Cahn-Hilliard drop sit above their wells by about the linearised
    Gibbs-Thomson shift sigma / (R f'') = w / (12 R) in 2D (Cahn & Hilliard 1958: sigma = sqrt(2 kappa h) / 6,
    f'' = 2 h; 0.0078 here, the relaxed field's own 0.0082 and 0.0078): the note, with or without the model."""
    n, height = 128, 1.0
    c, kappa = _cahn_hilliard_drop(n, height=height)
    assert c.min() == pytest.approx(0.0078, abs=1e-3) and c.max() - 1 == pytest.approx(0.0078, abs=1e-3)
    folder = tmp_path / "run"
    folder.mkdir()
    mesh = grid_mesh((n, n))
    index = np.floor(mesh.cell_centroids[:, :2] * n).astype(int)  # the cell holding each centre
    values = c[index[:, 0], index[:, 1]]
    for k in range(3):
        to_meshio(mesh, cell_data={"c": values}, field_data={"TimeValue": np.array([0.1 * k])}).write(
            str(folder / f"s_{k}.vtu"))
    options = {}
    if with_model:
        model = tmp_path / "well.toml"
        model.write_text(f'[model]\nkind = "double-well"\nlean = 0.0\nrich = 1.0\nheight = {height}\n'
                         f"kappa = {kappa}\n")
        options = {"free_energy": str(model), "periodic": ("x", "y")}
    result = measure(str(folder), field="c", analyses=("conservation", "interface", "droplets"), **options)
    kinds = [f.kind for f in result.findings]
    assert "bulk_plateaus" in kinds and "indicator_overshoot" not in kinds
    note = result.findings[kinds.index("bulk_plateaus")]
    linearised = 3.0 / n / (12 * 0.25)  # w / (12 R), Cahn & Hilliard 1958 linearised [calc]
    assert note.figures["shift_low"] == pytest.approx(linearised, rel=0.1)
    assert note.figures["shift_high"] == pytest.approx(linearised, rel=0.1)  # the drop's plateau, read off its tail
    assert ("expected_shift" in note.figures) == with_model


def test_a_run_that_starts_on_the_wells_is_judged_step_by_step():
    """A Cahn-Hilliard run started from a tanh profile on the wells (step 0: bulks at 0 and 1, c within [0, 1])
    relaxes to both bulks shifted alike (+0.0082 and +0.0075, the relaxed drop of the test below against the
    linearised Gibbs-Thomson shift 0.0078, Cahn & Hilliard 1958): each step with overshoot is judged on its own
    two bulks, not the first step's well beside a later step's plateau (which read "one sits on its well")."""
    steps = pd.DataFrame({"step": [0, 1, 2], "time": [0.0, 0.5, 1.0], "bulk_c_low": [0.0, 0.0082, 0.0082],
                          "bulk_c_high": [1.0, 1.0075, 1.0075], "c_min": [0.0, 0.0081, 0.0081],
                          "c_max": [1.0, 1.0076, 1.0076], "overshoot_volume": [0.0, 1e-3, 1e-3],
                          "domain_volume": [1.0, 1.0, 1.0]})
    found = {f.kind: f for f in findings(steps, pd.DataFrame(), {"interface_kind": "diffuse"},
                                         MeasureOptions(field="c"), [], dimension=2)}
    assert "bulk_plateaus" in found and "indicator_overshoot" not in found
    steps.loc[2, "bulk_c_low"] = 0.0  # a later step with one bulk back on its well: overshoot, that step named
    found = {f.kind: f for f in findings(steps, pd.DataFrame(), {"interface_kind": "diffuse"},
                                         MeasureOptions(field="c"), [], dimension=2)}
    assert "at step 2 the bulk sits at c = 0 and 1.008" in found["indicator_overshoot"].text

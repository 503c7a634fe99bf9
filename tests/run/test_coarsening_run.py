"""measure --coarsening on self-similar patterns growing as t^(1/3) (Lifshitz & Slyozov 1961), with
the interface width scaled with the pattern or fixed in cells (the construction), and on steps that
store no times."""

import os

import numpy as np
import pytest
from conftest import fixed_width_pattern, write_listing

from phasegauge import measure
from phasegauge.meshgen import grid_mesh, to_meshio


def test_coarsening_finding_and_plot(tmp_path):
    folder = tmp_path / "run"
    folder.mkdir()
    mesh = grid_mesh((128, 128))
    x, y = mesh.cell_centroids.T
    periods = np.array([8, 6, 4, 3, 2])
    listing = []
    for i, m in enumerate(periods):
        k = 2 * np.pi * m
        c = 0.5 * (1 + np.tanh(3 * (np.cos(k * x) + np.cos(k * y) + 0.7 * np.cos(k * (x + y)))))
        t = (periods[0] / m) ** 3
        to_meshio(mesh, cell_data={"c": c}).write(str(folder / f"s_{i}.vtu"))
        listing.append(f"{float(t)!r},run/s_{i}.vtu")
    (tmp_path / "steps.csv").write_text("\n".join(listing) + "\n")
    out = tmp_path / "out"
    result = measure(str(tmp_path / "steps.csv"), field="c", coarsening=True, out=str(out), analyses=("interface",))
    note = next(f for f in result.findings if f.kind == "coarsening")
    assert note.figures["exponent"] == pytest.approx(1 / 3, abs=0.02)
    assert os.path.exists(out / "coarsening.png")


def test_fixed_width_run_fits_the_interface_spacing(tmp_path):
    # grows exactly as t^(1/3) (the construction; Lifshitz & Slyozov 1961) at a fixed interface width,
    # as a Cahn-Hilliard run does: the structure-factor length alone read n = 0.273
    periods = np.array([8, 6, 4, 3, 2])
    mesh, fields = fixed_width_pattern(128, periods, 1.5)
    listing = write_listing(tmp_path, [(100.0 * (periods[0] / m) ** 3, f"s_{i}.vtu", mesh, {"c": c})
                                       for i, (m, c) in enumerate(zip(periods, fields))])
    result = measure(listing, field="c", coarsening=True, periodic=("x", "y"), out=str(tmp_path / "out"))
    note = next(f for f in result.findings if f.kind == "coarsening")
    assert note.figures["exponent"] == pytest.approx(1 / 3, abs=0.01)  # measured 0.331: our tolerance
    assert note.figures["length"] == "interface_spacing" and "interface_spacing" in note.text
    assert note.figures["structure_factor_exponent"] < 0.3  # the structure factor's bias, given beside it
    spacing = result.steps["interface_spacing"].to_numpy()
    assert spacing == pytest.approx(result.steps["domain_volume"] / result.steps["interface_size"], rel=1e-12)
    # without the interface analysis the spacing takes the contour's size itself: the same
    alone = measure(listing, field="c", coarsening=True, analyses=("mixing",), out=str(tmp_path / "alone"))
    assert alone.steps["interface_spacing"].to_numpy() == pytest.approx(spacing, rel=1e-12)


def test_steps_without_times_give_no_exponent(tmp_path):
    # files numbered with no times stored, written at t = 1, 8, 64, 512 (log-spaced): step numbers as
    # times read n = 1.18 for the 1/3 of the construction; no exponent, and the note says why
    mesh = grid_mesh((64, 64))
    x, y = mesh.cell_centroids.T
    (tmp_path / "run").mkdir()
    for i, m in enumerate([16, 8, 4, 2]):
        c = 0.5 * (1 + np.tanh(3 * (np.cos(2 * np.pi * m * x) + np.cos(2 * np.pi * m * y))))
        to_meshio(mesh, cell_data={"c": c}).write(str(tmp_path / "run" / f"out_{i + 1:04d}.vtk"))
    out = tmp_path / "out"
    result = measure(str(tmp_path / "run"), field="c", coarsening=True, periodic=("x", "y"), out=str(out),
                     analyses=("interface",))
    note = next(f for f in result.findings if f.kind == "coarsening")
    assert "store no times" in note.text and "time,path" in note.text
    assert "exponent" not in note.figures
    assert os.path.exists(out / "coarsening.png")  # the lengths against the step number, no fit


def test_coarsening_note_names_the_length_it_fitted():
    import pandas as pd

    from phasegauge.run._coarsening_finding import coarsening_finding

    # lengths built as exact power laws (L = t^(1/3) and t^(1/4)) with a step at t = 0 [calc]
    t = np.array([0.0, 1.0, 8.0, 27.0, 64.0])
    steps = pd.DataFrame({"step": range(5), "time": t, "coarsening_length": t ** 0.25,
                          "interface_spacing": t ** (1 / 3)})
    note = coarsening_finding(steps)
    assert note.figures["exponent"] == pytest.approx(1 / 3, rel=1e-12)
    assert note.figures["structure_factor_exponent"] == pytest.approx(0.25, rel=1e-12)
    assert note.figures["points"] == 4 and "over 4 steps of 5" in note.text
    assert "n = 0.333" in note.text and "n = 0.25" in note.text
    # a table without the spacing: the structure-factor length, named
    older = coarsening_finding(steps.drop(columns=["interface_spacing"]))
    assert older.figures["length"] == "coarsening_length" and "structure factor" in older.text
    assert older.figures["exponent"] == pytest.approx(0.25, rel=1e-12)
    numbered = coarsening_finding(steps, numbered=True)
    assert "store no times" in numbered.text and "exponent" not in numbered.figures
    assert coarsening_finding(steps.iloc[:2]) is None

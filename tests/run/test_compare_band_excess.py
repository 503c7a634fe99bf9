"""A diffuse run against a sharp one (a level set, volume fractions): the note names the kinds and states
the volume the diffuse band adds, checked against the logistic drop's analytic excess."""

import numpy as np
import pytest
from scipy.integrate import quad

from phasegauge.analysis.compare import band_volume_excess
from phasegauge.meshgen import grid_mesh, to_meshio
from phasegauge.run.compare import RunSpec, compare_runs

R = 0.2
EPS = 0.02  # phi = tanh((R - r) / (sqrt2 EPS)): c = (1 + phi) / 2 is logistic of scale s = EPS / sqrt2


@pytest.mark.parametrize("dimension,power", [(2, 1), (3, 2)])
def test_band_volume_excess_against_quadrature(dimension, power):
    # scipy's quadrature of int c dV over a logistic drop, minus the sharp drop's volume
    s = 0.01
    shell = 2 * np.pi if dimension == 2 else 4 * np.pi
    diffuse = quad(lambda r: shell * r ** power / (1 + np.exp((r - R) / s)), 0, R + 60 * s, points=[R],
                   epsabs=1e-14, epsrel=1e-12)[0]
    sharp = shell * R ** (power + 1) / (power + 1)
    assert band_volume_excess(s, [R], dimension) == pytest.approx(diffuse - sharp, rel=1e-6)
    assert band_volume_excess(s, [R, R], dimension) == pytest.approx(2 * (diffuse - sharp), rel=1e-6)


def _drop_runs(tmp_path):
    """A: a tanh drop on 100^2 quads; B: the same circle as a level set G = r - R on 80^2 triangles."""
    quad_mesh, tri = grid_mesh((100, 100)), grid_mesh((80, 80), kind="triangle")
    for k in range(2):
        centre = np.array([0.4 + 0.1 * k, 0.5])
        ra = np.linalg.norm(quad_mesh.coordinates - centre, axis=1)
        to_meshio(quad_mesh, point_data={"phi": np.tanh((R - ra) / (np.sqrt(2) * EPS))}).write(tmp_path / f"a_{k}.vtu")
        rb = np.linalg.norm(tri.coordinates - centre, axis=1)
        to_meshio(tri, point_data={"G": rb - R}).write(tmp_path / f"b_{k}.vtu")
    for run in "ab":
        lines = ["time,path"] + [f"{0.1 * k:.1f},{run}_{k}.vtu" for k in range(2)]
        (tmp_path / f"{run}.csv").write_text("\n".join(lines) + "\n")
    return str(tmp_path / "a.csv"), str(tmp_path / "b.csv")


def test_a_diffuse_run_against_a_level_set_gets_the_note_and_the_band_excess(tmp_path):
    a, b = _drop_runs(tmp_path)
    result = compare_runs(RunSpec(a, "phi", (-1, 1), label="pf"),
                          RunSpec(b, "G", phase="lower", level_set=True, label="ls"), out=tmp_path / "out")
    table = result.comparison
    # the shapes agree (the same circle) while the phase volumes differ by the band's excess
    assert (table["dice"] > 0.999).all()
    # analytic: the logistic drop's int c dA = pi R^2 + pi^3 s^2 / 3 (Sommerfeld expansion of the
    # Fermi-Dirac integral), s = EPS / sqrt2; the level set's cut cells have no such excess
    s = EPS / np.sqrt(2)
    analytic = np.pi ** 3 * s ** 2 / 3
    excess = result.band_excess
    assert excess["label"] == "pf" and excess["other"] == "ls" and excess["drops"] == 1
    # our threshold 5 %: the measured interface_eps reads 1.3 % high on this band, its square 2.6 %
    assert excess["expected"] == pytest.approx(analytic, rel=0.05)
    assert excess["observed"] == pytest.approx(analytic, rel=0.05)
    assert table["phase_volume_a"].iloc[-1] == pytest.approx(np.pi * R ** 2 + analytic, rel=1e-4)
    report = (tmp_path / "out" / "report.html").read_text()
    assert "the interfaces are of different kinds (pf diffuse" in report and "ls level set)" in report
    note = report.split("the interfaces are of different kinds")[1].split("</li>")[0]
    assert "which the level set run does not have" in note and "nan cells" not in note
    assert f"{excess['expected']:.4g} for its 1 droplet(s)" in note


def test_a_drop_at_a_wall_states_no_excess(tmp_path):
    # half a drop against the wall x = 0: its band is cut there, so no closed drop and no figure
    quad_mesh, tri = grid_mesh((60, 60)), grid_mesh((48, 48), kind="triangle")
    ra = np.linalg.norm(quad_mesh.coordinates - [0.0, 0.5], axis=1)
    to_meshio(quad_mesh, point_data={"phi": np.tanh((R - ra) / (np.sqrt(2) * EPS))}).write(tmp_path / "a_0.vtu")
    rb = np.linalg.norm(tri.coordinates - [0.0, 0.5], axis=1)
    to_meshio(tri, point_data={"G": rb - R}).write(tmp_path / "b_0.vtu")
    result = compare_runs(RunSpec(str(tmp_path / "a_0.vtu"), "phi", (-1, 1), label="pf"),
                          RunSpec(str(tmp_path / "b_0.vtu"), "G", phase="lower", level_set=True, label="ls"),
                          out=tmp_path / "out")
    assert np.isnan(result.band_excess["expected"]) and "wall normal to x" in result.band_excess["why"]
    assert "not stated here: a droplet" in (tmp_path / "out" / "report.html").read_text()

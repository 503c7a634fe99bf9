"""The interface kind the user declares takes the place of the kind read from the thickness.

Outside checks: the variance of a diffusing profile grows by 2 D t (Crank 1975), so a declared
diffuse run whose variance grows so reads D; volume fractions of a disc by sub-sampling each cell
(elementary geometry) make a volume-of-fluid step (about two cells across: sharp).
"""

import json

import numpy as np
import pytest
from click.testing import CliRunner

from conftest import write_listing
from phasegauge import measure
from phasegauge.analysis.interface import diffusion_audit
from phasegauge.cli import main
from phasegauge.errors import OptionError
from phasegauge.meshgen import grid_mesh
from phasegauge.run.compare import RunSpec, compare_runs

N = 40


def test_a_declared_kind_decides_the_audit_and_the_measured_one_is_kept():
    t = np.arange(6.0)
    variance = 0.01 + 2 * 0.003 * t  # D = 0.003 [Crank 1975]
    thin = np.full(6, 2.1)  # a volume-of-fluid thickness
    steady = 0.01 + 2 * 0.0003 * t  # a sharp run's width moving by 14 %: its reconstruction, not smearing
    measured = diffusion_audit(t, steady, cells_across=thin)
    assert (measured["interface_kind"], measured["interface_kind_measured"]) == ("sharp", "sharp")
    assert np.isnan(measured["D_num"])
    # a run sharp in median whose width grows by half or more smears (audit 15: a volume-of-fluid run
    # doubling its width at a steady rate read "no diffusivity inferred"): fitted
    t8 = np.arange(8.0)
    grown = diffusion_audit(t8, 0.01 + 2 * 0.003 * t8, cells_across=np.full(8, 2.1))
    assert grown["D_num"] == pytest.approx(0.003, rel=1e-9) and "smears steadily" in grown["verdict"]
    declared = diffusion_audit(t, variance, cells_across=thin, declared_kind="diffuse")
    assert (declared["interface_kind"], declared["interface_kind_measured"]) == ("diffuse", "sharp")
    assert declared["D_num"] == pytest.approx(0.003, rel=1e-9) and declared["n_fit"] == 6
    declared_sharp = diffusion_audit(t, steady, cells_across=np.full(6, 2.5), declared_kind="sharp")
    assert np.isnan(declared_sharp["D_num"]) and "as declared" in declared_sharp["verdict"]
    # declared sharp but read diffuse: a smeared run, fitted and flagged as one (its diffusion not hidden)
    smeared = diffusion_audit(t, variance, cells_across=np.full(6, 6.0), declared_kind="sharp")
    assert (smeared["interface_kind"], smeared["interface_kind_measured"]) == ("sharp", "diffuse")
    assert smeared["D_num"] == pytest.approx(0.003, rel=1e-9) and smeared["widening"]
    assert smeared["verdict"].startswith("declared sharp, but the interface is 6 cells across")
    with pytest.raises(OptionError, match="'sharp' or 'diffuse'"):
        diffusion_audit(t, variance, cells_across=thin, declared_kind="vof")


def _disc_fractions(mesh, radius, sub=8):
    """Volume fraction of a disc about (0.5, 0.5) in each square cell, by sub-sampling."""
    x = mesh.cell_centroids
    h = 1.0 / N
    offsets = (np.arange(sub) + 0.5) / sub - 0.5
    inside = np.zeros(mesh.n_cells)
    for dx in offsets:
        for dy in offsets:
            inside += np.hypot(x[:, 0] + dx * h - 0.5, x[:, 1] + dy * h - 0.5) < radius
    return inside / sub ** 2


def _vof_series(folder):
    mesh = grid_mesh((N, N), kind="quad")
    return write_listing(str(folder), [(0.1 * k, f"a_{k}.vtu", mesh, {"alpha": _disc_fractions(mesh, 0.25)})
                                       for k in range(4)])


def test_a_volume_of_fluid_run_declared_diffuse_gets_the_diffuse_findings(tmp_path):
    listing = _vof_series(tmp_path)
    plain = measure(listing, "alpha", analyses=("interface",))
    assert plain.audit["interface_kind"] == "sharp"
    assert "interface_under_resolved" not in [f.kind for f in plain.findings]
    out = tmp_path / "out"
    declared = measure(listing, "alpha", analyses=("interface",), interface_kind="diffuse", out=str(out))
    assert (declared.audit["interface_kind"], declared.audit["interface_kind_measured"]) == ("diffuse", "sharp")
    assert declared.audit["cells_across"] == pytest.approx(plain.audit["cells_across"])
    assert "interface_under_resolved" in [f.kind for f in declared.findings]
    assert json.loads((out / "diffusion_audit.json").read_text())["interface_kind_measured"] == "sharp"
    manifest = json.loads((out / "manifest.json").read_text())
    assert manifest["interface_kind"] == "diffuse" and manifest["options"]["interface_kind"] == "diffuse"
    assert "as declared; the thickness reads sharp" in (out / "report.html").read_text()
    with pytest.raises(OptionError, match="interface kind must be 'sharp' or 'diffuse'"):
        measure(listing, "alpha", analyses=("interface",), interface_kind="VOF")


def test_the_command_line_the_recipe_and_compare_take_it(tmp_path):
    listing = _vof_series(tmp_path)
    result = CliRunner().invoke(main, ["measure", listing, "--field", "alpha", "--interface-kind", "diffuse",
                                       "--analyses", "interface", "-o", str(tmp_path / "m"), "-q"])
    assert result.exit_code == 0, result.output
    assert json.loads((tmp_path / "m" / "diffusion_audit.json").read_text())["interface_kind"] == "diffuse"
    recipe = tmp_path / "r.toml"
    recipe.write_text(f'[input]\npath = "{listing}"\nfield = "alpha"\n[interface]\ninterface_kind = "diffuse"\n'
                      f'[run]\nanalyses = ["interface"]\n[output]\nfolder = "{tmp_path / "r"}"\n')
    result = CliRunner().invoke(main, ["run", str(recipe), "-q"])
    assert result.exit_code == 0, result.output
    assert json.loads((tmp_path / "r" / "diffusion_audit.json").read_text())["interface_kind"] == "diffuse"
    recipe.write_text(recipe.read_text().replace('"diffuse"', '"vof"'))
    result = CliRunner().invoke(main, ["run", str(recipe), "-q"])
    assert result.exit_code != 0 and "must be 'sharp' or 'diffuse', found 'vof'" in result.output
    compared = compare_runs(RunSpec(listing, "alpha", interface_kind="diffuse"), RunSpec(listing, "alpha"))
    assert compared.first.audit["interface_kind"] == "diffuse" and compared.second.audit["interface_kind"] == "sharp"


def test_a_bad_or_misplaced_kind_is_refused_before_any_run(tmp_path):
    listing = _vof_series(tmp_path)
    with pytest.raises(OptionError, match="'sharp' or 'diffuse', found 'vof'"):
        RunSpec(listing, "alpha", interface_kind="vof")
    with pytest.raises(OptionError, match="--interface-kind diffuse was given with --level-set"):
        RunSpec(listing, "alpha", level_set=True, interface_kind="diffuse")
    with pytest.raises(OptionError, match="was given with --level-set"):
        measure(listing, "alpha", level_set=True, interface_kind="sharp")
    recipe = tmp_path / "c.toml"
    recipe.write_text(f'[first]\npath = "{listing}"\nfield = "alpha"\n[second]\npath = "{listing}"\n'
                      f'field = "alpha"\ninterface_kind = "vof"\n[output]\nfolder = "{tmp_path / "c"}"\n')
    result = CliRunner().invoke(main, ["run", str(recipe), "-q"])
    assert result.exit_code != 0 and "c.toml: [second] interface_kind must be 'sharp' or 'diffuse'" in result.output
    assert not (tmp_path / "c").exists()  # nothing measured


def test_the_compare_report_says_a_kind_was_declared(tmp_path):
    listing = _vof_series(tmp_path)
    result = CliRunner().invoke(main, ["compare", listing, listing, "--field-a", "alpha", "--field-b", "alpha",
                                       "--interface-kind-b", "diffuse", "-o", str(tmp_path / "c"), "-q"])
    assert result.exit_code == 0, result.output
    page = (tmp_path / "c" / "report.html").read_text()
    assert "diffuse (as declared; the thickness reads sharp)" in page
    assert json.loads((tmp_path / "c" / "manifest.json").read_text())["interface_kind"] == {
        "first": "sharp", "second": "diffuse"}


def test_declared_sharp_with_no_thickness_read_is_fitted_not_silenced():
    t = np.arange(6.0)
    variance = 0.01 + 2 * 0.003 * t  # D = 0.003, width +73 % [Crank 1975]
    audit = diffusion_audit(t, variance, declared_kind="sharp")  # no cells_across: the kind not read
    assert (audit["interface_kind"], audit["interface_kind_measured"]) == ("sharp", "unknown")
    assert audit["widening"] and audit["D_num"] == pytest.approx(0.003, rel=1e-9)
    assert audit["verdict"].startswith("declared sharp (its thickness not read")


def test_a_bad_choice_on_the_command_line_names_the_run(tmp_path):
    listing = _vof_series(tmp_path)
    result = CliRunner().invoke(main, ["compare", listing, listing, "--field-a", "alpha", "--field-b", "alpha",
                                       "--steps-b", "x", "-o", str(tmp_path / "c"), "-q"])
    assert result.exit_code != 0 and "the second run (its options ending in -b" in result.output
    assert "--steps-b" in result.output

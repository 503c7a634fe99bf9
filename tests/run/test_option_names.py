"""One name per option: every name in the README's table gives the same manifest entry from the
command line, a recipe and the Python API, and the old names still give it (with a warning)."""

import json
import os
import shlex

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner

from phasegauge import measure
from phasegauge.cli import main
from phasegauge.errors import OldNameWarning, OptionError
from phasegauge.meshgen import grid_mesh, to_meshio
from phasegauge.recipes import run_recipe
from phasegauge.run.options import MeasureOptions

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))

#: name -> (command-line arguments, recipe table, recipe value as TOML, Python value); none a default
VALUES = {
    "field": (["--field", "alpha"], "input", '"alpha"', "alpha"),
    "range": (["--range", "-0.1,1.1"], "input", "[-0.1, 1.1]", (-0.1, 1.1)),
    "phase": (["--phase", "lower"], "input", '"lower"', "lower"),
    "velocity": (["--velocity", "U"], "input", '"U"', "U"),
    "field_location": (["--field-location", "cell"], "input", '"cell"', "cell"),
    "sort_by_time": (["--sort-by-time"], "input", "true", True),
    "keep_3d": (["--keep-3d"], "input", "true", True),
    "steps": (["--steps", "0:4"], "input", '"0:4"', "0:4"),
    "time_from": (["--time-from", "0.05"], "input", "0.05", 0.05),
    "time_to": (["--time-to", "0.3"], "input", "0.3", 0.3),
    "every": (["--every", "2"], "input", "2", 2),
    "level": (["--level", "0.4"], "interface", "0.4", 0.4),
    "diffusivity": (["--diffusivity", "1e-4"], "interface", "1e-4", 1e-4),
    "interface_kind": (["--interface-kind", "diffuse"], "interface", '"diffuse"', "diffuse"),
    "contours": (["--no-contours"], "interface", "false", False),
    "adjacency": (["--adjacency", "point"], "droplets", '"point"', "point"),
    "periodic": (["--periodic", "x"], "droplets", '["x"]', ("x",)),
    "ignore_remerge_within": (["--ignore-remerge-within", "2"], "droplets", "2", 2),
    "box": (["--box", "0,1,0,1,-1,1"], "mixing", "[[0, 1], [0, 1], [-1, 1]]", ((0, 1), (0, 1), (-1, 1))),
    "section_axis": (["--section-axis", "x"], "mixing", '"x"', "x"),
    "section_count": (["--section-count", "5"], "mixing", "5", 5),
    "section_positions": (["--section-positions", "0.25,0.5"], "mixing", "[0.25, 0.5]", (0.25, 0.5)),
    "mixing_target": (["--mixing-target", "0.8"], "mixing", "0.8", 0.8),
    "inflow_mean": (["--inflow-mean", "0.25"], "mixing", "0.25", 0.25),
    "segregation_scale": (["--segregation-scale"], "mixing", "true", True),
    "densities": (["--densities", "2,1"], "conservation", "[2.0, 1.0]", (2.0, 1.0)),
    "drift_tolerance": (["--drift-tolerance", "0.01"], "conservation", "0.01", 0.01),
    "analyses": (["--analyses", "mixing,interface,droplets,conservation"], "run",
                 '["mixing", "interface", "droplets", "conservation"]', ("mixing", "interface", "droplets",
                                                                         "conservation")),
    "strict": (["--strict"], "run", "true", True),
    "plot_format": (["--plot-format", "svg"], "output", '"svg"', "svg"),
    "keep_cache": (["--keep-cache"], "output", "true", True),
}

#: the phase-field and mixture names: measured on their own series (a regular grid, model files);
#: the model paths are filled in per test (MODELS), ``temperature_field`` is tried alone (it excludes
#: ``temperature``)
EXTRA = {
    "free_energy": (["--free-energy", "{well}"], "phase_field", '"{well}"', "{well}"),
    "coarsening": (["--coarsening"], "phase_field", "true", True),
    "model": (["--model", "{mixture}"], "miscibility", '"{mixture}"', "{mixture}"),
    "temperature": (["--temperature", "300"], "miscibility", "300.0", 300.0),
    "temperature_field": (["--temperature-field", "T"], "miscibility", '"T"', "T"),
    "solute": (["--solute", "s"], "miscibility", '"s"', "s"),
    "solute_receiving": (["--solute-receiving", "lean"], "miscibility", '"lean"', "lean"),
    "bulk_widths": (["--bulk-widths", "1.5"], "miscibility", "1.5", 1.5),
    "equilibrium_tolerance": (["--equilibrium-tolerance", "0.02"], "miscibility", "0.02", 0.02),
    "capillary_length": (["--capillary-length", "0.001"], "miscibility", "0.001", 0.001),
}
#: options that exclude others above (a level set takes no range): their own run below
APART = {"level_set": (["--level-set"], "input", "true", True)}
VALUES = {**VALUES, **EXTRA, **APART}


def _readme_table():
    """(name, flag text, recipe text, manifest key, old names) of each row of the README's table."""
    with open(os.path.join(ROOT, "README.md"), encoding="utf-8") as handle:
        text = handle.read()
    section = text.split("## Option names", 1)[1].split("\n## ", 1)[0]
    rows = []
    for line in section.splitlines():
        cells = [c.strip() for c in line.strip().strip("|").split("|")]
        if len(cells) == 5 and cells[0].startswith("`"):
            rows.append(cells)
    return rows


def _series(folder, steps=4, n=12):
    mesh = grid_mesh((n, n), kind="triangle")
    x, y = mesh.cell_centroids[:, 0], mesh.cell_centroids[:, 1]
    lines = []
    for k in range(steps):
        c = 0.5 * (1 + np.tanh((0.25 - np.hypot(x - 0.4 - 0.05 * k, y - 0.5)) / 0.05))
        velocity = np.zeros((mesh.n_cells, 3))
        velocity[:, 0] = 0.5
        to_meshio(mesh, cell_data={"alpha": c, "U": velocity}).write(os.path.join(folder, f"s_{k}.vtu"))
        lines.append(f"{0.1 * k},s_{k}.vtu")
    listing = os.path.join(folder, "run.steps")
    with open(listing, "w") as handle:
        handle.write("\n".join(lines) + "\n")
    return listing


def _recipe(path, listing, out, entries):
    tables = {}
    for table, key, value in entries:
        tables.setdefault(table, []).append(f"{key} = {value}")
    tables.setdefault("input", []).insert(0, f'path = "{listing}"')
    tables.setdefault("output", []).insert(0, f'folder = "{out}"')
    text = "\n".join(f"[{t}]\n" + "\n".join(lines) for t, lines in tables.items()) + "\n"
    with open(path, "w") as handle:
        handle.write(text)
    return path


def _options(out):
    with open(os.path.join(out, "manifest.json"), encoding="utf-8") as handle:
        return json.load(handle)["options"]


def _cli(args):
    result = CliRunner().invoke(main, args)
    assert result.exit_code == 0, result.output


def test_readme_table_names_every_option():
    """The table lists each MeasureOptions field (and contours) once, with the flag and the recipe key
    spelled from the name."""
    rows = _readme_table()
    names = [r[0].strip("`") for r in rows]
    fields = {f.name for f in __import__("dataclasses").fields(MeasureOptions)}
    assert set(names) == set(VALUES)
    assert fields - {"probes", "lines", "measured"} <= set(names)
    assert {"contours", "plot_format", "keep_cache"} <= set(names)
    for name, flag, recipe, manifest_key, _ in rows:
        name = name.strip("`")
        assert manifest_key == f"`{name}`"
        assert f"`--{name.replace('_', '-')}`" in flag
        assert recipe.endswith(f" {name}`")
        assert recipe == f"`[{VALUES[name][1]}] {name}`"


def test_every_name_gives_one_manifest_entry(tmp_path):
    listing = _series(str(tmp_path))
    names = [r[0].strip("`") for r in _readme_table() if r[0].strip("`") not in {**EXTRA, **APART}]
    args = [a for name in names for a in VALUES[name][0]]
    _cli(["measure", listing, "-o", str(tmp_path / "cli"), *args])
    recipe = _recipe(str(tmp_path / "r.toml"), listing, str(tmp_path / "recipe"),
                     [(VALUES[n][1], n, VALUES[n][2]) for n in names])
    run_recipe(recipe)
    measure(listing, out=tmp_path / "api", **{n: VALUES[n][3] for n in names})
    cli, rec, api = (_options(tmp_path / k) for k in ("cli", "recipe", "api"))
    for name in names:
        assert cli[name] == rec[name] == api[name], name
    assert api["contours"] is False and api["adjacency"] == "point" and api["range"] == [-0.1, 1.1]
    assert not os.path.isdir(tmp_path / "api" / "contours")
    assert (tmp_path / "api" / "phase_volume_drift.svg").exists() and (tmp_path / "api" / ".cache").is_dir()
    assert list(pd.read_csv(tmp_path / "api" / "steps.csv")["step"]) == [1, 3]  # times 0.1, 0.3; every 2nd
    invocations = [json.load(open(tmp_path / k / "manifest.json"))["invocation"] for k in ("cli", "recipe", "api")]
    assert invocations[0]["command_line"] == shlex.join(["phasegauge", "measure", listing, "-o",
                                                          str(tmp_path / "cli"), *args])
    assert invocations[1]["recipe"] == open(recipe).read() and invocations[1]["recipe_path"] == recipe
    assert invocations[2] == {"python": "phasegauge.measure"}


def _fill(value, models):
    if isinstance(value, list):
        return [_fill(v, models) for v in value]
    return value.format(**models) if isinstance(value, str) else value


@pytest.mark.parametrize("names", [[n for n in EXTRA if n != "temperature_field"], ["model", "temperature_field"]])
def test_phase_field_and_mixture_names_give_one_manifest_entry(tmp_path, names):
    """As above, for the options of the phase-field checks and of a partially miscible mixture."""
    mesh = grid_mesh((40, 4), bounds=[(0.0, 1.0), (0.0, 0.1)], kind="quad")
    x = mesh.cell_centroids[:, 0]
    lines = []
    for k in range(3):
        c = 0.1 + 0.8 * 0.5 * (1 + np.tanh((0.25 - np.abs(x - 0.5)) / (0.03 + 0.01 * k)))
        data = {"alpha": c, "s": 0.05 * c, "T": np.full(mesh.n_cells, 300.0)}
        to_meshio(mesh, cell_data=data).write(tmp_path / f"m_{k}.vtu")
        lines.append(f"{0.1 * k},m_{k}.vtu")
    listing = str(tmp_path / "run.steps")
    (tmp_path / "run.steps").write_text("\n".join(lines) + "\n")
    models = {"well": str(tmp_path / "well.toml"), "mixture": str(tmp_path / "regular.toml")}
    (tmp_path / "well.toml").write_text('[model]\nkind = "double-well"\nlean = 0.0\nrich = 1.0\nheight = 1.0\n'
                                       'kappa = 1e-4\n')
    (tmp_path / "regular.toml").write_text('[model]\nkind = "regular"\ncomponent = "A"\nchi = 3.0\n')
    base = ["--field", "alpha", "--analyses", "interface,mixing"]
    args = [_fill(a, models) for n in names for a in EXTRA[n][0]]
    _cli(["measure", listing, "-o", str(tmp_path / "cli"), *base, *args])
    entries = [("input", "field", '"alpha"'), ("run", "analyses", '["interface", "mixing"]')]
    recipe = _recipe(str(tmp_path / "r.toml"), listing, str(tmp_path / "recipe"),
                     entries + [(EXTRA[n][1], n, _fill(EXTRA[n][2], models)) for n in names])
    run_recipe(recipe)
    measure(listing, "alpha", out=tmp_path / "api", analyses=("interface", "mixing"),
            **{n: _fill(EXTRA[n][3], models) for n in names})
    cli, rec, api = (_options(tmp_path / k) for k in ("cli", "recipe", "api"))
    for name in names:
        assert cli[name] == rec[name] == api[name], name
        assert api[name] is not None and api[name] != getattr(MeasureOptions(field="c"), name), name


def test_old_names_give_the_same_manifest_entry(tmp_path):
    listing = _series(str(tmp_path))
    with pytest.warns(OldNameWarning) as caught:
        measure(listing, "alpha", out=tmp_path / "api", value_range=(-0.1, 1.1), connectivity="point",
                write_contours=False, analyses=("interface", "droplets"))
    said = " ".join(str(w.message) for w in caught)
    for old, new in (("value_range", "range"), ("connectivity", "adjacency"), ("write_contours", "contours")):
        assert f"'{old}' is the old name of '{new}'" in said
    new = measure(listing, "alpha", out=tmp_path / "new", range=(-0.1, 1.1), adjacency="point",
                  contours=False, analyses=("interface", "droplets"))
    old, current = _options(tmp_path / "api"), _options(tmp_path / "new")
    assert old == current and new.options.adjacency == "point"
    with pytest.warns(OldNameWarning):
        assert new.options.value_range == new.options.range
    _cli(["measure", listing, "-o", str(tmp_path / "cli_old"), "--field", "alpha", "--analyses", "mixing",
          "--ignore-remerge", "2", "--sections", "x", "--section-at", "0.25,0.5"])
    _cli(["measure", listing, "-o", str(tmp_path / "cli_new"), "--field", "alpha", "--analyses", "mixing",
          "--ignore-remerge-within", "2", "--section-axis", "x", "--section-positions", "0.25,0.5"])
    assert _options(tmp_path / "cli_old") == _options(tmp_path / "cli_new")
    recipe = _recipe(str(tmp_path / "old.toml"), listing, str(tmp_path / "rec_old"),
                     [("input", "field", '"alpha"'), ("mixing", "target", "0.8"), ("run", "analyses", '["mixing"]')])
    with pytest.warns(OldNameWarning, match=r"\[mixing\] target is the old name of mixing_target"):
        run_recipe(recipe)
    assert _options(tmp_path / "rec_old")["mixing_target"] == 0.8
    assert not (tmp_path / "rec_old" / ".cache").exists()  # removed after a complete run without keep_cache


def test_old_flag_is_hidden_from_help():
    text = CliRunner().invoke(main, ["measure", "--help"]).output
    assert "--section-axis" in text and "--sections" not in text and "--section-at" not in text


@pytest.mark.parametrize("wrong, nearest", [("adjacancy", "adjacency"), ("mixing_targt", "mixing_target"),
                                            ("value_rang", "range"), ("wokers", "workers")])
def test_wrong_keyword_names_the_nearest(tmp_path, wrong, nearest):
    """As a recipe does (difflib's closest match; the unknown key is refused before any work)."""
    with pytest.raises(OptionError, match=f"no option '{wrong}'; did you mean '{nearest}'"):
        measure(str(tmp_path / "none.steps"), "alpha", **{wrong: 1})
    if nearest != "workers":
        with pytest.raises(OptionError, match=f"did you mean '{nearest}'"):
            MeasureOptions(field="c", **{wrong: 1})


def test_old_and_new_name_together_are_refused():
    with pytest.raises(OptionError, match="got 'range' and its old name 'value_range'"):
        MeasureOptions(field="c", range=(0, 1), value_range=(0, 1))


@pytest.mark.parametrize("choice, expected", [
    (dict(steps="0:10:3"), [0, 3, 6, 9]), (dict(steps="4"), [4]), (dict(steps="8:"), [8, 9]),
    (dict(time_from=0.25, time_to=0.55), [3, 4, 5]), (dict(steps=":6", every=2), [0, 2, 4]),
    (dict(time_from=0.3, every=3), [3, 6, 9])])
def test_step_choice(choice, expected):
    """Python's own slicing of range(10) is the reference for START:STOP:STRIDE."""
    from phasegauge.run._selection import chosen_steps

    times = [0.1 * k for k in range(10)]
    assert chosen_steps(times, **choice) == expected
    if "steps" in choice and ":" in choice["steps"]:
        assert expected[::1] == list(range(10))[slice(*[int(p) if p else None for p in choice["steps"].split(":")])][
            ::choice.get("every", 1)]


@pytest.mark.parametrize("choice, message", [
    (dict(steps="a:b"), "steps must be START:STOP:STRIDE"), (dict(steps="0:10:0"), "stride of steps must be"),
    (dict(time_from=2.0, time_to=1.0), "lies after time_to"), (dict(every=0), "every must be a whole number")])
def test_bad_step_choice_is_refused(choice, message):
    with pytest.raises(OptionError, match=message):
        MeasureOptions(field="c", **choice)


def test_step_choice_that_leaves_nothing_names_the_series(tmp_path):
    listing = _series(str(tmp_path), steps=2)
    with pytest.raises(OptionError, match=r"leaves no step \(the series has 2 steps numbered from 0, times 0 to 0.1\)"):
        measure(listing, "alpha", steps="5:", out=tmp_path / "o")


def test_old_recipe_key_of_the_equilibrium_tolerance(tmp_path):
    (tmp_path / "regular.toml").write_text('[model]\nkind = "regular"\ncomponent = "A"\nchi = 3.0\n')
    recipe = tmp_path / "r.toml"
    recipe.write_text('[input]\npath = "run.steps"\nfield = "c"\n[output]\nfolder = "out"\n'
                      '[miscibility]\nmodel = "regular.toml"\ntemperature = 300.0\ntolerance = 0.02\n')
    from phasegauge.recipes import load_recipe, measure_arguments

    with pytest.warns(OldNameWarning, match=r"\[miscibility\] tolerance is the old name of equilibrium_tolerance"):
        loaded = load_recipe(str(recipe))
    assert measure_arguments(loaded)["options"].equilibrium_tolerance == 0.02


def _runs_entry(out):
    with open(os.path.join(out, "manifest.json"), encoding="utf-8") as handle:
        runs = json.load(handle)["runs"]
    return [{k: v for k, v in run.items() if k != "path"} for run in runs]


def test_compare_range_is_one_name(tmp_path):
    """compare's --range-a/--range-b, the recipe's [first]/[second] range and RunSpec(range=) give one
    manifest entry; RunSpec's old keyword value_range warns and gives it too."""
    from phasegauge.run.compare import RunSpec, compare_runs

    a, b = tmp_path / "a", tmp_path / "b"
    a.mkdir(), b.mkdir()
    first, second = _series(str(a), steps=2, n=8), _series(str(b), steps=2, n=8)
    _cli(["compare", first, second, "--field-a", "alpha", "--field-b", "alpha", "--range-a", "-0.1,1.1",
          "--range-b", "0,2", "--label-a", "one", "--label-b", "two", "-q", "-o", str(tmp_path / "cli")])
    recipe = tmp_path / "c.toml"
    recipe.write_text(f'[first]\npath = "{first}"\nfield = "alpha"\nrange = [-0.1, 1.1]\nlabel = "one"\n'
                      f'[second]\npath = "{second}"\nfield = "alpha"\nrange = [0, 2]\nlabel = "two"\n'
                      f'[output]\nfolder = "{tmp_path / "recipe"}"\n')
    _cli(["run", str(recipe), "--quiet"])
    compare_runs(RunSpec(first, "alpha", range=(-0.1, 1.1), label="one"),
                 RunSpec(second, "alpha", range=(0, 2), label="two"), out=tmp_path / "api")
    with pytest.warns(OldNameWarning, match="'value_range' is the old name of 'range'"):
        old = RunSpec(first, "alpha", value_range=(-0.1, 1.1), label="one")
    compare_runs(old, RunSpec(second, "alpha", range=(0, 2), label="two"), out=tmp_path / "old")
    entries = [_runs_entry(tmp_path / k) for k in ("cli", "recipe", "api", "old")]
    assert entries[0] == entries[1] == entries[2] == entries[3]
    assert [run["range"] for run in entries[0]] == [[-0.1, 1.1], [0, 2]]
    with pytest.raises(OptionError, match="no option 'rnge'; did you mean 'range'"):
        RunSpec(first, "alpha", rnge=(0, 1))


def test_2d_box_gives_one_manifest_entry(tmp_path):
    """A 2D box: four numbers on the command line, two pairs in a recipe or in Python, or two pairs
    and an unbounded z pair, give one manifest entry."""
    listing = _series(str(tmp_path), steps=1, n=8)
    _cli(["measure", listing, "-o", str(tmp_path / "cli"), "--field", "alpha", "--analyses", "mixing",
          "--box", "0,1,0,0.5"])
    recipe = _recipe(str(tmp_path / "r.toml"), listing, str(tmp_path / "recipe"),
                     [("input", "field", '"alpha"'), ("mixing", "box", "[[0, 1], [0, 0.5]]"),
                      ("run", "analyses", '["mixing"]')])
    run_recipe(recipe)
    measure(listing, "alpha", out=tmp_path / "api", analyses=("mixing",), box=((0, 1), (0, 0.5)))
    measure(listing, "alpha", out=tmp_path / "api_z", analyses=("mixing",),
            box=((0, 1), (0, 0.5), (-np.inf, np.inf)))
    boxes = [_options(tmp_path / k)["box"] for k in ("cli", "recipe", "api", "api_z")]
    assert boxes == [[[0, 1], [0, 0.5]]] * 4
    assert MeasureOptions(field="c", box=((0, 1), (0, 0.5), (-1, 1))).box == ((0, 1), (0, 0.5), (-1, 1))


def test_the_level_set_name_gives_one_manifest_entry(tmp_path):
    """As above, for ``level_set`` (which refuses a range, so it runs on its own)."""
    mesh = grid_mesh((30, 30), kind="quad")
    phi = np.hypot(mesh.coordinates[:, 0] - 0.5, mesh.coordinates[:, 1] - 0.5) - 0.2
    for k in range(2):
        to_meshio(mesh, point_data={"phi": phi}).write(tmp_path / f"l_{k}.vtu")
    listing = str(tmp_path / "run.steps")
    (tmp_path / "run.steps").write_text("0,l_0.vtu\n1,l_1.vtu\n")
    _cli(["measure", listing, "-o", str(tmp_path / "cli"), "--field", "phi", *APART["level_set"][0]])
    recipe = _recipe(str(tmp_path / "r.toml"), listing, str(tmp_path / "recipe"),
                     [("input", "field", '"phi"'), (APART["level_set"][1], "level_set", APART["level_set"][2])])
    run_recipe(recipe)
    measure(listing, "phi", out=tmp_path / "api", level_set=APART["level_set"][3])
    cli, rec, api = (_options(tmp_path / k) for k in ("cli", "recipe", "api"))
    assert cli["level_set"] is rec["level_set"] is api["level_set"] is True

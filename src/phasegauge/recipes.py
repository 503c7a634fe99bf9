"""Recipe files: a whole measure or compare run kept as a TOML file beside the case.

A measure recipe::

    [input]
    path = "../sample_fields/filament_breakup/filament_breakup.xdmf"   # relative to the recipe
    field = "phi"
    range = [-1, 1]
    phase = "upper"            # optional
    velocity = "velocity"      # optional: or its scalar components, ["u.x", "u.y"] or "u.x,u.y"
    field_location = "cell"    # optional: which copy of a field written on cells and points
    sort_by_time = false       # optional: order the steps by the times in their files
    steps = "0:100:5"          # optional: step numbers START:STOP:STRIDE (STOP excluded)
    time_from = 0.5            # optional: only steps within [time_from, time_to]
    every = 2                  # optional: then every 2nd of those

    [interface]                # optional tables; leaving a table out keeps the defaults
    level = 0.5
    diffusivity = 1e-4         # physical diffusivity or mobility for the audit
    interface_kind = "sharp"   # optional: "sharp" (volume-of-fluid) or "diffuse", in place of the kind read
    contours = true            # write the interface of every step

    [droplets]
    adjacency = "face"         # or "point"
    periodic = ["x", "y"]
    ignore_remerge_within = 0

    [mixing]
    box = [[0, 1], [0, 1], [-1, 1]]
    section_axis = "x"
    section_count = 20         # or section_positions = [...]
    mixing_target = 0.9
    inflow_mean = 0.25         # optional: the mean of c over the whole inflow

    [conservation]
    densities = [1000.0, 1.0]
    drift_tolerance = 1e-3

    [run]
    analyses = ["interface", "droplets", "mixing", "conservation"]
    workers = 2
    threads = 4                     # optional: threads of each process (default: the CPUs, shared)
    scheduler = "tcp://host:8786"   # optional Dask cluster
    strict = false
    snapshots = 4

    [output]
    folder = "../out/filament"      # relative to the recipe
    overwrite = true
    plot_format = "png"             # or "svg", "pdf"
    keep_cache = false              # keep .cache/ (the finished steps) after a complete run

    [miscibility]              # optional: bulk compositions against a mixture model
    model = "solvent_pair.toml"   # model file, relative to the recipe
    temperature = 298.15       # K (or temperature_field = "T")
    solute = "s"               # optional solute field; solute_receiving = "rich" or "lean"
    bulk_widths = 2.0          # bulk cells: farther than this many widths from the contour
    equilibrium_tolerance = 0.01  # gap to the binodal counted as equilibrium
    capillary_length = 0.01    # optional: sigma v_m / (R T), for the Gibbs-Thomson shift

    [phase_field]              # optional: Cahn-Hilliard checks
    free_energy = "well.toml"  # double well with kappa, relative to the recipe (regular grids)
    coarsening = true          # pattern lengths per step and the fitted L ~ t^n

    [validation]               # optional; CSV files relative to the recipe
    probes = "probes.csv"      # name,x,y[,z]
    lines = "lines.csv"        # name,x0,y0[,z0],x1,y1[,z1],points
    measured = "measured.csv"  # x,y[,z],value[,time][,uncertainty]

A campaign recipe is a measure recipe whose ``[input]`` has no path, with a
``[campaign]`` table (``parameter`` name, ``unit``) and one ``[[runs]]`` table
per run (``path``, ``parameter``, optional ``label``); see :mod:`phasegauge.run.campaign`.

A compare recipe has ``[first]`` and ``[second]`` tables (each like ``[input]``,
with an optional ``label``), an optional ``[compare]`` table
(``time_tolerance``, ``spacing``, ``level``, ``reference_table``,
``rising_bubble``, ``periodic``: both runs' periodic axes), ``[run]`` and ``[output]``.

Unknown tables and keys are refused with the nearest known name suggested; an old
key name (:data:`OLD_KEYS`) is read as its new one, with an :class:`~phasegauge.errors.OldNameWarning`.
"""

from __future__ import annotations

import difflib
import os
import sys
from types import MappingProxyType

from .errors import InputFileNotFound, OldNameWarning, OptionError

__all__ = ["load_recipe", "run_recipe", "RECIPE_SCHEMA", "COMPARE_SCHEMA", "CAMPAIGN_SCHEMA", "OLD_KEYS"]

#: (table, old key) -> the key's one name (read with an OldNameWarning)
OLD_KEYS = MappingProxyType({("mixing", "target"): "mixing_target",
                             ("miscibility", "tolerance"): "equilibrium_tolerance"})

_INPUT = {"path": str, "field": str, "range": list, "phase": str, "velocity": (str, list), "label": str,
          "field_location": str, "sort_by_time": bool, "level_set": bool}

RECIPE_SCHEMA = {
    "input": {**_INPUT, "keep_3d": bool, "steps": str, "time_from": (int, float), "time_to": (int, float),
              "every": int},
    "interface": {"level": (int, float), "diffusivity": (int, float), "interface_kind": str, "contours": bool},
    "droplets": {"adjacency": str, "periodic": list, "ignore_remerge_within": int},
    "mixing": {"box": list, "section_axis": str, "section_count": int, "section_positions": list,
               "mixing_target": (int, float), "inflow_mean": (int, float), "segregation_scale": bool},
    "conservation": {"densities": list, "drift_tolerance": (int, float)},
    "run": {"analyses": list, "workers": int, "threads": int, "scheduler": str, "strict": bool, "snapshots": int},
    "output": {"folder": str, "overwrite": bool, "plot_format": str, "keep_cache": bool},
    "validation": {"probes": str, "lines": str, "measured": str},
    "miscibility": {"model": str, "temperature": (int, float), "temperature_field": str, "solute": str,
                    "solute_receiving": str, "bulk_widths": (int, float), "equilibrium_tolerance": (int, float),
                    "capillary_length": (int, float)},
    "phase_field": {"free_energy": str, "coarsening": bool},
}

#: a campaign recipe: a measure recipe whose [input] has no path, a [campaign] table and [[runs]]
CAMPAIGN_SCHEMA = {**RECIPE_SCHEMA, "campaign": {"parameter": str, "unit": str}}

#: keys of each [[runs]] table of a campaign
RUN_ENTRY = {"path": str, "parameter": (int, float), "label": str}

COMPARE_SCHEMA = {
    "first": {**_INPUT, "interface_kind": str, "steps": str},
    "second": {**_INPUT, "interface_kind": str, "steps": str},
    "compare": {"time_tolerance": (int, float), "spacing": (int, float), "level": (int, float),
                "reference_table": str, "rising_bubble": bool, "periodic": list},
    "run": {"workers": int, "threads": int, "strict": bool},
    "output": {"folder": str, "overwrite": bool},
}

_REQUIRED = {"measure": {"input": ("path", "field"), "output": ("folder",)},
             "campaign": {"input": ("field",), "output": ("folder",)},
             "compare": {"first": ("path", "field"), "second": ("path", "field"), "output": ("folder",)}}


def _load_toml(path: str) -> dict:
    if sys.version_info >= (3, 11):
        import tomllib
    else:  # pragma: no cover
        import tomli as tomllib
    if not os.path.exists(path):
        raise InputFileNotFound("recipe not found", where=path, fix="check the path; examples are in recipes/")
    try:
        with open(path, "rb") as handle:
            return tomllib.load(handle)
    except tomllib.TOMLDecodeError as exc:
        raise OptionError(f"not valid TOML ({exc})", where=path,
                          fix="check quotes, brackets and '=' on the line named") from None


def _rename_old_keys(data: dict, path: str) -> None:
    """Read each old key (:data:`OLD_KEYS`) as its new name, with a warning; both at once is refused."""
    import warnings

    for (table, key), new in OLD_KEYS.items():
        entries = data.get(table)
        if not isinstance(entries, dict) or key not in entries:
            continue
        if new in entries:
            raise OptionError(f"[{table}] has '{new}' and its old name '{key}'", where=path, fix=f"keep only {new}")
        warnings.warn(OldNameWarning(f"[{table}] {key} is the old name of {new}; write {new} = ... (the old "
                                     "name will be removed)", where=path), stacklevel=3)
        entries[new] = entries.pop(key)


def _suggest(name: str, known) -> str:
    close = difflib.get_close_matches(name, list(known), n=1, cutoff=0.5)
    return f"did you mean '{close[0]}'?" if close else "known: " + ", ".join(sorted(known))


def load_recipe(path) -> dict:
    """Read and validate a recipe.

    Returns
    -------
    dict
        ``{'kind': 'measure'|'compare', 'base': folder of the recipe, **tables}``
        with paths made absolute.

    Raises
    ------
    OptionError
        Unknown table or key (with the nearest known one), wrong value type,
        missing required key.
    """
    path = os.fspath(path)
    data = _load_toml(path)
    kind = "compare" if ("first" in data or "second" in data) else ("campaign" if "runs" in data else "measure")
    schema = {"compare": COMPARE_SCHEMA, "campaign": CAMPAIGN_SCHEMA}.get(kind, RECIPE_SCHEMA)
    _rename_old_keys(data, path)
    for table, entries in data.items():
        if kind == "campaign" and table == "runs":
            _check_runs(entries, path, data.get("input", {}))
            continue
        if table not in schema:
            raise OptionError(f"unknown table [{table}]; {_suggest(table, schema)}", where=path,
                              fix="see the recipe format in the README")
        if not isinstance(entries, dict):
            raise OptionError(f"[{table}] must be a table", where=path, fix=f"write it as [{table}] with keys below")
        for key, value in entries.items():
            if key not in schema[table]:
                home = [t for t in schema if t != table and key in schema[t]]
                raise OptionError(f"unknown key '{key}' in [{table}]; "
                                  + (f"it belongs in [{home[0]}]" if home else _suggest(key, schema[table])),
                                  where=path, fix=f"move {key} = ... under [{home[0]}]" if home
                                  else "see the recipe format in the README")
            expected = schema[table][key]
            if isinstance(value, bool) and expected in ((int, float), int):
                ok = False
            else:
                ok = isinstance(value, expected)
            if not ok:
                names = (_type_word(expected.__name__) if isinstance(expected, type) else "number"
                         if expected == (int, float) else " or a ".join(_type_word(t.__name__) for t in expected))
                raise OptionError(f"[{table}] {key} must be a {names}, found {value!r}",
                                  where=path, fix="correct the value")
    for table, keys in _REQUIRED[kind].items():
        for key in keys:
            if key not in data.get(table, {}):
                raise OptionError(f"[{table}] needs '{key}'", where=path, fix=f"add {key} = ... under [{table}]")
    _check_values(data, kind, path)
    base = os.path.dirname(os.path.abspath(path))
    for table in ("input", "first", "second"):
        if table in data and "path" in data[table]:
            data[table]["path"] = _resolve(base, data[table]["path"])
    data["output"]["folder"] = _resolve(base, data["output"]["folder"])
    if "compare" in data and "reference_table" in data["compare"]:
        data["compare"]["reference_table"] = _resolve(base, data["compare"]["reference_table"])
    for entry in data.get("runs", []) if kind == "campaign" else []:
        entry["path"] = _resolve(base, entry["path"])
    if "free_energy" in data.get("phase_field", {}):
        data["phase_field"]["free_energy"] = _resolve(base, data["phase_field"]["free_energy"])
    if "model" in data.get("miscibility", {}):
        data["miscibility"]["model"] = _resolve(base, data["miscibility"]["model"])
    if "miscibility" in data:
        _check_miscibility(data["miscibility"], path)
    for key in data.get("validation", {}):
        data["validation"][key] = _resolve(base, data["validation"][key])
    if "validation" in data:
        _point_options(data["validation"])  # the files are read and checked before any work
    data["kind"] = kind
    data["base"] = base
    with open(path, encoding="utf-8", errors="replace") as handle:
        data["recipe_text"] = handle.read()
    data["recipe_path"] = os.path.abspath(path)
    return data


#: recipe entry -> the measure option it sets (values are checked one entry at a time)
_MEASURE_OPTION = {("input", "field"): "field", ("input", "range"): "range", ("input", "phase"): "phase",
                   ("input", "velocity"): "velocity", ("interface", "level"): "level",
                   ("interface", "diffusivity"): "diffusivity", ("interface", "interface_kind"): "interface_kind",
                   ("droplets", "adjacency"): "adjacency",
                   ("droplets", "periodic"): "periodic",
                   ("droplets", "ignore_remerge_within"): "ignore_remerge_within", ("mixing", "box"): "box",
                   ("mixing", "section_axis"): "section_axis", ("mixing", "section_count"): "section_count",
                   ("mixing", "section_positions"): "section_positions", ("mixing", "mixing_target"): "mixing_target",
                   ("mixing", "inflow_mean"): "inflow_mean",
                   ("conservation", "densities"): "densities",
                   ("conservation", "drift_tolerance"): "drift_tolerance", ("run", "analyses"): "analyses",
                   ("input", "steps"): "steps", ("input", "time_from"): "time_from", ("input", "time_to"): "time_to",
                   ("input", "every"): "every", ("run", "strict"): "strict"}


#: how an entry is written, for a value of the wrong form
_FORM = {"box": "write box = [[xmin, xmax], [ymin, ymax]] (and [zmin, zmax] in 3D)",
         "range": "write range = [low, high]", "densities": "write densities = [phase, other phase]",
         "section_positions": "write section_positions = [x1, x2, ...]", "periodic": 'write periodic = ["x", "y"]'}


def _check_values(data: dict, kind: str, path: str) -> None:
    """Check every value of a recipe before any work, naming the entry as the recipe writes it.

    Each entry goes through the same checks as the Python API (:class:`MeasureOptions`),
    one entry at a time, so the message names ``[table] key`` and the value found.
    """
    from .model.indicator import normalize_phase, parse_range
    from .model._threads import check_threads
    from .run.options import MeasureOptions, check_workers

    def refuse(table, key, err):
        what = err.what
        head, sep, tail = what.partition(" must ")
        text = f"[{table}] {key} must {tail}" if sep and len(head.split()) <= 3 else f"[{table}] {key}: {what}"
        return OptionError(text, where=path, fix=err.fix)

    mixing = data.get("mixing", {})
    if "section_positions" in mixing and "section_axis" not in mixing:
        raise OptionError("[mixing] section_positions are given without section_axis, so no section would be cut",
                          where=path, fix='add section_axis = "x" (the axis the planes are normal to)')
    if kind in ("measure", "campaign"):
        for (table, key), option in _MEASURE_OPTION.items():
            if key not in data.get(table, {}):
                continue
            value = data[table][key]
            given = {option: value}
            if option == "section_positions" and "section_axis" in mixing:
                given["section_axis"] = mixing["section_axis"]
            try:
                if option == "box":
                    given["box"] = tuple(tuple(pair) if isinstance(pair, list) else pair for pair in value)
                MeasureOptions(**{"field": "c", **given})
            except OptionError as err:
                raise refuse(table, key, err) from None
            except (TypeError, ValueError) as err:
                raise OptionError(f"[{table}] {key} has a value of the wrong form ({value!r}: {err})",
                                  where=path, fix=_FORM.get(key, "see the recipe format in the README")) from None
    for table in ("input", "first", "second"):
        entries = data.get(table, {})
        try:
            if "range" in entries:
                parse_range(tuple(entries["range"]))
            if "phase" in entries:
                normalize_phase(entries["phase"])
        except OptionError as err:
            raise refuse(table, "range" if "range" in err.what else "phase", err) from None
        for key in ("interface_kind", "steps") if table != "input" else ():  # a compare run's (measure's: above)
            try:
                if key in entries:
                    MeasureOptions(field="c", level_set=entries.get("level_set", False), **{key: entries[key]})
            except OptionError as err:
                raise refuse(table, key, err) from None
    run = data.get("run", {})
    for key, check in (("workers", check_workers), ("threads", check_threads)):
        try:
            if key in run:
                check(run[key])
        except OptionError as err:
            raise refuse("run", key, err) from None
    if run.get("snapshots", 0) < 0:
        raise OptionError(f"[run] snapshots must be 0 or more, found {run['snapshots']}", where=path,
                          fix="4 snapshots is the default")
    compare = data.get("compare", {})
    for key in ("time_tolerance", "spacing"):
        if key in compare and not compare[key] > 0:
            raise OptionError(f"[compare] {key} must be positive, found {compare[key]}", where=path,
                              fix="leave it out for the default")
    if "periodic" in compare:
        try:
            MeasureOptions(field="c", periodic=tuple(compare["periodic"]))
        except OptionError as err:
            raise refuse("compare", "periodic", err) from None
    if "level" in compare and not 0 < compare["level"] < 1:
        raise OptionError(f"[compare] level must lie strictly between 0 and 1, found {compare['level']}",
                          where=path, fix="the interface is usually at level 0.5")


def _check_runs(runs, path: str, inp: dict) -> None:
    """Check the [[runs]] tables of a campaign: each a table with a path and a numeric parameter."""
    if not isinstance(runs, list) or not runs or not all(isinstance(r, dict) for r in runs):
        raise OptionError("runs must be [[runs]] tables", where=path,
                          fix='write [[runs]] with path = "..." and parameter = 0.5 for each run')
    if "path" in inp:
        raise OptionError("a campaign's [input] has no path: each [[runs]] table names its own", where=path,
                          fix="move the path into the [[runs]] tables")
    for k, entry in enumerate(runs, start=1):
        for key, value in entry.items():
            if key not in RUN_ENTRY:
                raise OptionError(f"unknown key '{key}' in [[runs]] number {k}; {_suggest(key, RUN_ENTRY)}",
                                  where=path, fix="see the recipe format in the README")
            expected = RUN_ENTRY[key]
            if (isinstance(value, bool) and key == "parameter") or not isinstance(value, expected):
                raise OptionError(f"[[runs]] number {k}: {key} must be a "
                                  f"{'number' if key == 'parameter' else 'text in quotes'}, found {value!r}",
                                  where=path, fix="correct the value")
        for key in ("path", "parameter"):
            if key not in entry:
                raise OptionError(f"[[runs]] number {k} needs '{key}'", where=path, fix=f"add {key} = ...")


def _type_word(name: str) -> str:
    return {"str": "text in quotes", "list": "list [..]", "bool": "true or false", "int": "whole number"}.get(
        name, name)


def _resolve(base: str, value: str) -> str:
    value = os.path.expanduser(value)
    if any(ch in value for ch in "*?[") or os.path.isabs(value):
        return value if os.path.isabs(value) else os.path.join(base, value)
    return os.path.normpath(os.path.join(base, value))


def measure_arguments(recipe: dict) -> dict:
    """Keyword arguments of :func:`phasegauge.run.measure.measure` for a measure recipe."""
    from .run.measure import ANALYSES, MeasureOptions

    inp = recipe["input"]
    iface = recipe.get("interface", {})
    drops = recipe.get("droplets", {})
    mix = recipe.get("mixing", {})
    cons = recipe.get("conservation", {})
    run = recipe.get("run", {})
    out = recipe["output"]
    options = MeasureOptions(
        field=inp["field"], range=tuple(inp.get("range", (0.0, 1.0))), phase=inp.get("phase", "upper"),
        level=iface.get("level", 0.5), velocity=inp.get("velocity"),
        analyses=tuple(run.get("analyses", ANALYSES)), adjacency=drops.get("adjacency", "face"),
        periodic=tuple(drops.get("periodic", ())), ignore_remerge_within=drops.get("ignore_remerge_within", 0),
        densities=tuple(cons["densities"]) if "densities" in cons else None,
        diffusivity=iface.get("diffusivity"), interface_kind=iface.get("interface_kind"),
        box=tuple(map(tuple, mix["box"])) if "box" in mix else None,
        section_axis=mix.get("section_axis"), section_count=mix.get("section_count", 20),
        section_positions=tuple(mix["section_positions"]) if "section_positions" in mix else None,
        mixing_target=mix.get("mixing_target", 0.9), inflow_mean=mix.get("inflow_mean"),
        segregation_scale=mix.get("segregation_scale", False),
        drift_tolerance=cons.get("drift_tolerance", 1e-3),
        strict=run.get("strict", False), field_location=inp.get("field_location", "auto"),
        sort_by_time=inp.get("sort_by_time", False), keep_3d=inp.get("keep_3d", False),
        level_set=inp.get("level_set", False), steps=inp.get("steps"),
        time_from=inp.get("time_from"), time_to=inp.get("time_to"), every=inp.get("every", 1),
        **recipe.get("phase_field", {}), **_point_options(recipe.get("validation", {})),
        **recipe.get("miscibility", {}))
    return dict(path=inp.get("path"), options=options, out=out["folder"], overwrite=out.get("overwrite", False),
                workers=run.get("workers", 1), threads=run.get("threads"), scheduler=run.get("scheduler"),
                contours=iface.get("contours", True), snapshots=run.get("snapshots", 4),
                plot_format=out.get("plot_format", "png"), keep_cache=out.get("keep_cache", False),
                invocation={"recipe": recipe.get("recipe_text", ""), "recipe_path": recipe.get("recipe_path", "")})


def _check_miscibility(miscibility: dict, path: str) -> None:
    """Check the [miscibility] table as a whole (the model is read here), naming the table."""
    from .run.options import MeasureOptions

    if "model" not in miscibility:
        raise OptionError("[miscibility] needs 'model'", where=path, fix='add model = "MODEL.toml"')
    try:
        MeasureOptions(field="c", **miscibility)
    except OptionError as err:
        raise OptionError(f"[miscibility] {err.what}", where=err.where or path, fix=err.fix) from None


def _point_options(validation: dict) -> dict:
    """MeasureOptions entries read from a recipe's [validation] files."""
    from .io import read_line_file, read_measured_file, read_probe_file

    readers = {"probes": read_probe_file, "lines": read_line_file, "measured": read_measured_file}
    return {key: readers[key](path) for key, path in validation.items()}


def run_recipe(path, *, overwrite=None, resume: bool = False, workers=None, threads=None, progress=None,
               strict=None):
    """Run a recipe file; returns the measure or compare result.

    ``overwrite``, ``workers``, ``threads`` and ``strict`` override the recipe's entries when given.
    """
    recipe = load_recipe(path)
    if strict is not None and recipe["kind"] != "compare":
        recipe.setdefault("run", {})["strict"] = bool(strict)
    if recipe["kind"] == "measure":
        from .run.measure import measure

        kwargs = measure_arguments(recipe)
        if overwrite is not None:
            kwargs["overwrite"] = overwrite
        if workers is not None:
            kwargs["workers"] = workers
        if threads is not None:
            kwargs["threads"] = threads
        return measure(resume=resume, progress=progress, **kwargs)
    if recipe["kind"] == "campaign":
        from .run.campaign import run_campaign

        kwargs = measure_arguments(recipe)
        campaign = recipe.get("campaign", {})
        return run_campaign(recipe["runs"], kwargs["options"], out=kwargs["out"],
                            parameter=campaign.get("parameter", "parameter"), unit=campaign.get("unit", ""),
                            overwrite=kwargs["overwrite"] if overwrite is None else overwrite, resume=resume,
                            workers=kwargs["workers"] if workers is None else workers,
                            threads=kwargs["threads"] if threads is None else threads, progress=progress,
                            contours=kwargs["contours"], snapshots=kwargs["snapshots"],
                            scheduler=kwargs["scheduler"], plot_format=kwargs["plot_format"],
                            keep_cache=kwargs["keep_cache"])
    from .run.compare import compare_runs, compare_arguments

    kwargs = compare_arguments(recipe)
    if overwrite is not None:
        kwargs["overwrite"] = overwrite
    if workers is not None:
        kwargs["workers"] = workers
    if threads is not None:
        kwargs["threads"] = threads
    return compare_runs(progress=progress, **kwargs)

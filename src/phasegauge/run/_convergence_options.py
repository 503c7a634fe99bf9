"""The measure options the three runs of a convergence study share, compared as what they measured.

Every :class:`~phasegauge.run.options.MeasureOptions` field is compared between the runs
(:data:`MEASURING_OPTIONS`), except the few of :data:`NOT_COMPARED_OPTIONS`, each with the reason it
cannot change a figure of a column all three runs write; a field added to the options later is
compared unless it is added there.
"""

from __future__ import annotations

import dataclasses
from types import MappingProxyType

from ..errors import OptionError
from .options import MeasureOptions

__all__ = ["MEASURING_OPTIONS", "NOT_COMPARED_OPTIONS", "as_json", "location_read",
           "measured_words", "check_same_options", "given_options", "check_given_options", "measured_with"]

#: measure options the runs may differ in, each with why it cannot change a figure of a column all three
#: runs write (the convergence table compares only the columns all three write, at the times they share)
NOT_COMPARED_OPTIONS = MappingProxyType({
    "analyses": "chooses which columns are written; a column all three write is computed alike",
    "segregation_scale": "adds the segregation_scale column only",
    "coarsening": "adds the coarsening_length and interface_spacing columns only",
    "ignore_remerge_within": "renames droplet tracks and leaves events out: no steps.csv column, no droplet volume",
    "diffusivity": "the physical value the findings set the numerical diffusivity against: no column",
    "drift_tolerance": "the drift that raises a finding: no column",
    "strict": "whether a bad step stops the run or is skipped: the steps measured get the same figures",
    "sort_by_time": "the step order: without it a series whose times do not increase is refused, so the figures "
                    "are the same or none",
    "time_to": "leaves later steps out only: a figure at a kept time is the same (the drift and the outflow run "
               "from the first step)",
    "probes": "a table of its own (probes.csv)",
    "lines": "a table of its own (lines.csv)",
    "measured": "a table of its own (validation.csv)",
})

#: measure options that can change the figures: the three runs must share them (named as on the command line;
#: ``steps``, ``time_from`` and ``every`` too: the first step measured is the drift's reference, and the steps
#: kept are the outflow's time steps)
MEASURING_OPTIONS = tuple(f.name for f in dataclasses.fields(MeasureOptions) if f.name not in NOT_COMPARED_OPTIONS)


#: options that only add columns when given (the cross sections' profile and mixing length; the masses): a run
#: measured without one writes none of those columns, so between runs its "not given" matches any
_ADDS_COLUMNS = ("section_axis", "densities")

#: options read by the cross sections only: a run measured without a section axis is not compared on them
_SECTION_OPTIONS = ("section_count", "section_positions", "mixing_target", "inflow_mean")

#: an option's value longer than this many characters is cut in a message (a model's parameters)
_SHOWN_CHARACTERS = 60


def _as_written(value):
    """``value`` with each dataclass instance in it (a free-energy or mixture model) as the manifest writes
    the options (``dataclasses.asdict``: a dict of its fields), not as its text."""
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return dataclasses.asdict(value)
    if isinstance(value, dict):
        return {key: _as_written(item) for key, item in value.items()}
    if isinstance(value, (list, tuple)):
        return [_as_written(item) for item in value]
    return value


def as_json(value):
    """``value`` as the manifest holds it (models as dicts of their fields, tuples as lists, other objects as
    text, NaN and infinities as null)."""
    import json

    from ..report._files import strict_json

    return json.loads(json.dumps(strict_json(_as_written(value)), default=str))


def _option_words(value) -> str:
    if isinstance(value, bool):
        return "on" if value else "off"
    if value is None:
        return "not given"
    if isinstance(value, list):
        return ",".join(_option_words(v) for v in value) or "none"
    return f"{value:g}" if isinstance(value, float) else str(value)


def _shown(words: str) -> str:
    return words if len(words) <= _SHOWN_CHARACTERS else words[:_SHOWN_CHARACTERS - 3] + "..."


def location_read(field_read) -> str:
    """Where a run read its field, from its manifest's ``field_read`` line ("" when not recorded)."""
    import re

    found = re.search(r"': (cell|point) data", str(field_read or ""))
    return found.group(1) if found else ""


def measured_words(key, value, source=None):
    """An option's value as what it measured, in words; None where it matches any.

    Periodic axes are a set; the field location ``auto`` is the location ``source`` read the field
    from (None where unknown); ``keep_3d`` off on a mesh ``source`` measured in 3D, or on a 2D mesh,
    changed nothing (a mesh one cell thick measured as 2D records its depth) and matches any.
    """
    value = as_json(value)
    if key == "periodic" and isinstance(value, list):
        value = sorted(str(v) for v in value)
    if key == "field_location" and value in (None, "auto"):
        return (source.location_read or None) if source is not None else None
    if key == "keep_3d" and source is not None and source.recorded_dimension in (2, 3):
        if source.recorded_dimension == 2 and not source.recorded_depth:
            return None  # a 2D mesh: keep_3d has nothing to keep
        if source.recorded_dimension == 3 and not value:
            return None  # measured in 3D without it: not a mesh one cell thick
    return _option_words(value)


def check_same_options(sources) -> None:
    """Refuse runs measured with different options that change the figures (:data:`MEASURING_OPTIONS`).

    What was measured is compared: periodic axes as a set, the field location as the location read
    (``auto`` where that is not known yet matches either), ``keep_3d`` only where the mesh is one cell
    thick. A run measured without a section axis or densities (:data:`_ADDS_COLUMNS`) wrote none of
    the columns those change, so it is not compared on them (nor on the section options,
    :data:`_SECTION_OPTIONS`). A run whose manifest lacks an option (an older measure run) is not
    compared on it. A series'
    ``keep_3d`` is compared once its mesh is read (its dimension as measured and depth recorded): a real
    3D mesh measured with it is the mesh measured without it.
    """
    for key in MEASURING_OPTIONS:
        groups = {}
        for source in sources:
            if key == "keep_3d" and source.kind == "series" and not source.recorded_dimension:
                continue
            if (key in _ADDS_COLUMNS and source.options.get(key) is None
                    or key in _SECTION_OPTIONS and source.options.get("section_axis", "") is None):
                continue  # it wrote none of the columns the option changes
            if key in source.options:
                words = measured_words(key, source.options[key], source)
                if words is not None:
                    groups.setdefault(words, []).append(source)
        if len(groups) > 1:
            (first, runs), (second, others) = list(groups.items())[:2]
            names = [", ".join(s.name for s in group) for group in (runs, others)]
            flag = "--" + key.replace("_", "-")
            raise OptionError(f"the runs were measured with different {flag}: {_shown(first)} ({names[0]}) against "
                              f"{_shown(second)} ({names[1]}), so their figures are not those of one case",
                              where=others[0].path,
                              fix="measure the runs with the same options (or give the three series with the "
                                  "options once)")


def given_options(options, given) -> dict:
    """The measuring options given explicitly: ``given``, else those of ``options`` off their defaults."""
    if given is not None:
        return {k: v for k, v in dict(given).items() if k in MEASURING_OPTIONS}
    if options is None:
        return {}
    defaults = type(options)(field=options.field)
    return {k: getattr(options, k) for k in MEASURING_OPTIONS
            if hasattr(options, k) and as_json(getattr(options, k)) != as_json(getattr(defaults, k))}


def check_given_options(sources, given: dict) -> None:
    """Refuse measuring options given with measure folders measured otherwise: they cannot apply to a folder."""
    folders = [s for s in sources if s.kind == "measure folder"]
    for key, value in given.items():
        flag = "--" + key.replace("_", "-")
        odd = [s for s in folders if key in s.options
               and measured_words(key, value) is not None
               and measured_words(key, s.options[key], s) not in (None, measured_words(key, value))]
        if odd:
            own, typed = measured_words(key, odd[0].options[key], odd[0]), measured_words(key, value)
            names = ", ".join(s.name for s in odd[:-1]) + (" and " if len(odd) > 1 else "") + odd[-1].name
            one = len(odd) == 1
            if isinstance(value, bool):
                given_words, own_words = flag if value else f"no {flag}", f"with{'' if own == 'on' else 'out'} it"
            else:
                given_words, own_words = f"{flag} {_shown(typed)}", f"with {flag} {_shown(own)}"
            raise OptionError(f"{given_words} was given, but the {names} run{'' if one else 's'} "
                              f"(measure folder{'' if one else 's'}) {'was' if one else 'were'} measured {own_words}: "
                              "a folder's figures are not measured again", where=odd[0].path,
                              fix=f"measure {'it' if one else 'them'} again with {given_words} (or give "
                                  f"{'its series' if one else 'their series'}), or leave {flag} out")


def measured_with(sources):
    """The options the figures were measured with: a series' (measured here), else the fine folder's (every
    option that changes a figure is the same in every run; each run's own are in its record)."""
    measured = [s for s in sources if s.kind == "series"] or [s for s in sources if s.options]
    return measured[0].options if measured else None

"""The ``equilibrium`` command's work: a model file at one temperature, or its phase diagram.

Reads the model (io), solves it (analysis) and hands plain records to the report writer.
"""

from __future__ import annotations

import numpy as np

from ..errors import OptionError

__all__ = ["equilibrium_record", "phase_diagram_run", "critical_search_range"]


def critical_search_range(temperature=None, temperatures=None) -> tuple:
    """Where critical points are searched: a quarter to four times T, or the diagram's range."""
    if temperatures is not None:
        return float(temperatures[0]), float(temperatures[1])
    return max(0.25 * float(temperature), 1e-3), 4.0 * float(temperature)


def _check_temperature(value, name):
    if value is None or not np.isfinite(value) or value <= 0:
        raise OptionError(f"{name} must be a temperature > 0 K, found {value!r}", fix=f"for example {name} 298.15")
    return float(value)


def _critical_records(model, search):
    from ..analysis.thermo import critical_points

    return [{"temperature": p.temperature, "composition": p.composition, "kind": p.kind}
            for p in critical_points(model, temperatures=search)]


def _model_record(model, path) -> dict:
    return {"model_file": str(path), "kind_of_model": model.kind, "component": model.component}


def equilibrium_record(model, temperature, *, path="") -> dict:
    """Binodal, spinodal and critical point(s) of ``model`` at ``temperature`` (K), as plain values.

    Returns
    -------
    dict
        ``temperature, state ('two phases' | 'one stable phase'), binodal_lean, binodal_rich,
        spinodal_lean, spinodal_rich, critical_temperature, critical_composition, kind,
        critical_points, critical_search, two_phase_regions, unstable_ranges`` plus the model's kind
        and component (NaN / None where there is none). ``two_phase_regions`` lists every region as
        ``[lean, rich]`` (the binodal pair is the widest; the others on the composition grid) and
        ``unstable_ranges`` every range where the free energy is concave (the spinodal pair spans them).
    """
    from ..analysis._binodal import all_regions
    from ..analysis.thermo import equilibrium_at

    t = _check_temperature(temperature, "--temperature")
    eq = equilibrium_at(model, t)
    regions, unstable = all_regions(model, t, eq)
    search = critical_search_range(temperature=t)
    critical = _critical_records(model, search)
    first = critical[0] if critical else {"temperature": float("nan"), "composition": float("nan"), "kind": None}
    record = _model_record(model, path)
    record.update({"temperature": t, "state": "two phases" if eq.separates else "one stable phase",
                   "binodal_lean": eq.binodal_lean, "binodal_rich": eq.binodal_rich,
                   "spinodal_lean": eq.spinodal_lean, "spinodal_rich": eq.spinodal_rich,
                   "confirmed": eq.confirmed, "critical_temperature": first["temperature"],
                   "critical_composition": first["composition"], "kind": first["kind"],
                   "critical_points": critical, "critical_search": list(search),
                   "two_phase_regions": [list(r) for r in regions], "unstable_ranges": [list(r) for r in unstable]})
    return record


def phase_diagram_run(model, temperatures, *, out, count=200, overwrite=False, path="") -> dict:
    """Write the phase diagram of ``model`` over ``temperatures`` = (LO, HI) into the folder ``out``.

    Writes ``phase_diagram.csv`` (temperature, binodal and spinodal pairs) and ``phase_diagram.png``
    through the report's atomic writes; an existing folder is refused unless ``overwrite``.

    Returns
    -------
    dict
        The model, the range, the critical points and the findings (for example no split in range).
    """
    from ..analysis.thermo import phase_diagram
    from ..report._phase_diagram import write_phase_diagram

    if temperatures is None or len(temperatures) != 2:
        raise OptionError(f"--temperatures needs LO,HI, found {temperatures!r}", fix="for example 280,380")
    lo = _check_temperature(temperatures[0], "--temperatures")
    hi = _check_temperature(temperatures[1], "--temperatures")
    if not lo < hi:
        raise OptionError(f"--temperatures needs LO < HI, found {lo:g},{hi:g}", fix="for example 280,380")
    if int(count) < 2:
        raise OptionError(f"--count must be at least 2, found {count}", fix="for example --count 200")
    t = np.linspace(lo, hi, int(count))
    table = phase_diagram(model, t)
    critical = _critical_records(model, (lo, hi))
    separated = np.isfinite(table["binodal_lean"]) | ~table["solved"]   # not solved: a split (it has a spinodal)
    findings = []
    if not separated.any():
        findings.append(f"one stable phase at every temperature from {lo:g} to {hi:g} K (no split in the range)")
    elif separated.all():
        findings.append(f"two phases at every temperature from {lo:g} to {hi:g} K (no critical point in the range)")
    if not table["solved"].all():
        unsolved = t[~table["solved"]]
        findings.append(f"the binodal was not solved at {unsolved.size} temperature(s) from {unsolved[0]:g} to "
                        f"{unsolved[-1]:g} K (left empty; the warning names the cause)")
    if not table["confirmed"].all():
        findings.append(f"{int((~table['confirmed']).sum())} binodal pair(s) failed the global stability test")
    others = _other_regions(model, table)
    if others:
        at = sorted({row["temperature"] for row in others})
        findings.append(f"a second two-phase region beside the binodal's at {len(at)} temperature(s) from "
                        f"{at[0]:g} to {at[-1]:g} K: the binodal columns are the widest region; the others are "
                        "drawn as dots and listed in other_two_phase_regions")
    record = _model_record(model, path)
    record.update({"temperatures": [lo, hi], "count": int(count), "critical_points": critical,
                   "findings": findings, "other_two_phase_regions": others})
    columns = {name: np.asarray(table[name]) for name in ("temperature", "binodal_lean", "binodal_rich",
                                                          "spinodal_lean", "spinodal_rich")}
    write_phase_diagram(out, columns, record, overwrite=overwrite)
    return record


def _other_regions(model, table: dict) -> list:
    """The two-phase regions beside the binodal's (the widest) at each temperature of the diagram, as
    ``{"temperature", "lean", "rich"}`` records (none for a double well)."""
    from ..analysis._binodal import other_regions
    from ..model.mixture_models import DoubleWellModel

    if isinstance(model, DoubleWellModel):
        return []
    found = []
    for t, lean, rich in zip(table["temperature"], table["binodal_lean"], table["binodal_rich"]):
        if np.isfinite(lean):
            found += [{"temperature": float(t), "lean": a, "rich": b} for a, b in other_regions(model, t, lean, rich)]
    return found

"""Campaigns: one case measured over a sweep of a parameter (a recipe with ``[[runs]]``).

Every run is measured with the recipe's options into its own folder under the
output folder (``run_<label>``); ``campaign.csv`` holds one row per run with its
summary figures, and the report draws each against the parameter. A resumed
campaign reuses the runs that finished and resumes the one that was interrupted.
"""

from __future__ import annotations

import hashlib
import json
import os
import re
import time
from dataclasses import dataclass, field

import numpy as np

from ..errors import OptionError

__all__ = ["CampaignResult", "run_campaign", "campaign_summary", "SUMMARY_FIGURES", "run_label"]

#: campaign.csv figures taken from each run: (column, steps.csv column or audit key, how)
SUMMARY_FIGURES = (("mixing_length", "mixing_length", "last"), ("mixing_index", "mixing_index", "last"),
                   ("phase_volume_drift", "phase_volume_drift", "last"),
                   ("interface_width", "interface_width", "last"), ("droplet_count", "droplet_count", "last"),
                   ("D_num", "D_num", "audit"))


@dataclass
class CampaignResult:
    """The campaign table (a DataFrame, one row per run) and each run's measure result (None when reused)."""

    table: object
    runs: list = field(default_factory=list)
    parameter: str = "parameter"
    unit: str = ""


def run_label(entry: dict, k: int) -> str:
    """The folder-safe label of run ``k`` (its ``label``, else its number)."""
    label = str(entry.get("label") or f"{k:03d}")
    return re.sub(r"[^A-Za-z0-9_.-]+", "_", label)


def campaign_summary(steps, audit: dict) -> dict:
    """The summary figures of one run (see :data:`SUMMARY_FIGURES`); NaN where the run has none."""
    out = {}
    for column, source, how in SUMMARY_FIGURES:
        if how == "audit":
            value = (audit or {}).get(source)
        elif steps is not None and source in steps and len(steps):
            value = steps[source].iloc[-1]
        else:
            value = None
        out[column] = float(value) if value is not None and np.isfinite(float(value)) else float("nan")
    out["steps"] = 0 if steps is None else int(len(steps))
    return out


def _finished(folder: str):
    """(steps table, audit) of a finished measure run in ``folder``, or None."""
    import pandas as pd

    from ..report._files import RUN_MARKER

    try:
        with open(os.path.join(folder, RUN_MARKER), encoding="utf-8") as handle:
            if json.load(handle).get("state") != "complete":
                return None
        steps = pd.read_csv(os.path.join(folder, "steps.csv"))
        audit = {}
        path = os.path.join(folder, "diffusion_audit.json")
        if os.path.isfile(path):
            with open(path, encoding="utf-8") as handle:
                audit = json.load(handle)
        return steps, audit
    except (OSError, ValueError):
        return None


def run_campaign(runs: list, options, *, out, parameter: str = "parameter", unit: str = "",
                 overwrite: bool = False, resume: bool = False, workers: int = 1, progress=False,
                 contours: bool = True, snapshots: int = 4) -> CampaignResult:
    """Measure every run of a campaign and tabulate its summary figures against the parameter.

    Parameters
    ----------
    runs : list of dict
        Each ``path`` (a series), ``parameter`` (a number) and optional ``label``.
    options : MeasureOptions
        The options every run is measured with.
    out : str or os.PathLike
        The campaign folder: ``campaign.csv``, plots, ``manifest.json`` and one
        ``run_<label>`` measure folder per run.
    parameter, unit : str
        Name and unit of the swept parameter (column names and plot labels).
    overwrite, resume : bool
        As for ``measure``; a resumed campaign reuses finished runs.
    workers : int
        Local worker processes of each run.

    Returns
    -------
    CampaignResult
    """
    from ..report._files import output_transaction, prepare_output_folder
    from .measure import measure

    if not runs:
        raise OptionError("a campaign needs at least one run", fix="add [[runs]] tables with path and parameter")
    labels = [run_label(r, k) for k, r in enumerate(runs)]
    if len(set(labels)) != len(labels):
        raise OptionError("run labels repeat", fix="give every [[runs]] table its own label")
    for r in runs:
        value = r.get("parameter")
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not np.isfinite(value):
            raise OptionError(f"every run needs a finite number as parameter, found {value!r}",
                              fix="write parameter = 0.5 in each [[runs]] table")
    started = time.time()
    key = hashlib.sha256(json.dumps([[os.path.abspath(r["path"]), float(r["parameter"]), label]
                                     for r, label in zip(runs, labels)]).encode()
                         + options.key().encode()).hexdigest()[:16]
    with output_transaction(out):
        prepare_output_folder(out, overwrite=overwrite, resume=resume, run_key=key)
        rows, results = [], []
        for r, label in zip(runs, labels):
            folder = os.path.join(os.fspath(out), f"run_{label}")
            done = _finished(folder) if resume else None
            if done is None:
                res = measure(r["path"], options=options, out=folder, workers=workers, progress=progress,
                              resume=resume and os.path.isdir(folder), contours=contours,
                              snapshots=snapshots)
                steps, audit = res.steps, res.audit
            else:
                res, (steps, audit) = None, done
            results.append(res)
            rows.append({"run": label, "parameter": float(r["parameter"]), "path": os.path.abspath(r["path"]),
                         "folder": f"run_{label}", **campaign_summary(steps, audit)})
        table = _table(rows)
        from ._report_data import package_version
        from ..report._campaign_report import write_campaign_report

        write_campaign_report(out, table, parameter=parameter, unit=unit, version=package_version(), started=started,
                              run_key=key)
    return CampaignResult(table=table, runs=results, parameter=parameter, unit=unit)


def _table(rows):
    import pandas as pd

    table = pd.DataFrame(rows)
    return table.sort_values("parameter", kind="stable", ignore_index=True)

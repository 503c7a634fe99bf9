"""Numbers in file and folder names: the order of a series' files, their name patterns, and the
doubts names leave (decimals or frame numbers; several series in one folder).

A number in a name is :data:`NAME_NUMBER`: digits, with a decimal part and an exponent if they have
them, so solvers' time folders (``0.05``, ``1e-05``) order by value. A minus sign is not read (names
of negative times need a listing).
"""

from __future__ import annotations

import fnmatch
import glob as globmod
import os
import re
import warnings

import numpy as np

from ..errors import SeriesError, SeriesWarning

__all__ = ["NAME_NUMBER", "name_number", "natural_key", "digits_masked", "check_one_family", "warn_decimal_doubt",
           "first_three"]

#: a number in a file or folder name, as names are ordered, masked and numbered: digits, with a
#: decimal part and an exponent if they have them (solvers' time folders ``0.05`` and ``1e-05``)
NAME_NUMBER = r"\d+(?:\.\d+)?(?:[eE][-+]?\d+)?"


def name_number(text: str) -> int | float:
    """The value of a number matched by :data:`NAME_NUMBER`: an int for plain digits, else a float
    (``0.10`` and ``0.1`` are equal; ``1.10`` comes before ``1.9``, as decimals do)."""
    return int(text) if text.isdigit() else float(text)


def natural_key(text: str, numbers: str = NAME_NUMBER):
    """Sort key that orders embedded numbers by value in every path component.

    ``step_2`` comes before ``step_10``, ``run_12/internal.vtu`` before
    ``run_114/internal.vtu``, and the time folders ``0.05`` and ``1e-05`` are taken as the numbers
    they are (``0.05`` before ``0.1``): each folder name and the file name are compared in turn,
    numbers (``numbers``, a pattern: :data:`NAME_NUMBER`; ``r"\\d+"``
    reads digits alone, so ``1.10`` after ``1.9`` as frame numbers) as numbers, letters without
    case; the whole text breaks ties.
    """
    text = os.fspath(text)
    components = [c for c in re.split(r"[\\/]+", text) if c]
    return [[(0, name_number(p)) if re.fullmatch(numbers, p) else (1, p.lower())
             for p in re.split(f"({numbers})", c) if p]
            for c in components] + [[(2, text)]]


def warn_decimal_doubt(files: list, where: str, steps: list) -> None:
    """Warn when no step stores its time, the names' numbers order differently as decimals (the order
    taken: ``data_1.10`` before ``data_1.8``) and as runs of digits (frame numbers: after it), and the
    decimals are not at a steady interval, as time folders (``0``, ``0.05``, ``0.1``) are."""
    if len(files) < 2 or any(s.time_origin != "index" for s in steps):
        return
    frames = sorted(files, key=lambda f: natural_key(f, numbers=r"\d+"))
    if frames == files or _steady(files):
        return
    first = next(i for i, (a, b) in enumerate(zip(files, frames)) if a != b)
    warnings.warn(SeriesWarning(f"no step stores its time and the names hold numbers with a decimal point, taken as "
                                f"decimals: {os.path.basename(files[first])} is step {first} (as frame numbers "
                                f"{os.path.basename(frames[first])} would be); give a 'time,path' listing if they "
                                "are frame numbers", where=where), stacklevel=3)


def _steady(files: list) -> bool:
    """Whether the last number in each path (below the files' common folder) rises at one interval,
    to a part in a thousand."""
    common = os.path.commonpath([os.path.abspath(f) for f in files])
    values = []
    for f in files:
        found = re.findall(NAME_NUMBER, os.path.relpath(os.path.abspath(f), common))
        if not found:
            return False
        values.append(float(found[-1]))
    steps = np.diff(values)
    return len(values) >= 3 and steps.min() > 0 and steps.max() - steps.min() <= 1e-3 * steps.max()


def digits_masked(path: str) -> str:
    """A file's name with every number replaced by ``#``: runs of digits, with a decimal part and
    an exponent if they have them (``c_0.5.vtu``, ``c_1.vtu`` and ``s_1.0e-01.vtu`` alike)."""
    return re.sub(NAME_NUMBER, "#", os.path.basename(path))


def check_one_family(files: list, where: str) -> None:
    """Refuse files of several series in one folder or glob: two or more name patterns (every number
    masked, :func:`digits_masked`) of two files or more each, such as a solver's boundary patches
    (``wall_0001.vtu``) beside its volume files (``out_0001.vtu``). Measured in one name order they
    would mix the meshes of the patches and the volume into one history."""
    families: dict = {}
    for f in files:
        families.setdefault(digits_masked(f), []).append(f)
    several = {p: fs for p, fs in families.items() if len(fs) >= 2}
    if len(several) < 2:
        return
    # the largest first file is most likely the volume mesh (its patches hold a layer of faces)
    likely = max(several, key=lambda p: _size(several[p][0]))
    shown = first_three([f"{p.replace('#', '*')} ({len(fs)} files)" for p, fs in several.items()])
    others = [os.path.basename(f) for p, fs in several.items() if p != likely for f in fs]
    suggested = _glob_for(likely, where if os.path.isdir(where) else os.path.dirname(where), others)
    raise SeriesError(f"the files are {len(several)} series named differently ({shown}), such as boundary patches "
                      "beside the volume mesh or steps renamed at a restart, so the steps are not clear", where=where,
                      fix=(f"give a quoted glob that picks one, such as '{suggested}', or a 'time,path' listing"
                           if suggested else "give a 'time,path' listing of the steps"))


def _glob_for(masked: str, folder: str, others: list):
    """A glob for the files of name pattern ``masked`` (numbers as ``#``) that matches none of
    ``others`` (base names), or None: its text escaped, each number ``*``, else ``[0-9]*``."""
    for number in ("*", "[0-9]*"):
        pattern = number.join(globmod.escape(part) for part in masked.split("#"))
        if not any(fnmatch.fnmatchcase(name, pattern) for name in others):
            return os.path.join(folder, pattern)
    return None


def _size(path: str) -> int:
    try:
        return os.path.getsize(path)
    except OSError:
        return 0


def first_three(texts: list) -> str:
    """The first three of ``texts`` joined, and how many more there are (the series' warnings name files or gaps so)."""
    return ", ".join(texts[:3]) + (f" and {len(texts) - 3} more" if len(texts) > 3 else "")

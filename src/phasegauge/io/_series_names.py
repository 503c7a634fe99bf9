"""Numbers in file and folder names: the order of a series' files, their name patterns, and the
doubts names leave (decimals or frame numbers; several series in one folder).

A number in a name is :data:`NAME_NUMBER`: digits, with a decimal part and an exponent if they have
them, so solvers' time folders (``0.05``, ``1e-05``) order by value. A minus sign is not read (names
of negative times need a listing).
"""

from __future__ import annotations

import dataclasses
import fnmatch
import glob as globmod
import os
import re
import warnings

import numpy as np

from ..errors import SeriesError, SeriesWarning
from ._formats import mesh_suffixes, stores_time

__all__ = ["NAME_NUMBER", "INTERVAL_TOLERANCE", "name_number", "natural_key", "digits_masked", "check_one_family",
           "warn_decimal_doubt", "with_folder_times", "first_three", "warn_other_indexes", "is_xml_collection",
           "lists_step_times"]

#: a number in a file or folder name, as names are ordered, masked and numbered: digits, with a
#: decimal part and an exponent if they have them (solvers' time folders ``0.05`` and ``1e-05``)
NAME_NUMBER = r"\d+(?:\.\d+)?(?:[eE][-+]?\d+)?"

#: time steps (and numbers in names) within this fraction of each other count as the same interval
INTERVAL_TOLERANCE = 1e-3


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


def with_folder_times(files: list, steps: list, checked=None) -> list:
    """``steps`` (of ``files``) with the times their step folders' names give where no step stores
    its time: folders named by a number alone (``0``, ``0.05``, ``1e-05``: a solver's time folders),
    each file in its own, some name with a decimal point or an exponent (folders named ``1``, ``2``,
    ``3`` may count outputs, not time). Steps whose files could not be read keep no time.

    The first step's file is read whole first (``checked``: the series' record of checked data
    files): a time it stores beyond the head the discovery reads wins, as it will when each step is
    read, so the folders' names are then not used at all.
    """
    names = [os.path.basename(os.path.dirname(os.path.abspath(f))) for f in files]
    if len(files) < 2 or len(set(names)) < len(names) or not all(re.fullmatch(NAME_NUMBER, n) for n in names):
        return steps
    if not any(re.search(r"[.eE]", n) for n in names) or any(s.time_origin not in ("index", "unknown") for s in steps):
        return steps
    first = next((s for s in steps if s.time_origin == "index"), None)
    if first is None or stores_time(first.path, checked) is not False:  # unreadable: named when measured
        return steps
    return [dataclasses.replace(s, time=float(name_number(n)), time_origin="folder_name")
            if s.time_origin == "index" else s for s, n in zip(steps, names)]


def is_xml_collection(head: bytes) -> bool:
    """Whether a file's head is a VTK-style XML collection of other files (root ``VTKFile`` of
    ``type="Collection"``), whatever the file's name."""
    return re.search(rb'<VTKFile[^>]*type="Collection"', head) is not None


def lists_step_times(head: bytes) -> bool:
    """Whether a file's head is an index another program writes beside a series' step files, naming them
    with their times: an XML collection (:func:`is_xml_collection`) or a JSON file series (an object whose
    ``files`` entries carry a ``name`` and a ``time``). Told by content, not by name; not read (the times
    come from open formats: the files, their folders' names or our own listing)."""
    if is_xml_collection(head):
        return True
    return re.match(rb"\s*\{", head) is not None and b'"files"' in head and b'"time"' in head


#: how much of such an index file is searched for the step files' names (bytes)
_INDEX_HEAD = 1 << 22
#: how much of a file tells whether it is such an index (bytes)
_KIND_HEAD = 2048


def warn_other_indexes(files: list, where: str, steps: list) -> list:
    """Warn once, naming them, of index files another program wrote beside the step files
    (:func:`lists_step_times`: other than mesh files, in the step files' folders or the folder above) that
    name some of them, when a step stores no time: the times they list are not read, and the steps take their
    numbers. Multiblock files (``.vtm``) that name some of them and store a time of their own (VTK's
    multiblock writer puts it there, not in the blocks) are counted too: given the blocks' files, their
    times are not read. Returns the index files named."""
    from ._multiblock import own_time

    if not any(s.time_origin == "index" for s in steps):
        return []
    folders = {os.path.dirname(os.path.abspath(f)) for f in files}
    folders |= {os.path.dirname(f) for f in folders}
    bases = {os.path.basename(f).encode() for f in files}
    meshes = mesh_suffixes()
    found = []
    for folder in sorted(folders):
        try:
            names = sorted(os.listdir(folder), key=natural_key)
        except OSError:
            continue
        for name in names:
            index = os.path.join(folder, name)
            multiblock = name.lower().endswith(".vtm")
            if (not multiblock and name.lower().endswith(meshes)) or not os.path.isfile(index):
                continue  # (a mesh file is no index: not opened)
            try:
                with open(index, "rb") as handle:
                    text = handle.read(_KIND_HEAD)
                    if not (multiblock or lists_step_times(text)):
                        continue
                    text += handle.read(_INDEX_HEAD - _KIND_HEAD)
            except OSError:
                continue
            if any(base in text for base in bases) and not (multiblock and not own_time(index, decode=False)):
                found.append(index)
    if found:
        vtm = [os.path.basename(f) for f in found if f.lower().endswith(".vtm")]
        other = [os.path.basename(f) for f in found if not f.lower().endswith(".vtm")]
        said = [f"{', '.join(other)} beside the step files list{'s' if len(other) == 1 else ''} their times in "
                f"another program's index format{'s' if len(other) > 1 else ''}"] if other else []
        if vtm:
            one = len(vtm) == 1
            said.append(f"the .vtm file{'' if one else 's'} beside the step files ({first_three(vtm)}) "
                        f"store{'s' if one else ''} their times")
        fix = ("give the .vtm files (copies naming only the blocks measured keep their times) or the times in a "
               "'time,path' listing" if vtm else "give the times in a 'time,path' listing (a .steps file, one "
               "'time,path' pair a line) or write them into the files' field data (TimeValue)")
        warnings.warn(SeriesWarning(f"{' and '.join(said)}, not read: the steps without a stored time take their "
                                    f"step numbers as times; {fix}", where=where), stacklevel=3)
    return found


def warn_decimal_doubt(files: list, where: str, steps: list) -> bool:
    """Warn when no step stores its time, some name holds a number with a decimal point, and the
    names read as frame numbers (runs of digits: ``data_1.8`` before ``data_1.10``) order otherwise
    and more regularly (fewer jumps from the smallest interval) than as decimals, the order taken.
    Step folders named by a number alone are time folders (``0``, ``0.05``, ``0.125``): no doubt
    there. Returns whether it warned (the file-number gaps, read as decimals, are then no guide)."""
    if len(files) < 2 or any(s.time_origin != "index" for s in steps):
        return False
    names = _below_common(files)
    if names is None or not any(re.search(r"\d\.\d", name) for name in names):
        return False
    if all(len(p) > 1 and re.fullmatch(NAME_NUMBER, p[0]) for p in (re.split(r"[\\/]+", name) for name in names)):
        return False
    frames = sorted(range(len(files)), key=lambda i: natural_key(files[i], numbers=r"\d+"))
    if frames == list(range(len(files))):
        return False
    if _jumps([_last(name, NAME_NUMBER) for name in names]) <= _jumps([_last(names[i], r"\d+") for i in frames]):
        return False
    first = next(i for i, j in enumerate(frames) if i != j)
    warnings.warn(SeriesWarning(f"no step stores its time and the names hold numbers with a decimal point, taken as "
                                f"decimals: {names[first]} is step {first} (as frame numbers {names[frames[first]]} "
                                "would be); give a 'time,path' listing if they are frame numbers", where=where),
                  stacklevel=3)
    return True


def _below_common(files: list):
    """Each file's path below the common folder of two files or more, or None (none in common)."""
    try:
        common = os.path.commonpath([os.path.abspath(f) for f in files])
    except ValueError:  # different drives
        return None
    return [os.path.relpath(os.path.abspath(f), common) for f in files]


def _last(name: str, numbers: str) -> float:
    """The value of the last number (``numbers``, a pattern) in ``name``, or NaN."""
    found = re.findall(numbers, name)
    return float(found[-1]) if found else float("nan")


def _jumps(values: list) -> int:
    """How many steps between consecutive ``values`` differ from the smallest rising one by more
    than :data:`INTERVAL_TOLERANCE` of it (all of them when the values do not rise)."""
    steps = np.diff(np.asarray(values, dtype=float))
    rising = steps[steps > 0]
    if rising.size == 0 or not np.isfinite(steps).all():
        return steps.size
    return int(np.count_nonzero(np.abs(steps - rising.min()) > INTERVAL_TOLERANCE * rising.min()))


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
    # a folder's name is taken as it is (escaped); a glob's folder part is a pattern already
    suggested = _glob_for(likely, globmod.escape(where) if os.path.isdir(where) else os.path.dirname(where), others)
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

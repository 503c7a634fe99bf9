"""Exception and warning hierarchy of phasegauge.

Every error the library raises on purpose derives from :class:`PhasegaugeError`.
The concrete errors also inherit the matching built-in exception, so callers
that catch ``ValueError`` or ``FileNotFoundError`` keep working.

Each error carries three parts that the command line joins into one line:

* ``where``: the file and, for a series, the step (``"run_0003.vtu, step 3"``),
* ``what``: what was expected and what was found,
* ``fix``: what the user can do about it.

All errors pickle (they cross process boundaries in parallel runs).
"""

from __future__ import annotations

__all__ = [
    "PhasegaugeError",
    "InputError",
    "InputFileNotFound",
    "UnreadableFileError",
    "UnsupportedMeshError",
    "FieldNotFoundError",
    "FieldShapeError",
    "SeriesError",
    "OptionError",
    "OutputError",
    "AnalysisError",
    "PhasegaugeWarning",
    "RangeWarning",
    "NonFiniteWarning",
    "SkippedStepWarning",
    "ResolutionWarning",
    "SeriesWarning",
    "MeshWarning",
    "BlocksLeftOutNote",
    "CornerCopiesNote",
    "ReadingNote",
    "OldNameWarning",
    "collapse_warnings",
    "numbers_masked",
    "count_steps",
    "short_text",
    "cut_middle",
]


class PhasegaugeError(Exception):
    """Root of all phasegauge errors.

    Parameters
    ----------
    what : str
        What was expected and what was found.
    where : str, optional
        The file and step concerned.
    fix : str, optional
        What the user can do.
    """

    #: exit status the command line uses for this error (2: bad input, 1: failure inside)
    exit_status = 2

    def __init__(self, what: str, *, where: str = "", fix: str = ""):
        self.what = str(what)
        self.where = str(where)
        self.fix = str(fix)
        super().__init__(self.one_line())

    def one_line(self) -> str:
        """The message as one line: ``where: what; fix``, each part cut to a few hundred characters
        (a path of megabytes keeps its start and its end)."""
        text = cut_middle(self.what, WHAT_LIMIT)
        if self.where:
            text = f"{cut_middle(self.where, WHERE_LIMIT)}: {text}"
        if self.fix:
            text = f"{text}; {cut_middle(self.fix, FIX_LIMIT)}"
        return text

    def with_where(self, where: str) -> "PhasegaugeError":
        """Return a copy of this error with ``where`` set (when it was empty)."""
        if self.where:
            return self
        return type(self)(self.what, where=where, fix=self.fix)

    def at(self, where: str) -> "PhasegaugeError":
        """Return a copy of this error with ``where`` replaced (for example by the file and step)."""
        return type(self)(self.what, where=where, fix=self.fix)

    def with_fix(self, fix: str) -> "PhasegaugeError":
        """Return a copy of this error with ``fix`` replaced."""
        return type(self)(self.what, where=self.where, fix=fix)

    def __reduce__(self):
        return (_rebuild, (type(self), self.what, self.where, self.fix))

    def __str__(self) -> str:
        return self.one_line()


def _rebuild(cls, what, where, fix):
    return cls(what, where=where, fix=fix)


class InputError(PhasegaugeError, ValueError):
    """The input files or their content are not what the tool needs."""


class InputFileNotFound(PhasegaugeError, FileNotFoundError):
    """An input path does not exist."""


class UnreadableFileError(InputError):
    """A file exists but cannot be read as a mesh (truncated, wrong format, empty)."""


class UnsupportedMeshError(InputError):
    """The mesh holds cells or a layout the tool does not handle."""


class FieldNotFoundError(PhasegaugeError, KeyError):
    """The named field is not in the step."""


class FieldShapeError(InputError):
    """The field has the wrong shape (a vector where a scalar is needed, wrong length)."""


class SeriesError(InputError):
    """The series is inconsistent: missing steps, times not increasing, mesh changes."""


class OptionError(PhasegaugeError, ValueError):
    """An option or recipe entry is invalid."""


class OutputError(PhasegaugeError, OSError):
    """The output cannot be written (exists, not writable)."""


class AnalysisError(PhasegaugeError, RuntimeError):
    """An analysis failed on valid input (a failure inside the tool)."""

    exit_status = 1


class PhasegaugeWarning(UserWarning):
    """Root of phasegauge warnings.

    Parameters
    ----------
    what : str
        What was found (one line).
    where : str, optional
        The file and step concerned; kept apart so that a warning repeated over
        many steps can be reported once (:func:`collapse_warnings`).
    """

    def __init__(self, what: str = "", where: str = ""):
        self.what = " ".join(str(what).split())
        self.where = str(where)
        super().__init__(self.one_line())

    def one_line(self) -> str:
        """The message as one line: ``where: what`` (each part cut as errors cut theirs)."""
        what = cut_middle(self.what, WHAT_LIMIT)
        return f"{cut_middle(self.where, WHERE_LIMIT)}: {what}" if self.where else what

    def __reduce__(self):
        return (type(self), (self.what, self.where))

    def __str__(self) -> str:
        return self.one_line()


class RangeWarning(PhasegaugeWarning):
    """The field's values do not fit the given range."""


class NonFiniteWarning(PhasegaugeWarning):
    """The field holds NaN or Inf values (kept out of integrals)."""


class SkippedStepWarning(PhasegaugeWarning):
    """A step of a series was skipped."""


class ResolutionWarning(PhasegaugeWarning):
    """The interface or a droplet is resolved by too few cells."""


class SeriesWarning(PhasegaugeWarning):
    """The series looks irregular (gaps in the file numbering, a mesh that changes)."""


class MeshWarning(PhasegaugeWarning):
    """The mesh has inverted or zero-size cells, or duplicate points that were merged."""


class ReadingNote(MeshWarning):
    """How the cells or blocks of a file were read, said as an info line of a run (``inspect``: how the cells
    were read), not as a finding: cells a writer decomposed read as whole cells, blocks left out."""


class BlocksLeftOutNote(ReadingNote):
    """Blocks of a multiblock file left out as boundary patches (volume-format files of faces only): said
    where the polygon-data patches left out are said (an info line of a run, ``inspect``'s left-out blocks),
    not as a finding. ``names``: the blocks' names, as the file names them (read from here, not the text)."""

    def __init__(self, what: str = "", where: str = "", names=()):
        self.names = tuple(str(name) for name in names)
        super().__init__(what, where)

    def __reduce__(self):
        return (type(self), (self.what, self.where, self.names))


class CornerCopiesNote(ReadingNote):
    """Cells written each with their own copies of their corners (no point shared by two cells), whose copies'
    point values agree, merged into shared points: the figures are those of the shared-point mesh, so it is an
    info line of a run, not a finding."""


class OldNameWarning(PhasegaugeWarning, FutureWarning):
    """An option, recipe key or flag was given under its old name (still accepted, to be removed).

    A :class:`FutureWarning` (the deprecation category Python shows to end users by
    default), so ``pytest.deprecated_call`` and warning filters on it both work.
    """


def numbers_masked(text: str) -> str:
    """``text`` with every number (signs, decimals, exponents) written ``#``: warnings that differ in their
    figures only are one kind (:func:`collapse_warnings`, the command line's printer)."""
    import re

    return re.sub(r"[-+]?(\d+\.?\d*|\.\d+)([eE][-+]?\d+)?", "#", text)


def collapse_warnings(records) -> list:
    """Collapse warnings repeated over steps into one line each.

    Parameters
    ----------
    records : iterable of (category, what, where)
        ``category`` a warning class, ``what`` the text without the place,
        ``where`` the file and step.

    Returns
    -------
    list of (category, str)
        One entry per kind of warning (same class and same text once its
        numbers are masked), in order of first appearance: the first
        occurrence's text, with the number of further steps it appeared in.

    Notes
    -----
    Steps are counted, not places: a step's file read when the series is
    found (``run/case_0.vtm``) and again when it is measured
    (``case_0.vtm, step 0``) is one step (:func:`count_steps`).
    """
    groups: dict = {}
    for category, what, where in records:
        key = (category, numbers_masked(what))
        entry = groups.get(key)
        if entry is None:
            groups[key] = [category, what, where, [where]]
        else:
            entry[3].append(where)
    out = []
    for category, what, where, places in groups.values():
        more = count_steps(places) - 1
        text = cut_middle(what, WHAT_LIMIT)
        if where:
            text = f"{cut_middle(where, WHERE_LIMIT)}: {text}"
        if more > 0:
            text += f" (and {more} more step{'s' if more > 1 else ''})"
        out.append((category, text))
    return out


def count_steps(places) -> int:
    """How many steps the places ``places`` of one warning name (at least 1).

    A place is a file (``run/case_0.vtm``) or a file and step (``case_0.vtm, step 0``). Two files are
    one when one path ends with the other (a message may name a step's file from the series' folder);
    a file without a step is one of the steps of that file when some place names it with a step, and
    a step of its own otherwise.
    """
    import os
    import re

    def file_of(text: str) -> str:
        return os.path.normpath(text.replace("\\", "/")).replace("\\", "/") if text else ""

    def same(a: str, b: str) -> bool:
        return a == b or a.endswith("/" + b) or b.endswith("/" + a)

    stepped, plain = [], []  # (file, step) and files
    for place in dict.fromkeys(places):
        match = re.match(r"(.*?), step (\d+)", place)
        if match:
            unit = (file_of(match.group(1)), int(match.group(2)))
            if not any(s == unit[1] and same(f, unit[0]) for f, s in stepped):
                stepped.append(unit)
        else:
            plain.append(file_of(place))
    alone = []
    for f in plain:
        if not any(same(f, g) for g, _ in stepped) and not any(same(f, g) for g in alone):
            alone.append(f)
    return max(1, len(stepped) + len(alone))


#: the longest ``where``, ``what`` and ``fix`` a message line shows (characters)
WHERE_LIMIT, WHAT_LIMIT, FIX_LIMIT = 160, 360, 240


def cut_middle(text: str, limit: int) -> str:
    """``text`` on one line, cut in the middle to at most ``limit`` characters when longer
    (``start ... end``: a path keeps its first folders and its file name)."""
    text = " ".join(str(text).split())
    if len(text) <= limit:
        return text
    keep = limit - 5
    head = keep * 2 // 5
    return f"{text[:head]} ... {text[len(text) - (keep - head):]}"


def short_text(exc: BaseException, limit: int = 120) -> str:
    """An exception's message on one line, cut to ``limit`` characters (its class name when empty).

    For messages that quote a failure from another library inside a phasegauge error.
    """
    text = " ".join(str(exc).split()) or type(exc).__name__
    return text if len(text) <= limit else text[:limit - 3] + "..."

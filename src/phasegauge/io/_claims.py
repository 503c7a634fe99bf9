"""Sizes a file claims, checked before anything is allocated for them.

A damaged or hand-edited header can claim billions of points or cells; a reader
that believes it asks for tens of GiB before it finds out the file is short.
The checks here read only headers and metadata: a legacy VTK header's counts
against the file's real size (each value takes at least a few bytes), the
point count of a VTK XML piece, and the shape of every HDF5 dataset an XDMF
file names against the bytes the dataset stores; every claim also against the
memory the machine has.
"""

from __future__ import annotations

import os
import re
from stat import S_ISREG
from types import MappingProxyType

from ..errors import UnreadableFileError

__all__ = ["available_memory", "check_legacy_claims", "check_xml_claims", "check_hdf5_claims", "CheckedFiles"]

_HEAD_BYTES = 1 << 16

#: legacy VTK sections: keyword -> (how many values per count, which count: 1 first, 2 second)
_LEGACY_SECTIONS = MappingProxyType({b"POINTS": (3, 1), b"CELLS": (1, 2), b"CELL_TYPES": (1, 1),
                                     b"POLYGONS": (1, 2), b"TRIANGLE_STRIPS": (1, 2), b"LINES": (1, 2),
                                     b"VERTICES": (1, 2)})
_SIZES = MappingProxyType({b"double": 8, b"float": 4, b"int": 4, b"long": 8, b"vtktypeint64": 8,
                           b"vtktypeint32": 4})

_DAMAGED = ("the header is damaged (or the file is cut short): write the step again or remove it from the "
            "series")


def available_memory() -> int:
    """Bytes of memory the machine can give now (``MemAvailable``; else the physical memory)."""
    try:
        with open("/proc/meminfo") as handle:
            for line in handle:
                if line.startswith("MemAvailable:"):
                    return int(line.split()[1]) * 1024
    except (OSError, ValueError, IndexError):
        pass
    try:
        return os.sysconf("SC_PHYS_PAGES") * os.sysconf("SC_PAGE_SIZE")
    except (OSError, ValueError, AttributeError):
        return 1 << 62


def _gib(n: float) -> str:
    return f"{n / 2**30:.3g} GiB" if n >= 2**30 else f"{n / 2**20:.3g} MiB"


def _refuse_memory(path: str, what: str, need: int) -> None:
    free = available_memory()
    if need > free:
        raise UnreadableFileError(f"{what}, which would take {_gib(need)} of memory; this machine has "
                                  f"{_gib(free)} free", where=path,
                                  fix=_DAMAGED + "; a real mesh this large needs a machine with more memory")


def check_legacy_claims(path: str) -> None:
    """Refuse a legacy VTK file whose header counts cannot fit in the file or in memory.

    Each count in the file's head (``POINTS n type``, ``CELLS n size``, ``CELL_TYPES n``, ...)
    is turned into the fewest bytes its values can take (binary: their size; ASCII: a digit and
    a separator each) and compared with the file's size.

    Raises
    ------
    UnreadableFileError
        A count the file is too small to hold, or one that would not fit in memory.
    """
    size = os.path.getsize(path)
    with open(path, "rb") as handle:
        head = handle.read(_HEAD_BYTES)
    binary = re.search(rb"^BINARY\s*$", head[:1024], re.MULTILINE) is not None
    pattern = rb"^(" + b"|".join(_LEGACY_SECTIONS) + rb")[ \t]+(\d+)(?:[ \t]+(\w+))?[ \t]*\r?$"
    for match in re.finditer(pattern, head, re.MULTILINE):
        keyword = match.group(1)
        per, which = _LEGACY_SECTIONS[keyword]
        second = match.group(3)
        count = int(match.group(2))
        values = count * per
        if which == 2 and second is not None and second.isdigit():
            values = max(count, int(second))  # offsets and connectivity (5.x) or sizes with corners (4.x)
        if binary:
            each = _SIZES.get((second or b"").lower(), 4) if keyword == b"POINTS" else 4
        else:
            each = 2
        noun = {b"POINTS": "points", b"CELL_TYPES": "cell types"}.get(keyword, "cells")
        what = f"the header claims {count:,} {noun} ({keyword.decode()} {count})"
        if values * each > size:
            raise UnreadableFileError(f"{what}, at least {values * each:,} bytes, but the file has only "
                                      f"{size:,} bytes", where=path, fix=_DAMAGED)
        _refuse_memory(path, what, values * 8)
    dims = re.search(rb"^DIMENSIONS[ \t]+(\d+)[ \t]+(\d+)[ \t]+(\d+)", head, re.MULTILINE)
    if dims:
        count = int(dims.group(1)) * int(dims.group(2)) * int(dims.group(3))
        _refuse_memory(path, f"the header claims a grid of {count:,} points (DIMENSIONS "
                             f"{' '.join(d.decode() for d in dims.groups())})", count * 3 * 8)


def check_xml_claims(path: str) -> None:
    """Refuse a VTK XML file whose pieces claim more points or cells than memory holds.

    Compressed data can be far smaller than what it holds, so only memory bounds the claim.
    """
    with open(path, "rb") as handle:
        head = handle.read(_HEAD_BYTES)
    for name, per in ((b"NumberOfPoints", 3), (b"NumberOfCells", 9)):
        for match in re.finditer(name + rb'="\s*(\d+)\s*"', head):
            count = int(match.group(1))
            _refuse_memory(path, f"a piece claims {count:,} {name.decode()[8:].lower()} "
                                 f"({name.decode()}=\"{count}\")", count * per * 8)


class CheckedFiles:
    """The HDF5 files whose claims passed :func:`check_hdf5_claims` in one run (a series keeps one).

    A file is known by its path, size and modification time, so a file rewritten since is checked
    again; a check that fails is not kept (it fails again on the next step, with the same message).
    """

    def __init__(self):
        self._passed: set = set()

    @staticmethod
    def key(name: str):
        """``(absolute path, size, modification time in ns)`` of ``name``, or None when it cannot be
        looked at or is no regular file (one ``os.stat``)."""
        try:
            stat = os.stat(name)
        except OSError:
            return None
        if not S_ISREG(stat.st_mode):
            return None
        return os.path.abspath(name), stat.st_size, stat.st_mtime_ns

    def __contains__(self, key) -> bool:
        return key is not None and key in self._passed

    def add(self, key) -> None:
        if key is not None:
            self._passed.add(key)


def check_hdf5_claims(xdmf_path: str, files: list, *, checked: CheckedFiles | None = None) -> None:
    """Refuse HDF5 datasets (of the files an XDMF file names) whose shape the file does not store or
    memory does not hold.

    A dataset stored without compression takes its whole size in the file; one that claims
    more than it stores is damaged. Any dataset's size is also checked against free memory.
    Files that do not open are left to the reader (which says what is wrong with them). With
    ``checked``, a file that passed before (steps of one series sharing an HDF5 file) is not
    opened again, and a file that passes is added to it.
    """
    for name in files:
        key = CheckedFiles.key(name)  # the file is looked at once: None where it is no regular file
        if key is None or (checked is not None and key in checked):
            continue
        if _check_hdf5_file(xdmf_path, name) and checked is not None:
            checked.add(key)


def _check_hdf5_file(xdmf_path: str, name: str) -> bool:
    """The check of one HDF5 file (raises :class:`UnreadableFileError`); False when it does not open."""
    try:
        import h5py
    except ImportError:  # pragma: no cover - h5py is a dependency
        return False
    try:
        handle = h5py.File(name, "r")
    except Exception:
        return False
    with handle:
        datasets = []
        handle.visititems(lambda key, obj: datasets.append((key, obj)) if isinstance(obj, h5py.Dataset)
                          else None)
        for key, data in datasets:
            claimed = int(data.size) * data.dtype.itemsize
            stored = data.id.get_storage_size()
            what = (f"the HDF5 dataset '{key}' in {os.path.basename(name)} claims {int(data.size):,} values "
                    f"(shape {tuple(data.shape)})")
            if data.compression is None and not data.fillvalue and stored < claimed and claimed > 1 << 20:
                raise UnreadableFileError(f"{what}, {claimed:,} bytes, but stores only {stored:,}",
                                          where=xdmf_path, fix=_DAMAGED)
            _refuse_memory(xdmf_path, what, claimed)
    return True

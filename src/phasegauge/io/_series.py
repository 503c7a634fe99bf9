"""Series discovery: what steps a path holds, in what order, at what times.

A series path is one of

* one mesh file (``.vtu``, ``.vtk``, ``.xdmf``/``.xmf``): one step, or every step
  of an XDMF temporal collection;
* a folder: every mesh file in it, in natural order (``step_2`` before ``step_10``);
* a glob pattern (quoted on the command line): the matching mesh files, natural order;
* a step listing: a text file of ``time,path`` lines (see :func:`read_listing`).

The time of a step comes from the first of: the listing (a listing's times
are used as written; the files' own stored times are not read), the XDMF
``Time`` element, a one-value ``TimeValue`` array in the file's field data, the
names of time folders (``0.05/``) where no file stores its time, the step index.
:attr:`StepInfo.time_origin` says which.

Files of a folder or a glob are taken in natural order on every path component
(``run_12/internal.vtu`` before ``run_114/internal.vtu``); a folder holding no
mesh file but step folders (each with one mesh file, as solver converters write
them) is read one step per folder. ``sort_by_time=True`` orders the steps by
their files' times instead; otherwise :meth:`Series.time_problem` reports times
that do not increase, and a run refuses them.
"""

from __future__ import annotations

import dataclasses
import glob as globmod
import os
import warnings
from dataclasses import dataclass

import numpy as np

from ..errors import InputFileNotFound, MeshWarning, PhasegaugeError, SeriesError, SeriesWarning, UnreadableFileError
from ..model.mesh import Mesh
from ._formats import (TIME_NEEDS_FULL_READ, check_readable, format_for, peek_time, read_mesh_file, stored_time,
                       suffix_list, surface_file_problem, time_from_field_data)
from ._mesh_pool import MeshPool
from ._multiblock import without_indexed_files
from ._meshio_adapter import StepFields, mesh_and_fields
from ._meshio_xdmf import XdmfTimeSeries
from ._claims import CheckedFiles, check_hdf5_claims
from ._series_gaps import (RESOLUTION_SHARE, coarse_time_share, repeated_times_fix, restart_problem, two_times,
                           warn_series_gaps, warn_time_resolution)
from ._series_names import (check_one_family, digits_masked, first_three, is_xml_collection, natural_key,
                            warn_decimal_doubt, warn_other_indexes, with_folder_times)
from ._xdmf import (collection_times, collections_among, grid_time, included_files, lone_collection,
                    temporal_grids, xdmf_data_files)

__all__ = ["Series", "StepInfo", "Step", "open_series", "natural_key", "read_listing",
           "LISTING_SUFFIXES"]

#: suffixes taken as a step listing
LISTING_SUFFIXES = (".steps", ".txt", ".csv", ".list")


@dataclass(frozen=True)
class StepInfo:
    """Where one step comes from.

    Attributes
    ----------
    index : int
        Position in the series, from 0.
    time : float
        Time of the step, in the solver's time units.
    time_origin : {'xdmf', 'file', 'listing', 'folder_name', 'index', 'unknown'}
        Where the time came from (``'unknown'``: the file could not be read
        to find its stored time; ``time`` is NaN and reading the step fails).
    path : str
        The file holding the step.
    grid : int or None
        Index of the grid in an XDMF temporal collection.
    name : str
        How messages name the file: its base name, or its path from the series'
        folder when steps share a base name (``run_114/internal.vtu``).
    time_resolution : float
        The gap to the next time the file's storage of it holds: single precision's spacing at
        the time; 0 for double precision, text and times not stored in the file.
    """

    index: int
    time: float
    time_origin: str
    path: str
    grid: int | None = None
    name: str = ""
    time_resolution: float = 0.0

    @property
    def where(self) -> str:
        name = self.name or os.path.basename(self.path)
        return f"{name}, step {self.index}"


@dataclass
class Step:
    """One step read into the model: its mesh, its fields and where it came from."""

    info: StepInfo
    mesh: Mesh
    fields: StepFields

    @property
    def time(self) -> float:
        return self.info.time

    @property
    def index(self) -> int:
        return self.info.index


def folder_listing(folder: str, files: list):
    """The ``time,path`` listing a folder holds beside its mesh files, or None.

    A file with a listing suffix that reads as a listing and names only mesh files that exist
    in the folder is taken (the first by name); files that are not listings (a probe table, a
    log) are passed over. Returns ``(listing path, rows)``.
    """
    names = {os.path.abspath(f) for f in files}
    for entry in sorted(os.listdir(folder), key=natural_key):
        candidate = os.path.join(folder, entry)
        if not (entry.lower().endswith(LISTING_SUFFIXES) and os.path.isfile(candidate)):
            continue
        try:
            rows = read_listing(candidate)
        except (SeriesError, OSError, UnicodeError):
            continue
        if all(os.path.abspath(f) in names for _, f in rows):
            return candidate, rows
    return None


def _warn_unlisted(files: list, listing: str, rows: list) -> None:
    """Warn (:class:`SeriesWarning`, one line) of the folder's mesh files its listing does not name
    that are named as its steps are: the same text around every number (``out_7.vtu`` beside a
    listed ``out_6.vtu``, ``c_1.vtu`` beside ``c_0.5.vtu``; every unlisted file where no
    listed name holds a number). Other files beside the steps (a solver's boundary patches,
    ``wall_0000.vtu``) are no missing steps and are passed over."""
    named = {os.path.abspath(f) for _, f in rows}
    patterns = {digits_masked(f) for f in named}
    numbered = any("#" in p for p in patterns)
    left = [os.path.basename(f) for f in files
            if os.path.abspath(f) not in named and (not numbered or digits_masked(f) in patterns)]
    if left:
        n = len(left)
        shown = first_three(left)
        warnings.warn(SeriesWarning(
            f"{n} mesh file{'s' if n > 1 else ''} in the folder {'are' if n > 1 else 'is'} not in the step listing "
            f"{os.path.basename(listing)} ({shown}) and {'are' if n > 1 else 'is'} not measured: add "
            f"{'them' if n > 1 else 'it'} to the listing, move {'them' if n > 1 else 'it'} out of the folder, or "
            "give the listing itself as the path", where=os.path.dirname(listing)), stacklevel=4)


def read_listing(path: str) -> list[tuple[float, str]]:
    """Read a step listing.

    The format is plain text, one step a line: ``time,path``. Paths are relative
    to the listing's folder unless absolute. Blank lines and lines starting with
    ``#`` are ignored; a first line ``time,path`` is taken as a header.

    Raises
    ------
    SeriesError
        A line that is not ``time,path``, or no steps.
    """
    base = os.path.dirname(os.path.abspath(path))
    rows = []
    with open(path, encoding="utf-8-sig", errors="replace") as handle:
        for number, line in enumerate(handle, start=1):
            text = line.strip()
            if not text or text.startswith("#"):
                continue
            if number == 1 and text.replace(" ", "").lower() == "time,path":
                continue
            parts = [p.strip() for p in text.split(",", 1)]
            try:
                if len(parts) != 2 or not parts[1]:
                    raise ValueError
                float(parts[0])
            except ValueError:
                raise SeriesError(f"line {number} is not 'time,path': {text[:60]!r}", where=path,
                                  fix="write one 'time,path' pair a line, the time a number") from None
            time = stored_time(parts[0], where=f"{path}, line {number}", source="of the listing line",
                               fix="write one 'time,path' pair a line, the time a finite number")
            rows.append((time, parts[1] if os.path.isabs(parts[1]) else os.path.join(base, parts[1])))
    if not rows:
        raise SeriesError("the listing holds no steps", where=path, fix="add 'time,path' lines")
    return rows


def _is_mesh_file(name: str) -> bool:
    return format_for(name) is not None and not os.path.isdir(name)


def step_folder_files(path: str) -> list:
    """The steps of a folder of step folders: the one mesh file in each subfolder, in natural order.

    Converters of finite-volume solvers write a folder per step holding the
    internal (volume) mesh file, with the boundary patches in a subfolder of
    their own; only the files directly in each step folder are looked at.
    Subfolders without a mesh file are passed over.

    Raises
    ------
    SeriesError
        A step folder holding several mesh files (which one is the step is not clear).
    """
    files = []
    for name in sorted(os.listdir(path), key=natural_key):
        folder = os.path.join(path, name)
        if not os.path.isdir(folder):
            continue
        inside = sorted((f for f in os.listdir(folder) if _is_mesh_file(os.path.join(folder, f))), key=natural_key)
        if len(inside) > 1:
            raise SeriesError(f"the step folder '{name}' holds {len(inside)} mesh files ({', '.join(inside[:4])}), "
                              "so the step is not clear", where=path,
                              fix=f"give a quoted glob that picks one, such as '{os.path.join(path, '*', inside[0])}'")
        if inside:
            files.append(os.path.join(folder, inside[0]))
    return files


class Series:
    """An ordered list of steps behind a path, read one step at a time.

    Parameters
    ----------
    path : str or os.PathLike
        A mesh file, XDMF time collection, folder, glob pattern or step listing.
    mesh_pool : MeshPool, optional
        Where the meshes read are kept for reuse; give one pool to several
        series (or runs) to share the mesh work between them. Default: a pool
        of this series that keeps the last mesh.
    sort_by_time : bool
        Order the steps by the times stored in their files instead of by their
        names (a stable sort; :class:`SeriesWarning` when it changes the order).
        Default: the name order, and :meth:`time_problem` reports times that do
        not increase.

    Attributes
    ----------
    kind : {'file', 'collection', 'folder', 'glob', 'listing'}
    steps : list of StepInfo

    Raises
    ------
    InputFileNotFound
        The path, or a file a listing names, does not exist.
    SeriesError
        No mesh files found, or a listing line is malformed.

    Notes
    -----
    The meshes read are kept in the pool; a step whose points and cells are
    equal reuses one, so work cached on the mesh (measures, adjacency) is done
    once per series while the topology stays the same.
    """

    def __init__(self, path, *, mesh_pool: MeshPool | None = None, sort_by_time: bool = False):
        self.path = os.fspath(path)
        self.mesh_pool = MeshPool() if mesh_pool is None else mesh_pool
        self.sort_by_time = bool(sort_by_time)
        self._xdmf_readers: dict = {}
        self.checked_files = CheckedFiles()  # HDF5 files whose claims passed: checked once per series
        self.listing_file = None  # a folder's own 'time,path' listing, when it has one
        self.steps = self._discover()
        if self.sort_by_time:
            self.steps = _sorted_by_time(self.steps, self.path)

    # --------------------------------------------------------------- discovery
    def _discover(self) -> list[StepInfo]:
        path = self.path
        if os.path.isdir(path):
            files = sorted((os.path.join(path, f) for f in os.listdir(path) if _is_mesh_file(os.path.join(path, f))),
                           key=natural_key)
            found = collections_among(files)  # each XDMF file read once for the two below
            files = _without_included(without_indexed_files(files), found)
            collection = lone_collection(files, path, found)
            if collection is not None:  # a folder of one XDMF time collection (and its HDF5 files)
                return self._collection_steps(collection, temporal_grids(collection))
            if not files:
                files = step_folder_files(path)
            if not files:
                surfaces = sorted(f for f in os.listdir(path) if surface_file_problem(f) is not None)
                if surfaces:
                    raise SeriesError(f"the folder holds only surface files ({len(surfaces)}, such as "
                                      f"{surfaces[0]}: boundary patches), no volume mesh", where=path,
                                      fix="give the folder of the volume (internal) mesh files")
                raise SeriesError(f"the folder holds no mesh files ({suffix_list()}), nor folders of one "
                                  "mesh file each", where=path,
                                  fix="give a folder of mesh files or of step folders, a mesh file or a step listing")
            self.kind = "folder"
            listing = folder_listing(path, files)
            if listing is not None:  # a 'time,path' listing beside the files gives order and times
                self.listing_file = listing[0]
                _warn_unlisted(files, *listing)
                return [StepInfo(i, t, "listing", f) for i, (t, f) in enumerate(listing[1])]
            check_one_family(files, path)
            steps = self._from_files(files)
            if not warn_decimal_doubt(files, path, steps):
                warn_series_gaps(files, path, steps)
            warn_other_indexes(files, path, steps)
            return steps
        if any(ch in path for ch in "*?[") and not os.path.exists(path):
            files = without_indexed_files(sorted((f for f in globmod.glob(path) if _is_mesh_file(f)), key=natural_key))
            found = collections_among(files)
            files = _without_included(files, found)
            if not files:
                raise SeriesError("the pattern matches no mesh files", where=path,
                                  fix="check the pattern; quote it so the shell does not expand it")
            collection = lone_collection(files, path, found)
            if collection is not None:
                return self._collection_steps(collection, temporal_grids(collection))
            self.kind = "glob"
            check_one_family(files, path)
            steps = self._from_files(files)
            if not warn_decimal_doubt(files, path, steps):
                warn_series_gaps(files, path, steps)
            warn_other_indexes(files, path, steps)
            return steps
        check_readable(path)
        if path.lower().endswith(LISTING_SUFFIXES):
            self.kind = "listing"
            rows = read_listing(path)
            missing = [f for _, f in rows if not os.path.exists(f)]
            if len(missing) == len(rows):
                raise InputFileNotFound(
                    f"none of the {len(rows)} files the listing names exists (the first: {missing[0]})",
                    where=path, fix="paths in a listing are relative to the listing's folder; fix them or "
                                    "restore the files")
            return [StepInfo(i, t, "listing", f) for i, (t, f) in enumerate(rows)]
        if path.lower().endswith((".xdmf", ".xmf")):
            grids = temporal_grids(path)
            if grids is not None:
                return self._collection_steps(path, grids)
        if not _is_mesh_file(path):
            if _is_xml_collection(path):  # another program's index of step files: not an open format here
                raise UnreadableFileError("is an XML collection of step files, which is not read", where=path,
                                          fix="give the folder of the step files, a quoted glob of them, or a "
                                              "'time,path' listing of the steps")
            surface = surface_file_problem(path)
            if surface is not None:
                raise surface
            raise UnreadableFileError(
                f"is neither a mesh file ({suffix_list()}) nor a step listing "
                f"({', '.join(LISTING_SUFFIXES)})", where=path,
                fix="give a mesh file, a folder, a quoted glob or a 'time,path' listing")
        self.kind = "file"
        return self._from_files([path])

    def _collection_steps(self, path: str, grids: list) -> list[StepInfo]:
        """The steps of the XDMF temporal collection in file ``path`` (its grids): a grid's time is its own
        ``<Time Value=...>``, else its place in the collection's time list, else its index. A collection
        that includes step files (XInclude) instead: each file a step, read as a plain XDMF file at the
        time its grid stores."""
        included = None if grids else included_files(path)
        if included:
            missing = [f for f in included if not os.path.exists(f)]
            if missing:
                raise InputFileNotFound(f"{len(missing)} of the {len(included)} step files the collection includes "
                                        f"are missing (the first: {os.path.basename(missing[0])})", where=path,
                                        fix="restore them next to the collection's file")
            self.kind, steps = "collection", self._from_files(included)
            warn_series_gaps(included, path, steps)
            return steps
        self.kind = "collection"
        steps = []
        listed = collection_times(path, len(grids))  # a <Time TimeType="List"> of the collection, or None
        for i, grid in enumerate(grids):
            t = grid_time(grid, where=f"{path}, step {i}")
            if t is None and listed is not None:
                t = listed[i]
            if t is not None:
                steps.append(StepInfo(i, t, "xdmf", path, grid=i, time_resolution=getattr(t, "resolution", 0.0)))
            else:
                steps.append(StepInfo(i, float(i), "index", path, grid=i))
        if not steps:
            raise SeriesError("the XDMF time collection is empty", where=path, fix="write at least one step")
        warn_series_gaps([], path, steps)  # from the grids' times, as a folder's from its files'
        return steps

    def _from_files(self, files: list[str]) -> list[StepInfo]:
        steps = []
        names = _message_names(files)
        for i, f in enumerate(files):
            where = f"{names[i] or f}, step {i}"
            try:
                t = peek_time(f)
            except SeriesError as err:
                raise err.at(where) from None
            if t is TIME_NEEDS_FULL_READ:
                try:
                    raw = read_mesh_file(f, checked=self.checked_files)
                except PhasegaugeError:  # an unreadable step: its time is unknown; reading it fails later
                    steps.append(StepInfo(i, float("nan"), "unknown", f, name=names[i]))
                    continue
                t = time_from_field_data(raw.field_data, where)
            if t is None:
                steps.append(StepInfo(i, float(i), "index", f, name=names[i]))
            else:
                steps.append(StepInfo(i, float(t), "file", f, name=names[i],
                                      time_resolution=getattr(t, "resolution", 0.0)))
        warn_time_resolution(steps, self.path)
        return with_folder_times(files, steps, self.checked_files)

    # ------------------------------------------------------------------ access
    def __len__(self) -> int:
        return len(self.steps)

    def __iter__(self):
        for i in range(len(self.steps)):
            yield self.read(i)

    @property
    def times(self) -> np.ndarray:
        """Times of all steps, shape (n_steps,) (NaN where unknown)."""
        return np.array([s.time for s in self.steps])

    def time_problem(self, chosen=None) -> SeriesError | None:
        """Where the times of the steps ``chosen`` (step numbers; all without) do not increase, as an error,
        or None; steps of unknown time (unreadable files) are left out."""
        picked = self.steps if chosen is None else [self.steps[i] for i in chosen]
        known = [s for s in picked if np.isfinite(s.time)]
        coarse = coarse_time_share(self.steps) >= RESOLUTION_SHARE
        origins = {s.time_origin for s in known}
        if "index" in origins and origins & {"file", "xdmf"}:
            first = next(s for s in known if s.time_origin == "index")
            return SeriesError(f"some steps store their times and others do not (step {first.index} is the first "
                               "that does not): stored times and step numbers would be one time axis",
                               where=f"{first.path}, step {first.index}", fix="write the time into every file or "
                               "give a 'time,path' listing (measure can also choose the steps that store it: --steps)")
        for k, (before, after) in enumerate(zip(known[:-1], known[1:])):
            restart = restart_problem(known, k) if after.time < before.time and self.kind != "listing" else None
            if restart is not None:  # the times go back to times the run had written
                return restart
            if after.time <= before.time:
                if self.kind == "listing":
                    fix = f"correct the times in {os.path.basename(self.path)} or remove the repeated step"
                elif self.kind == "collection":
                    fix = "choose the steps (--steps, --time-from, --time-to) or remove repeated or out-of-order grids"
                elif coarse and abs(after.time - before.time) < max(before.time_resolution, after.time_resolution):
                    fix = (f"the files store the times in single precision, which tells times near {after.time:.8g} "
                           f"apart only to {after.time_resolution:.2g}: write them in double precision, or give a "
                           "'time,path' listing")
                elif after.time == before.time:
                    fix = repeated_times_fix(known)
                else:
                    fix = ("rename the files to sort like their times, or use --sort-by-time (recipe: sort_by_time = "
                           f"true); a restart that wrote steps again: --steps :{after.index} or --steps {after.index}:")
                shown = two_times(before.time, after.time)
                return SeriesError(f"times do not increase: step {after.index} has time {shown[1]} after "
                                   f"{shown[0]} at step {before.index} ({before.path})",
                                   where=f"{after.path}, step {after.index}", fix=fix)
        return None

    @property
    def time_origins(self) -> list:
        """Distinct origins of the step times, in order of first use."""
        return list(dict.fromkeys(s.time_origin for s in self.steps))

    @property
    def files(self) -> list:
        """Distinct files of the series, in order."""
        out = []
        for s in self.steps:
            if s.path not in out:
                out.append(s.path)
        return out

    def read(self, index: int) -> Step:
        """Read step ``index`` (mesh and fields)."""
        info = self.steps[index]
        if info.grid is not None:
            mesh, fields = self._read_collection_step(info)
        else:
            if os.path.lexists(info.path):
                check_readable(info.path, info.where)
            else:
                named = f" (named in {os.path.basename(self.path)})" if self.kind == "listing" else ""
                raise InputFileNotFound(f"the step's file is missing{named}", where=info.where,
                                        fix="restore the file" + (", or remove its line from the listing"
                                                                  if named else ""))
            try:
                raw = read_mesh_file(info.path, checked=self.checked_files)
                mesh, fields = mesh_and_fields(raw, info.where, self.mesh_pool)
            except PhasegaugeError as err:
                raise err.at(info.where) from None
            if info.time_origin in ("index", "folder_name"):  # a time the file stores beyond its head wins
                t = time_from_field_data(fields.field_data, info.where)
                if t is not None:
                    info = dataclasses.replace(info, time=t, time_origin="file")
                    self.steps[index] = info
            if getattr(raw, "time_disagreement", None) and info.time_origin == "file":
                warnings.warn(MeshWarning(f"{raw.time_disagreement}; write one time, or give a 'time,path' "
                                          "listing whose times are used instead", where=info.where), stacklevel=2)
        self.mesh_pool.add(mesh)
        return Step(info, mesh, fields)

    def read_mesh(self, index: int = 0) -> Mesh:
        """The mesh of step ``index`` (read once and reused while the topology stays)."""
        return self.read(index).mesh

    def _read_collection_step(self, info: StepInfo):
        reader = self._xdmf_readers.get(info.path)
        if reader is None:
            check_hdf5_claims(info.path, xdmf_data_files(info.path), checked=self.checked_files)
            reader = self._xdmf_readers[info.path] = XdmfTimeSeries(info.path)
        return reader.step(info.grid, info.where, self.mesh_pool)

    def close(self) -> None:
        """Close HDF5 files held open by XDMF readers (the kept meshes stay in the pool)."""
        for reader in self._xdmf_readers.values():
            reader.close()
        self._xdmf_readers.clear()

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()

    def __getstate__(self):
        state = self.__dict__.copy()
        state["_xdmf_readers"] = {}
        return state


def _is_xml_collection(path: str) -> bool:
    """True for a VTK-style XML file whose root is a collection of other files (``type="Collection"``),
    told by its head whatever its name."""
    try:
        with open(path, "rb") as handle:
            head = handle.read(2048)
    except OSError:
        return False
    return is_xml_collection(head)


def _without_included(files: list, collections: dict) -> list:
    """``files`` without the step files an XDMF collection among them includes (read through it);
    ``collections``: :func:`._xdmf.collections_among` of ``files``."""
    named = {os.path.abspath(g) for _, included in collections.values() for g in included or ()}
    return [f for f in files if os.path.abspath(f) not in named] if named else files


def _sorted_by_time(steps: list, where: str) -> list:
    """The steps in the order of their times (stable; steps of unknown time keep their place).
    When no step has a time of its own (every time a step index), the order stays, with a warning."""
    if len(steps) > 1 and all(s.time_origin in ("index", "unknown") for s in steps):
        warnings.warn(SeriesWarning("--sort-by-time: no step stores its time (the times are step indices), so "
                                    "the steps stay in the order of their names; give a 'time,path' listing to "
                                    "set the times and the order", where=where), stacklevel=3)
        return steps
    times = np.array([s.time for s in steps])
    known = np.flatnonzero(np.isfinite(times))
    order = np.arange(len(steps))
    order[known] = known[np.argsort(times[known], kind="stable")]
    if np.array_equal(order, np.arange(len(steps))):
        return steps
    moved = [steps[i] for i in order]
    first = int(np.flatnonzero(order != np.arange(len(steps)))[0])
    warnings.warn(SeriesWarning("the steps are ordered by the times in their files, not by their names "
                                f"(the first out of name order: {moved[first].path}, now step {first})",
                                where=where), stacklevel=3)
    return [dataclasses.replace(s, index=k) for k, s in enumerate(moved)]


def _message_names(files: list) -> list:
    """How messages name each file: the base name, or the path from the common folder when base names repeat."""
    bases = [os.path.basename(f) for f in files]
    if len(set(bases)) == len(bases) or len(files) < 2:
        return [""] * len(files)
    try:
        common = os.path.commonpath([os.path.abspath(f) for f in files])
    except ValueError:  # different drives
        return [""] * len(files)
    return [os.path.relpath(os.path.abspath(f), common) for f in files]


def open_series(path, *, mesh_pool: MeshPool | None = None, sort_by_time: bool = False) -> Series:
    """Open a series (see :class:`Series`)."""
    return Series(path, mesh_pool=mesh_pool, sort_by_time=sort_by_time)

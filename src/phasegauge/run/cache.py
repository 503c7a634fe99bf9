"""The resume cache: finished steps' results, pickled in the output folder.

A finished step's :class:`~phasegauge.run.step.StepResult` is kept as
``OUT/.cache/step_NNNNNN_KEY.pkl``. ``KEY`` digests everything the result
depends on: the SHA-256 of the step file's content, the step's grid in an XDMF
collection, the size and modification time of the files the step's numbers live
in (:func:`phasegauge.io.step_data_files`: the HDF5 files of any XDMF step file,
a multiblock's blocks; hashing them whole would cost as much as reading them), and the options
digest (:meth:`MeasureOptions.key`). A resumed run takes a step from the cache
only when all of these are unchanged.

Droplet tracking needs each step's cell centroids after the step (see
:mod:`phasegauge.model.outline`); the cache keeps them once per mesh as
``OUT/.cache/outline_SIGNATURE.pickle`` (not ``.pkl``: those are the steps), so
a resumed run reads no step again.
"""

from __future__ import annotations

import dataclasses
import hashlib
import os
import pickle
from typing import NamedTuple

__all__ = ["StepCache", "CacheEntry", "code_digest"]


def code_digest() -> str:
    """Digest of phasegauge's own source files (their paths and contents), 16 hex digits.

    A resumed run must be finished by the code that started it: a step cached by another
    version could differ in method, and a run would mix the two (checked by
    :func:`phasegauge.report.prepare_output_folder`). About 2 MB of source, a few milliseconds.
    """
    root = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
    digest = hashlib.sha256()
    for folder, dirs, files in sorted(os.walk(root)):
        dirs.sort()
        for name in sorted(files):
            if name.endswith(".py"):
                path = os.path.join(folder, name)
                digest.update(os.path.relpath(path, root).encode())
                with open(path, "rb") as handle:
                    digest.update(handle.read())
    return digest.hexdigest()[:16]


class CacheEntry(NamedTuple):
    """Where one step's result is cached, and the step file's SHA-256."""

    path: str
    file_sha256: str


class StepCache:
    """Pickled step results (and mesh outlines) in a folder, keyed by input content and options.

    Parameters
    ----------
    folder : str or os.PathLike
        Created if missing.
    options_key : str
        :meth:`MeasureOptions.key` of the run.

    Notes
    -----
    Picklable (a folder name and a key): worker processes write into the same
    folder. Every file is written atomically, so a killed run leaves only
    temporaries, never half a result.
    """

    def __init__(self, folder, options_key: str):
        self.folder = os.fspath(folder)
        self.options_key = str(options_key)
        os.makedirs(self.folder, exist_ok=True)
        self._data_files: dict = {}  # step file -> the data files it names (parsed once)

    def __repr__(self) -> str:
        return f"StepCache({self.folder!r}, options {self.options_key})"

    def __getstate__(self):
        return {"folder": self.folder, "options_key": self.options_key, "_data_files": {}}

    # ------------------------------------------------------------------ step results
    def entry(self, info) -> CacheEntry | None:
        """The cache entry of a step (:class:`phasegauge.io.StepInfo`); None when its file is missing."""
        from ..io import file_sha256

        if not os.path.isfile(info.path):
            return None
        try:
            digest = file_sha256(info.path)
        except OSError:  # a file the user may not read: the step is skipped when it is read
            return None
        text = f"{digest}|{info.grid}|{self._data_stamp(info)}|{self.options_key}"
        if info.time_origin in ("listing", "folder_name"):  # a time from outside the file: a changed one is new
            text += f"|{info.time!r}"
        key = hashlib.sha256(text.encode()).hexdigest()[:20]
        return CacheEntry(os.path.join(self.folder, f"step_{info.index:06d}_{key}.pkl"), digest)

    def load(self, entry: CacheEntry):
        """The cached result of ``entry`` (marked ``reused``), or None (missing or damaged)."""
        if not os.path.exists(entry.path):
            return None
        try:
            with open(entry.path, "rb") as handle:
                result = pickle.load(handle)
        except Exception:  # a damaged cache entry is recomputed
            return None
        result.reused = True
        return result

    def holds(self, entry: CacheEntry) -> bool:
        """True when ``entry``'s result is cached."""
        return os.path.exists(entry.path)

    def changed_since(self, info, entry: CacheEntry) -> bool:
        """True when step ``info.index`` was cached from other content than ``entry`` names.

        The options are the run's own (a resume checks the run key first), so another
        key for the same step means its file (or the HDF5 files it reads) changed since
        the run that cached it.
        """
        prefix = f"step_{info.index:06d}_"
        mine = os.path.basename(entry.path)
        try:
            return any(f.startswith(prefix) and f.endswith(".pkl") and f != mine for f in os.listdir(self.folder))
        except OSError:
            return False

    def store(self, entry: CacheEntry, result) -> None:
        """Cache a finished step's result (its outline without centroids: those are kept once per mesh)."""
        from ..report._files import atomic_write_bytes

        outline = getattr(result, "outline", None)
        if outline is not None and outline.has_centroids:
            result = dataclasses.replace(result, outline=outline.without_centroids())
        atomic_write_bytes(entry.path, pickle.dumps(result, protocol=pickle.HIGHEST_PROTOCOL))

    def holds_finished_steps(self) -> bool:
        """True when at least one step's result is cached (finished work worth keeping)."""
        try:
            return any(f.startswith("step_") and f.endswith(".pkl") for f in os.listdir(self.folder))
        except OSError:
            return False

    def _data_stamp(self, info) -> str:
        """Size and modification time of the files a step reads besides its own
        (:func:`phasegauge.io.step_data_files`: the HDF5 files of any XDMF step file, the volume blocks
        of a multiblock step; '' for other steps)."""
        from ..io import step_data_files

        files = self._data_files.get(info.path)
        if files is None:
            files = self._data_files[info.path] = step_data_files(info.path)
        stamps = []
        for full in files:
            try:
                st = os.stat(full)
                stamps.append(f"{full}:{st.st_size}:{st.st_mtime_ns}")
            except OSError:
                stamps.append(f"{full}:missing")
        return "|".join(stamps)

    # ------------------------------------------------------------------ mesh outlines
    def _outline_path(self, signature: str) -> str:
        return os.path.join(self.folder, f"outline_{signature}.pickle")

    def has_outline(self, signature: str) -> bool:
        """True when the outline (with centroids) of the mesh ``signature`` is kept."""
        return os.path.exists(self._outline_path(signature))

    def load_outline(self, signature: str):
        """The kept :class:`~phasegauge.model.outline.MeshOutline` of a mesh, or None."""
        try:
            with open(self._outline_path(signature), "rb") as handle:
                return pickle.load(handle)
        except Exception:
            return None

    def store_outline(self, outline) -> None:
        """Keep a mesh's outline with its centroids (once per mesh)."""
        from ..report._files import atomic_write_bytes

        atomic_write_bytes(self._outline_path(outline.signature),
                           pickle.dumps(outline, protocol=pickle.HIGHEST_PROTOCOL))

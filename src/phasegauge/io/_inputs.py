"""The input files of a series, with their sizes and content hashes (for manifests and the resume cache)."""

from __future__ import annotations

import hashlib
import os

__all__ = ["file_sha256", "input_files", "step_data_files"]


def file_sha256(path, chunk: int = 1 << 22) -> str:
    """SHA-256 of a file's content, hex."""
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        while True:
            block = handle.read(chunk)
            if not block:
                break
            digest.update(block)
    return digest.hexdigest()


def step_data_files(path) -> list:
    """The files a step file's numbers live in besides itself, as paths: the HDF5 files an XDMF file
    names (a one-step file, a collection, or a step file a collection includes), the volume blocks or
    pieces a multiblock or parallel index file (``.vtm``, ``.pvtu``, ...) names; [] for other files.

    The resume cache stamps them and the manifest lists them: a solver that rewrites a step's data
    may leave the step file itself unchanged.

    Parameters
    ----------
    path : str or os.PathLike
        A step file.

    Returns
    -------
    list of str
        Files that do not exist are listed too ([] when the step file cannot be read).
    """
    from ._formats import format_for
    from ._multiblock import is_index_file, multiblock_data_files

    path = os.fspath(path)
    if is_index_file(path):
        return multiblock_data_files(path)
    fmt = format_for(path)
    if fmt is None or fmt.hdf5_files is None:
        return []
    return list(fmt.hdf5_files(path))


def input_files(series, known_sha256: dict | None = None) -> list:
    """Every input file of a series: a listing (or a collection's file that includes the step files),
    the step files, each followed by the files its numbers live in (:func:`step_data_files`: an XDMF
    file's HDF5 files, a multiblock file's volume blocks).

    Parameters
    ----------
    series : Series
    known_sha256 : dict of str to str, optional
        Hashes already computed (path as the series names it -> SHA-256), reused instead of
        reading the file again.

    Returns
    -------
    list of dict
        ``{"path": absolute path, "bytes": size, "sha256": hex digest}`` for each file that
        exists (``"sha256"`` is None for a file that cannot be read), each listed once, in order:
        the listing or including file, then each step file followed by its data files.
    """
    known = known_sha256 or {}
    # a listing, or a collection's file that includes the step files: read for the steps, not a step
    files = [series.path] if os.path.isfile(series.path) and series.path not in series.files else []
    for f in series.files:
        files.append(f)
        files += step_data_files(f)
    out, seen = [], set()
    for f in files:
        full = os.path.abspath(f)
        if full in seen or not os.path.isfile(f):
            continue
        try:
            digest = known.get(f) or file_sha256(f)
        except OSError:  # a file the user may not read (its step was skipped): listed without a hash
            digest = None
        seen.add(full)
        out.append({"path": full, "bytes": os.path.getsize(f), "sha256": digest})
    return out

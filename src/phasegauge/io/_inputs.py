"""The input files of a series, with their sizes and content hashes (for manifests and the resume cache)."""

from __future__ import annotations

import hashlib
import os

__all__ = ["file_sha256", "input_files"]


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


def input_files(series, known_sha256: dict | None = None) -> list:
    """Every input file of a series: the step files, the HDF5 files an XDMF collection names, the volume
    blocks each multiblock (``.vtm``) step names, a listing.

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
        exists (``"sha256"`` is None for a file that cannot be read), in order: the listing, the step files (each multiblock file followed by its
        volume blocks), the data files.
    """
    from ._multiblock import is_index_file, multiblock_data_files
    from ._xdmf import xdmf_data_files

    known = known_sha256 or {}
    files = []
    for f in series.files:
        files.append(f)
        if is_index_file(f):
            files += multiblock_data_files(f)
    if series.kind == "collection":  # its file, or the step files it includes: their HDF5 data
        for f in series.files:
            files += xdmf_data_files(f)
    if series.kind == "listing":
        files = [series.path] + files
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

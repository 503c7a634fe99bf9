"""The input files of a run, with their size and content hash (for a run's manifest).

An XDMF file holds only the layout of its steps; the numbers sit in the HDF5
files it names. Those are inputs too, so :func:`input_files` lists each of them
after the XDMF file that names it, taking the names from the XDMF text the way
the reader does.
"""

from __future__ import annotations

import hashlib
import os

from ._meshio_adapter import _hdf5_names

__all__ = ["input_files", "sha256_of"]

#: suffixes of XDMF files, whose HDF5 data files are inputs as well
_XDMF_SUFFIXES = (".xdmf", ".xmf")


def sha256_of(path, chunk: int = 1 << 22) -> str:
    """SHA-256 of a file's content, as 64 hex digits (read in chunks of ``chunk`` bytes)."""
    h = hashlib.sha256()
    with open(path, "rb") as handle:
        while True:
            block = handle.read(chunk)
            if not block:
                break
            h.update(block)
    return h.hexdigest()


def input_files(paths, *, known: dict | None = None) -> list:
    """Every input file with its size and SHA-256.

    Parameters
    ----------
    paths : iterable of str or os.PathLike
        The files a run read (a series' step files, its listing file...).
    known : dict of str to str, optional
        SHA-256 already computed for some paths (keyed by the path as given),
        e.g. by the workers that read the steps; those files are not hashed again.

    Returns
    -------
    list of dict
        One ``{'path': absolute path, 'bytes': size, 'sha256': hex digest}``
        per existing file, in the order given, each XDMF file followed by the
        HDF5 files it names; a file named twice is listed once, missing files
        are left out.

    Examples
    --------
    >>> import os, tempfile
    >>> folder = tempfile.mkdtemp()
    >>> path = os.path.join(folder, "a.txt")
    >>> _ = open(path, "w").write("abc")
    >>> [(os.path.basename(f["path"]), f["bytes"], f["sha256"][:8]) for f in input_files([path])]
    [('a.txt', 3, 'ba7816bf')]
    """
    known = dict(known or {})
    listed = []
    for path in paths:
        path = os.fspath(path)
        listed.append(path)
        if path.lower().endswith(_XDMF_SUFFIXES):
            folder = os.path.dirname(os.path.abspath(path))
            listed += [name if os.path.isabs(name) else os.path.join(folder, name) for name in _hdf5_names(path)]
    out, seen = [], set()
    for path in listed:
        full = os.path.abspath(path)
        if full in seen or not os.path.isfile(path):
            continue
        seen.add(full)
        out.append({"path": full, "bytes": os.path.getsize(path), "sha256": known.get(path) or sha256_of(path)})
    return out

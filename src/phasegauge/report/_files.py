"""Atomic file writing and the output-folder rules.

Every output file is written to a temporary file in the same folder and moved
into place with :func:`os.replace`, so a reader never sees half a file and an
interrupted run never leaves a damaged one.
"""

from __future__ import annotations

import hashlib
import io
import json
import os
import shutil
import tempfile

from ..errors import OutputError

__all__ = ["atomic_write_bytes", "atomic_write_text", "atomic_write_csv", "atomic_write_json",
           "atomic_save_figure", "prepare_output_folder", "sha256_of", "RUN_MARKER"]

#: file inside an output folder that says a phasegauge run owns it
RUN_MARKER = ".phasegauge-run.json"


def atomic_write_bytes(path, data: bytes) -> None:
    """Write ``data`` to ``path`` through a temporary file and :func:`os.replace`."""
    path = os.fspath(path)
    folder = os.path.dirname(os.path.abspath(path))
    try:
        os.makedirs(folder, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=".tmp-", suffix=os.path.basename(path), dir=folder)
    except OSError as exc:
        raise OutputError(f"cannot write here ({exc.strerror or exc})", where=path,
                          fix="choose an output folder you can write to") from None
    try:
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)
            handle.flush()
            os.fsync(handle.fileno())
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise


def atomic_write_text(path, text: str) -> None:
    atomic_write_bytes(path, text.encode("utf-8"))


def atomic_write_json(path, obj) -> None:
    atomic_write_text(path, json.dumps(obj, indent=2, default=_json_default) + "\n")


def _json_default(obj):
    import numpy as np

    if isinstance(obj, np.generic):
        return obj.item()
    if isinstance(obj, np.ndarray):
        return obj.tolist()
    if isinstance(obj, (set, tuple)):
        return list(obj)
    return str(obj)


def atomic_write_csv(path, frame) -> None:
    """Write a DataFrame as CSV (no index, full float precision)."""
    buffer = io.StringIO()
    frame.to_csv(buffer, index=False, float_format="%.10g")
    atomic_write_text(path, buffer.getvalue())


def atomic_save_figure(path, figure, *, dpi: int = 110) -> bytes:
    """Save a matplotlib figure as PNG atomically; return the PNG bytes."""
    buffer = io.BytesIO()
    figure.savefig(buffer, format="png", dpi=dpi, bbox_inches="tight")
    data = buffer.getvalue()
    atomic_write_bytes(path, data)
    return data


def sha256_of(path, chunk: int = 1 << 22) -> str:
    """SHA-256 of a file's content."""
    h = hashlib.sha256()
    with open(path, "rb") as handle:
        while True:
            block = handle.read(chunk)
            if not block:
                break
            h.update(block)
    return h.hexdigest()


def prepare_output_folder(out, *, overwrite: bool = False, resume: bool = False, run_key: str = "") -> str:
    """Check and create the output folder.

    Parameters
    ----------
    out : str or os.PathLike
    overwrite : bool
        Replace an existing folder's phasegauge outputs.
    resume : bool
        Continue an interrupted run in ``out`` (its cached steps are reused).
    run_key : str
        Identity of this run's inputs and options; a resumed folder must match it.

    Returns
    -------
    str : ``'new'``, ``'resume'`` or ``'overwrite'``

    Raises
    ------
    OutputError
        The folder exists and neither flag is given; it holds files phasegauge
        did not write (it is never emptied then); resuming a run of other
        inputs or options; the folder cannot be created.
    """
    out = os.fspath(out)
    marker = os.path.join(out, RUN_MARKER)
    if os.path.exists(out) and not os.path.isdir(out):
        raise OutputError("exists and is not a folder", where=out, fix="choose another output folder")
    exists = os.path.isdir(out) and bool(os.listdir(out))
    if exists:
        owned = os.path.exists(marker)
        if resume:
            if not owned:
                raise OutputError("holds no phasegauge run to resume", where=out,
                                  fix="start a new run without --resume")
            with open(marker, encoding="utf-8") as handle:
                previous = json.load(handle)
            if run_key and previous.get("run_key") != run_key:
                raise OutputError("was made from other inputs or options, so it cannot be resumed", where=out,
                                  fix="rerun with the same inputs and options, or use --overwrite")
            return "resume"
        if not overwrite:
            raise OutputError("output folder exists", where=out,
                              fix="give --overwrite to replace it, --resume to finish an interrupted run, "
                                  "or another folder")
        if not owned:
            raise OutputError("exists and holds files phasegauge did not write, so it is not replaced",
                              where=out, fix="choose an empty or new output folder")
        _clear_owned(out)
        mode = "overwrite"
    else:
        mode = "new"
    try:
        os.makedirs(out, exist_ok=True)
        test = os.path.join(out, ".write-test")
        with open(test, "w") as handle:
            handle.write("")
        os.remove(test)
    except OSError as exc:
        raise OutputError(f"cannot be written ({exc.strerror or exc})", where=out,
                          fix="choose an output folder you can write to") from None
    atomic_write_json(marker, {"run_key": run_key, "state": "running"})
    return mode


def _clear_owned(out: str) -> None:
    """Remove the outputs of an earlier run (only in a folder phasegauge owns)."""
    for name in os.listdir(out):
        path = os.path.join(out, name)
        if os.path.isdir(path) and not os.path.islink(path):
            shutil.rmtree(path)
        else:
            os.remove(path)

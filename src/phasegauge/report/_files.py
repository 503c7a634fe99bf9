"""Atomic file writing and the output-folder rules.

Every output file is written to a temporary file in the same folder and moved
into place with :func:`os.replace`, so a reader never sees half a file and an
interrupted run never leaves a damaged one.
"""

from __future__ import annotations

import contextlib
import contextvars
import io
import json
import os
import re
import socket
import secrets
import shutil
import struct
import zlib

from ..errors import OutputError

__all__ = ["atomic_write_bytes", "atomic_write_text", "atomic_write_csv", "atomic_write_json",
           "atomic_save_figure", "encode_png", "prepare_output_folder", "output_transaction", "RUN_MARKER",
           "mark_complete",
           "PREVIOUS_RUN", "TEMP_PREFIX", "remove_temporaries"]

#: file inside an output folder that says a phasegauge run owns it
RUN_MARKER = ".phasegauge-run.json"

#: folder inside an output folder that holds the earlier run's outputs while ``--overwrite`` runs
PREVIOUS_RUN = ".previous-run"
#: the file that marks an output folder a run is writing (host, process id): a second run is refused
RUN_LOCK = ".phasegauge-lock"
#: what an earlier run's folder may hold without a record of the files it wrote (older versions):
#: phasegauge's own names and its tables', plots' and runs' name patterns
_OUR_NAMES = re.compile(r"(manifest|diffusion_audit|phase_diagram)\.json|report\.html|\.cache|contours|run_.*|"
                        r"(campaign|comparison|convergence|droplet_statistics|droplets|events|lines|pairs|"
                        r"phase_diagram|probes|profiles|reference_checks|steps|steps_.*|validation|"
                        r"validation_summary)\.csv|.*\.(png|svg|pdf)")
#: the same for files in the contours folder: the interfaces, their listing, and a write a kill cut short
_OUR_CONTOURS = re.compile(r"contours/(interface_\d+\.vtu|interface\.steps|\.interface_\d+\.[0-9a-f]+\.vtu)")
#: this process among all that had its number (a container restarted gives the same one): a lock that
#: holds the number but not this token was left by an earlier process
_PROCESS_TOKEN = secrets.token_hex(8)

#: prefix of the temporary files of atomic writes
TEMP_PREFIX = ".tmp-"

#: random bytes in a temporary file's name (after the prefix, as hex), before the file's own name
_TEMP_TOKEN_BYTES = 6

_ACTIVE = contextvars.ContextVar("phasegauge_output_transaction", default=None)


def atomic_write_bytes(path, data: bytes) -> None:
    """Write ``data`` to ``path`` through a temporary file and :func:`os.replace`."""
    path = os.fspath(path)
    folder = os.path.dirname(os.path.abspath(path))
    try:
        os.makedirs(folder, exist_ok=True)
        # the temporary name ends in '.part', so a listing of '*.pkl' or '*.vtu' never takes it for output
        # created with mode 0666 less the umask, as any new file (mkstemp would give 0600)
        tmp = os.path.join(folder, f"{TEMP_PREFIX}{secrets.token_hex(_TEMP_TOKEN_BYTES)}{os.path.basename(path)}.part")
        fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666)
    except OSError as exc:
        raise OutputError(f"cannot write here ({exc.strerror or exc})", where=path,
                          fix="choose an output folder you can write to") from None
    try:
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)
            handle.flush()
            os.fsync(handle.fileno())
        os.replace(tmp, path)
    except BaseException as exc:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        if isinstance(exc, OSError):  # a full disk, a folder removed under the run...
            raise OutputError(f"cannot write {os.path.basename(path)} ({exc.strerror or exc})", where=folder,
                              fix="free space or choose an output folder you can write to") from None
        raise


def atomic_write_text(path, text: str) -> None:
    atomic_write_bytes(path, text.encode("utf-8"))


def atomic_write_json(path, obj) -> None:
    """Write strict JSON: NaN and infinities become ``null`` (RFC 8259 has no NaN)."""
    atomic_write_text(path, json.dumps(strict_json(obj), indent=2, default=_json_default, allow_nan=False) + "\n")


def strict_json(obj):
    """``obj`` with every non-finite float (numpy ones too) replaced by None, for strict JSON."""
    import numpy as np

    if isinstance(obj, dict):
        return {key: strict_json(value) for key, value in obj.items()}
    if isinstance(obj, (list, tuple, set)):
        return [strict_json(value) for value in obj]
    if isinstance(obj, np.ndarray):
        return [strict_json(value) for value in obj.tolist()]
    if isinstance(obj, (float, np.floating)):
        return float(obj) if np.isfinite(obj) else None
    if isinstance(obj, np.generic):
        return obj.item()
    return obj


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
    """Write a DataFrame as CSV (no index): floats as their shortest round-trip text (pandas' default,
    Python's ``repr``), so ``pandas.read_csv`` reads back the same values and dtypes."""
    buffer = io.StringIO()
    frame.to_csv(buffer, index=False)
    atomic_write_text(path, buffer.getvalue())


#: the formats plots can be saved in
PLOT_FORMATS = ("png", "svg", "pdf")


def atomic_save_figure(path, figure, *, dpi: int = 110) -> bytes:
    """Save a matplotlib figure atomically in the format its suffix names (png, svg, pdf).

    Returns the figure as PNG bytes (for embedding in a report page), whatever the file's format.

    A figure with a layout engine (the report's constrained layout) is laid out once, at the saving
    resolution, and then drawn once per format: matplotlib would otherwise lay it out and draw it
    without rendering before every save (and a tight bounding box needs that extra pass too). A
    figure without a layout engine is saved as its maker placed the axes (``subplots_adjust``).
    """
    suffix = os.path.splitext(os.fspath(path))[1].lower().lstrip(".") or "png"
    _lay_out_once(figure, dpi)
    data = _png_bytes(figure, dpi)
    if suffix == "png":
        atomic_write_bytes(path, data)
    else:
        other = io.BytesIO()
        figure.savefig(other, format=suffix, dpi=dpi)
        atomic_write_bytes(path, other.getvalue())
    return data


def _png_bytes(figure, dpi: int) -> bytes:
    """The figure drawn on the Agg canvas at ``dpi`` (by ``savefig``, as raw RGBA), as PNG bytes.

    The pixels are the ones matplotlib's PNG would hold; they are encoded by :func:`encode_png`
    (RGB when the image is opaque, as the report's white figures are) at the fastest zlib level.
    """
    import numpy as np

    figure.set_dpi(dpi)
    raw = io.BytesIO()
    figure.savefig(raw, format="raw", dpi=dpi)
    width, height = int(figure.bbox.width), int(figure.bbox.height)
    pixels = np.frombuffer(raw.getbuffer(), dtype=np.uint8)
    if pixels.size != width * height * 4:  # not the Agg canvas's layout: let matplotlib write the PNG
        buffer = io.BytesIO()
        figure.savefig(buffer, format="png", dpi=dpi)
        return buffer.getvalue()
    rgba = pixels.reshape(height, width, 4)
    return encode_png(rgba[..., :3] if rgba[..., 3].min() == 255 else rgba)


def encode_png(pixels, *, level: int = 1) -> bytes:
    """A PNG file of an 8-bit image: ``pixels`` of shape (height, width, 3) RGB or (height, width, 4) RGBA.

    Written to the PNG specification (W3C, Portable Network Graphics, 2nd edition, 2003) with the
    standard library: a header chunk, every row with filter type 0 (none) in one zlib stream at
    ``level`` (1: fastest), the end chunk. Plots are mostly flat colour, which the fastest level
    packs well without row filters: about a third of Pillow's time for the same image (Pillow also
    tries its row filters and loads its image plugins on the first save), 3 % larger files.

    Parameters
    ----------
    pixels : array_like of shape (height, width, 3) or (height, width, 4), uint8
    level : int
        zlib compression level, 0 to 9.

    Returns
    -------
    bytes
        The PNG file.
    """
    import numpy as np

    pixels = np.asarray(pixels, dtype=np.uint8)
    height, width, channels = pixels.shape
    rows = np.zeros((height, width * channels + 1), dtype=np.uint8)  # column 0: filter type 0 of each row
    rows[:, 1:] = pixels.reshape(height, width * channels)
    header = struct.pack(">IIBBBBB", width, height, 8, 2 if channels == 3 else 6, 0, 0, 0)
    return b"".join((b"\x89PNG\r\n\x1a\n", _png_chunk(b"IHDR", header),
                     _png_chunk(b"IDAT", zlib.compress(rows.data, int(level))), _png_chunk(b"IEND", b"")))


def _png_chunk(kind: bytes, data: bytes) -> bytes:
    """One PNG chunk: length, type, data and the CRC-32 of type and data."""
    return struct.pack(">I", len(data)) + kind + data + struct.pack(">I", zlib.crc32(data, zlib.crc32(kind)))


def _lay_out_once(figure, dpi: int) -> None:
    """Lay out a figure that has a layout engine at ``dpi``, once, and remove the engine (the axes keep their places).

    One-column figures get one measuring pass (:func:`._canvas.lay_out_column`); any other runs its engine.
    Linear axes with automatic ticks get fewer of them first (:func:`._canvas.sparse_ticks`).
    """
    from ._canvas import lay_out_column, sparse_ticks

    sparse_ticks(figure)
    engine = figure.get_layout_engine()
    if engine is None or lay_out_column(figure, dpi):
        return
    figure.set_dpi(dpi)
    engine.execute(figure)
    figure.set_layout_engine(None)  # with rc settings that put an engine back, matplotlib lays it out again


def prepare_output_folder(out, *, overwrite: bool = False, resume: bool = False, run_key: str = "",
                          code: str = "", contours: bool | None = None) -> str:
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
    code : str
        Identity of the code that measures (a digest of its source); a resumed folder must have
        been measured by the same code, so that no run mixes the numbers of two versions.
    contours : bool, optional
        Whether the run writes the interface of every step into ``contours/``; a resumed folder must
        have been measured alike, or ``contours/`` would miss its finished steps or keep files of a
        run that writes none.

    Returns
    -------
    str : ``'new'``, ``'resume'`` or ``'overwrite'``

    Raises
    ------
    OutputError
        The folder exists and neither flag is given; it holds files phasegauge
        did not write (it is never emptied then); resuming a run of other
        inputs or options, or with contour files where this run writes none (or the reverse), or one
        another version measured; the folder cannot be created.
    """
    out = os.fspath(out)
    marker = os.path.join(out, RUN_MARKER)
    txn = _ACTIVE.get()
    if txn is not None and txn.out != os.path.abspath(out):
        txn = None
    if os.path.exists(out) and not os.path.isdir(out):
        raise OutputError("exists and is not a folder", where=out, fix="choose another output folder")
    exists = os.path.isdir(out) and any(name != RUN_LOCK for name in os.listdir(out))
    if txn is not None and txn.lock is None:  # one run writes a folder at a time
        txn.lock = _take_lock(out)
    if exists:
        owned = os.path.exists(marker)
        if resume:
            if not owned:
                raise OutputError("holds no phasegauge run to resume", where=out,
                                  fix="start a new run without --resume")
            try:
                with open(marker, encoding="utf-8") as handle:
                    previous = json.load(handle)
            except (OSError, ValueError):
                previous = {}
            if run_key and previous.get("run_key") != run_key:
                raise OutputError("was made from other inputs or options, so it cannot be resumed", where=out,
                                  fix="rerun with the same inputs and options, or use --overwrite")
            if code and previous.get("code", "") != code:
                raise OutputError("was measured by another version of phasegauge, whose numbers may differ, so "
                                  "it cannot be resumed", where=out,
                                  fix="use --overwrite to measure it again with this version")
            _check_resumed_contours(out, previous.get("contours", contours), contours)
            remove_temporaries(out)
            # files the earlier run did not write (a killed run's: by phasegauge's names) are not counted as
            # this run's when it ends
            kept = set(_foreign_files(out, marker))
            atomic_write_json(marker, {**previous, "kept": [p for p in _files_in(out)
                                                            if p in kept or p.split("/")[0] in kept]})
            if txn is not None:
                txn.mode = "resume"
            return "resume"
        if not overwrite:
            raise OutputError("output folder exists", where=out,
                              fix="give --overwrite to replace it, --resume to finish an interrupted run, "
                                  "or another folder")
        foreign = _foreign_files(out, marker) if owned else []
        if not owned or foreign:
            said = f" ({', '.join(foreign[:3])}{' ...' if len(foreign) > 3 else ''})" if foreign else ""
            raise OutputError(f"exists and holds files phasegauge did not write{said}, so it is not replaced",
                              where=out, fix="move them out of it, or choose an empty or new output folder")
        if txn is not None:
            _set_aside(out)
        else:
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
    if txn is not None:
        txn.mode = mode
    atomic_write_json(marker, {"run_key": run_key, "code": code, "contours": contours, "state": "running"})
    return mode


def _check_resumed_contours(out: str, before, now) -> None:
    """Refuse to resume a run that wrote contour files with a run that writes none, or the reverse."""
    if now is None or before is None or bool(before) == bool(now):
        return
    if now:
        raise OutputError("was measured without contour files (--no-contours), so a resume that writes them "
                          "would leave contours/ without its finished steps", where=out,
                          fix="resume with --no-contours, or use --overwrite to measure it again with contour files")
    raise OutputError("was measured with contour files, so a resume without them (--no-contours) would leave "
                      "contours/ with its finished steps' files only", where=out,
                      fix="resume with --contours (the default), or use --overwrite to measure it again without them")


def mark_complete(out) -> None:
    """Mark the run in ``out`` complete, keeping what :func:`prepare_output_folder` noted of it
    (the run's inputs and options, the code that measured it, and the files found there when it
    resumed that it did not write) and the files it wrote there (paths under ``out``, subfolders
    included)."""
    out = os.fspath(out)
    marker = os.path.join(out, RUN_MARKER)
    try:
        with open(marker, encoding="utf-8") as handle:
            noted = json.load(handle)
    except (OSError, ValueError):
        noted = {}
    kept = set(noted.get("kept", ()))
    written = sorted(path for path in _files_in(out) if path not in kept)
    atomic_write_json(marker, {"run_key": noted.get("run_key", ""), "code": noted.get("code", ""),
                               "contours": noted.get("contours"), "state": "complete", "written": written})


def _files_in(out: str) -> list:
    """Every file under ``out`` as a path relative to it ('/'-separated), but the marker, the lock, the
    earlier run set aside, the step cache (the run's own) and temporaries."""
    found = []
    for folder, dirs, files in os.walk(out):
        if folder == out:
            dirs[:] = [d for d in dirs if d not in (PREVIOUS_RUN, ".cache")]
        rel = os.path.relpath(folder, out)
        links = [d for d in dirs if os.path.islink(os.path.join(folder, d))]  # not walked: an entry each
        dirs[:] = [d for d in dirs if d not in links]
        for name in files + links:
            if folder == out and name in (RUN_MARKER, RUN_LOCK) or name.startswith(TEMP_PREFIX):
                continue
            found.append(name if rel == "." else f"{rel}/{name}".replace(os.sep, "/"))
        if not files and not dirs and not links and rel != ".":
            found.append(rel.replace(os.sep, "/") + "/")  # an empty folder the run made
    return found


def _foreign_files(out: str, marker: str) -> list:
    """Files in an earlier run's folder that it did not write (subfolders included): not in its
    marker's record; older versions and killed runs kept none, so then those whose top-level name is
    none of phasegauge's names and patterns."""
    written = _record(marker)
    if written is not None:
        return sorted(path for path in _files_in(out) if path not in written)
    records = {}  # a campaign's run folders keep their own records: judged by those

    def ours(path: str) -> bool:
        top, _, rest = path.partition("/")
        if top.startswith("run_") and rest:
            if top not in records:
                records[top] = _record(os.path.join(out, top, RUN_MARKER))
            if records[top] is not None:
                return rest in records[top] or rest in (RUN_MARKER, RUN_LOCK) or rest.startswith(".cache/")
        if top == "contours" and rest:
            return bool(_OUR_CONTOURS.fullmatch(path))
        return bool(_OUR_NAMES.fullmatch(top))

    return sorted({path if "/" in path and path.split("/")[0] in ("contours", *records) else path.split("/")[0]
                   for path in _files_in(out) if not ours(path)})


def _record(marker: str):
    """The files a finished run recorded in its marker (a set), or None (no record: a killed run's, an
    older version's, or no marker)."""
    try:
        with open(marker, encoding="utf-8") as handle:
            written = json.load(handle).get("written")
    except (OSError, ValueError, AttributeError):
        return None
    return None if written is None else set(written)


def _take_lock(out: str) -> str:
    """Mark ``out`` as written by this process (:data:`RUN_LOCK`), creating the folder; refuse it
    while another live run holds it (one of this host whose process has ended left it: taken over)."""
    path = os.path.join(out, RUN_LOCK)
    mine = {"host": socket.gethostname(), "pid": os.getpid(), "process": _PROCESS_TOKEN}
    for _ in range(2):
        try:
            os.makedirs(out, exist_ok=True)
            fd = os.open(path, os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o644)
        except FileExistsError:
            try:
                with open(path, encoding="utf-8") as handle:
                    held = json.load(handle)
            except (OSError, ValueError):
                held = {}
            earlier = held.get("pid") == mine["pid"] and held.get("process") != mine["process"]  # a restart's
            if held.get("host") == mine["host"] and (earlier or not _alive(held.get("pid"))):
                with contextlib.suppress(OSError):
                    os.remove(path)  # left by a run that was killed
                continue
            raise OutputError(f"another phasegauge run (process {held.get('pid', '?')} on {held.get('host', '?')}) "
                              "is writing this folder", where=out,
                              fix=f"wait for it to finish or choose another folder; if no run is writing it, remove "
                                  f"{RUN_LOCK} from it") from None
        except OSError as exc:
            raise OutputError(f"cannot be written ({exc.strerror or exc})", where=out,
                              fix="choose an output folder you can write to") from None
        with os.fdopen(fd, "w", encoding="utf-8") as handle:
            json.dump(mine, handle)
        return path
    raise OutputError("cannot mark the folder as this run's", where=out, fix="choose another output folder")


def _alive(pid) -> bool:
    """Whether process ``pid`` of this host still runs."""
    if not isinstance(pid, int) or pid <= 0:
        return False
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except OSError:  # it runs, as another user
        return True
    return True


class _Transaction:
    """State of one run's output folder (see :func:`output_transaction`)."""

    def __init__(self, out: str):
        self.out = os.path.abspath(out)
        self.existed_empty = os.path.isdir(out) and not os.listdir(out)
        self.mode = None  # set by prepare_output_folder: 'new', 'overwrite' or 'resume'
        self.worth_keeping = lambda: False  # finished work a failed run should leave for --resume
        self.lock = None  # this run's RUN_LOCK file, once prepare_output_folder took it


@contextlib.contextmanager
def output_transaction(out):
    """Make a run's output folder all-or-nothing as far as the user's earlier outputs go.

    Inside this context, :func:`prepare_output_folder` with ``overwrite`` sets
    the earlier run's outputs aside (in ``PREVIOUS_RUN`` inside the folder)
    instead of deleting them. When the run then fails with an error, they are
    put back and the earlier report is as it was; when it succeeds they are
    deleted. A new folder that a failed run created is removed again, unless
    the run sets ``worth_keeping`` to say it holds finished steps (the error then
    says to resume). An interrupt (Ctrl-C, a kill) leaves everything for
    ``--resume``; a resumed run that succeeds deletes what was set aside.

    Yields the transaction (None for ``out=None``); nested uses for the same
    folder are one transaction.
    """
    active = _ACTIVE.get()
    if out is None or (active is not None and active.out == os.path.abspath(out)):
        yield active if out is not None else None
        return
    txn = _Transaction(os.fspath(out))
    token = _ACTIVE.set(txn)
    try:
        yield txn
    except Exception as exc:
        replacement = _roll_back(txn, exc)
        if replacement is not None:
            raise replacement from exc
        raise
    else:
        if txn.mode in ("overwrite", "resume"):
            shutil.rmtree(os.path.join(txn.out, PREVIOUS_RUN), ignore_errors=True)
    finally:
        _ACTIVE.reset(token)
        if txn.lock is not None:
            with contextlib.suppress(OSError):
                os.remove(txn.lock)


def _roll_back(txn: _Transaction, exc: Exception):
    """Undo what a failed run did to its output folder; return a clearer error or None."""
    from ..errors import PhasegaugeError

    out = txn.out
    aside = os.path.join(out, PREVIOUS_RUN)
    try:
        if txn.mode == "overwrite" and os.path.isdir(aside):
            for name in os.listdir(out):
                if name not in (PREVIOUS_RUN, RUN_LOCK):
                    _remove(os.path.join(out, name))
            for name in os.listdir(aside):
                os.replace(os.path.join(aside, name), os.path.join(out, name))
            os.rmdir(aside)
            if isinstance(exc, PhasegaugeError) and exc.exit_status == 2:
                return exc.with_fix(f"{exc.fix}; the earlier outputs in {out} are kept as they were")
        elif txn.mode == "new":
            if txn.worth_keeping():
                if isinstance(exc, PhasegaugeError):
                    return exc.with_fix(f"{exc.fix}; the finished steps are kept in {out} for --resume")
            elif os.path.exists(os.path.join(out, RUN_MARKER)):
                shutil.rmtree(out, ignore_errors=True)
                if txn.existed_empty:
                    os.makedirs(out, exist_ok=True)
    except OSError:  # cleaning up must never hide the error itself
        pass
    return None


def _set_aside(out: str) -> None:
    """Move an earlier run's outputs into ``PREVIOUS_RUN`` (a stale one from a killed run is dropped)."""
    aside = os.path.join(out, PREVIOUS_RUN)
    if os.path.isdir(aside):
        shutil.rmtree(aside)
    os.makedirs(aside)
    for name in os.listdir(out):
        if name not in (PREVIOUS_RUN, RUN_LOCK):
            os.replace(os.path.join(out, name), os.path.join(aside, name))


def _remove(path: str) -> None:
    if os.path.isdir(path) and not os.path.islink(path):
        shutil.rmtree(path)
    else:
        os.remove(path)


def remove_temporaries(out: str, names: list | None = None) -> None:
    """Remove the temporary files of atomic writes left in ``out``.

    Without ``names``, every one in the folder and its subfolders (but the earlier run's, kept
    aside while ``--overwrite`` runs): those a killed run left behind. With ``names``, only those
    of the files ``names`` (base names) in ``out`` itself: those a drawing fork stopped (or dead)
    while writing them left. A file that is gone already, or a folder that cannot be read, is passed over.
    """
    if names is not None and not names:
        return
    wanted = None if names is None else {f"{name}.part" for name in names}
    start = len(TEMP_PREFIX) + 2 * _TEMP_TOKEN_BYTES  # the prefix and the random token (hex)
    for folder, dirs, files in os.walk(out):
        dirs[:] = [] if wanted is not None else [d for d in dirs if d != PREVIOUS_RUN]
        for name in files:
            if name.startswith(TEMP_PREFIX) and (wanted is None or name[start:] in wanted):
                try:
                    os.remove(os.path.join(folder, name))
                except OSError:
                    pass


def _clear_owned(out: str) -> None:
    """Remove the outputs of an earlier run (only in a folder phasegauge owns)."""
    for name in os.listdir(out):
        if name != RUN_LOCK:
            _remove(os.path.join(out, name))

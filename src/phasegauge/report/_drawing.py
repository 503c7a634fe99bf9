"""Making and saving a report's figures, in two processes where a core is free for the second.

A report's figures are independent of each other: each is made from the run's tables, laid out,
drawn and written to its own file. Where the machine has a core the report does not use, a fork
of this process (which has matplotlib imported already, so the fork imports nothing) makes and
saves part of them while this process does the rest; the fork sends back each figure's PNG bytes
for the page. The fork is only a way of doing the same work sooner: where ``os.fork`` is missing,
where other threads run in this process (a fork copies their locks as they are), where this
process is itself a worker, or where the machine is busy, everything is drawn here, the same way.

The fork is always waited for (no process outlives the call), and what happens in it surfaces
here: an error raised while drawing a figure is raised again in this process with the figure's
name; a fork that ends without sending its figures (killed, crashed) leaves them to this process.
"""

from __future__ import annotations

import os
import pickle
import sys
from types import MappingProxyType

from ..errors import AnalysisError, short_text
from ._files import atomic_save_figure, remove_temporaries

__all__ = ["save_figure_makers", "save_figures", "fork_helps"]

#: how much each figure costs to make, lay out and draw, relative to a one-axes time plot (others: 1);
#: the snapshots from ``benchmarks/bench_report.py --figures`` (RESULTS.md, "Ninth round: the report
#: in a fresh process", per figure: 0.086-0.090 s against about 0.053 s a 2D figure), the rest estimates
_WEIGHTS = MappingProxyType({"interface_snapshots": 1.6, "interface_width": 2.0, "mixing_profile": 1.5,
                             "droplet_sizes": 1.2, "phase_compositions": 1.5})


def fork_helps(count: int) -> bool:
    """Whether drawing ``count`` figures in two processes is expected to end sooner than in one.

    Yes on Linux only (elsewhere system libraries may hang a forked child, which is why Python
    starts its own workers by spawn on macOS), where there are at least 3 figures, this process runs no other thread
    and is not itself a worker process (``multiprocessing``), and a second core is free: two or
    more cores available to this process, and fewer than the cores less one busy with other work
    (:func:`_busy_cores`).
    """
    import threading

    if count < 3 or not sys.platform.startswith("linux") or not hasattr(os, "fork") or threading.active_count() != 1:
        return False
    import multiprocessing

    if multiprocessing.parent_process() is not None:
        return False
    cores = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else (os.cpu_count() or 1)
    return cores >= 2 and _busy_cores() < cores - 1


def _busy_cores() -> float:
    """How many cores other work keeps busy now.

    Where Linux gives it (``/proc/loadavg``), the threads runnable at this moment less this one: the
    last minute's load average would still count the run's own steps, which have ended when the
    report draws. Elsewhere that load average (``os.getloadavg``), or 0 where the system gives none.
    """
    try:
        with open("/proc/loadavg", encoding="ascii") as handle:
            runnable = handle.read().split()[3].partition("/")[0]
        return max(float(runnable) - 1.0, 0.0)
    except (OSError, IndexError, ValueError):
        pass
    try:
        return os.getloadavg()[0] if hasattr(os, "getloadavg") else 0.0
    except OSError:  # no load average on this system
        return 0.0


def save_figure_makers(out: str, makers, written: list, plot_format: str = "png", *,
                       fork: bool | None = None) -> list:
    """Make each (file stem, caption, maker) figure and save it as ``out/<stem>.<plot_format>``.

    Parameters
    ----------
    out : str
        The output folder.
    makers : sequence of (str, str, callable)
        File stem, caption and a callable without arguments that returns the matplotlib Figure
        (:func:`._plots.measure_figure_makers`).
    written : list
        The names of the files are appended to it, in the order of ``makers``.
    plot_format : {'png', 'svg', 'pdf'}
    fork : bool, optional
        Draw part of the figures in a fork of this process: True where ``os.fork`` exists, False
        never, None (default) where :func:`fork_helps` says so.

    Returns
    -------
    list of (str, bytes)
        (caption, PNG bytes) of each figure, in the order of ``makers``.

    Raises
    ------
    Exception
        The error a figure's maker or its saving raised (in either process), with a note naming
        the figure (Python 3.11 and later).
    """
    makers = list(makers)
    if fork is None:
        fork = fork_helps(len(makers))
    pngs = [None] * len(makers)
    theirs = _their_share(makers) if fork and hasattr(os, "fork") else []
    if theirs:
        _draw_split(out, makers, theirs, plot_format, pngs)
    else:
        for index in range(len(makers)):
            pngs[index] = _draw(out, makers[index], plot_format)
    written.extend(f"{stem}.{plot_format}" for stem, _caption, _make in makers)
    return [(caption, png) for (_stem, caption, _make), png in zip(makers, pngs)]


def save_figures(out: str, figures, written: list, plot_format: str = "png") -> list:
    """Save each (file stem, caption, Figure) made already as ``out/<stem>.<plot_format>``, in this process.

    :func:`save_figure_makers` of figures that exist (a comparison's): the same files, the names
    appended to ``written`` and the (caption, PNG bytes) pairs returned.
    """
    makers = [(stem, caption, lambda figure=figure: figure) for stem, caption, figure in figures]
    return save_figure_makers(out, makers, written, plot_format, fork=False)


def _their_share(makers) -> list:
    """The indices of the figures the fork draws: about half the total weight, the costliest first."""
    order = sorted(range(len(makers)), key=lambda i: -_WEIGHTS.get(makers[i][0], 1.0))
    theirs, load = [], [0.0, 0.0]
    for index in order:
        side = 0 if load[0] <= load[1] else 1
        load[side] += _WEIGHTS.get(makers[index][0], 1.0)
        if side == 1:
            theirs.append(index)
    return sorted(theirs)


def _draw(out: str, maker, plot_format: str) -> bytes:
    stem, _caption, make = maker
    try:
        return atomic_save_figure(os.path.join(out, f"{stem}.{plot_format}"), make())
    except Exception as exc:
        _name(exc, stem)
        raise


def _name(exc: BaseException, stem: str) -> None:
    if hasattr(exc, "add_note"):
        exc.add_note(f"while drawing the report's figure '{stem}'")


def _draw_split(out: str, makers, theirs: list, plot_format: str, pngs: list) -> None:
    """Draw the figures ``theirs`` in a fork and the others here; fill ``pngs`` by index."""
    from importlib import import_module

    for module in ("matplotlib.figure", "matplotlib.backends.backend_agg"):  # before the fork: it imports
        import_module(module)                                                # none of matplotlib again
    import gc

    held = _signal_mask()
    # the objects made so far leave the collector's view while the fork lives: a collection would
    # write to every one of them, and each page written is copied (in the fork, and here while it runs)
    freeze = gc.get_freeze_count() == 0  # (a program that froze objects itself keeps them so)
    if freeze:
        gc.freeze()
    read_end, write_end = os.pipe()
    parent = os.getpid()
    # Ctrl-C or SIGTERM waits while the fork is made: an interrupt raised as os.fork returns would
    # lose the fork's pid (a fork left running), or leave the fork in this program's code. This
    # thread holds them back (the signal mask), and Python's handlers only note them meanwhile: a
    # signal sent to the process may be taken by another thread (a library's own, which threading
    # does not count), whose handler Python runs here, in the main thread (found by review)
    noted = []
    handlers = _note_interrupts(noted)
    try:
        _block_interrupts()
        pid = os.fork()
    except BaseException:
        _set_signal_mask(held)
        if freeze:
            gc.unfreeze()
        os.close(read_end)
        os.close(write_end)
        _put_back(handlers, noted)
        raise
    if pid == 0:  # the fork: draw, send, leave without running this process's exit handlers
        status = 1
        try:
            _put_back(handlers, [])  # an interrupt ends the fork from here on (one noted before is the parent's)
            _set_signal_mask(held)
            _die_with_parent(parent)
            os.close(read_end)
            _send(write_end, _draw_all(out, makers, theirs, plot_format))
            status = 0
        finally:
            os._exit(status)
    received = None
    try:
        os.close(write_end)
        _set_signal_mask(held)  # an interrupt from here on stops the fork (below)
        _put_back(handlers, noted)  # (one noted meanwhile is raised here)
        for index in range(len(makers)):
            if index not in theirs:
                pngs[index] = _draw(out, makers[index], plot_format)
        received = _receive(read_end)
    finally:
        _set_signal_mask(held)  # (lifted above, unless an interrupt came first)
        _put_back(handlers, [])
        os.close(read_end)
        if received is None:  # leaving on an error here: the fork's figures are not wanted
            _stop(pid)
        try:
            os.waitpid(pid, 0)
        except ChildProcessError:  # reaped already (a program that ignores SIGCHLD has its children reaped)
            pass
        if freeze:
            gc.unfreeze()
        remove_temporaries(out, [f"{makers[i][0]}.{plot_format}" for i in theirs if i not in (received or {})])
    for index, (kind, value) in (received or {}).items():
        if kind == "error":
            raise _raised(value, makers[index][0])
        pngs[index] = value
    for index in theirs:  # the fork ended without sending these (killed, crashed): draw them here
        if pngs[index] is None:
            pngs[index] = _draw(out, makers[index], plot_format)


def _draw_all(out: str, makers, indices: list, plot_format: str) -> dict:
    """Index -> ('png', bytes) for each figure drawn, up to the first that raised: ('error', record)."""
    done = {}
    for index in indices:
        stem, _caption, make = makers[index]
        try:
            done[index] = ("png", atomic_save_figure(os.path.join(out, f"{stem}.{plot_format}"), make()))
        except Exception as exc:  # sent as it is where it pickles, else as its class name and text
            try:
                record = pickle.dumps(exc)
            except Exception:
                record = (type(exc).__name__, short_text(exc, 400))
            done[index] = ("error", record)
            break
    return done


def _send(fd: int, done: dict) -> None:
    data = memoryview(pickle.dumps(done, protocol=pickle.HIGHEST_PROTOCOL))
    while data:
        data = data[os.write(fd, data):]
    os.close(fd)


def _receive(fd: int) -> dict:
    """What the fork sent (an empty dict when it ended without sending all of it)."""
    chunks = []
    while True:
        chunk = os.read(fd, 1 << 20)
        if not chunk:
            break
        chunks.append(chunk)
    try:
        return pickle.loads(b"".join(chunks)) if chunks else {}
    except Exception:  # cut short: the fork was killed while sending
        return {}


def _raised(record, stem: str) -> BaseException:
    """The error the fork sent for figure ``stem``, to raise here."""
    if isinstance(record, bytes):
        try:
            exc = pickle.loads(record)
        except Exception as failure:
            exc = AnalysisError(f"drawing the report's figure '{stem}' failed in the drawing process "
                                f"(its error could not be read back: {short_text(failure)})",
                                fix="run again; if it fails again, report it with the input")
    else:
        name, text = record
        exc = AnalysisError(f"drawing the report's figure '{stem}' failed in the drawing process: {name}: {text}",
                            fix="run again; if it fails again, report it with the input")
    _name(exc, stem)
    return exc


def _stop(pid: int) -> None:
    import signal

    try:
        os.kill(pid, signal.SIGKILL)
    except OSError:  # already ended
        pass


def _signal_mask():
    """This thread's blocked signals (None where the system has no ``pthread_sigmask``)."""
    import signal

    return signal.pthread_sigmask(signal.SIG_BLOCK, ()) if hasattr(signal, "pthread_sigmask") else None


def _block_interrupts() -> None:
    """Hold back SIGINT and SIGTERM (delivered when :func:`_set_signal_mask` lifts the block)."""
    import signal

    if hasattr(signal, "pthread_sigmask"):
        signal.pthread_sigmask(signal.SIG_BLOCK, {signal.SIGINT, signal.SIGTERM})


def _note_interrupts(noted: list):
    """Python's SIGINT and SIGTERM handlers replaced by ones that append the signal to ``noted``;
    the handlers replaced (None off the main thread, where Python sets no handler)."""
    import signal
    import threading

    if threading.current_thread() is not threading.main_thread():
        return None
    handlers = {}
    for number in (signal.SIGINT, signal.SIGTERM):
        handler = signal.getsignal(number)
        if callable(handler):  # (an ignored or default signal stays so: Python runs nothing for it)
            handlers[number] = signal.signal(number, lambda signum, frame: noted.append(signum))
    return handlers


def _put_back(handlers, noted: list) -> None:
    """Put back the handlers :func:`_note_interrupts` replaced (once), then raise the first signal noted
    meanwhile as its handler would have (Ctrl-C's KeyboardInterrupt)."""
    import signal

    while handlers:
        number, handler = handlers.popitem()
        signal.signal(number, handler)
    if noted:
        signal.raise_signal(noted.pop(0))
        noted.clear()


def _set_signal_mask(mask) -> None:
    import signal

    if mask is not None:
        signal.pthread_sigmask(signal.SIG_SETMASK, mask)


def _die_with_parent(parent: int) -> None:
    """End this fork when the process that made it ends, however it ends (SIGKILL, the OOM killer).

    On Linux the kernel sends SIGKILL on the parent's death (``prctl(PR_SET_PDEATHSIG)``); the fork
    would otherwise go on writing figures into an output folder its run has left.
    """
    if sys.platform.startswith("linux"):
        import signal

        try:
            import ctypes

            ctypes.CDLL(None, use_errno=True).prctl(1, signal.SIGKILL, 0, 0, 0)  # PR_SET_PDEATHSIG = 1
        except (OSError, AttributeError):  # pragma: no cover - no prctl
            pass
    if os.getppid() != parent:  # the parent ended before the guard was set
        os._exit(1)

"""Where the steps run: in this process, on local forked workers, or on a Dask cluster, behind one :func:`run_steps`.

All three give the same tables. Workers get a :class:`~phasegauge.run.step.StepRunner`
(a path and options) and step indices, never arrays, and hand back small
results. Each result goes to the run's :class:`~phasegauge.run.assemble.TrackingFeed`
as it arrives, so droplet tracking keeps up with the steps.

Local workers are forked when the run starts: each builds the mesh caches for
itself while this process takes the first step (measured faster than forking
after it: the forks no longer idle, and copy-on-write of this process's heap
slowed their first steps). A feeder thread hands each fork its next step the
moment it returns one (one step per fork at a time, so no fork holds queued
steps while this process idles at the end). A fork keeps the cell centroids of
its step's mesh until this process says whether it already holds them (it
usually does: the mesh rarely changes), so they cross between processes only
when needed.
"""

from __future__ import annotations

import os
import sys
import time
import traceback
from collections import deque

from ..errors import AnalysisError, OptionError, short_text
from .options import wrong_field_option

__all__ = ["run_steps", "check_scheduler"]


def run_steps(runner, indices, *, workers: int = 1, scheduler: str | None = None, feed=None,
              progress=None) -> list:
    """Run ``runner`` on the steps ``indices`` and return their results in that order.

    Parameters
    ----------
    runner : StepRunner
    indices : iterable of int
    workers : int
        Local processes (this one included); 1 runs every step here.
    scheduler : str, optional
        Dask scheduler address, or ``'local'`` for a local Dask cluster (``workers`` is then not used).
    feed : TrackingFeed, optional
        Takes every result as it arrives.
    progress : Progress, optional
        Counts the finished steps.

    Raises
    ------
    PhasegaugeError
        The first step says the field option is wrong (raised at once, whatever the
        executor), or a step failed with ``strict`` or inside the tool.
    OptionError
        A Dask scheduler that cannot be reached, or Dask not installed.
    """
    indices = list(indices)
    if not indices:
        return []

    def record(result, link=True):
        if feed is not None:
            feed.add(result, link=link)
        if progress is not None:
            progress.update(reused=result.reused)

    if workers > 1 and not scheduler and len(indices) > 1:
        return _run_local(runner, indices, min(workers, len(indices)), record, feed)
    # the first step runs here, before any other: a field name that is wrong stops the run at once
    first = runner.run(indices[0])
    record(first)
    if first.error is not None and wrong_field_option(first.error):
        raise first.error
    rest = indices[1:]
    if rest and scheduler:
        if feed is not None and first.skipped is None and first.outline is not None:
            feed.pin(runner.outline(first.outline.signature))
        return [first] + _run_dask(runner, rest, scheduler, record, feed)
    results = [first]
    for i in rest:
        result = runner.run(i)
        record(result)
        results.append(result)
    return results


# ------------------------------------------------------------------ local forked workers
class _Fork:
    """This process's side of one forked worker."""

    def __init__(self, process, conn):
        self.process = process
        self.conn = conn
        self.busy = None  # the step it runs now
        self.send: list = []  # outlines to send back with the next message
        self.drop: list = []  # outlines it may forget
        self.deferred: list = []  # outlines to decide on once this process's first step is done
        self.finishing = False  # told there are no more steps
        self.closed = False


def _die_with_parent(parent: int) -> None:
    """Make this forked worker end when the process that forked it ends, however it ends.

    On Linux the kernel sends SIGKILL on the parent's death (``prctl(PR_SET_PDEATHSIG)``),
    even while the worker is inside a long numpy call; elsewhere, and as a second guard, a
    watchdog thread checks every half second that the parent is still the one that forked
    it. A SIGKILL or SIGTERM to the parent then leaves no worker behind holding memory or
    the caller's pipes. SIGTERM here takes its default action again (the parent's handler,
    which turns it into an interrupt, is inherited by the fork).
    """
    import signal
    import threading

    signal.signal(signal.SIGTERM, signal.SIG_DFL)
    if sys.platform.startswith("linux"):
        try:
            import ctypes

            libc = ctypes.CDLL(None, use_errno=True)
            libc.prctl(1, signal.SIGKILL, 0, 0, 0)  # PR_SET_PDEATHSIG = 1
        except (OSError, AttributeError):  # pragma: no cover - no prctl: the watchdog alone
            pass
    if os.getppid() != parent:  # the parent ended before the guard was set
        os._exit(1)

    def watch():
        while True:
            time.sleep(0.5)
            if os.getppid() != parent:
                os._exit(1)

    threading.Thread(target=watch, name="parent-watchdog", daemon=True).start()


def _serve(runner, conn, parent: int | None = None) -> None:
    """A forked worker: run the steps this process is sent, one at a time, until told to stop."""
    if parent is not None:
        _die_with_parent(parent)
    kept = {}  # signature -> outline with centroids, until told to send or drop it
    try:
        while True:
            try:
                index, send, drop = conn.recv()
            except (EOFError, OSError):
                break
            for signature in send:
                conn.send(("outline", kept.pop(signature, None) or runner.outline(signature)))
            for signature in drop:
                kept.pop(signature, None)
            if index is None:
                break
            try:
                result = runner.run(index)
            except BaseException as exc:  # handed to the parent, which raises it
                conn.send(("error", _portable(exc), traceback.format_exc()))
                break
            outline = result.outline
            if outline is not None and outline.has_centroids:
                kept[outline.signature] = outline
                result.outline = outline.without_centroids()
            conn.send(("result", result))
    finally:
        runner.close()
        conn.close()


def _portable(exc: BaseException) -> BaseException:
    """``exc`` if it pickles, else an :class:`AnalysisError` that says what it was."""
    import pickle

    try:
        pickle.dumps(exc)
        return exc
    except Exception:
        return AnalysisError(f"{type(exc).__name__}: {short_text(exc, 160)}",
                             fix="rerun with --debug for the traceback and report it")


class WorkerTraceback(Exception):
    """The traceback of a failure in a worker process (the cause of the error raised here)."""

    def __str__(self) -> str:
        return "\n" + (self.args[0] if self.args else "")


def _run_local(runner, indices, workers, record, feed) -> list:
    """Steps ``indices`` on ``workers`` (at least 2) processes: this one and ``workers - 1`` forked ones.

    This process takes steps itself, the first of ``indices`` first. A first
    step that says the field option is wrong stops the run and is raised.
    """
    import multiprocessing as mp
    import threading
    from multiprocessing.connection import wait

    ctx = mp.get_context("fork") if hasattr(os, "fork") else mp.get_context()
    results = {}
    todo = deque(indices)
    lock = threading.Lock()  # one result at a time into the results, the feed and the progress display
    tracking = feed is not None and feed.tracking
    first_done = threading.Event()
    failure = []

    def take():
        try:
            return todo.popleft()  # atomic: the feeder and this thread draw from one queue
        except IndexError:
            return None

    def keep(result, link=True):
        with lock:
            results[result.index] = result
            record(result, link)

    mine = take()  # this process's first step, before any fork takes one
    runner.close()  # each fork opens its own files (HDF5 handles do not cross a fork)
    wake_out, wake_in = ctx.Pipe(duplex=False)
    forks = []
    try:
        for _ in range(workers - 1):
            parent_end, child_end = ctx.Pipe()
            process = ctx.Process(target=_serve, args=(runner, child_end, os.getpid()), daemon=True)
            process.start()
            child_end.close()
            forks.append(_Fork(process, parent_end))
    except BaseException:
        _stop(forks)
        raise

    def decide(fork, result):
        """Whether the fork sends its outline of ``result``'s mesh, forgets it, or waits to be told."""
        if not tracking or result.skipped is not None or result.outline is None:
            return
        signature = result.outline.signature
        with lock:
            held = feed.holds(signature)
        if held:
            fork.drop.append(signature)
        elif first_done.is_set():
            fork.send.append(signature)
        else:
            fork.deferred.append(signature)

    def dispatch(fork):
        if fork.busy is not None or fork.finishing or fork.closed:
            return
        if fork.deferred and first_done.is_set():
            with lock:
                for signature in fork.deferred:
                    (fork.drop if feed.holds(signature) else fork.send).append(signature)
            fork.deferred = []
        index = take()
        if index is None and fork.deferred:
            return  # told what to do with its outlines once this process's first step is done
        fork.conn.send((index, fork.send, fork.drop))
        fork.send, fork.drop = [], []
        fork.busy = index
        fork.finishing = index is None

    def feed_forks():
        try:
            for fork in forks:
                dispatch(fork)
            while any(not f.closed for f in forks):
                ready = wait([f.conn for f in forks if not f.closed] + [wake_out])
                if wake_out in ready:
                    wake_out.recv()
                    for fork in forks:
                        dispatch(fork)
                for fork in forks:
                    if fork.closed or fork.conn not in ready:
                        continue
                    try:
                        message = fork.conn.recv()
                    except (EOFError, OSError):
                        fork.closed = True
                        if not fork.finishing:
                            raise AnalysisError("a worker process ended unexpectedly"
                                                + (f" while running step {fork.busy}" if fork.busy is not None
                                                   else ""),
                                                fix="check the memory available per worker, or use fewer "
                                                    "workers") from None
                        continue
                    if message[0] == "result":  # the fork's next step first, then the tracking
                        result = message[1]
                        fork.busy = None
                        keep(result, link=False)
                        decide(fork, result)
                        dispatch(fork)
                        if tracking:
                            with lock:
                                feed.link()
                    elif message[0] == "outline":
                        with lock:
                            feed.add_outline(message[1])
                    else:  # an error in the fork
                        error = message[1]
                        error.__cause__ = WorkerTraceback(message[2])
                        raise error
        except BaseException as exc:  # handed to the main thread, which raises it
            failure.append(exc)
            todo.clear()
            _stop(forks)

    feeder = threading.Thread(target=feed_forks, daemon=True)
    feeder.start()
    try:
        first = runner.run(mine)
        keep(first)
        first_done.set()
        wake_in.send(True)
        if first.error is not None and wrong_field_option(first.error):
            raise first.error
        while (index := take()) is not None:
            keep(runner.run(index))
    except BaseException:
        todo.clear()
        _stop(forks)
        raise
    finally:
        first_done.set()
        try:
            wake_in.send(True)
        except OSError:
            pass
        feeder.join()
        for fork in forks:
            fork.process.join(timeout=5)
            fork.conn.close()
        wake_in.close()
        wake_out.close()
    if failure:
        raise failure[0]
    return [results[i] for i in indices]


def _stop(forks) -> None:
    """End the forks at once (after a failure)."""
    for fork in forks:
        if fork.process.is_alive():
            fork.process.terminate()


# ------------------------------------------------------------------ Dask
def _dask_step(runner, index: int, held: frozenset):
    """One step on a Dask worker; the outline's centroids travel only when the client lacks them."""
    result = runner.run(index)
    outline = result.outline
    if outline is not None and outline.has_centroids and outline.signature in held:
        result.outline = outline.without_centroids()
    return result


def check_scheduler(scheduler) -> None:
    """Refuse a Dask scheduler when Dask is not installed, before any step runs."""
    import importlib.util

    if scheduler and importlib.util.find_spec("distributed") is None:
        raise OptionError(f"a Dask scheduler ({scheduler}) needs the optional 'cluster' extra, which is not "
                          "installed", fix='pip install ".[cluster]" (from the phasegauge folder; see the README)')


def _run_dask(runner, indices, scheduler, record, feed) -> list:
    check_scheduler(scheduler)
    from distributed import Client, LocalCluster, as_completed

    runner.close()  # the workers open their own files
    held = feed.pinned if feed is not None else frozenset()
    own_cluster = None
    if scheduler == "local":
        own_cluster = LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None)
        client = Client(own_cluster)
    else:
        try:
            client = Client(scheduler, timeout="20s")
        except Exception as exc:
            raise OptionError(f"cannot reach the Dask scheduler at {scheduler} ({exc})",
                              fix="check the address (tcp://host:8786) and that the scheduler runs") from None
    try:
        # one runner per worker, kept there between steps (its series stays open, its meshes kept)
        remote = client.scatter(runner, broadcast=True, hash=False)
        futures = [client.submit(_dask_step, remote, i, held, pure=False, key=f"phasegauge-step-{i}-{time.time_ns()}")
                   for i in indices]
        order = {f.key: i for f, i in zip(futures, indices)}
        results = {}
        for future in as_completed(futures):
            result = future.result()
            results[order[future.key]] = result
            record(result)
        return [results[i] for i in indices]
    finally:
        client.close()
        if own_cluster is not None:
            own_cluster.close()

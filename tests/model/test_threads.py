"""How many threads a process takes, and the setting that caps them."""

import os

import pytest

from phasegauge.errors import OptionError
from phasegauge.model._threads import THREADS_VARIABLE, _glibc, check_threads, thread_count


def test_thread_count_shares_the_cpus_and_follows_the_variable(monkeypatch):
    monkeypatch.delenv(THREADS_VARIABLE, raising=False)
    cpus = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count()
    assert thread_count() == min(cpus, 8)
    assert thread_count(processes=1000) == 1  # never below one
    monkeypatch.setenv(THREADS_VARIABLE, "6")
    assert thread_count() == 6 and thread_count(processes=2) == 3 and thread_count(processes=4) == 1
    monkeypatch.setenv(THREADS_VARIABLE, "many")
    with pytest.raises(OptionError, match=f"{THREADS_VARIABLE} must be a whole number"):
        thread_count()


@pytest.mark.parametrize("bad", [0, -2, "two", 1.5, True, None])
def test_check_threads_refuses_what_is_no_count(bad):
    with pytest.raises(OptionError, match="threads must be a whole number of at least 1"):
        check_threads(bad)


def test_check_threads_takes_counts():
    assert check_threads(3) == 3 and check_threads("4") == 4


# Prints the arenas glibc's own report lists (malloc_info: one <heap nr=...> per arena) before and after
# the threads of the case named (argv[1]; argv[2]: the tests folder, for conftest's file writer).
_ARENAS = """
import ctypes, os, sys, tempfile, threading
import numpy as np
from phasegauge.model._threads import Beside, ordered_map
libc = ctypes.CDLL(None)
libc.fopen.restype = ctypes.c_void_p
libc.fopen.argtypes = [ctypes.c_char_p, ctypes.c_char_p]
libc.fclose.argtypes = [ctypes.c_void_p]
libc.malloc_info.argtypes = [ctypes.c_int, ctypes.c_void_p]
def arenas():
    with tempfile.TemporaryDirectory() as folder:
        path = os.path.join(folder, "info.xml")
        fp = libc.fopen(path.encode(), b"w")
        libc.malloc_info(0, fp)
        libc.fclose(fp)
        with open(path) as f:
            return f.read().count("<heap nr=")
kept = []
def work(i):
    kept.append(np.ones(1000 + i))
    return i
counts = [arenas()]
assert list(ordered_map(work, range(6), threads=1)) == list(range(6))
if sys.argv[1] == "threads":
    assert list(ordered_map(work, range(6), threads=3)) == list(range(6))
    with Beside(work, 7):
        pass
if sys.argv[1] == "one":
    thread = threading.Thread(target=work, args=(8,))
    thread.start()
    thread.join()
if sys.argv[1] in ("step1", "step2"):  # a step of "many" cells (the threshold set to 0) on 1 or 2 threads
    sys.path.insert(0, sys.argv[2])
    from conftest import write_listing
    from phasegauge import measure
    from phasegauge.meshgen import grid_mesh
    from phasegauge.run import step
    step.THREADED_CELLS = 0
    mesh = grid_mesh((20, 20), kind="triangle")
    r = np.linalg.norm(mesh.cell_centroids[:, :2] - 0.5, axis=1)
    with tempfile.TemporaryDirectory() as folder:
        listing = write_listing(folder, [(0.0, "d.vtu", mesh, {"c": 0.5 * (1 + np.tanh((0.25 - r) / 0.04))})])
        measure(listing, "c", threads=int(sys.argv[1][-1]), progress=False)
    thread = threading.Thread(target=work, args=(8,))
    thread.start()
    thread.join()
if sys.argv[1] == "beside":  # another thread started while the one beside runs (no arena freed yet)
    other_done = threading.Event()
    def waiting(i):
        work(i)
        return other_done.wait(60)
    with Beside(waiting, 7) as side:
        thread = threading.Thread(target=work, args=(8,))
        thread.start()
        thread.join()
        other_done.set()
    assert side.result()
counts.append(arenas())
print(*counts)
"""


@pytest.mark.skipif(_glibc() is None, reason="the arenas are glibc's")
def test_threads_share_the_main_arena():
    """Threads started by ordered_map, by Beside alone, or by a step on two threads make no arena of
    their own; one thread, or the user's own count, leaves the allocator alone. Outside check: the
    arenas glibc's own report lists (malloc_info), in a fresh process."""
    import subprocess
    import sys

    def arenas(how, **settings):
        from conftest import subprocess_env

        env = subprocess_env(malloc_defaults=True)
        env.update(settings)
        tests = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
        done = subprocess.run([sys.executable, "-c", _ARENAS, how, tests], capture_output=True, text=True,
                              timeout=120, env=env)
        assert done.returncode == 0, done.stderr
        return [int(n) for n in done.stdout.split()]

    assert arenas("threads") == [1, 1]  # three pool threads and one beside: no arena of their own
    assert arenas("beside") == [1, 1]  # a thread beside first, and another while it runs: the same
    assert arenas("one") == [1, 2]  # nothing set on one thread: a thread started later gets its own
    # the user's own count (here 4) is kept: the thread beside and the other get arenas of their own
    assert arenas("beside", MALLOC_ARENA_MAX="4") == [1, 3]
    assert arenas("step2") == [1, 1]  # a step on two threads sets it
    assert arenas("step1") == [1, 2]  # a step on one thread, however many cells: not


def test_beside_hands_back_the_result_or_the_error():
    import threading

    from phasegauge.model._threads import Beside

    started = threading.Event()

    def work(a, *, b):
        started.set()
        return a + b

    job = Beside(work, 2, b=3)
    assert started.wait(5) and job.result() == 5 and job.result() == 5

    def fail():
        raise OptionError("no planes here", fix="give positions inside the mesh")

    job = Beside(fail)
    job.wait()  # waits without raising: the caller may be raising an error of its own
    with pytest.raises(OptionError, match="no planes here"):
        job.result()

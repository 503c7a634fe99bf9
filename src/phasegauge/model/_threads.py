"""Threads for array work: how many one process may use, and a map over them in order.

numpy releases the interpreter lock inside its loops over arrays, so independent pieces of
mesh work (the planes of a section operator, for instance) run side by side on threads of one
process, each on its own arrays. Results come back in the order of the inputs, whatever thread
made them, so a run's tables are the same bit for bit on any number of threads. Whatever starts
threads here (the map, a thread beside, scipy's searches on threads) first has them allocate in
the arenas the process has (:func:`share_one_arena`).
"""

from __future__ import annotations

import os
import threading
from concurrent.futures import ThreadPoolExecutor

from ..errors import OptionError

__all__ = ["THREADS_VARIABLE", "thread_count", "check_threads", "ordered_map", "Beside", "share_one_arena",
           "heap_back_to_system"]

#: environment variable that caps the threads of one process (as OMP_NUM_THREADS does for OpenMP)
THREADS_VARIABLE = "PHASEGAUGE_THREADS"

#: threads a process takes at most by default (more gave little on the sizes measured)
_DEFAULT_MOST = 8


def check_threads(threads) -> int:
    """``threads`` (an int, or a string of digits) as a positive int, or :class:`OptionError`."""
    text = str(threads).strip()
    if isinstance(threads, bool) or not text.isdigit() or int(text) < 1:
        raise OptionError(f"threads must be a whole number of at least 1, found {threads!r}",
                          fix="for example --threads 4")
    return int(text)


def thread_count(processes: int = 1) -> int:
    """Threads each of ``processes`` side-by-side processes of this run may use.

    The CPUs this process may run on (its affinity where the system tells it, capped at 8),
    or ``PHASEGAUGE_THREADS`` when set, shared among the processes: at least 1.
    """
    given = os.environ.get(THREADS_VARIABLE, "").strip()
    if given:
        try:
            total = check_threads(given)
        except OptionError:
            raise OptionError(f"{THREADS_VARIABLE} must be a whole number of at least 1, found {given!r}",
                              fix=f"set {THREADS_VARIABLE}=4, for example, or unset it") from None
    else:
        cpus = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else (os.cpu_count() or 1)
        total = min(cpus, _DEFAULT_MOST)
    return max(1, total // max(1, int(processes)))


def ordered_map(function, items, *, threads: int = 1):
    """``function(item)`` for every item, yielded in the order of ``items``.

    On up to ``threads`` threads (1: in this thread, one after another). The threads end before
    the last result is yielded, or when the caller stops reading. ``function`` must not write
    to anything another call reads.
    """
    items = list(items)
    if threads <= 1 or len(items) <= 1:
        yield from map(function, items)
        return
    share_one_arena()
    with ThreadPoolExecutor(min(threads, len(items)), thread_name_prefix="phasegauge") as pool:
        yield from pool.map(function, items)


#: glibc's ``mallopt`` parameter of the most arenas (``M_ARENA_MAX`` in ``malloc.h``)
_M_ARENA_MAX = -8


def _glibc():
    """glibc's functions as ctypes sees them in this process, or None where the C library is another
    (another library's ``mallopt`` may read -8 as something else; macOS has none; Windows no
    ``CDLL(None)``)."""
    try:
        version = os.confstr("CS_GNU_LIBC_VERSION")  # (glibc's own name for itself)
    except (AttributeError, OSError, ValueError):
        return None
    if not version or not version.startswith("glibc"):
        return None
    import ctypes

    try:
        return ctypes.CDLL(None)  # the symbols this process has loaded
    except (OSError, TypeError):
        return None


def share_one_arena() -> None:
    """Have the threads this process starts from now on allocate from the arenas it has, making no
    new one, where the C library is glibc (``mallopt(M_ARENA_MAX, 1)``; made again, the same
    setting); elsewhere, or when the user set the arena count (``MALLOC_ARENA_MAX``, or
    ``glibc.malloc.arena_max`` in ``GLIBC_TUNABLES``), nothing.

    glibc gives each thread that allocates an arena of its own, and keeps what is freed there for
    that arena's later use: each arena holds its own high-water mark, so threads doing work side by
    side held more at the peak than one thread doing it all (on 1M jittered hexahedra over 40 steps
    707-810 MB with no trim against 578-583 MB in one arena). Handing their free pages back after
    every threaded part (``malloc_trim``, as was done) cost page faults when the next step took them
    again: 1.2-1.3M over that run, 4.8-7.0 s of system time. In one arena what any thread frees is
    taken by the next array of any thread. The setting is the process's, as ``MALLOC_ARENA_MAX=1``
    would make it: threads started later (the host program's too) take the main arena, or one of
    the arenas that ended threads left; where glibc had already fixed its limit (more than 8 arenas
    made before) it changes nothing. A run on one thread (``PHASEGAUGE_THREADS=1``) starts no thread
    and leaves the allocator as it is. The user's count is read from the environment as it is when
    called (glibc read it at the start: a variable set later, or one glibc ignored, still counts).
    """
    if "MALLOC_ARENA_MAX" in os.environ or "arena_max" in os.environ.get("GLIBC_TUNABLES", ""):
        return  # the user's own count
    libc = _glibc()
    mallopt = None if libc is None else getattr(libc, "mallopt", None)
    if mallopt is not None:  # (set again by every caller before its threads: the same setting)
        mallopt(_M_ARENA_MAX, 1)


def heap_back_to_system() -> None:
    """Hand the free pages of the C heap back to the system, where the C library is glibc
    (``malloc_trim(0)``); elsewhere nothing.

    For a reader that allocates big arrays in mappings of their own, beside the heap (VTK's): what
    the heap kept free from the work before would add to them at the peak (on 1M polyhedra over 5
    steps 1016 MB above the start against 871-872 MB with the pages handed back before each read).
    The work after takes its pages from the system again (page faults: little beside such a read).
    """
    libc = _glibc()
    trim = None if libc is None else getattr(libc, "malloc_trim", None)
    if trim is not None:
        trim(0)


def prepare_mesh(mesh, *, threads: int = 1, split: bool = True) -> None:
    """Make a new mesh's cell geometry and face topology side by side, then its split plan.

    The first step of a run needs both (the measures for every integral, the faces for the mesh
    check and the droplets' neighbours); neither reads the other, so on two free cores the pair
    takes about the longer one's time; the faces' sorts share the threads as well. With
    ``split`` (an analysis will split cells: the interface, the sections), the split plan's
    per-cell part is made after the geometry, beside the faces, and the plan of which
    hexahedra, wedges and pyramids are split about added centres follows on all the threads.
    A regular grid numbers its faces by position (no
    grouping), and one thread makes what it needs when it is first read, as before; so does a
    mesh whose geometry or faces are made already.
    """
    if threads < 2 or mesh.regular_grid is not None:
        return
    made = mesh.__dict__
    if "_geometry" in made or "_face_topology" in made:
        return
    from .simplices import _plan_cells, _split_plan

    mesh.coordinates  # noqa: B018  (read by all: made here first)
    split = split and mesh.dimension == 3

    def geometry_and_cells():  # the split plan's per-cell part needs no faces: made beside them
        mesh._geometry  # noqa: B018
        return _plan_cells(mesh) if split else None

    _, cells = ordered_map(lambda make: make(), (lambda: _make_faces(mesh, threads), geometry_and_cells),
                           threads=2)
    if split:
        _split_plan(mesh, threads=threads, cells=cells)


def _make_faces(mesh, threads: int) -> None:
    """The mesh's face grouping (:attr:`Mesh._face_topology`, a cached property) made with its
    sorts on ``threads`` threads: the same grouping as the property makes on one, kept where the
    property keeps it."""
    from ._faces import face_topology

    mesh.__dict__["_face_topology"] = face_topology(mesh, threads=threads)


class Beside:
    """``function(*args, **kwargs)`` on a thread of its own while the caller goes on.

    For work the caller's next steps do not read (a step's sections, and a new mesh's section
    operator, while the interface is measured; the contour while the widths' band integrals are
    formed, or the bulk values while it is found; the droplets while the widths are measured):
    nothing it makes is read before :meth:`result`, and it must not warn (its warnings would land
    among the caller's in no fixed order: it returns them for the caller to give). The mesh caches both threads
    may make (``Mesh.memo`` entries, cached properties) are pure functions of the mesh: made twice
    at once they cost time, never a different value. numpy's error settings (``np.errstate``)
    are not carried over to the thread. As a context manager (``with Beside(...) as side:``) the
    thread is waited for when the block ends, however it ends.
    """

    def __init__(self, function, *args, **kwargs):
        self._value = self._error = None
        self._joined = False

        def run():
            try:
                self._value = function(*args, **kwargs)
            except BaseException as exc:  # handed to the caller by result()
                self._error = exc

        share_one_arena()
        self._thread = threading.Thread(target=run, name="phasegauge-beside", daemon=True)
        self._thread.start()

    def __enter__(self):
        return self

    def __exit__(self, *exc) -> None:  # the thread is waited for however the block ends
        self.wait()

    def wait(self) -> None:
        """Wait for the thread to end (its error, if any, kept for :meth:`result`)."""
        if not self._joined:
            self._thread.join()
            self._joined = True

    def result(self):
        """The function's result, or its error raised here."""
        self.wait()
        if self._error is not None:
            raise self._error
        return self._value

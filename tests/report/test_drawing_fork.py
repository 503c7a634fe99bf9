"""The report's drawing fork (``report/_drawing.py``): the same files as one process, no process left
behind, errors raised here with the figure's name, and one process where ``os.fork`` is missing."""

import os

import numpy as np
import pytest
from PIL import Image

from phasegauge.errors import AnalysisError, OptionError
from phasegauge.report import _drawing
from phasegauge.report._canvas import new_figure
from phasegauge.report._drawing import fork_helps, save_figure_makers

needs_fork = pytest.mark.skipif(not hasattr(os, "fork"), reason="this system has no os.fork")


def _plot(k):
    def make():
        fig = new_figure(3.0, 2.0)
        ax = fig.add_subplot()
        ax.plot([0, 1, 2], [k, k + 2, k + 1], "-o")
        ax.set_xlabel("time (run's time units)")
        ax.set_ylabel("value")
        return fig
    return make


def _makers(count=5):
    return [(f"plot_{k}", f"plot {k}", _plot(k)) for k in range(count)]


def _no_child_left(pids):
    for pid in pids:
        with pytest.raises(ChildProcessError):  # reaped: no zombie
            os.waitpid(pid, os.WNOHANG)


@pytest.fixture
def forks(monkeypatch):
    """The pids of the forks the drawing makes."""
    pids, fork = [], os.fork

    def recorded():
        pid = fork()
        if pid:
            pids.append(pid)
        return pid

    monkeypatch.setattr(os, "fork", recorded)
    return pids


@needs_fork
def test_a_fork_writes_the_same_files_as_one_process(tmp_path, forks):
    one, two = tmp_path / "one", tmp_path / "two"
    one.mkdir()
    two.mkdir()
    written_one, written_two = [], []
    alone = save_figure_makers(str(one), _makers(), written_one, fork=False)
    assert not forks
    split = save_figure_makers(str(two), _makers(), written_two, fork=True)
    assert len(forks) == 1
    _no_child_left(forks)
    assert written_one == written_two == [f"plot_{k}.png" for k in range(5)]
    assert [caption for caption, _ in split] == [f"plot {k}" for k in range(5)]
    for (_, a), (_, b), name in zip(alone, split, written_one):
        assert a == b == (two / name).read_bytes() == (one / name).read_bytes()
        # Pillow decodes every file (the fork's and this process's) to an image of the figure's size
        assert Image.open(two / name).size == (330, 220)  # 3 x 2 inches at 110 dpi


@needs_fork
def test_an_error_in_the_forks_figure_is_raised_here_with_its_name(tmp_path, forks):
    makers = _makers()

    def broken():
        raise OptionError("no column 'droplet_count' in the table", fix="pass the steps table")

    share = _drawing._their_share(makers)
    makers[share[0]] = ("droplet_count", "count", broken)
    with pytest.raises(OptionError, match="no column 'droplet_count'") as caught:
        save_figure_makers(str(tmp_path), makers, [], fork=True)
    if hasattr(caught.value, "add_note"):
        assert any("'droplet_count'" in note for note in caught.value.__notes__)
    _no_child_left(forks)


@needs_fork
def test_an_error_that_does_not_pickle_comes_back_as_an_analysis_error(tmp_path, forks):
    makers = _makers()

    class Unpicklable(Exception):
        def __reduce__(self):
            raise TypeError("not this one")

    def broken():
        raise Unpicklable("lost")

    makers[_drawing._their_share(makers)[0]] = ("mixing_index", "mixing", broken)
    with pytest.raises(AnalysisError, match="figure 'mixing_index'.*Unpicklable: lost"):
        save_figure_makers(str(tmp_path), makers, [], fork=True)
    _no_child_left(forks)


@needs_fork
def test_an_error_here_stops_the_fork(tmp_path, forks):
    makers = _makers()
    mine = [i for i in range(len(makers)) if i not in _drawing._their_share(makers)]

    def broken():
        raise OptionError("bad table")

    makers[mine[0]] = ("steps", "steps", broken)
    with pytest.raises(OptionError, match="bad table"):
        save_figure_makers(str(tmp_path), makers, [], fork=True)
    _no_child_left(forks)


@needs_fork
def test_figures_of_a_fork_that_dies_are_drawn_here(tmp_path, forks):
    parent = os.getpid()
    makers = _makers()
    index = _drawing._their_share(makers)[0]
    draw = makers[index][2]

    def dies_in_the_fork():
        if os.getpid() != parent:
            os._exit(9)  # as if killed
        return draw()

    makers[index] = (makers[index][0], makers[index][1], dies_in_the_fork)
    pngs = save_figure_makers(str(tmp_path), makers, [], fork=True)
    _no_child_left(forks)
    assert all(png.startswith(b"\x89PNG") for _, png in pngs)
    assert sorted(os.listdir(tmp_path)) == sorted(f"{stem}.png" for stem, _, _ in makers)


def test_without_os_fork_everything_is_drawn_in_one_process(tmp_path, monkeypatch):
    monkeypatch.delattr(os, "fork", raising=False)
    assert not fork_helps(7)
    written = []
    pngs = save_figure_makers(str(tmp_path), _makers(3), written, fork=True)
    assert written == ["plot_0.png", "plot_1.png", "plot_2.png"]
    assert all((tmp_path / name).read_bytes() == png for name, (_, png) in zip(written, pngs))


def test_the_fork_is_used_only_where_it_can_help(monkeypatch):
    import threading

    monkeypatch.setattr(_drawing, "_busy_cores", lambda: 0.2)
    monkeypatch.setattr(os, "sched_getaffinity", lambda pid: {0, 1}, raising=False)
    monkeypatch.setattr(os, "fork", lambda: None, raising=False)
    monkeypatch.setattr(_drawing.sys, "platform", "linux")
    # this process alone (whatever threads the test run keeps): every condition met, the fork helps;
    # each check below takes one condition away
    real_count = threading.active_count
    monkeypatch.setattr(threading, "active_count", lambda: 1)
    assert fork_helps(7) is True
    monkeypatch.setattr(_drawing.sys, "platform", "darwin")
    assert not fork_helps(7)  # a forked child may hang in system libraries there: one process
    monkeypatch.setattr(_drawing.sys, "platform", "linux")
    assert not fork_helps(2)  # too few figures to share
    monkeypatch.setattr(_drawing, "_busy_cores", lambda: 1.5)
    assert not fork_helps(7)  # the second core is busy
    monkeypatch.setattr(_drawing, "_busy_cores", lambda: 0.2)
    monkeypatch.setattr(os, "sched_getaffinity", lambda pid: {0})
    assert not fork_helps(7)  # one core
    monkeypatch.setattr(os, "sched_getaffinity", lambda pid: {0, 1})
    assert fork_helps(7) is True  # the conditions met again
    monkeypatch.setattr(threading, "active_count", lambda: 2)
    assert not fork_helps(7)  # another thread runs: no fork
    monkeypatch.setattr(threading, "active_count", real_count)
    stop = threading.Event()
    other = threading.Thread(target=stop.wait)
    other.start()
    try:
        assert not fork_helps(7)  # a real one, counted by threading itself
    finally:
        stop.set()
        other.join()


def test_the_fork_takes_about_half_the_weight():
    makers = [(stem, stem, None) for stem in ("phase_volume_drift", "interface_width", "interface_snapshots",
                                              "droplet_count", "droplet_sizes", "mixing_index", "mixing_profile")]
    theirs = _drawing._their_share(makers)
    weight = [_drawing._WEIGHTS.get(stem, 1.0) for stem, _, _ in makers]
    share = sum(weight[i] for i in theirs) / sum(weight)
    assert 0.4 <= share <= 0.6 and 0 < len(theirs) < len(makers)
    assert np.all(np.diff(theirs) > 0)


def test_busy_cores_counts_other_work(monkeypatch):
    busy = _drawing._busy_cores()
    assert 0.0 <= busy < 10_000
    if os.path.exists("/proc/loadavg"):  # Linux: the runnable threads now, this one left out
        with open("/proc/loadavg", encoding="ascii") as handle:
            total = int(handle.read().split()[4 - 1].partition("/")[2])
        assert busy <= total
    monkeypatch.setattr("builtins.open", _no_file)
    monkeypatch.setattr(os, "getloadavg", lambda: (1.25, 1.0, 1.0), raising=False)
    assert _drawing._busy_cores() == 1.25  # elsewhere: the last minute's load average


def _no_file(*args, **kwargs):
    raise OSError("no /proc here")


def _end(pids):
    """Kill and reap whatever of ``pids`` is left (a failed test leaves no process behind)."""
    import signal

    for pid in pids:
        try:
            os.kill(pid, signal.SIGKILL)
            os.waitpid(pid, 0)
        except (ProcessLookupError, ChildProcessError):
            pass


@needs_fork
@pytest.mark.skipif(not hasattr(__import__("signal"), "pthread_sigmask"), reason="no pthread_sigmask")
def test_an_interrupt_as_the_fork_is_made_leaves_no_process_behind(tmp_path, monkeypatch):
    """Ctrl-C (SIGINT) arriving just as ``os.fork`` returns: the interrupt is raised, the fork is
    stopped and reaped, and Ctrl-C and SIGTERM are no longer held back (POSIX signal masks)."""
    import signal
    import threading

    if threading.active_count() != 1:
        # the report forks only where no other thread runs (_drawing.fork_helps); a signal sent to
        # the process with another thread alive is the next test's case
        pytest.skip("another thread runs in this process, left by an earlier test")
    before = signal.pthread_sigmask(signal.SIG_BLOCK, ())
    pids, fork = [], os.fork

    def interrupted():
        pid = fork()
        if pid:
            pids.append(pid)
            # the interrupt, as the fork returns here, sent to this thread (sent to the process, any
            # thread that does not hold it back, a library's own that threading does not count, may take it)
            signal.pthread_kill(threading.get_ident(), signal.SIGINT)
        return pid

    monkeypatch.setattr(os, "fork", interrupted)
    # Ctrl-C as Python sets it up: a program started in the background of a shell (as a CI script may
    # be) starts with SIGINT ignored, and Python then leaves it ignored (the test failed so in CI)
    handler = signal.signal(signal.SIGINT, signal.default_int_handler)
    try:
        with pytest.raises(KeyboardInterrupt):
            save_figure_makers(str(tmp_path), _makers(), [], fork=True)
        assert len(pids) == 1
        _no_child_left(pids)
    finally:
        _end(pids)
        after = signal.pthread_sigmask(signal.SIG_SETMASK, before)  # no held signal left to later tests
        signal.signal(signal.SIGINT, handler)
    assert after == before


@needs_fork
@pytest.mark.skipif(not hasattr(__import__("signal"), "pthread_sigmask"), reason="no pthread_sigmask")
def test_an_interrupt_sent_to_the_process_as_the_fork_is_made_leaves_no_process_behind(tmp_path, monkeypatch):
    """Ctrl-C sent to the whole process (as a terminal sends it) while another thread runs: the kernel
    gives it to the thread that does not hold it back and Python runs its handler in this thread,
    inside the window the mask was to protect (found by review: the fork's pid lost or Ctrl-C left
    held back for good). The interrupt is raised once the fork's pid is kept, the fork is stopped and
    reaped, the mask and the handler are put back (POSIX signal masks; Python's signal module)."""
    import signal
    import threading

    before = signal.pthread_sigmask(signal.SIG_BLOCK, ())
    pids, fork, stop = [], os.fork, threading.Event()
    other = threading.Thread(target=stop.wait)  # a thread that does not hold SIGINT back
    other.start()

    def interrupted():
        pid = fork()
        if pid:
            pids.append(pid)
            # the other thread took the signal; Python then runs the handler in the main thread at
            # its next instruction, whatever the mask: here, as the fork returns (the worst moment,
            # made certain: a real signal lands there only now and then)
            signal.getsignal(signal.SIGINT)(signal.SIGINT, None)
        return pid

    monkeypatch.setattr(os, "fork", interrupted)
    handler = signal.signal(signal.SIGINT, signal.default_int_handler)  # (a background job starts with it ignored)
    try:
        with pytest.raises(KeyboardInterrupt):
            save_figure_makers(str(tmp_path), _makers(), [], fork=True)
        assert len(pids) == 1
        _no_child_left(pids)
        assert signal.getsignal(signal.SIGINT) is signal.default_int_handler
    finally:
        stop.set()
        other.join()
        _end(pids)
        after = signal.pthread_sigmask(signal.SIG_SETMASK, before)
        signal.signal(signal.SIGINT, handler)
    assert after == before


@needs_fork
@pytest.mark.skipif(not hasattr(__import__("signal"), "pthread_sigmask"), reason="no pthread_sigmask")
def test_the_fork_draws_with_interrupts_let_through(tmp_path, forks):
    """The fork lifts the block on Ctrl-C and SIGTERM before it draws, so they can end it."""
    import signal

    before = signal.pthread_sigmask(signal.SIG_BLOCK, ())
    makers = _makers()
    index = _drawing._their_share(makers)[0]
    draw = makers[index][2]

    def checked():
        held = signal.pthread_sigmask(signal.SIG_BLOCK, ())
        if signal.SIGINT in held or signal.SIGTERM in held:
            raise OptionError("interrupts held back while drawing")
        return draw()

    makers[index] = (makers[index][0], makers[index][1], checked)
    pngs = save_figure_makers(str(tmp_path), makers, [], fork=True)
    _no_child_left(forks)
    assert all(png.startswith(b"\x89PNG") for _, png in pngs)
    assert signal.pthread_sigmask(signal.SIG_BLOCK, ()) == before


_KILLED_PARENT = r'''
import os, signal, sys, time
sys.path.insert(0, sys.argv[1])
from phasegauge.report._canvas import new_figure
from phasegauge.report._drawing import save_figure_makers, _their_share

folder, parent = sys.argv[2], os.getpid()

def plot():
    fig = new_figure(3.0, 2.0)
    fig.add_subplot().plot([0, 1], [0, 1])
    return fig

def waits_in_the_fork():
    if os.getpid() != parent:  # the fork: say who it is (whole: the parent waits for the file), then draw long
        with open(os.path.join(folder, "fork.pid.part"), "w") as handle:
            handle.write(str(os.getpid()))
        os.replace(os.path.join(folder, "fork.pid.part"), os.path.join(folder, "fork.pid"))
        time.sleep(300)
    return plot()

def killed_here():  # this process dies (SIGKILL: no clean-up) once the fork is drawing
    while not os.path.exists(os.path.join(folder, "fork.pid")):
        time.sleep(0.01)
    os.kill(os.getpid(), signal.SIGKILL)

makers = [(f"p{k}", "", plot) for k in range(4)]
theirs = _their_share(makers)
makers[theirs[0]] = ("slow", "", waits_in_the_fork)
makers[[i for i in range(4) if i not in theirs][0]] = ("dies", "", killed_here)
save_figure_makers(folder, makers, [], fork=True)
'''


@needs_fork
@pytest.mark.skipif(not __import__("sys").platform.startswith("linux"), reason="PR_SET_PDEATHSIG is Linux's")
def test_the_fork_ends_when_its_parent_is_killed(tmp_path):
    """A run killed with SIGKILL (no clean-up runs) leaves no drawing fork behind (Linux prctl(2),
    PR_SET_PDEATHSIG)."""
    import signal
    import subprocess
    import sys

    import phasegauge

    src = os.path.dirname(os.path.dirname(phasegauge.__file__))
    # (output to a file, not a pipe: a fork left behind would hold a pipe open)
    with open(tmp_path / "stderr.txt", "wb") as stderr:
        done = subprocess.run([sys.executable, "-c", _KILLED_PARENT, src, str(tmp_path)], stdin=subprocess.DEVNULL,
                              stdout=subprocess.DEVNULL, stderr=stderr, env={**os.environ, "MPLBACKEND": "Agg"})
    assert done.returncode == -signal.SIGKILL, (tmp_path / "stderr.txt").read_text()
    pid = int((tmp_path / "fork.pid").read_text())
    try:
        for _ in range(3000):  # the kernel's SIGKILL is immediate; its reaping by init may lag
            if not _running(pid):
                break
            __import__("time").sleep(0.01)
        assert not _running(pid)
    finally:
        if _running(pid):
            os.kill(pid, signal.SIGKILL)


def _running(pid: int) -> bool:
    """Whether process ``pid`` exists and is not a zombie (Linux /proc)."""
    try:
        with open(f"/proc/{pid}/stat", encoding="ascii") as handle:
            return handle.read().rpartition(")")[2].split()[0] not in ("Z", "X")
    except (FileNotFoundError, ProcessLookupError):
        return False


@needs_fork
def test_a_fork_stopped_while_writing_leaves_no_temporary_file(tmp_path, forks):
    """An error here stops the fork (SIGKILL: its atomic write cannot clean up); the temporary file
    it was writing is removed (the ``.tmp-<hex><name>.part`` files of ``_files.atomic_write_bytes``)."""
    import time

    from phasegauge.report._files import _TEMP_TOKEN_BYTES, TEMP_PREFIX

    token = "ab" * _TEMP_TOKEN_BYTES  # as secrets.token_hex(_TEMP_TOKEN_BYTES) writes it
    parent = os.getpid()
    makers = _makers()
    theirs = _drawing._their_share(makers)
    index, mine = theirs[0], [i for i in range(len(makers)) if i not in theirs][0]
    temporary = tmp_path / f"{TEMP_PREFIX}{token}{makers[index][0]}.png.part"
    other = tmp_path / f"{TEMP_PREFIX}{token}mine.png.part"  # not the fork's: kept
    other.write_bytes(b"")

    def writing_in_the_fork():
        if os.getpid() != parent:  # the fork: half way through writing its file, when it is stopped
            temporary.write_bytes(b"\x89PNG")
            time.sleep(300)
        raise AssertionError("drawn here")

    def broken_once_the_fork_writes():
        while not temporary.exists():
            time.sleep(0.01)
        raise OptionError("bad table")

    makers[index] = (makers[index][0], makers[index][1], writing_in_the_fork)
    makers[mine] = ("steps", "steps", broken_once_the_fork_writes)
    try:
        with pytest.raises(OptionError, match="bad table"):
            save_figure_makers(str(tmp_path), makers, [], fork=True)
        _no_child_left(forks)
    finally:
        _end(forks)
    assert not temporary.exists() and other.exists()


def test_figures_made_already_are_saved_as_their_makers_would_save_them(tmp_path):
    # the comparison's figures exist before they are saved: the same files and bytes as the makers
    from phasegauge.report._drawing import save_figures

    one, two = tmp_path / "one", tmp_path / "two"
    one.mkdir()
    two.mkdir()
    written_one, written_two = [], []
    made = save_figures(str(one), [(stem, caption, make()) for stem, caption, make in _makers(3)], written_one)
    drawn = save_figure_makers(str(two), _makers(3), written_two, fork=False)
    assert written_one == written_two == ["plot_0.png", "plot_1.png", "plot_2.png"]
    assert made == drawn
    assert all((one / name).read_bytes() == (two / name).read_bytes() == png
               for name, (_, png) in zip(written_one, made))


def test_temporaries_of_named_files_or_of_every_file_are_removed(tmp_path):
    # one clean-up for a stopped fork's files (by name, in the folder itself) and a killed run's (all)
    from phasegauge.report._files import _TEMP_TOKEN_BYTES, PREVIOUS_RUN, TEMP_PREFIX, remove_temporaries

    token = "ab" * _TEMP_TOKEN_BYTES  # as secrets.token_hex(_TEMP_TOKEN_BYTES) writes it
    (tmp_path / ".cache").mkdir()
    (tmp_path / PREVIOUS_RUN).mkdir()
    files = {key: tmp_path / f"{TEMP_PREFIX}{token}{name}.part" for key, name in
             (("fork", "plot_1.png"), ("mine", "plot_2.png"))}
    files["cached"] = tmp_path / ".cache" / f"{TEMP_PREFIX}{token}plot_1.png.part"
    files["previous"] = tmp_path / PREVIOUS_RUN / f"{TEMP_PREFIX}{token}plot_1.png.part"
    for path in files.values():
        path.write_bytes(b"half")
    remove_temporaries(str(tmp_path), [])
    assert all(path.exists() for path in files.values())
    remove_temporaries(str(tmp_path), ["plot_1.png"])
    assert [key for key, path in files.items() if not path.exists()] == ["fork"]
    remove_temporaries(str(tmp_path))
    assert [key for key, path in files.items() if path.exists()] == ["previous"]

"""How many threads a process takes, and the setting that caps them."""

import os

import pytest

from phasegauge.errors import OptionError
from phasegauge.model._threads import THREADS_VARIABLE, check_threads, thread_count


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

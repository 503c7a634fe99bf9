"""The progress line: steps done, rate and time left; whole lines in a log; silent when turned off."""

import io

from phasegauge.run.progress import Progress


def test_progress_line_counts_and_estimates():
    stream = io.StringIO()
    bar = Progress(10, "steps", enabled=True, stream=stream)
    for _ in range(4):
        bar.update()
    bar.update(reused=True)
    text = bar.text()
    assert text.startswith("steps 5/10 (50%, 1 reused)") and "/s" in text and "left" in text
    bar.close()
    assert stream.getvalue().endswith("\n")


def test_progress_writes_whole_lines_to_a_log():
    """A stream that is not a terminal (a batch log) gets whole lines, one per interval; a run
    shorter than the interval leaves none (so an error stays the only line)."""
    stream = io.StringIO()  # not a terminal
    bar = Progress(3, stream=stream, interval=0.0)
    for _ in range(3):
        bar.update()
    bar.close()
    lines = stream.getvalue().splitlines()
    assert [line.split(" (")[0] for line in lines] == ["steps 1/3", "steps 2/3", "steps 3/3"]
    assert "\r" not in stream.getvalue() and "\033" not in stream.getvalue()
    quiet = io.StringIO()
    short = Progress(3, stream=quiet, interval=1e9)
    for _ in range(3):
        short.update()
    short.close()
    assert quiet.getvalue() == ""


def test_progress_silent_when_turned_off():
    stream = io.StringIO()
    bar = Progress(3, stream=stream, enabled=False)
    bar.update()
    bar.close()
    assert stream.getvalue() == ""

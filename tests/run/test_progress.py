"""The progress line: steps done, rate and time left; silent when not asked or not a terminal."""

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


def test_progress_silent_when_not_a_terminal():
    stream = io.StringIO()  # not a terminal
    bar = Progress(3, stream=stream)
    bar.update()
    bar.close()
    assert stream.getvalue() == ""

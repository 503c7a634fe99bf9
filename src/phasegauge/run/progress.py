"""Progress of long runs on stderr: steps done, rate and time left."""

from __future__ import annotations

import sys
import time

__all__ = ["Progress"]


class Progress:
    """A one-line progress display.

    Parameters
    ----------
    total : int
        Number of steps.
    label : str
    enabled : bool or None
        None: a live line on a terminal, and otherwise (a batch log) a full line
        every ``interval`` seconds.
    stream : file, optional
        Where to write (default ``sys.stderr``).
    interval : float
        Seconds between the lines written to a stream that is not a terminal.
    """

    def __init__(self, total: int, label: str = "steps", *, enabled=None, stream=None, interval: float = 5.0):
        self.total = int(total)
        self.label = label
        self.stream = stream or sys.stderr
        terminal = bool(getattr(self.stream, "isatty", lambda: False)())
        self.lines = enabled is None and not terminal  # a log file: whole lines, now and then
        self.interval = float(interval) if self.lines else 0.2
        self.enabled = True if enabled is None else enabled
        self.done = 0
        self.reused = 0
        self.start = time.monotonic()
        # a terminal shows the first update at once; a log gets its first line after an interval,
        # so a short run (or one that fails at once) leaves no progress lines in it
        self._last = self.start if self.lines else float("-inf")
        self._logged = None  # steps done at the last line written to a log

    def update(self, n: int = 1, *, reused: bool = False) -> None:
        self.done += n
        if reused:
            self.reused += n
        now = time.monotonic()
        if not self.enabled:
            return
        if self.lines:
            if now - self._last >= self.interval:
                self._last, self._logged = now, self.done
                self.stream.write(self.text(now) + "\n")
                self.stream.flush()
        elif now - self._last > self.interval or self.done >= self.total:
            self._last = now
            self.stream.write("\r" + self.text(now) + "\033[K")
            self.stream.flush()

    def text(self, now: float | None = None) -> str:
        now = time.monotonic() if now is None else now
        elapsed = max(now - self.start, 1e-9)
        computed = self.done - self.reused
        rate = computed / elapsed
        left = (self.total - self.done) / rate if rate > 0 else float("nan")
        pct = 100.0 * self.done / self.total if self.total else 100.0
        extra = f", {self.reused} reused" if self.reused else ""
        eta = _clock(left) if left == left else "?"
        return (f"{self.label} {self.done}/{self.total} ({pct:.0f}%{extra}), {rate:.2f}/s, "
                f"{eta} left")

    def close(self) -> None:
        if self.enabled and not self.lines:
            self.stream.write("\r" + self.text() + "\033[K\n")
            self.stream.flush()
        elif self.enabled and self._logged is not None and self._logged != self.done:
            self.stream.write(self.text() + "\n")  # a log that got lines gets the last count too
            self.stream.flush()


def _clock(seconds: float) -> str:
    seconds = int(round(seconds))
    if seconds < 60:
        return f"{seconds}s"
    minutes, seconds = divmod(seconds, 60)
    if minutes < 60:
        return f"{minutes}m{seconds:02d}s"
    hours, minutes = divmod(minutes, 60)
    return f"{hours}h{minutes:02d}m"

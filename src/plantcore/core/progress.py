"""Progress of long work, shown on standard error only when it is a terminal.

Long work (reports with plots, large models, sweeps over many operating points) reports what
it is doing through a :class:`Progress`.  When standard error is attached to a terminal the
user sees one line that is rewritten in place::

    report: 3/7 (43%) frequency response

When standard error is redirected (a log file, a pipe, a test run, a batch job) nothing at
all is written, so captured output stays clean.  The choice can be forced with
``enabled=True`` / ``enabled=False``.

Examples
--------
>>> import io
>>> stream = io.StringIO()              # not a terminal: nothing is written
>>> with Progress("sweep", total=3, stream=stream) as bar:
...     for k in range(3):
...         bar.step(f"point {k + 1}")
>>> stream.getvalue()
''
>>> stream = io.StringIO()
>>> with Progress("sweep", total=2, stream=stream, enabled=True, min_interval=0.0) as bar:
...     bar.step("first")
...     bar.step("second")
>>> stream.getvalue().split("\\r")[-1].strip()
'sweep: 2/2 (100%) done'
"""

from __future__ import annotations

import sys
import time

__all__ = ["Progress", "progress_enabled"]


def progress_enabled(stream=None) -> bool:
    """True when ``stream`` (default: ``sys.stderr``) is an interactive terminal.

    A stream without ``isatty``, a closed stream, or one whose ``isatty`` raises, counts as
    not a terminal.
    """
    stream = sys.stderr if stream is None else stream
    if stream is None:
        return False
    try:
        return bool(stream.isatty())
    except (AttributeError, ValueError, OSError):
        return False


class Progress:
    """A one-line progress indicator on standard error.

    Parameters
    ----------
    label : str
        What is being done, shown first on the line (``"report"``, ``"sweep"``).
    total : int, optional
        Number of steps, when known; then the line shows ``done/total`` and a percentage.
    stream : file-like, optional
        Where to write; default ``sys.stderr`` (looked up when the object is created, so
        that redirection in force at that moment is honoured).
    enabled : bool, optional
        Force the indicator on or off; by default it is on exactly when ``stream`` is a
        terminal (:func:`progress_enabled`).
    min_interval : float, optional
        Least time in seconds between two redraws (default 0.1 s), so that a loop of
        thousands of quick steps costs nothing; the final state is always drawn.

    Notes
    -----
    The line is redrawn with a carriage return and padded with spaces to wipe out a longer
    previous line; :meth:`close` ends it with a newline.  Writing errors (a closed terminal)
    switch the indicator off instead of interrupting the work.
    """

    def __init__(self, label: str, total: int | None = None, *, stream=None,
                 enabled: bool | None = None, min_interval: float = 0.1):
        if total is not None:
            if isinstance(total, bool) or int(total) != total or total < 0:
                raise ValueError(f"total must be a non-negative whole number or None, got {total!r}.")
            total = int(total)
        if min_interval < 0:
            raise ValueError(f"min_interval must be 0 or more seconds, got {min_interval!r}.")
        self.label = str(label)
        self.total = total
        self.stream = sys.stderr if stream is None else stream
        self.enabled = progress_enabled(self.stream) if enabled is None else bool(enabled)
        self.min_interval = float(min_interval)
        self.done = 0
        self.note = ""
        self._width = 0
        self._last_draw = None
        self._closed = False

    # --- reporting ------------------------------------------------------------------------
    def step(self, note: str = "", amount: int = 1) -> None:
        """Advance by ``amount`` steps; ``note`` says what is being done now."""
        self.update(self.done + amount, note)

    def update(self, done: int, note: str = "") -> None:
        """Set the number of steps done and the current note."""
        self.done = int(done)
        self.note = " ".join(str(note).split())
        finished = self.total is not None and self.done >= self.total
        self._draw(force=finished)

    def close(self, note: str = "done") -> None:
        """Draw the final state and end the line (only once)."""
        if self._closed:
            return
        self._closed = True
        if self.enabled and self._last_draw is not None:
            self.note = note
            self._draw(force=True)
            self._write("\n")

    def __enter__(self) -> "Progress":
        return self

    def __exit__(self, exc_type, exc, tb) -> None:
        self.close("done" if exc_type is None else "stopped")

    # --- drawing --------------------------------------------------------------------------
    def text(self) -> str:
        """The current line, without the carriage return."""
        if self.total:
            pct = min(100, int(round(100.0 * self.done / self.total)))
            head = f"{self.label}: {self.done}/{self.total} ({pct}%)"
        else:
            head = f"{self.label}: {self.done}"
        return f"{head} {self.note}" if self.note else head

    def _draw(self, *, force: bool = False) -> None:
        if not self.enabled or self._closed and not force:
            return
        now = time.monotonic()
        if not force and self._last_draw is not None and now - self._last_draw < self.min_interval:
            return
        self._last_draw = now
        line = self.text()
        pad = max(0, self._width - len(line))
        self._width = len(line)
        self._write("\r" + line + " " * pad)

    def _write(self, text: str) -> None:
        try:
            self.stream.write(text)
            self.stream.flush()
        except (OSError, ValueError):
            self.enabled = False

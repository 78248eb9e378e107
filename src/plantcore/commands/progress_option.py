"""The one progress convention of the command line: ``--progress`` and named stages.

Every command whose work can take more than a couple of seconds shows, on standard error,
one line rewritten in place that names the stage it is in (``certificate``, ``mode table``,
``distance search``, ...) with the time spent in that stage so far::

    reduce: 3/4 (75%) certificate of the written model (14 s)

The line is shown when standard error is a terminal and never otherwise (a log file, a
pipe, a test run), unless the command is given ``--progress``, which shows it anyway.
Standard output is never touched.  The line is drawn by
:class:`plantcore.core.progress.Progress`; this module adds the option, its help text, and
:class:`StageProgress`, which redraws the line about once a second while one long stage runs
(a numerical routine that offers no progress hook of its own still shows that the command is
alive, and for how long it has been in that stage).
"""

from __future__ import annotations

import shutil
import threading
import time

from plantcore.core.progress import Progress

__all__ = ["PROGRESS_HELP", "StageProgress", "add_progress_option", "progress_setting",
           "stages"]

PROGRESS_HELP = ("show progress on standard error even when it is not a terminal (default: "
                 "only when standard error is a terminal)")

#: Seconds between two redraws of the elapsed time while a stage runs.
TICK_SECONDS = 1.0


def add_progress_option(parser) -> None:
    """Add ``--progress`` (the same name and help for every command)."""
    parser.add_argument("--progress", action="store_true", help=PROGRESS_HELP)


def progress_setting(args):
    """``True`` with ``--progress``, else ``None`` (shown exactly when stderr is a terminal):
    the ``progress`` argument of the library's own progress-aware calls."""
    return True if getattr(args, "progress", False) else None


def _elapsed(seconds: float) -> str:
    seconds = int(seconds)
    if seconds < 60:
        return f"{seconds} s"
    minutes, seconds = divmod(seconds, 60)
    if minutes < 60:
        return f"{minutes} min {seconds} s"
    hours, minutes = divmod(minutes, 60)
    return f"{hours} h {minutes} min"


class StageProgress(Progress):
    """A :class:`~plantcore.core.progress.Progress` over named stages that shows how long
    the current stage has run, redrawn every :data:`TICK_SECONDS` by a helper thread, and
    cut to one row of the terminal (a wrapped line cannot be rewritten in place).

    ``step(note)`` starts the stage ``note``; the elapsed time is appended once the stage has
    run a second or more.  The helper thread only redraws (it never touches the work) and
    is stopped by :meth:`close`; nothing runs when the indicator is off, or with
    ``ticking=False`` (for a stage that draws a progress line of its own, which the redraws
    would overwrite).
    """

    def __init__(self, label: str, total: int | None = None, *, ticking: bool = True,
                 **options):
        super().__init__(label, total, **options)
        self._lock = threading.RLock()
        self._stage_start = time.monotonic()
        self._stop = threading.Event()
        self._ticker = None
        if self.enabled and ticking:
            self._ticker = threading.Thread(target=self._tick, name=f"{label} progress",
                                            daemon=True)
            self._ticker.start()

    def update(self, done: int, note: str = "") -> None:
        with self._lock:
            self._stage_start = time.monotonic()
            super().update(done, note)

    def text(self) -> str:
        line = super().text()
        spent = time.monotonic() - self._stage_start
        tail = f" ({_elapsed(spent)})" if not self._closed and spent >= 1.0 else ""
        # one row of the terminal: a wrapped line could not be rewritten in place
        room = shutil.get_terminal_size((80, 24)).columns - 1 - len(tail)
        if len(line) > room:
            line = line[:max(room - 3, 0)] + "..."
        return line + tail

    def _draw(self, *, force: bool = False) -> None:
        with self._lock:
            super()._draw(force=force)

    def _tick(self) -> None:
        while not self._stop.wait(TICK_SECONDS):
            with self._lock:
                if self._closed or not self.enabled:
                    return
                if self._last_draw is not None:
                    self._draw(force=True)

    def close(self, note: str = "done") -> None:
        self._stop.set()
        if self._ticker is not None and self._ticker is not threading.current_thread():
            self._ticker.join()
        with self._lock:
            super().close(note)


def stages(label: str, args, total: int | None = None, **options) -> StageProgress:
    """The progress line of command ``label``, on or off by the convention above."""
    return StageProgress(label, total, enabled=progress_setting(args), **options)

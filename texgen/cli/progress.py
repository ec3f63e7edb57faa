"""A one-line progress bar on a terminal, fed by the engine's ``progress(stage, done, total)``."""
from __future__ import annotations

import sys
import time
from typing import TextIO


class ProgressBar:
    """Draws ``stage [#####.....] done/total`` over itself on a terminal stream.

    Silent when the stream is not a terminal (logs, pipes, CI) or ``enabled`` is
    false, so it can always be passed to the engine.

    :param stream: where to draw (default ``sys.stderr``).
    :param enabled: ``False`` for ``--quiet``.
    :param width: cells of the bar.
    :param interval: least seconds between redraws of one stage, so fast stages cost nothing.
    """

    def __init__(self, stream: TextIO | None = None, *, enabled: bool = True, width: int = 30,
                 interval: float = 0.1, label: str = ""):
        self.stream = stream if stream is not None else sys.stderr
        isatty = getattr(self.stream, "isatty", None)
        self.active = bool(enabled and isatty is not None and isatty())
        self.width = width
        self.interval = interval
        self.label = label
        self._last = float("-inf")  # the first call always draws (monotonic time may start near 0)
        self._shown = False

    def __call__(self, stage: str, done: int, total: int) -> None:
        if not self.active:
            return
        now = time.monotonic()
        if done < total and now - self._last < self.interval:
            return
        self._last = now
        total = max(total, 1)
        full = min(self.width, self.width * done // total)
        bar = "#" * full + "." * (self.width - full)
        lead = f"{self.label}: " if self.label else ""
        self.stream.write(f"\r\x1b[2K{lead}{stage} [{bar}] {done}/{total}")
        self.stream.flush()
        self._shown = True

    def close(self) -> None:
        """Erase the bar so that the next message starts on a clean line."""
        if self.active and self._shown:
            self.stream.write("\r\x1b[2K")
            self.stream.flush()
            self._shown = False

    def __enter__(self) -> "ProgressBar":
        return self

    def __exit__(self, *exc) -> None:
        self.close()

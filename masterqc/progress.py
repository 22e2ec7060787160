"""Progress display on standard error.

Shown only on a terminal, only once the work has taken more than
``delay_s`` seconds, and never on standard output (so ``--json`` stays clean).
"""

from __future__ import annotations

import sys
import time


class Progress:
    """A one-line progress display: ``update(done, total)``, then ``close()``."""

    def __init__(self, label: str, stream=None, enabled: bool | None = None, delay_s: float = 2.0):
        self.label = label
        self.stream = stream or sys.stderr
        if enabled is None:
            enabled = hasattr(self.stream, "isatty") and self.stream.isatty()
        self.enabled = enabled
        self.delay_s = delay_s
        self.started = time.monotonic()
        self._last = 0.0
        self._shown = False

    def update(self, done: float, total: float, unit_text: str = "") -> None:
        if not self.enabled:
            return
        now = time.monotonic()
        if now - self.started < self.delay_s or now - self._last < 0.2:
            return
        self._last = now
        frac = done / total if total else 0.0
        elapsed = now - self.started
        eta = elapsed * (1 - frac) / frac if frac > 0 else float("nan")
        eta_text = f"{eta:5.0f} s left" if eta == eta else ""
        self.stream.write(f"\r{self.label}: {100 * frac:5.1f} % {unit_text} {eta_text}\033[K")
        self.stream.flush()
        self._shown = True

    def close(self) -> None:
        if self._shown:
            self.stream.write("\r\033[K")
            self.stream.flush()
            self._shown = False

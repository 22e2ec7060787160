"""Progress of a batch on standard error.

On a terminal: one live line -- files done of total, audio hours analysed,
real-time factor (audio seconds analysed per second of wall time), elapsed
time and ETA -- redrawn every second while long files are still running.
Not on a terminal (a log, cron mail, CI): one plain line per finished file,
then one indented line per problem of that file (errors, failures, warnings,
worst first).  On a terminal, the problems of a file that fails or cannot be
checked are printed above the live line.  ``quiet``: nothing.
"""

from __future__ import annotations

import sys
import threading
import time

from masterqc.fileio import shown
from masterqc.problems import problem_lines, ranked_problems


def _clock(seconds: float) -> str:
    s = int(round(seconds))
    return f"{s // 3600:d}:{s // 60 % 60:02d}:{s % 60:02d}"


class BatchProgress:
    """``file_done(rel, verdict, audio_s, size_bytes, analysed)``, then ``close()``."""

    def __init__(self, total_files: int, total_bytes: int, stream=None, quiet: bool = False,
                 live: bool | None = None):
        self.stream = stream or sys.stderr
        self.quiet = quiet
        self.live = (hasattr(self.stream, "isatty") and self.stream.isatty()) if live is None else live
        self.total_files = total_files
        self.total_bytes = max(1, total_bytes)
        self.done_files = 0
        self.done_bytes = 0
        self.audio_s = 0.0
        self.started = time.monotonic()
        self._shown = False
        self._lock = threading.Lock()
        self._stop = threading.Event()
        self._ticker = None
        if self.live and not self.quiet:
            self._ticker = threading.Thread(target=self._tick, name="masterqc-progress", daemon=True)
            self._ticker.start()

    def _tick(self) -> None:
        while not self._stop.wait(1.0):
            with self._lock:
                if self._stop.is_set():
                    return
                self.stream.write(f"\r{self.line()}\033[K")
                self.stream.flush()
                self._shown = True

    def stats(self) -> dict:
        """Figures shown: ``files_done``, ``audio_hours``, ``realtime_factor`` (None before any audio), ``eta_s``."""
        elapsed = max(1e-9, time.monotonic() - self.started)
        frac = self.done_bytes / self.total_bytes
        eta = elapsed * (1 - frac) / frac if frac > 0 else None
        return {"files_done": self.done_files, "audio_hours": self.audio_s / 3600.0,
                "realtime_factor": self.audio_s / elapsed if self.audio_s > 0 else None,
                "eta_s": eta, "elapsed_s": elapsed}

    def line(self) -> str:
        st = self.stats()
        rtf = f"{st['realtime_factor']:.1f}x real time" if st["realtime_factor"] else "-- real time"
        eta = _clock(st["eta_s"]) if st["eta_s"] is not None else "--:--"
        return (f"{st['files_done']}/{self.total_files} files  {st['audio_hours']:.2f} h audio analysed  "
                f"{rtf}  elapsed {_clock(st['elapsed_s'])}  ETA {eta}")

    def file_done(self, rel: str, verdict: str, audio_s: float, size_bytes: int, analysed: bool,
                  how: str | None = None, problems=None, path: str = "") -> None:
        """One finished file; ``how`` says what happened to it ("checked", "reused", "not analysed");
        ``problems`` its findings (or ``{check, status, message}`` records) -- every one that is
        not a pass is shown, worst first (``path``, the file's path as the messages spell it, is
        left out of them: the line names the file)."""
        with self._lock:
            self._file_done(rel, verdict, audio_s, size_bytes, analysed, how, problems, path)

    def _file_done(self, rel, verdict, audio_s, size_bytes, analysed, how=None, problems=None, path="") -> None:
        self.done_files += 1
        self.done_bytes += max(0, size_bytes)
        if analysed:
            self.audio_s += max(0.0, audio_s or 0.0)
        if self.quiet:
            return
        lines = [shown(t) for t in problem_lines(ranked_problems(problems or []), path=path)]
        if self.live:
            if verdict in ("fail", "error"):
                self.stream.write("\r\033[K" + f"{verdict.upper():5s} {shown(rel)}\n"
                                  + "".join(t + "\n" for t in lines))
            self.stream.write(f"\r{self.line()}\033[K")
            self._shown = True
        else:
            how = how or ("checked" if analysed else "reused")
            self.stream.write(f"[{self.done_files}/{self.total_files}] {verdict.upper():5s} {shown(rel)} ({how})\n"
                              + "".join(t + "\n" for t in lines))
        self.stream.flush()

    def note(self, text: str) -> None:
        if self.quiet:
            return
        with self._lock:
            if self._shown:
                self.stream.write("\r\033[K")
            self.stream.write(shown(text) + "\n")
            self.stream.flush()

    def close(self) -> None:
        self._stop.set()
        if self._ticker is not None:
            self._ticker.join(timeout=2.0)
            self._ticker = None
        if self._shown:
            self.stream.write("\r\033[K")
            self.stream.flush()
            self._shown = False

"""Options of a measurement run.

Defaults are what ``masterqc measure`` uses without a spec; ``masterqc check``
derives them from the delivery spec (the spec module owns that mapping).
Each analyzer reads only the fields it needs.
"""

from __future__ import annotations

import hashlib
import json
import os
from dataclasses import dataclass, field, fields

#: MeasureOptions fields that never change a measured number (tests/test_block_size.py,
#: tests/test_engine_threads.py): left out of the measurement key
NOT_MEASUREMENT_SETTINGS = ("block_frames", "threads")


#: environment variable: threads one measurement may use (its analyzer threads, and any thread pool
#: inside it: BLAS, FFT workers).  Unset: :func:`default_thread_count` decides.  A batch with several
#: jobs sets it in each worker process to the cores it may use divided by the jobs (at least 1), so
#: ``jobs x threads`` never exceeds the cores (masterqc.batch.execute); anything that adds threads
#: inside a measurement takes its count from ``MeasureOptions.threads``, whose default reads this.
THREADS_ENV = "MASTERQC_THREADS"


def default_thread_count() -> int:
    """Threads one measurement uses by default: ``MASTERQC_THREADS`` when set (a whole number of
    1 or more; anything else is a :class:`~masterqc.errors.UsageError`), else 2, or 1 on a one-core machine."""
    raw = os.environ.get(THREADS_ENV, "").strip()
    if raw:
        try:
            n = int(raw)
        except ValueError:
            n = 0
        if n < 1:
            from masterqc.errors import UsageError
            raise UsageError(f"environment variable {THREADS_ENV}={raw!r}: give a whole number of 1 or more")
        return n
    try:
        cores = len(os.sched_getaffinity(0))
    except (AttributeError, OSError):
        cores = os.cpu_count() or 1
    return max(1, min(2, cores))


#: environment variable set by :func:`pin_blas_to_one_thread`: BLAS was loaded with one thread
BLAS_PINNED_ENV = "MASTERQC_BLAS_ONE_THREAD"
#: the thread-count variables of the BLAS libraries numpy may load
BLAS_THREAD_ENVS = ("OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "BLIS_NUM_THREADS")


def pin_blas_to_one_thread() -> bool:
    """Before numpy is imported: start BLAS with one thread through its environment variables,
    so that :func:`masterqc.measure.oversample.single_thread_blas` need not load threadpoolctl and inspect the process
    (about 20 ms of a short file's start-up).  Nothing is done when numpy is loaded already or
    the user set any of those variables (their choice stands; the context then limits BLAS as
    before).  The command line calls it for one file's measure or check; the measurement holds
    BLAS to one thread either way, so results are unchanged."""
    import sys
    if "numpy" in sys.modules or any(os.environ.get(v) for v in BLAS_THREAD_ENVS + (BLAS_PINNED_ENV,)):
        return False
    for v in BLAS_THREAD_ENVS:
        os.environ[v] = "1"
    os.environ[BLAS_PINNED_ENV] = "1"
    return True


@dataclass(frozen=True)
class MeasureOptions:
    #: frames per block read from the file (results never depend on it)
    block_frames: int = 65536
    #: override of the channel labels, e.g. ("L", "R", "C", "LFE", "Ls", "Rs")
    channel_layout: tuple | None = None
    #: true-peak oversampling factor: 4, 8 or 16 (ITU-R BS.1770-5 Annex 2 asks for at least 4x at 48 kHz)
    true_peak_oversampling: int = 4
    #: ceiling against which the times of true-peak overs are reported
    true_peak_ceiling_dbtp: float = -1.0
    #: target rates whose conversion safety is assessed (issue: sampling integrity)
    conversion_targets_hz: tuple = ()
    #: lower edge of the ultrasonic band
    ultrasonic_from_hz: float = 20000.0
    #: clipping: a run is at least this many consecutive samples at full scale (common practice, no source)
    clip_min_run_samples: int = 3
    #: clipping: how far below full scale (dB, >= 0) a sample still counts as clipped
    clip_threshold_db: float = 0.0
    #: head/tail near-silence: a frame is silent when every channel's |sample| is at or below this level
    silence_threshold_dbfs: float = -60.0
    #: dropouts: shortest mid-file run of digital silence or of a frozen sample value reported
    dropout_min_s: float = 0.005
    #: channel relations: the share of time below this phase correlation is reported
    phase_correlation_threshold: float = 0.0
    #: channel relations: a pair whose whole-file correlation is at or below this reads as inverted polarity
    inverted_polarity_correlation: float = -0.5
    #: true-peak interpolation filter: "kaiser" (masterqc's own) or "annex2" (BS.1770-5 example, 4x)
    true_peak_filter: str = "kaiser"
    #: timecode rate of the start timecode and of located findings: "23.976", "24", "25", "29.97df", "29.97ndf", "30"
    timecode_fps: str = "25"
    #: free-form options for analyzers, keyed by analyzer name
    extra: dict = field(default_factory=dict)
    #: threads of one measurement (analyzers in parallel, decoding ahead); 1 runs everything in
    #: the calling thread (batch runs with several jobs pass 1); results never depend on it
    threads: int = field(default_factory=default_thread_count)

    def measurement_settings(self) -> dict:
        """Every option that can change a measured number, as plain JSON values (sorted keys)."""
        def plain(v):
            if isinstance(v, (tuple, list)):
                return [plain(x) for x in v]
            if isinstance(v, dict):
                return {str(k): plain(v[k]) for k in sorted(v, key=str)}
            return v
        return {f.name: plain(getattr(self, f.name)) for f in fields(self) if f.name not in NOT_MEASUREMENT_SETTINGS}

    def measurement_key(self) -> str:
        """SHA-256 of :meth:`measurement_settings` and the masterqc version: two runs with the same key
        measure a file to the same numbers, so stored measurements can be judged again."""
        from masterqc import __version__
        text = json.dumps({"tool_version": __version__, "settings": self.measurement_settings()}, sort_keys=True)
        return hashlib.sha256(text.encode("utf-8")).hexdigest()

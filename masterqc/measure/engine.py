"""The engine: read the file once, feed every analyzer, assemble the result object.

:func:`measure_file` returns the result object (:class:`masterqc.contract.Result`) without ``spec``, ``findings`` and ``verdict`` (the judge
adds those).  Extra top-level keys: ``series`` (display series for the report)
and ``settings`` (choices made where the standards leave room).
"""

from __future__ import annotations

import os
import sys
import threading
import time

import numpy as np

from masterqc import __version__, filehash
from masterqc.contract import RESULT_FORMAT_VERSION
from masterqc.audio.container import timecode_metadata
from masterqc.audio.reader import open_stream
from masterqc.errors import AudioReadError
from masterqc.jsonutil import jsonable
from masterqc.measure.base import Analyzer
from masterqc.measure.options import MeasureOptions
from masterqc.measure.oversample import single_thread_blas
from masterqc.measure.registry import analyzer_classes, post_steps



#: blocks the reader may decode ahead of the slowest analyzer (threaded runs; memory stays flat)
READ_AHEAD_BLOCKS = 4

#: environment variable: when set to a file path, :func:`measure_file` writes there (JSON) the CPU
#: seconds each analyzer spent in process() and finish() (opt-in profiling; off by default)
CPU_SPLIT_ENV = "MASTERQC_ANALYZER_CPU_JSON"


def _time_analyzers(analyzers, cpu_split: dict) -> None:
    """Make each analyzer add the CPU seconds of its own thread (``time.thread_time``)
    spent in process() and finish() to ``cpu_split[class name] = [process_s, finish_s]``.

    An analyzer takes one block at a time (whatever thread runs it), so its entry is
    never updated from two threads at once.  Waiting for a core is not counted.
    """
    for a in analyzers:
        rec = cpu_split.setdefault(type(a).__name__, [0.0, 0.0])
        a.process = _thread_timed(a.process, rec, 0)
        a.finish = _thread_timed(a.finish, rec, 1)
        if getattr(a, "process_planar", None) is not None:
            a.process_planar = _thread_timed(a.process_planar, rec, 0)


def _thread_timed(fn, rec: list, slot: int):
    """``fn`` that adds the CPU seconds of its own thread per call to ``rec[slot]``."""
    def timed(*args):
        t = time.thread_time()
        try:
            return fn(*args)
        finally:
            rec[slot] += time.thread_time() - t
    return timed


#: glibc ``mallopt`` parameters (malloc.h): M_TRIM_THRESHOLD, M_TOP_PAD, M_MMAP_THRESHOLD, M_ARENA_MAX
_M_TRIM_THRESHOLD, _M_TOP_PAD, _M_MMAP_THRESHOLD, _M_ARENA_MAX = -1, -2, -3, -8
_HEAP_TUNED = False


def keep_block_buffers_in_heap() -> bool:
    """Let the C allocator reuse freed block-sized buffers instead of mapping fresh pages.

    Every block makes temporaries of a few MB (filtered copies, FFT segments); by
    default glibc serves each from a new ``mmap`` and returns it at ``free``, so
    every block pays for page faults and zero-filling of fresh pages (measured:
    about 0.4 s of system time in a 10-minute stereo run, 25 % of the true-peak
    meter's time).  Raising the mmap and trim thresholds to 64 MB keeps them in
    the heap.  Peak memory is unchanged in shape (bench/bench_speed.py, memory
    section); results are untouched.

    One malloc arena for the whole process (``M_ARENA_MAX`` = 1, set before the
    analyzer threads start): with an arena per thread, an analyzer's long-lived
    arrays land in whichever worker's arena ran it, among that arena's block
    temporaries, and the arenas' high-water mark crept up with the file's
    duration (6 ch 96 kHz, 2 threads, in-process: peak 171 -> 177 MB from 4 to
    16 min; with one arena 165 -> 166 MB, run time unchanged within the noise of
    a shared machine).  The threads make a few large allocations per block, so
    one lock costs nothing measurable.

    Once per process, Linux/glibc only; a threshold the user set through
    ``MALLOC_*`` environment variables is left as is.
    """
    global _HEAP_TUNED
    if _HEAP_TUNED:
        return True
    _HEAP_TUNED = True
    if not sys.platform.startswith("linux"):
        return False
    try:
        import ctypes
        libc = ctypes.CDLL(None)
        mallopt = libc.mallopt
    except (OSError, AttributeError):        # not glibc (e.g. musl): nothing to tune
        return False
    limit = 64 << 20
    for env, param, value in (("MALLOC_MMAP_THRESHOLD_", _M_MMAP_THRESHOLD, limit),
                              ("MALLOC_TRIM_THRESHOLD_", _M_TRIM_THRESHOLD, 2 * limit),
                              ("MALLOC_TOP_PAD_", _M_TOP_PAD, 16 << 20),
                              ("MALLOC_ARENA_MAX", _M_ARENA_MAX, 1)):
        if env not in os.environ:
            mallopt(param, value)
    return True


def _prepare(block, info, want_clean: bool, want_planar: bool = False, rows=None):
    """(raw, clean, planar) views of a decoded block, all read-only.

    ``clean`` has non-finite samples replaced by 0.0 (float files only); it is the
    block itself when every sample is finite.  ``planar`` is ``clean`` as (channels,
    frames), C-contiguous (one copy, made here so that analyzers with
    ``planar_input`` do not each transpose the block; ``rows``, when the reader made
    that copy of ``block`` while decoding it, is taken as it is), or None when nobody asked.
    Read-only, because every analyzer sees the same arrays: one that wrote into its
    input would change another's.
    """
    block = np.asarray(block)
    block.flags.writeable = False
    clean = block
    if (want_clean or want_planar) and info.is_float and not np.isfinite(block).all():
        clean = np.where(np.isfinite(block), block, 0.0)
        clean.flags.writeable = False
    planar = None
    if want_planar:
        planar = rows if rows is not None and clean is block else np.ascontiguousarray(clean.T)
        planar.flags.writeable = False
    return block, clean, planar


def _decoded(stream, block_frames: int, want_planar: bool):
    """``(block, rows)`` pairs of the stream: ``rows`` is the block's planar copy where the reader
    made it in its decoding pass (:meth:`masterqc.audio.reader.AudioStream.blocks_with_rows`),
    else None (streams without that method: every block with None)."""
    with_rows = getattr(stream, "blocks_with_rows", None) if want_planar else None
    if with_rows is not None:
        return with_rows(block_frames)
    return ((block, None) for block in stream.blocks(block_frames))


def _feed(analyzer, prepared) -> None:
    """Hand ``analyzer`` the form of a prepared block it takes."""
    raw, clean, planar = prepared
    if getattr(analyzer, "planar_input", False):
        analyzer.process_planar(planar)
    else:
        analyzer.process(raw if analyzer.raw_input else clean)


def _check_inputs(analyzers) -> None:
    for a in analyzers:
        if getattr(a, "planar_input", False) and a.raw_input:
            raise ValueError(f"{type(a).__name__}: planar blocks are the cleaned ones; "
                             "raw_input and planar_input cannot both be set")


def _collect(analyzers, finished=None):
    """Every analyzer's finish() merged in the analyzers' order; ``finished[i]``, when given and
    set, is analyzer i's finish() already taken (its result, or the exception it raised)."""
    measurements, series, settings = {}, {}, {}
    for i, a in enumerate(analyzers):
        done = finished[i] if finished is not None else None
        if done is None:
            r = a.finish()
        elif isinstance(done, BaseException):
            raise done
        else:
            r = done
        measurements.update(r.measurements)
        series.update(r.series)
        if r.settings:
            settings[a.name] = r.settings
    return measurements, series, settings


def run_analyzers(stream, options: MeasureOptions, progress=None, classes=None, cpu_split=None,
                  thread_cpu=None):
    """Feed every applicable analyzer from one read of ``stream``.

    ``progress(frames_done, frames_total)`` is called after each block when given
    (always from the calling thread).  Returns ``(measurements, series, settings)``
    dicts.  With a dict ``cpu_split``, each analyzer's CPU seconds in process() and finish()
    are added to it (:func:`_time_analyzers`); with a dict ``thread_cpu``, the CPU seconds of
    decoding and preparing blocks (``"read_s"``: the reader thread, or the decode calls of a
    sequential run) and of the threads that run the analyzers (``"analyze_s"``: their
    process() calls and the scheduling around them).  After every analyzer has finished, the registry's post-steps
    (:func:`masterqc.measure.registry.post_steps`) combine evidence across analyzers.

    With ``options.threads`` > 1 the stream is decoded in a reader thread up to
    :data:`READ_AHEAD_BLOCKS` blocks ahead, and the analyzers run on that many
    threads (the calling one included): each analyzer takes every block in file
    order, one block at a time, on whichever thread is free, so its results are
    exactly those of a sequential run (filters, sums and reductions release the
    GIL, which is where the time goes).  BLAS is held to one thread for the whole
    run (its workers would compete with ours; its products here are small).
    """
    info = stream.info
    classes = analyzer_classes() if classes is None else classes
    analyzers = [cls(info, options) for cls in classes if cls.applies_to(info, options)]
    for a in analyzers:
        bind = getattr(a, "bind", None)
        if bind is not None:
            bind(analyzers)
    if cpu_split is not None:
        _time_analyzers(analyzers, cpu_split)
    _check_inputs(analyzers)
    threads = max(1, int(getattr(options, "threads", 1) or 1))
    keep_block_buffers_in_heap()
    with single_thread_blas():
        finished = None
        if threads == 1 or not analyzers:
            _run_sequential(stream, info, options, analyzers, progress, thread_cpu)
        else:
            finished = _BlockScheduler(stream, info, options, analyzers, threads, progress, thread_cpu,
                                       cpu_split).run()
        measurements, series, settings = _collect(analyzers, finished)
    for step in post_steps():
        measurements = step(measurements)
    return measurements, series, settings


def _run_sequential(stream, info, options, analyzers, progress, thread_cpu=None) -> None:
    want_clean = any(not a.raw_input and not getattr(a, "planar_input", False) for a in analyzers)
    want_planar = any(getattr(a, "planar_input", False) for a in analyzers)
    done = 0
    read_s = analyze_s = 0.0
    clock = time.thread_time if thread_cpu is not None else (lambda: 0.0)
    gen = _decoded(stream, options.block_frames, want_planar)
    while True:
        t0 = clock()
        block, rows = next(gen, (None, None))
        if block is None:
            read_s += clock() - t0
            break
        prepared = _prepare(block, info, want_clean, want_planar, rows)
        t1 = clock()
        for a in analyzers:
            _feed(a, prepared)
        analyze_s += clock() - t1
        read_s += t1 - t0
        done += block.shape[0]
        if progress is not None:
            progress(done, info.frames)
    if thread_cpu is not None:
        thread_cpu["read_s"] = thread_cpu.get("read_s", 0.0) + read_s
        thread_cpu["analyze_s"] = thread_cpu.get("analyze_s", 0.0) + analyze_s


#: blocks the calling thread feeds to every analyzer, in order, before the threads start
#: (threaded runs): each analyzer's wall time on them sizes the lanes (:func:`_lanes`)
WARM_UP_BLOCKS = 2

def _lanes(costs_s) -> list:
    """Analyzer indices grouped into lanes: a lane takes a block as one task, its analyzers
    fed in their order, so each analyzer still takes every block in file order.

    An analyzer alone costs about as much per block as the scheduling around it (a lock
    round, a wake-up, the GIL changing hands: some 10-20 us, bench/speed_s9threads.txt) when
    its own work is a few microseconds (sample peak, non-finite count, bit depth), so the cheap half (a cost at most
    the median of ``costs_s``, the analyzers' wall seconds on a warm-up block) shares one lane
    and every other analyzer has a lane of its own.  The median, not a share of the total: a
    warm-up block that one analyzer spends long on (a lazy import, a thread switched out) moves
    that analyzer to a lane of its own, never the others into one lane.  The lanes only decide
    which thread runs what; the results are the same whatever they are.
    """
    n = len(costs_s)
    if n == 0:
        return []
    median_s = sorted(costs_s)[(n - 1) // 2]
    cheap = [i for i in range(n) if costs_s[i] <= median_s]
    lanes = [[i] for i in range(n) if costs_s[i] > median_s] + [cheap]
    return sorted(lanes, key=lambda lane: lane[0])


class _BlockScheduler:
    """One reader thread and ``threads`` analyzer workers (the caller is one).

    The calling thread first feeds the first :data:`WARM_UP_BLOCKS` blocks to every analyzer
    in order, timing each one; the analyzers are then packed into lanes (:func:`_lanes`),
    and a lane takes a block as one task.

    Shared state, guarded by one lock: the decoded blocks not yet taken by every
    lane, and per lane the index of its next block and whether a worker holds it.
    A free worker takes the lane that is furthest behind (ties: the one listed
    first) whose next block is decoded; it records the block it has done and takes its
    next task in one hold of the lock.  Threads are woken only when there is something
    for them (a waiting thread that wakes takes the GIL from the ones at work): the reader
    when the slowest lane moves on, a worker when a block arrives or a second task is free,
    the caller also when there is progress to report.

    An analyzer that takes nothing from its peers (it keeps :meth:`Analyzer.bind
    <masterqc.measure.base.Analyzer.bind>` as it is) is finished on a worker as soon as its lane
    has taken the last block, while slower lanes still take theirs (its finish() reads only its
    own state, and no peer changes that state); the others are finished afterwards, in order, by
    :func:`_collect`, when every early finish is done, as before.  Results are collected in the
    analyzers' order whoever finished them, so they are those of a sequential run.  An early
    finish with parts (:class:`Analyzer <masterqc.measure.base.Analyzer>`'s optional
    ``finish_parts()``) is taken in two steps: the worker that takes it calls ``finish_parts()``
    and queues the parts, which any free worker takes (after the lanes' blocks, before other
    finishes), and the analyzer's finish() is free to take once the last of them is done, so
    a long finish (aliasing's kept frames) no longer runs on one core while the other waits.
    """

    def __init__(self, stream, info, options, analyzers, threads, progress, thread_cpu=None, cpu_split=None):
        self.stream, self.info, self.options = stream, info, options
        self.thread_cpu = thread_cpu           # opt-in: CPU seconds per kind of thread
        self.cpu_split = cpu_split             # opt-in: CPU seconds per analyzer (_time_analyzers)
        self.analyzers = analyzers
        self.threads = threads
        self.progress = progress
        self.want_clean = any(not a.raw_input and not getattr(a, "planar_input", False) for a in analyzers)
        self.want_planar = any(getattr(a, "planar_input", False) for a in analyzers)
        self.lock = threading.Lock()
        self.space = threading.Condition(self.lock)    # the reader waits here
        self.work = threading.Condition(self.lock)     # the helper workers wait here
        self.main = threading.Condition(self.lock)     # the calling thread waits here
        self.blocks: dict[int, tuple] = {}     # index -> (raw, clean, planar)
        self.ends: list[int] = []              # frames done after block k
        self.read_count = 0
        self.read_done = False
        self.read_error = None
        self.errors: list[tuple] = []          # (block index, analyzer index, exception)
        self.abort = False
        self.lanes: list[list[int]] = [[i] for i in range(len(analyzers))]   # set by _warm_up
        self.lane_of: list[int] = list(range(len(analyzers)))
        self.next: list[int] = []              # per lane: its next block
        self.busy: list[bool] = []             # per lane: a worker holds it
        self.low = 0                           # min(self.next): blocks every lane has taken
        self.reported = 0
        # finish() on a worker after the last block: analyzers that take nothing from their peers
        self.early = [isinstance(a, Analyzer) and type(a).bind is Analyzer.bind for a in analyzers]
        self.finished: list = [None] * len(analyzers)     # its AnalyzerResult, or the exception
        self.finishing = [False] * len(analyzers)         # taken by a worker (or done)
        self.finish_done = [False] * len(analyzers)
        # an early finish in parts (the analyzer's finish_parts(), then finish()): the parts not yet
        # taken, (analyzer index, part), and per analyzer whether it was split and its parts still
        # queued or running; its finish() waits for the last of them
        self.parts: list[tuple] = []
        self.split = [getattr(a, "finish_parts", None) is None for a in analyzers]
        self.parts_open = [0] * len(analyzers)
        self.part_error: list = [None] * len(analyzers)

    def _wake_all(self) -> None:
        self.space.notify_all()
        self.work.notify_all()
        self.main.notify_all()

    def _add_cpu(self, key: str, started: float) -> None:
        if self.thread_cpu is not None:
            spent = time.thread_time() - started
            with self.lock:
                self.thread_cpu[key] = self.thread_cpu.get(key, 0.0) + spent

    # -- calling thread, before the others start
    def _warm_up(self, gen) -> bool:
        """Feed the first :data:`WARM_UP_BLOCKS` blocks to every analyzer in order and pack the
        lanes from each analyzer's least wall time on one of them; False when the stream ended
        there (nothing left for the threads).  Errors are raised as in a sequential run."""
        costs_s = [None] * len(self.analyzers)
        clock = time.thread_time if self.thread_cpu is not None else None
        ended = False
        for k in range(WARM_UP_BLOCKS):
            c0 = clock() if clock else 0.0
            block, rows = next(gen, (None, None))
            if block is None:
                if clock:
                    self._add_cpu("read_s", c0)
                ended = True
                break
            prepared = _prepare(block, self.info, self.want_clean, self.want_planar, rows)
            if clock:
                self._add_cpu("read_s", c0)
            c1 = clock() if clock else 0.0
            for i, a in enumerate(self.analyzers):
                t = time.perf_counter()
                _feed(a, prepared)
                t = time.perf_counter() - t
                costs_s[i] = t if costs_s[i] is None else min(costs_s[i], t)
            if clock:
                self._add_cpu("analyze_s", c1)
            prepared = None
            self.ends.append((self.ends[-1] if self.ends else 0) + block.shape[0])
            self.read_count = self.low = self.reported = k + 1
            if self.progress is not None:
                self.progress(self.ends[-1], self.info.frames)
        if costs_s[0] is not None:
            self.lanes = _lanes(costs_s)
        for j, lane in enumerate(self.lanes):
            for i in lane:
                self.lane_of[i] = j
        self.next = [self.read_count] * len(self.lanes)
        self.busy = [False] * len(self.lanes)
        return not ended

    # -- reader thread
    def _read(self, gen) -> None:
        started = time.thread_time()
        try:
            self._read_blocks(gen)
        finally:
            self._add_cpu("read_s", started)

    def _work(self, report: bool) -> None:
        started = time.thread_time()
        try:
            self._work_blocks(report)
        finally:
            self._add_cpu("analyze_s", started)

    def _read_blocks(self, gen) -> None:
        try:
            for block, rows in gen:
                prepared = _prepare(block, self.info, self.want_clean, self.want_planar, rows)
                with self.lock:
                    if self.abort:
                        return
                    k = self.read_count
                    self.blocks[k] = prepared
                    self.ends.append((self.ends[-1] if self.ends else 0) + block.shape[0])
                    self.read_count = k + 1
                    self.work.notify_all()
                    self.main.notify()
                    while not self.abort and self.read_count - self.low >= READ_AHEAD_BLOCKS:
                        self.space.wait()
                    if self.abort:
                        return
        except BaseException as exc:          # noqa: BLE001 - handed to the caller's thread
            with self.lock:
                self.read_error = exc
        finally:
            _close(gen)
            with self.lock:
                self.read_done = True
                self._wake_all()

    # -- workers
    def _pick(self):
        """(lane index, True for its next block) or (analyzer index, False for its finish()), or
        None: the lane furthest behind whose next block is decoded, else an early finish."""
        best = None
        for j in range(len(self.lanes)):
            if self.busy[j] or self.next[j] >= self.read_count:
                continue
            if best is None or self.next[j] < self.next[best]:
                best = j
        if best is not None:
            return best, True
        if self.parts:
            return self.parts.pop(0), None
        for i in range(len(self.analyzers)):
            if self._can_finish(i):
                return i, False
        return None

    def _can_finish(self, i: int) -> bool:
        j = self.lane_of[i]
        return (self.early[i] and not self.finishing[i] and not self.busy[j] and self.read_done
                and self.next[j] >= self.read_count and self.parts_open[i] == 0)

    def _ready_count(self) -> int:
        ready = sum(1 for j in range(len(self.lanes)) if not self.busy[j] and self.next[j] < self.read_count)
        if self.read_done:                     # early finishes wait for the end of the stream
            ready += len(self.parts) + sum(1 for i in range(len(self.analyzers)) if self._can_finish(i))
        return ready

    def _finished(self) -> bool:
        return (self.read_done and self.low >= self.read_count and not self.parts
                and all(self.finish_done[i] for i in range(len(self.analyzers)) if self.early[i]))

    def _block_done(self, j: int, k: int) -> None:
        """Lane ``j`` has taken block ``k`` (under the lock)."""
        self.busy[j] = False
        self.next[j] = k + 1
        low = min(self.next)
        if low > self.low:
            for b in range(self.low, low):
                del self.blocks[b]
            self.low = low
            self.space.notify()
            if self.progress is not None:
                self.main.notify()

    def _work_blocks(self, report: bool) -> None:
        wait_on = self.main if report else self.work
        report = report and self.progress is not None
        done = None                            # (lane, block) fed, recorded with the next pick
        while True:
            pending = None
            with self.lock:
                if done is not None:
                    self._block_done(*done)
                    done = None
                while True:
                    if self.abort:
                        return
                    if report and self.low > self.reported:
                        pending = self.ends[self.reported:self.low]
                        self.reported = self.low
                        break
                    task = self._pick()
                    if task is not None:
                        break
                    if self._finished():
                        self._wake_all()
                        return
                    wait_on.wait()
                if pending is None:
                    x, is_block = task
                    if is_block:
                        self.busy[x] = True
                        k = self.next[x]
                        prepared = self.blocks[k]
                    elif is_block is False:
                        self.finishing[x] = True
                    if self._ready_count() > 0:    # this thread has one; another one may take the next
                        self.work.notify()
                        self.main.notify()
            if pending is not None:
                for frames in pending:
                    self.progress(frames, self.info.frames)
                continue
            if is_block is None:
                self._run_part(*x)
                continue
            if not is_block:
                if not self.split[x]:
                    self._split_finish(x, self.analyzers[x])
                else:
                    self._finish_one(x, self.analyzers[x])
                continue
            i = None
            try:
                for i in self.lanes[x]:
                    _feed(self.analyzers[i], prepared)
            except BaseException as exc:      # noqa: BLE001 - handed to the caller's thread
                with self.lock:
                    self.errors.append((k, i, exc))
                    self.abort = True
                    self._wake_all()
                return
            finally:
                prepared = None
            done = (x, k)

    def _split_finish(self, i: int, a) -> None:
        """Take analyzer ``i``'s finish_parts() on this worker and queue its parts for any worker;
        its finish() is taken once the last part is done (at once when there are none).  An error
        of finish_parts() or of a part is its result, raised by :func:`_collect` in order."""
        started = time.thread_time()
        try:
            parts = list(a.finish_parts() or ())
        except BaseException as exc:          # noqa: BLE001 - raised by _collect, in order
            parts, error = [], exc
        else:
            error = None
        spent = time.thread_time() - started
        with self.lock:
            self._add_finish_cpu(i, spent)
            self.split[i] = True
            self.part_error[i] = error
            self.parts.extend((i, part) for part in parts)
            self.parts_open[i] = len(parts)
            self.finishing[i] = False          # finish() itself, when its parts are done
            if self._ready_count() > 0:
                self.work.notify_all()
                self.main.notify()

    def _add_finish_cpu(self, i: int, spent: float) -> None:
        """CPU seconds of analyzer ``i``'s finish_parts() or of one of its parts (under the lock): in
        "finish_s" and, with a CPU split, in its finish() entry."""
        if self.thread_cpu is not None:
            self.thread_cpu["finish_s"] = self.thread_cpu.get("finish_s", 0.0) + spent
        if self.cpu_split is not None:
            self.cpu_split[type(self.analyzers[i]).__name__][1] += spent

    def _run_part(self, i: int, part) -> None:
        """One part of analyzer ``i``'s early finish (see :meth:`_split_finish`)."""
        started = time.thread_time()
        error = None
        try:
            part()
        except BaseException as exc:          # noqa: BLE001 - raised by _collect, in order
            error = exc
        spent = time.thread_time() - started
        with self.lock:
            self._add_finish_cpu(i, spent)
            if error is not None and self.part_error[i] is None:
                self.part_error[i] = error
            self.parts_open[i] -= 1
            if self.parts_open[i] == 0 and self._can_finish(i):
                self.work.notify()
                self.main.notify()

    def _finish_one(self, i: int, a) -> None:
        """finish() analyzer ``i`` on this worker; its result, or its exception, is kept for
        :func:`_collect` (which raises the first one in the analyzers' order)."""
        started = time.thread_time()
        try:
            if self.part_error[i] is not None:
                raise self.part_error[i]
            done = a.finish()
        except BaseException as exc:          # noqa: BLE001 - raised by _collect, in order
            done = exc
        spent = time.thread_time() - started
        with self.lock:
            if self.thread_cpu is not None:   # inside "analyze_s" too: the CPU split takes it out
                self.thread_cpu["finish_s"] = self.thread_cpu.get("finish_s", 0.0) + spent
            self.finished[i] = done
            self.finish_done[i] = True
            if self._finished():
                self._wake_all()

    def _stop(self) -> None:
        with self.lock:
            self.abort = True
            self._wake_all()

    def run(self):
        gen = _decoded(self.stream, self.options.block_frames, self.want_planar)
        try:
            more = self._warm_up(gen)
        except BaseException:
            _close(gen)
            raise
        if not more:                           # a short stream: every block taken, _collect finishes
            _close(gen)
            return None
        reader = threading.Thread(target=self._read, args=(gen,), name="masterqc-read", daemon=True)
        workers = [threading.Thread(target=self._work, args=(False,), name=f"masterqc-analyze-{n}", daemon=True)
                   for n in range(1, self.threads)]
        reader.start()
        for w in workers:
            w.start()
        try:
            self._work(report=True)
        except BaseException:
            self._stop()
            raise
        finally:
            for w in workers:
                w.join()
            self._stop()
            reader.join()
        if self.errors:
            raise min(self.errors, key=lambda e: (e[0], e[1]))[2]
        if self.read_error is not None:
            raise self.read_error
        return self.finished


def _close(gen) -> None:
    """Close a block generator; closing must not hide the real error."""
    gen_close = getattr(gen, "close", None)
    if gen_close is not None:
        try:
            gen_close()
        except Exception:                      # noqa: BLE001
            pass


def measure_file(path, options: MeasureOptions | None = None, progress=None) -> dict:
    """Measure one master and return the result object (without spec and findings).

    Raises :class:`masterqc.errors.AudioReadError` when the file cannot be read.
    """
    options = options or MeasureOptions()
    started = time.perf_counter()
    threaded = max(1, int(getattr(options, "threads", 1) or 1)) > 1
    split_path = os.environ.get(CPU_SPLIT_ENV)
    cpu_split = {} if split_path else None
    thread_cpu = {} if split_path else None
    cpu_started = time.process_time()
    # with threads, the file is hashed in the background while it is measured (or it has been
    # since the command line started, filehash.prefetch); its error (the file cannot be read)
    # still comes first, as in a sequential run
    hashing = filehash.take(path)
    # CPU the prefetched hash spent before this call (the CPU split counts it in start-up)
    hash_before_s = (hashing.cpu_so_far() or 0.0) if hashing is not None and split_path else 0.0
    if hashing is None and threaded:
        hashing = filehash.Background(filehash.file_facts, path)
    hash_started = time.thread_time()
    facts = None if hashing is not None else filehash.file_facts(path)
    hash_cpu_s = time.thread_time() - hash_started
    try:
        with open_stream(path, channel_layout=options.channel_layout) as stream:
            measurements, series, settings = run_analyzers(stream, options, progress, cpu_split=cpu_split,
                                                           thread_cpu=thread_cpu)
            container = stream.container
            fmt = stream.info.format_dict()
    except BaseException:
        if hashing is not None:
            hashing.result()
        raise
    if hashing is not None:
        facts = hashing.result()
        hash_cpu_s = hashing.cpu_s
    if split_path:
        import json
        # hash_before_measure_s: the part of hash_s spent before measure_file was called (a hash
        # the command line started, masterqc.filehash.prefetch; outside process_cpu_s);
        # threads_cpu_s: "hash_s" (the file's SHA-256), "read_s" (decoding and preparing the
        # blocks), "analyze_s" (the analyzer threads: the analyzers' process() and the
        # scheduling around it, and the finish() calls they took, "finish_s"); the rest of
        # process_cpu_s is opening the file, building the analyzers, the other finish() calls
        # and assembling the result
        with open(split_path, "w", encoding="utf-8") as f:
            json.dump({"process_cpu_s": time.process_time() - cpu_started,
                       "threads": max(1, int(getattr(options, "threads", 1) or 1)),
                       "threads_cpu_s": {"hash_s": hash_cpu_s, **thread_cpu},
                       "hash_before_measure_s": hash_before_s,
                       "analyzers": cpu_split}, f, indent=1)
    metadata = dict(container.metadata)
    metadata["container_kind"] = container.kind
    metadata["chunks"] = container.chunks
    metadata["problems"] = container.problems
    metadata.update(timecode_metadata(container, fmt["sample_rate_hz"], options.timecode_fps))
    result = {
        "result_format": RESULT_FORMAT_VERSION,
        "tool": {"name": "masterqc", "version": __version__},
        "file": facts,
        "format": fmt,
        "metadata": metadata,
        "measurements": measurements,
        "series": series,
        "settings": settings,
        "analysis": {"elapsed_s": time.perf_counter() - started,
                     "block_frames": options.block_frames,
                     "measurement_settings": options.measurement_settings()},
        "provenance": {"how": "measured", "measured_with": options.measurement_key()},
    }
    return jsonable(result)

"""Where the peak memory of ``masterqc measure FILE --json --quiet`` goes, in one process.

Runs the command line in this process with a sampler thread that reads /proc/self/status
(VmRSS) every ``--every-s`` seconds and notes the phase at each sample: "read NN %" while
the blocks stream (frames handed out by the reader), "finish Name" inside an analyzer's
finish(), "result" after the engine returned (judging, JSON).  Prints the resident
memory at the end of streaming, the peak per phase, glibc's heap figures (mallinfo2:
bytes in use, free bytes kept in the arenas, mmapped bytes) and, with ``--tracemalloc``,
the Python-visible allocations (numpy arrays included) at the end of streaming by line.

Usage: ``bench/probe_memory.py FILE [--tracemalloc] [--top 25] [--every-s 0.1] [--root DIR]``
"""

from __future__ import annotations

import argparse
import ctypes
import os
import sys
import threading
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent


class _MallInfo2(ctypes.Structure):
    _fields_ = [(n, ctypes.c_size_t) for n in ("arena", "ordblks", "smblks", "hblks", "hblkhd", "usmblks",
                                                "fsmblks", "uordblks", "fordblks", "keepcost")]


def heap() -> dict:
    """glibc heap figures in MB: in use, free inside the arenas, mmapped chunks."""
    try:
        f = ctypes.CDLL(None).mallinfo2
    except AttributeError:
        return {}
    f.restype = _MallInfo2
    m = f()
    return {"in_use": m.uordblks / 2**20, "free_in_arena": m.fordblks / 2**20,
            "arena": m.arena / 2**20, "mmapped": m.hblkhd / 2**20}


def status() -> dict:
    out = {}
    for line in open("/proc/self/status"):
        k, _, v = line.partition(":")
        if k in ("VmRSS", "VmHWM", "RssAnon", "RssFile"):
            out[k] = int(v.split()[0]) / 1024
    return out


def main() -> int:
    ap = argparse.ArgumentParser()
    ap.add_argument("file")
    ap.add_argument("--tracemalloc", action="store_true")
    ap.add_argument("--top", type=int, default=25)
    ap.add_argument("--every-s", type=float, default=0.1)
    ap.add_argument("--root", default=str(HERE.parent))
    ap.add_argument("--timeline", help="write 'seconds frames RSS arena_in_use arena_free mmapped' (MB) lines here")
    args = ap.parse_args()
    sys.path.insert(0, args.root)
    import masterqc.audio.reader as reader
    import masterqc.measure.engine as engine
    import masterqc.measure.registry as registry

    state = {"phase": "start", "frames": 0, "total": 1}
    peaks: dict[str, float] = {}
    marks: list[tuple[str, dict, dict]] = []
    snaps = {}

    orig_blocks = reader.AudioStream.blocks

    def blocks(self, block_frames=reader.DEFAULT_BLOCK_FRAMES):
        state["total"] = self.info.frames
        for b in orig_blocks(self, block_frames):
            state["frames"] += b.shape[0]
            state["phase"] = f"read {10 * (100 * state['frames'] // state['total'] // 10):3d} %"
            yield b
    reader.AudioStream.blocks = blocks

    orig_classes = registry.analyzer_classes

    def classes():
        out = []
        for cls in orig_classes():
            def finish(self, _cls=cls):
                if not marks or marks[-1][0] != "end of streaming" and state["phase"].startswith("read"):
                    marks.append(("end of streaming", status(), heap()))
                    if args.tracemalloc and "stream" not in snaps:
                        import tracemalloc
                        snaps["stream"] = tracemalloc.take_snapshot()
                state["phase"] = f"finish {_cls.__name__}"
                return _cls.finish(self)
            out.append(type(cls.__name__, (cls,), {"finish": finish}))
        return out
    registry.analyzer_classes = classes
    engine.analyzer_classes = classes

    orig_collect = engine._collect

    def collect(analyzers):
        r = orig_collect(analyzers)
        marks.append(("after finish()", status(), heap()))
        state["phase"] = "post + result"
        return r
    engine._collect = collect

    stop = threading.Event()

    line_out = open(args.timeline, "w") if args.timeline else None
    t_start = time.perf_counter()

    def sample():
        while not stop.is_set():
            rss = status()["VmRSS"]
            if line_out is not None:
                hp = heap()
                line_out.write(f"{time.perf_counter() - t_start:.2f} {state['frames']} {rss:.1f} "
                               f"{hp.get('in_use', 0):.1f} {hp.get('free_in_arena', 0):.1f} {hp.get('mmapped', 0):.1f}\n")
            ph = state["phase"]
            if rss > peaks.get(ph, 0.0):
                peaks[ph] = rss
            stop.wait(args.every_s)
    if args.tracemalloc:
        import tracemalloc
        tracemalloc.start(1)
    t = threading.Thread(target=sample, daemon=True)
    t.start()
    marks.append(("imported", status(), heap()))
    from masterqc.cli import main as cli_main
    started = time.perf_counter()
    with open(os.devnull, "w") as devnull:
        old = sys.stdout
        sys.stdout = devnull
        try:
            rc = cli_main(["measure", args.file, "--json", "--quiet"])
        finally:
            sys.stdout = old
    wall = time.perf_counter() - started
    marks.append(("end", status(), heap()))
    stop.set()
    t.join()
    print(f"probe_memory: {args.file}: exit {rc}, wall {wall:.1f} s, frames {state['frames']}")
    for name, st, hp in marks:
        print(f"  {name:<18} RSS {st['VmRSS']:7.1f} MB (anon {st.get('RssAnon', 0):6.1f}, file {st.get('RssFile', 0):5.1f}) "
              f"HWM {st['VmHWM']:7.1f} MB; heap in use {hp.get('in_use', 0):6.1f}, free in arena "
              f"{hp.get('free_in_arena', 0):6.1f}, mmapped {hp.get('mmapped', 0):6.1f} MB")
    print("  peak RSS sampled per phase:")
    for ph, mb in peaks.items():
        print(f"    {ph:<40} {mb:7.1f} MB")
    if "stream" in snaps:
        snap = snaps["stream"]
        stats = snap.statistics("lineno")
        total = sum(s.size for s in stats) / 2**20
        print(f"  tracemalloc at the end of streaming: {total:.1f} MB traced; top {args.top} lines:")
        for s in stats[:args.top]:
            fr = s.traceback[0]
            print(f"    {s.size / 2**20:8.2f} MB {s.count:8d} blocks  {fr.filename.split('site-packages/')[-1]}:{fr.lineno}")
    return rc


if __name__ == "__main__":
    sys.exit(main())

"""The threaded engine gives exactly the sequential engine's results.

``MeasureOptions.threads`` > 1 decodes ahead in a reader thread and runs the
analyzers on several threads, each analyzer taking every block in file order.
The reference here is the same engine with ``threads=1`` (everything in the
calling thread, blocks in file order): the results must be identical, value for
value (JSON text compared), whatever the block size.  Errors keep their type
and their file/frame naming; progress reaches the file's frame count in order.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
import soundfile as sf

from masterqc.audio.reader import open_stream
from masterqc.errors import AudioReadError
from masterqc.measure.base import Analyzer, AnalyzerResult
from masterqc.measure.engine import measure_file, run_analyzers
from masterqc.measure.options import MeasureOptions, default_thread_count
from masterqc.measure.registry import analyzer_classes

FS = 48000


def _programme(seconds: float, seed: int = 7) -> np.ndarray:
    """Stereo test programme: two sines, noise, a burst near full scale, a silent gap."""
    rng = np.random.default_rng(seed)
    n = int(seconds * FS)
    t = np.arange(n) / FS
    x = np.stack([0.3 * np.sin(2 * np.pi * 997 * t), 0.25 * np.sin(2 * np.pi * 441 * t + 1.0)], axis=1)
    x += 0.01 * rng.standard_normal((n, 2))
    x[n // 3:n // 3 + 4800] *= 3.0
    x[n // 2:n // 2 + 2400] = 0.0
    return np.clip(x, -1.0, 1.0 - 2.0 ** -23)


def _result_text(path, **options) -> str:
    r = measure_file(str(path), MeasureOptions(**options))
    r["analysis"].pop("elapsed_s")
    return json.dumps(r, sort_keys=True)


def test_default_is_two_threads_at_most():
    assert 1 <= default_thread_count() <= 2
    assert MeasureOptions().threads == default_thread_count()


@pytest.mark.parametrize("block_frames", [65536, 4097])
def test_threads_change_no_result_pcm(tmp_path, block_frames):
    path = tmp_path / "prog.wav"
    sf.write(str(path), _programme(12.0), FS, subtype="PCM_24")
    one = _result_text(path, threads=1, block_frames=block_frames)
    assert _result_text(path, threads=2, block_frames=block_frames) == one
    assert _result_text(path, threads=3, block_frames=block_frames) == one


def test_threads_change_no_result_float_with_non_finite(tmp_path):
    x = _programme(6.0)
    x[1000, 0] = np.nan
    x[50000:50010, 1] = np.inf
    path = tmp_path / "nan.wav"
    sf.write(str(path), x, FS, subtype="FLOAT")
    one = _result_text(path, threads=1, block_frames=8192)
    two = _result_text(path, threads=2, block_frames=8192)
    assert two == one
    m = json.loads(two)["measurements"]
    # the non-finite samples are counted from the raw blocks, the others see zeros there
    assert m["nonfinite_sample_count"] == 11  # by construction: 1 NaN + 10 inf written above
    assert m["integrated_lufs"] is not None


class _Recorder(Analyzer):
    """Records the blocks it sees (their first frame and length) and tries to write into one."""

    name = "recorder"
    seen: list = []
    wrote: list = []

    def process(self, block):
        type(self).seen.append(block.shape[0])
        try:
            block[0, 0] = 1.0
            type(self).wrote.append(True)
        except ValueError:
            type(self).wrote.append(False)

    def finish(self):
        return AnalyzerResult()


class _Fails(Analyzer):
    name = "fails"

    def __init__(self, info, options):
        super().__init__(info, options)
        self.calls = 0

    def process(self, block):
        self.calls += 1
        if self.calls == 3:
            raise RuntimeError("analyzer failed on its third block")

    def finish(self):  # pragma: no cover - never reached
        return AnalyzerResult()


@pytest.mark.parametrize("threads", [1, 2])
def test_blocks_are_read_only_and_in_order(tmp_path, threads):
    path = tmp_path / "prog.wav"
    sf.write(str(path), _programme(2.0), FS, subtype="PCM_16")
    _Recorder.seen, _Recorder.wrote = [], []
    calls = []
    with open_stream(str(path)) as stream:
        run_analyzers(stream, MeasureOptions(threads=threads, block_frames=10000),
                      progress=lambda done, total: calls.append((done, total)),
                      classes=[_Recorder] + analyzer_classes()[:3])
    frames = 2 * FS
    assert _Recorder.seen == [10000] * 9 + [frames - 90000]  # by construction: 96000 frames in 10000-frame blocks
    assert _Recorder.wrote and not any(_Recorder.wrote)
    assert calls == [(min(10000 * (k + 1), frames), frames) for k in range(10)]


@pytest.mark.parametrize("threads", [1, 2])
def test_analyzer_error_reaches_the_caller(tmp_path, threads):
    path = tmp_path / "prog.wav"
    sf.write(str(path), _programme(2.0), FS, subtype="PCM_16")
    with open_stream(str(path)) as stream:
        with pytest.raises(RuntimeError, match="third block"):
            run_analyzers(stream, MeasureOptions(threads=threads, block_frames=4096),
                          classes=[_Fails] + analyzer_classes()[:2])


class _BrokenStream:
    """A stream whose decoding fails after two blocks, as the reader reports it."""

    def __init__(self, info):
        self.info = info

    def blocks(self, block_frames):
        rng = np.random.default_rng(1)
        for _ in range(2):
            yield 0.1 * rng.standard_normal((block_frames, self.info.channels))
        raise AudioReadError("broken.wav", f"decoding failed after frame {2 * block_frames} (test)")


@pytest.mark.parametrize("threads", [1, 2])
def test_read_error_keeps_its_type_and_frame(tmp_path, threads):
    path = tmp_path / "prog.wav"
    sf.write(str(path), _programme(1.0), FS, subtype="PCM_16")
    with open_stream(str(path)) as stream:
        info = stream.info
    with pytest.raises(AudioReadError, match="after frame 8192"):
        run_analyzers(_BrokenStream(info), MeasureOptions(threads=threads, block_frames=4096))


@pytest.mark.parametrize("channels", [2, 6])
def test_level_balance_taken_from_the_loudness_meter_is_unchanged(tmp_path, channels):
    """The channel analyzer takes its K-weighted energies from the loudness meter of the
    run (bind); alone it filters the block itself.  Both must give the same balance."""
    from masterqc.measure.channels import ChannelRelationAnalyzer
    from masterqc.measure.loudness import LoudnessAnalyzer
    rng = np.random.default_rng(3)
    x = 0.05 * rng.standard_normal((3 * FS, channels))
    x *= np.linspace(0.5, 1.5, channels)[None, :]
    path = tmp_path / f"ch{channels}.wav"
    sf.write(str(path), x, FS, subtype="FLOAT")
    layout = ("L", "R") if channels == 2 else ("L", "R", "C", "LFE", "Ls", "Rs")
    got = {}
    for name, classes in (("alone", [ChannelRelationAnalyzer]),
                          ("shared", [LoudnessAnalyzer, ChannelRelationAnalyzer])):
        with open_stream(str(path), channel_layout=layout) as stream:
            m, _, _ = run_analyzers(stream, MeasureOptions(threads=2, block_frames=5000), classes=classes)
        got[name] = m["level_balance_lu_per_pair"]
    assert len(got["alone"]) == channels // 2 - (1 if channels == 6 else 0)
    assert got["shared"] == pytest.approx(got["alone"], rel=0, abs=1e-9)
    # analytic: pair gains differ by the channel scaling, 20*log10(g0 / g1) (white noise of one spectrum in
    # each channel, so the K-weighting takes the same share); 0.3 LU: house choice for 3 s of noise
    assert got["alone"][0] == pytest.approx(20 * np.log10(np.linspace(0.5, 1.5, channels)[0]
                                                          / np.linspace(0.5, 1.5, channels)[1]), abs=0.3)


@pytest.mark.parametrize("threads", [1, 2])
def test_missing_file_error_is_the_same_with_threads(tmp_path, threads):
    missing = tmp_path / "nowhere.wav"
    with pytest.raises(AudioReadError) as err:
        measure_file(str(missing), MeasureOptions(threads=threads))
    assert "nowhere.wav" in str(err.value)
    with pytest.raises(AudioReadError) as ref:
        measure_file(str(missing), MeasureOptions(threads=1))
    assert str(err.value) == str(ref.value)


def test_file_facts_are_the_same_with_threads(tmp_path):
    path = tmp_path / "prog.wav"
    sf.write(str(path), _programme(1.0), FS, subtype="PCM_24")
    one = measure_file(str(path), MeasureOptions(threads=1))["file"]
    two = measure_file(str(path), MeasureOptions(threads=2))["file"]
    import hashlib
    assert one == two
    assert two["sha256"] == hashlib.sha256(path.read_bytes()).hexdigest()
    assert two["size_bytes"] == path.stat().st_size


@pytest.mark.parametrize("threads", [1, 2])
def test_opt_in_cpu_split_changes_no_result(tmp_path, monkeypatch, threads):
    """``MASTERQC_ANALYZER_CPU_JSON`` (house choice: opt-in profiling) writes each applied
    analyzer's CPU seconds in process() and finish() and leaves every result as it was."""
    from masterqc.measure import engine
    path = tmp_path / "prog.wav"
    sf.write(str(path), _programme(6.0), FS, subtype="PCM_24")
    plain = _result_text(path, threads=threads)
    split_path = tmp_path / "split.json"
    monkeypatch.setenv(engine.CPU_SPLIT_ENV, str(split_path))
    assert _result_text(path, threads=threads) == plain
    data = json.loads(split_path.read_text())
    assert data["threads"] == threads
    names = {cls.__name__ for cls in analyzer_classes()}
    assert {"LoudnessAnalyzer", "TruePeakAnalyzer", "SamplePeakAnalyzer"} <= set(data["analyzers"]) <= names
    for process_s, finish_s in data["analyzers"].values():
        assert process_s >= 0.0 and finish_s >= 0.0
    # the true-peak meter does real work on 6 s of audio: its process time cannot be zero,
    # and the analyzers' parts cannot exceed the CPU time of the whole run
    assert data["analyzers"]["TruePeakAnalyzer"][0] > 0.0
    assert sum(map(sum, data["analyzers"].values())) <= data["process_cpu_s"] + 0.05

    # the engine's own parts (house choice: opt-in profiling): hash, decode, analyzer threads;
    # together with the analyzers' finish() they cannot exceed the run's CPU time either
    # (finish_s: the finish() calls the analyzer threads took, a part of analyze_s; threaded only)
    parts = data["threads_cpu_s"]
    assert {"hash_s", "read_s", "analyze_s"} <= set(parts) <= {"hash_s", "read_s", "analyze_s", "finish_s"}
    assert ("finish_s" in parts) == (threads > 1)
    assert parts["hash_s"] > 0.0 and parts["read_s"] > 0.0
    early = parts.get("finish_s", 0.0)
    assert parts["analyze_s"] >= sum(p for p, _f in data["analyzers"].values()) + early - 0.05
    assert early <= sum(f for _p, f in data["analyzers"].values()) + 0.01
    assert (parts["hash_s"] + parts["read_s"] + parts["analyze_s"] - early
            + sum(f for _p, f in data["analyzers"].values())) <= data["process_cpu_s"] + 0.05


def test_single_thread_blas_nests_and_restores():
    """The outermost context limits BLAS to one thread, inner ones (the true-peak meter's,
    inside the engine's) leave it so, and the limit is lifted only when the last one closes."""
    threadpoolctl = pytest.importorskip("threadpoolctl")
    from masterqc.measure import oversample
    ctl = threadpoolctl.ThreadpoolController().select(user_api="blas")
    if not ctl.lib_controllers:
        pytest.skip("no BLAS library that threadpoolctl can see")

    def threads():
        return [c.num_threads for c in threadpoolctl.ThreadpoolController().select(user_api="blas").lib_controllers]

    before = threads()
    with oversample.single_thread_blas():
        assert set(threads()) == {1}
        with oversample.single_thread_blas():
            assert set(threads()) == {1}
        assert set(threads()) == {1}                 # the inner one closing keeps the limit
        assert oversample._BLAS_DEPTH == 1
    assert oversample._BLAS_DEPTH == 0
    assert threads() == before


@pytest.mark.parametrize("threads", [1, 2])
def test_prefetched_hash_gives_the_same_facts(tmp_path, monkeypatch, threads):
    """A hash the command line starts early (masterqc.filehash.prefetch, house choice) is the one
    the engine reports: the same facts as hashlib over the file's bytes (by construction), with the
    CPU it spent before the measurement recorded apart in the opt-in split (within its total)."""
    import hashlib
    import json
    from masterqc import filehash
    from masterqc.measure import engine
    path = tmp_path / "prog.wav"
    sf.write(str(path), _programme(1.0), FS, subtype="PCM_24")
    split = tmp_path / "split.json"
    monkeypatch.setenv(engine.CPU_SPLIT_ENV, str(split))
    filehash.prefetch(str(path))
    facts = measure_file(str(path), MeasureOptions(threads=threads))["file"]
    assert filehash.take(str(path)) is None                        # handed out once
    assert facts["sha256"] == hashlib.sha256(path.read_bytes()).hexdigest()
    assert facts["size_bytes"] == path.stat().st_size
    data = json.loads(split.read_text())
    assert 0.0 <= data["hash_before_measure_s"] <= data["threads_cpu_s"]["hash_s"] + 1e-3


def test_prefetched_hash_of_a_missing_file_raises_the_read_error(tmp_path):
    from masterqc import filehash
    missing = tmp_path / "nowhere.wav"
    filehash.prefetch(str(missing))
    with pytest.raises(AudioReadError) as err:
        measure_file(str(missing), MeasureOptions(threads=2))
    assert "nowhere.wav" in str(err.value)


class _Slow(Analyzer):
    """Takes its blocks slowly (so that a faster analyzer runs out of blocks first) and records
    the order of events."""

    name = "slow"
    events: list = []

    def process(self, block):
        import time
        time.sleep(0.01)
        type(self).events.append("slow block")

    def finish(self):
        type(self).events.append("slow finish")
        return AnalyzerResult(measurements={"slow_key": 1})


class _Quick(Analyzer):
    """Takes nothing from its peers: finished early on a worker when threaded."""

    name = "quick"

    def __init__(self, info, options):
        super().__init__(info, options)
        self.blocks = 0

    def process(self, block):
        self.blocks += 1

    def finish(self):
        _Slow.events.append("quick finish")
        return AnalyzerResult(measurements={"quick_blocks": self.blocks})


class _QuickFails(_Quick):
    name = "quick_fails"

    def finish(self):
        raise ValueError("finish failed")


class _Binder(_Quick):
    """Takes a figure from a peer at finish (it overrides bind): finished after the others."""

    name = "binder"

    def bind(self, peers):
        self.peers = [p for p in peers if isinstance(p, _Quick) and p is not self]

    def finish(self):
        _Slow.events.append("binder finish")
        return AnalyzerResult(measurements={"binder_sees": [p.blocks for p in self.peers]})


@pytest.mark.parametrize("threads", [1, 2])
def test_early_finish_keeps_the_order_and_the_results(tmp_path, threads):
    # A threaded run finishes an analyzer that takes nothing from its peers as soon as it has
    # taken the last block, while a slower one still works; the binder still finishes after
    # every other analyzer; results are merged in the analyzers' order either way (house rule:
    # threads change no result).
    path = tmp_path / "prog.wav"
    sf.write(str(path), _programme(1.0), FS, subtype="PCM_16")
    _Slow.events = []
    with open_stream(str(path)) as stream:
        m, _, _ = run_analyzers(stream, MeasureOptions(threads=threads, block_frames=4800),
                                classes=[_Binder, _Slow, _Quick])
    assert list(m) == ["binder_sees", "slow_key", "quick_blocks"]
    assert m["quick_blocks"] == 10 and m["binder_sees"] == [10]       # 48000 frames in 4800-frame blocks
    events = _Slow.events
    assert events.count("slow block") == 10
    if threads > 1:             # the quick analyzer was done long before the slow one's last block
        assert events.index("quick finish") < len(events) - 1 - events[::-1].index("slow block")
        assert events[-2:] == ["slow finish", "binder finish"]
    else:                       # a sequential run finishes them in order, after the last block
        assert events[-3:] == ["binder finish", "slow finish", "quick finish"]


@pytest.mark.parametrize("threads", [1, 2])
def test_early_finish_error_reaches_the_caller(tmp_path, threads):
    path = tmp_path / "prog.wav"
    sf.write(str(path), _programme(1.0), FS, subtype="PCM_16")
    with open_stream(str(path)) as stream:
        with pytest.raises(ValueError, match="finish failed"):
            run_analyzers(stream, MeasureOptions(threads=threads, block_frames=4800),
                          classes=[_Slow, _QuickFails])


def test_lanes_share_only_the_cheap_half():
    # House choice (masterqc.measure.engine._lanes): analyzers whose warm-up cost is at most the
    # median share one lane, every other one has its own; lanes listed by their first analyzer.
    from masterqc.measure.engine import _lanes
    assert _lanes([5e-3, 1e-4, 3e-3, 2e-4, 1e-5]) == [[0], [1, 3, 4], [2]]
    # one analyzer slow on the warm-up block (a lazy import) does not pull the others together
    assert _lanes([0.1, 1e-3, 2e-3, 3e-3]) == [[0], [1, 2], [3]]
    assert _lanes([1e-3]) == [[0]]
    assert _lanes([]) == []


class _Costly(_Quick):
    """Spends a few milliseconds of wall time per block (a lane of its own)."""

    name = "costly"

    def process(self, block):
        import time
        time.sleep(0.003)
        self.blocks += 1

    def finish(self):
        return AnalyzerResult(measurements={"costly_blocks": self.blocks})


class _Quick2(_Quick):
    name = "quick2"

    def finish(self):
        return AnalyzerResult(measurements={"quick2_blocks": self.blocks})


@pytest.mark.parametrize("threads", [2, 3])
def test_lanes_feed_every_analyzer_every_block(tmp_path, threads):
    # By construction: 48000 frames in 4800-frame blocks, 10 blocks each (2 on the calling thread before the
    # lanes are made, 8 in lanes), whatever lane an analyzer landed in.
    path = tmp_path / "prog.wav"
    sf.write(str(path), _programme(1.0), FS, subtype="PCM_16")
    with open_stream(str(path)) as stream:
        m, _, _ = run_analyzers(stream, MeasureOptions(threads=threads, block_frames=4800),
                                classes=[_Quick, _Costly, _Quick2])
    assert m == {"quick_blocks": 10, "costly_blocks": 10, "quick2_blocks": 10}
    assert list(m) == ["quick_blocks", "costly_blocks", "quick2_blocks"]    # the analyzers' order


class _Parted(_Quick):
    """Splits its finish into parts (finish_parts); finish() merges what they left, in a fixed order."""

    name = "parted"
    fail_part = False

    def __init__(self, info, options):
        super().__init__(info, options)
        self.taken = False
        self.done: dict = {}

    def finish_parts(self):
        import threading
        self.taken = True

        def part(key):
            def run():
                import time
                time.sleep(0.02)
                if type(self).fail_part and key == "b":
                    raise RuntimeError("part failed")
                self.done[key] = (self.blocks, threading.current_thread().name)
            return run
        return [part(k) for k in ("a", "b", "c")]

    def finish(self):
        split_by_engine = self.taken
        if not self.taken:            # not split by the engine: the parts here, in order
            for p in self.finish_parts():
                p()
        _Slow.events.append("parted finish")
        return AnalyzerResult(measurements={"parted": {k: self.done[k][0] for k in sorted(self.done)}},
                              settings={"threads": sorted({t for _b, t in self.done.values()}),
                                        "split_by_engine": split_by_engine})


@pytest.mark.parametrize("threads", [1, 2, 3])
def test_finish_parts_run_before_finish_with_the_same_results(tmp_path, threads):
    # An analyzer's finish_parts() (the engine takes them on any worker after the analyzer's last
    # block, its finish() after the last of them) gives the results of a sequential run (house rule:
    # threads change no result): every part sees every block, finish() runs once, after them; results
    # in the analyzers' order.  10 blocks by construction: 48000 frames in 4800-frame blocks.
    path = tmp_path / "prog.wav"
    sf.write(str(path), _programme(1.0), FS, subtype="PCM_16")
    _Slow.events = []
    _Parted.fail_part = False
    with open_stream(str(path)) as stream:
        m, _, s = run_analyzers(stream, MeasureOptions(threads=threads, block_frames=4800),
                                classes=[_Slow, _Parted, _Quick])
    assert list(m) == ["slow_key", "parted", "quick_blocks"]
    assert m["parted"] == {"a": 10, "b": 10, "c": 10}      # 48000 frames in 4800-frame blocks
    assert _Slow.events.count("parted finish") == 1
    # threaded: the engine took the parts (an early finish); sequential: finish() ran them itself
    assert s["parted"]["split_by_engine"] is (threads > 1)
    if threads == 1:
        assert s["parted"]["threads"] == ["MainThread"]


@pytest.mark.parametrize("threads", [1, 2])
def test_finish_part_error_reaches_the_caller(tmp_path, threads):
    path = tmp_path / "prog.wav"
    sf.write(str(path), _programme(1.0), FS, subtype="PCM_16")
    _Parted.fail_part = True
    try:
        with open_stream(str(path)) as stream:
            with pytest.raises(RuntimeError, match="part failed"):
                run_analyzers(stream, MeasureOptions(threads=threads, block_frames=4800),
                              classes=[_Slow, _Parted])
    finally:
        _Parted.fail_part = False

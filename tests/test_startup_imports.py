"""Start-up: what the command line and a measurement import (house choice; a fact about our
imports, not a timing -- the timing lives in bench/bench_startup.py).

``masterqc measure`` on a short file should not pay for the report, batch, compare and
plotting stacks, for pydantic (the result models), nor for SciPy: scipy.signal imports most
of SciPy (scipy.stats included), and scipy.fft, scipy.ndimage and scipy.special each pay
SciPy's array-API layer.  The measurement designs its filters itself
(masterqc.measure.filterdesign), runs IIR work in masterqc.measure.iir (SciPy's compiled
cascade kernel, loaded on its own) and its FFT, running filters and I0 in
masterqc.measure.npkernels.
Each check runs in a fresh interpreter, because this test process has imported everything.
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import soundfile as sf

import masterqc

ROOT = Path(masterqc.__file__).resolve().parent.parent

#: modules the command line must not import before a command needs them
NOT_AT_START = ("matplotlib", "weasyprint", "jinja2", "dask", "yaml", "pydantic", "scipy")
#: modules a whole ``masterqc measure`` run on a short file must not import
NOT_IN_MEASURE = ("matplotlib", "weasyprint", "jinja2", "dask", "yaml", "pydantic",
                  "scipy.signal", "scipy.stats", "scipy.interpolate", "scipy.optimize", "scipy.spatial",
                  "scipy.linalg", "scipy.fft", "scipy.ndimage", "scipy.special", "scipy._lib._array_api",
                  "numpy.random",  # frames.frame_starts draws its jitter with masterqc.measure.npkernels
                  "masterqc.report.render", "masterqc.report.plots",
                  "masterqc.batch.runner", "masterqc.compare.model", "masterqc.result_models",
                  "masterqc.spec.loader",
                  # the other commands' parsers: ``measure`` named first builds its own sub-parser only
                  "masterqc.commands", "masterqc.compare.command", "masterqc.batch.cli",
                  "masterqc.report.command", "masterqc.formats",
                  # the text table: only without --json
                  "masterqc.report.text")
#: what a batch parent (plan, hash, schedule; the spec and its judge) must not import: the workers
#: measure and render (house choice: the parent's CPU is the batch's serial part)
NOT_IN_BATCH_PARENT = ("masterqc.measure.engine", "masterqc.measure.loudness", "scipy", "numpy.fft",
                       "matplotlib", "weasyprint", "masterqc.report.render")


def _loaded_after(code: str) -> set[str]:
    probe = code + "\nimport json, sys\nprint(json.dumps(sorted(sys.modules)))\n"
    out = subprocess.run([sys.executable, "-c", probe], cwd=ROOT, capture_output=True, text=True,
                         timeout=300, check=True)
    return set(json.loads(out.stdout.strip().splitlines()[-1]))


def test_cli_import_and_parser_leave_heavy_modules_out():
    loaded = _loaded_after("import masterqc.cli\nmasterqc.cli.build_parser()")
    assert "masterqc.cli" in loaded and "masterqc.commands" in loaded  # the probe ran what it says
    assert "masterqc.compare.command" in loaded                       # ... and built every sub-parser
    assert sorted(m for m in NOT_AT_START if m in loaded) == []


def _short_file(path: Path, fs_hz: int, channels: int, seconds: float) -> Path:
    t_s = np.arange(int(fs_hz * seconds)) / fs_hz
    x = 0.25 * np.sin(2 * np.pi * 1000.0 * t_s)[:, None] * np.linspace(1.0, 0.5, channels)[None, :]
    sf.write(path, x, fs_hz, subtype="PCM_24")
    return path


def _measure_probe(wav: Path, fs_hz: int) -> str:
    return ("import contextlib, io, json, masterqc.cli\n"
            "with contextlib.redirect_stdout(io.StringIO()) as buf:\n"
            f"    rc = masterqc.cli.main(['measure', {str(wav)!r}, '--json', '--quiet'])\n"
            "assert rc == 0, rc\n"
            "out = json.loads(buf.getvalue())\n"
            f"assert out['format']['sample_rate_hz'] == {fs_hz}\n"
            "assert out['measurements']['integrated_lufs'] is not None\n")


def test_measure_run_leaves_unused_modules_out(tmp_path):
    wav = _short_file(tmp_path / "short.wav", 48000, 2, 1.0)
    loaded = _loaded_after(_measure_probe(wav, 48000))
    assert "masterqc.measure.loudness" in loaded and "masterqc.measure.iir" in loaded  # it did measure
    assert sorted(m for m in NOT_IN_MEASURE if m in loaded) == []


def test_short_measure_loads_no_scipy_module_beyond_the_compiled_filter_kernel(tmp_path):
    """The only SciPy code a short measurement may run is SciPy's compiled cascade kernel
    (masterqc.measure.iir.compiled_kernel, when masterqc's own optional kernel was not built),
    which brings SciPy's package initialisation with it; every other SciPy module it loaded is a
    failure (FFT, n-d filters, special functions)."""
    loaded_by_kernel = _loaded_after("import masterqc.measure.iir as iir\n"
                                     "assert iir.compiled_kernel() is not None\n")
    kernel_only = {m for m in loaded_by_kernel if m == "scipy" or m.startswith("scipy.")}
    if "masterqc.measure._cascade" in loaded_by_kernel:      # masterqc's own kernel: no SciPy at all
        assert kernel_only == set()
    else:
        assert "scipy.signal._sosfilt" in kernel_only
    assert "scipy.fft" not in kernel_only
    wav = _short_file(tmp_path / "short.wav", 48000, 2, 1.0)
    loaded = _loaded_after(_measure_probe(wav, 48000))
    assert "masterqc.measure.spectral" in loaded and "masterqc.measure.npkernels" in loaded  # it analysed
    assert sorted(m for m in loaded if (m == "scipy" or m.startswith("scipy.")) and m not in kernel_only) == []


def test_six_channel_short_measure_leaves_scipy_signal_out(tmp_path):
    """5.1 (paired surrounds, an LFE outside the loudness sum) takes the same short path."""
    wav = _short_file(tmp_path / "six.wav", 48000, 6, 0.5)
    loaded = _loaded_after(_measure_probe(wav, 48000))
    assert "masterqc.measure.channels" in loaded
    assert "scipy.signal" not in loaded


def test_a_longer_file_takes_the_compiled_filter_without_scipy_signal(tmp_path):
    """Past the plain-Python budget (masterqc.measure.iir.PYTHON_BUDGET) a compiled sosfilt
    kernel is loaded on its own (masterqc.measure.iir.compiled_kernel: masterqc's optional
    one when it was built, else scipy's), scipy.signal is not imported (same bits:
    tests/test_iir_kernel.py)."""
    from masterqc.measure.iir import PYTHON_BUDGET
    seconds = 2 * PYTHON_BUDGET / (2 * 2 * 8000) + 1          # stereo, two K-weighting sections, 8 kHz
    wav = _short_file(tmp_path / "long.wav", 8000, 2, seconds)
    loaded = _loaded_after(_measure_probe(wav, 8000)
                           + "import masterqc.measure.iir as iir\nassert iir.compiled_kernel() is not None\n")
    assert "scipy.signal._sosfilt" in loaded or "masterqc.measure._cascade" in loaded
    assert sorted(m for m in NOT_IN_MEASURE if m in loaded) == []


def test_measure_options_alone_leave_the_engine_out():
    """``masterqc.measure`` resolves its names on first use: the options (imported by the spec model,
    the judge and the batch parent) do not import the engine, its analyzers, numpy or SciPy."""
    loaded = _loaded_after("from masterqc.measure.options import MeasureOptions\nMeasureOptions()")
    assert "masterqc.measure.options" in loaded
    assert sorted(m for m in ("masterqc.measure.engine", "masterqc.measure.registry", "numpy", "scipy")
                  if m in loaded) == []
    loaded = _loaded_after("from masterqc.measure import measure_file, MeasureOptions")
    assert "masterqc.measure.engine" in loaded  # ... and the lazy names still resolve


def test_batch_parent_modules_leave_measuring_and_rendering_out(tmp_path):
    spec = tmp_path / "spec.yaml"
    spec.write_text("spec_version: 1\nname: Parent probe\nloudness:\n  integrated: {target_lufs: -14.0, tolerance_lu: 1.0}\n")
    code = ("import masterqc.cli\nmasterqc.cli.build_parser(only='check')\n"
            "import masterqc.batch.runner, masterqc.batch.schedule, masterqc.batch.work, masterqc.pipeline\n"
            "from masterqc.measure.options import MeasureOptions\n"
            "from masterqc.batch.specmap import load_spec_map\n"
            f"load_spec_map({str(spec)!r}, MeasureOptions(), ())\n")
    loaded = _loaded_after(code)
    assert "masterqc.batch.runner" in loaded and "masterqc.spec.loader" in loaded  # the probe ran
    assert sorted(m for m in NOT_IN_BATCH_PARENT if m in loaded) == []


#: argument lines of every command (house choice: the options each command documents in --help)
_LINES = (
    ["measure", "a.wav"], ["measure", "a.wav", "--json", "--true-peak-oversampling", "8", "--layout", "L,R",
                           "--threads", "1", "--quiet"],
    ["measure", "a.wav", "--true-peak-oversample", "16"],
    ["schema"], ["schema", "spec"],
    ["check", "a.wav", "b", "--spec", "s.yaml", "--out", "o", "--format", "json,html", "--jobs", "2", "--quiet"],
    ["judge", "r.json", "--spec", "s.yaml"],
    ["spec", "validate", "s.yaml", "--print"], ["spec", "schema"],
    ["report", "r.json", "--out", "o"],
    ["demo"], ["runs", "--json", "list", "--limit", "3"], ["runs", "show", "4"],
    ["compare", "m.wav", "d.wav"],
)


def test_a_command_named_first_parses_as_in_the_whole_parser():
    """``main`` builds only the named command's sub-parser (start-up); the namespace must be the
    whole parser's, option for option, and every command must be buildable on its own."""
    from masterqc.cli import build_parser
    from masterqc.commands import ADDERS
    whole = build_parser()
    names = {"measure", "schema", *ADDERS}
    assert {line[0] for line in _LINES} == names  # every command is exercised
    for line in _LINES:
        alone = build_parser(only=line[0])
        assert vars(alone.parse_args(line)) == vars(whole.parse_args(line)), line


def test_a_command_named_first_reports_bad_arguments_as_the_whole_parser(capsys):
    """Exit code 2 (see masterqc.cli) and the same message for a bad option of a named command."""
    from masterqc.cli import EXIT_USAGE, build_parser
    import pytest
    messages = []
    for parser in (build_parser(), build_parser(only="measure")):
        with pytest.raises(SystemExit) as exc:
            parser.parse_args(["measure", "a.wav", "--true-peak-oversampling", "3"])
        assert exc.value.code == EXIT_USAGE
        messages.append(capsys.readouterr().err)
    assert messages[0] == messages[1] and "--true-peak-oversampling" in messages[0]


def test_the_program_exits_with_its_code_and_all_its_output(tmp_path):
    """``python -m masterqc`` goes through masterqc.cli.run (a cheap exit): the whole JSON still
    reaches a pipe, and the exit codes are the command line's (masterqc.cli: 0 pass, 3 unreadable)."""
    wav = _short_file(tmp_path / "short.wav", 48000, 2, 1.0)
    ok = subprocess.run([sys.executable, "-m", "masterqc", "measure", str(wav), "--json", "--quiet"],
                        cwd=tmp_path, capture_output=True, text=True, timeout=300,
                        env={**__import__("os").environ, "PYTHONPATH": str(ROOT)})
    assert ok.returncode == 0, ok.stderr
    assert json.loads(ok.stdout)["format"]["sample_rate_hz"] == 48000  # by construction: the file's rate
    bad = subprocess.run([sys.executable, "-m", "masterqc", "measure", str(tmp_path / "missing.wav")],
                         cwd=tmp_path, capture_output=True, text=True, timeout=300,
                         env={**__import__("os").environ, "PYTHONPATH": str(ROOT)})
    assert bad.returncode == 3 and "missing.wav" in bad.stderr


def _blas_probe(wav: Path, env_extra: dict) -> list[str]:
    import os
    env = {k: v for k, v in os.environ.items()
           if k not in ("OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "BLIS_NUM_THREADS", "MASTERQC_BLAS_ONE_THREAD")}
    env.update(env_extra)
    code = (_measure_probe(wav, 48000)
            + "import sys\nprint('threadpoolctl' in sys.modules)\n"
              "import threadpoolctl\n"
              "print(max(i['num_threads'] for i in threadpoolctl.threadpool_info() if i['user_api'] == 'blas'))\n")
    out = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True, timeout=300,
                         check=True, env=env)
    return out.stdout.strip().splitlines()[-2:]


def test_measure_starts_blas_with_one_thread_without_threadpoolctl(tmp_path):
    # house choice (masterqc.measure.options.pin_blas_to_one_thread): one file's measure sets the
    # BLAS thread variables before numpy loads, so the measurement need not inspect the process
    # with threadpoolctl to hold BLAS to one thread; a user's own setting stands
    wav = _short_file(tmp_path / "short.wav", 48000, 2, 1.0)
    assert _blas_probe(wav, {}) == ["False", "1"]
    assert _blas_probe(wav, {"OPENBLAS_NUM_THREADS": "2"})[0] == "True"      # their choice: limited per run

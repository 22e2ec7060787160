"""Start-up: what the command line and a measurement import (house choice; a fact about our
imports, not a timing -- the timing lives in bench/bench_startup.py).

``masterqc measure`` on a short file should not pay for the report, batch, compare and
plotting stacks, for pydantic (the result models), nor for scipy.signal (which imports most
of SciPy, scipy.stats included): the measurement designs its filters itself
(masterqc.measure.filterdesign) and runs short IIR work in masterqc.measure.iir.
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
                  "scipy.linalg", "masterqc.report.render", "masterqc.report.plots",
                  "masterqc.batch.runner", "masterqc.compare.model", "masterqc.result_models",
                  "masterqc.spec.loader")


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


def test_six_channel_short_measure_leaves_scipy_signal_out(tmp_path):
    """5.1 (paired surrounds, an LFE outside the loudness sum) takes the same short path."""
    wav = _short_file(tmp_path / "six.wav", 48000, 6, 0.5)
    loaded = _loaded_after(_measure_probe(wav, 48000))
    assert "masterqc.measure.channels" in loaded
    assert "scipy.signal" not in loaded


def test_a_longer_file_takes_the_compiled_filter_without_scipy_signal(tmp_path):
    """Past the plain-Python budget (masterqc.measure.iir.PYTHON_BUDGET) the compiled sosfilt
    kernel is loaded on its own (masterqc.measure.iir.compiled_kernel), scipy.signal is not
    imported (same bits: tests/test_iir_kernel.py)."""
    from masterqc.measure.iir import PYTHON_BUDGET
    seconds = 2 * PYTHON_BUDGET / (2 * 2 * 8000) + 1          # stereo, two K-weighting sections, 8 kHz
    wav = _short_file(tmp_path / "long.wav", 8000, 2, seconds)
    loaded = _loaded_after(_measure_probe(wav, 8000)
                           + "import masterqc.measure.iir as iir\nassert iir.compiled_kernel() is not None\n")
    assert "scipy.signal._sosfilt" in loaded
    assert sorted(m for m in NOT_IN_MEASURE if m in loaded) == []

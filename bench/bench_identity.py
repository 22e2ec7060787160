#!/usr/bin/env python3
"""Same results bit for bit: this tree against another (``--base-root``) on the demo masters,
EBU Tech 3341 style signals and the speed bench's programme.

Every file is measured in a fresh process per tree (``measure_file`` with the default options,
default threads, and again with one thread), and the result's ``measurements``, ``series`` and
``settings`` are compared as JSON text (``analysis.elapsed_s`` and the file's path are left out:
they are not measured values).  Any difference is printed with its key and the run exits 1.

Signals (written under ``bench/out/identity/``, reused when present):

- the demo masters (``masterqc.demo.MASTERS``, synthesised as the demo does);
- EBU Tech 3341 (2023) Table 1 true-peak cases 15-19 (sines at fs/4..fs/8 with 10 ms fades,
  the shapes of ``tests/test_true_peak.py``), loudness cases 1-2 (1 kHz at -20 and -30 dBFS,
  stereo) and a 5.1 file with the case 6 levels (the shapes, not the standard's files);
- the speed bench's programme, 30 s and 10 min (``--long`` adds 10 min; it is slow).

The generated signals reach 0 dBFS: turn monitors down before listening to any of them.

Usage: ``bench/bench_identity.py --base-root DIR [--long]`` where DIR holds an older
``masterqc/`` (``git archive BASE masterqc | tar -x -C DIR``; copy the built ``_cascade`` module
in too, or that tree runs its fallback kernels, which give the same bits).
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import soundfile as sf

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
OUT = HERE / "out" / "identity"

CHILD = r"""
import json, sys
sys.path.insert(0, sys.argv[1])
from masterqc.measure.engine import measure_file
from masterqc.measure.options import MeasureOptions
out = {}
for threads in (2, 1):
    for path in sys.argv[3:]:
        r = measure_file(path, MeasureOptions(threads=threads))
        out[f"{threads}:{path}"] = json.dumps([r["measurements"], r["series"], r["settings"], r["file"]["sha256"]],
                                              sort_keys=True)
json.dump(out, open(sys.argv[2], "w"))
"""


def tech3341_files() -> list[Path]:
    fs = 48000
    out = []
    n = np.arange(fs)
    ramp = int(0.010 * fs)
    env = np.minimum(1.0, np.minimum(n, n[-1] - n) / ramp)
    # EBU Tech 3341 Table 1 cases 15-19: (case, fs divisor, amplitude, phase in degrees)
    for case, div, amp, phase in [(15, 4, 0.50, 0.0), (16, 4, 0.50, 45.0), (17, 6, 0.50, 60.0),
                                  (18, 8, 0.50, 67.5), (19, 8, 1.00, 67.5)]:
        x = amp * np.sin(2 * np.pi * n / div + np.deg2rad(phase)) * env
        out.append(_write(f"tp_case{case}.wav", np.stack([x, x], axis=1), fs, "FLOAT"))
    # loudness cases 1-2: 1 kHz stereo at -20 and -30 dBFS, 20 s
    t = np.arange(20 * fs) / fs
    for case, level in [(1, -20.0), (2, -30.0)]:
        x = 10 ** (level / 20) * np.sin(2 * np.pi * 1000 * t)
        out.append(_write(f"lu_case{case}.wav", np.stack([x, x], axis=1), fs, "PCM_24"))
    # case 6 levels on 5.1 (L, R, C, LFE, Ls, Rs): -28, -28, -24, -inf, -30, -30 dBFS
    lv = [-28.0, -28.0, -24.0, None, -30.0, -30.0]
    x = np.stack([np.zeros_like(t) if v is None else 10 ** (v / 20) * np.sin(2 * np.pi * 1000 * t) for v in lv], axis=1)
    out.append(_write("lu_case6_51.wav", x, fs, "PCM_24"))
    return out


def _write(name: str, x, fs: int, subtype: str) -> Path:
    path = OUT / name
    if not path.exists():
        OUT.mkdir(parents=True, exist_ok=True)
        sf.write(path, x, fs, subtype=subtype)
    return path


def demo_files() -> list[Path]:
    from masterqc import demo
    folder = OUT / "demo"
    folder.mkdir(parents=True, exist_ok=True)
    out = []
    for m in demo.MASTERS:
        path = folder / f"{m.stem}.wav"
        out.append(path if path.exists() else demo.write_master(m, folder))
    return out


def programme_files(long: bool) -> list[Path]:
    sys.path.insert(0, str(HERE))
    from bench_speed import make_file
    out = [make_file(OUT / "programme_30s.wav", 30, 48000)]
    if long:
        out.append(make_file(OUT / "programme_10min.wav", 600, 48000))
    return out


def measure_all(root: Path, files, tag: str) -> dict:
    dump = OUT / f"results_{tag}.json"
    subprocess.run([sys.executable, "-c", CHILD, str(root), str(dump), *map(str, files)], check=True)
    return json.loads(dump.read_text())


def first_difference(a, b, path="") -> str:
    if type(a) is not type(b):
        return f"{path}: {a!r} != {b!r}"
    if isinstance(a, dict):
        for k in sorted(set(a) | set(b)):
            if k not in a or k not in b:
                return f"{path}.{k}: only in one"
            d = first_difference(a[k], b[k], f"{path}.{k}")
            if d:
                return d
        return ""
    if isinstance(a, list):
        if len(a) != len(b):
            return f"{path}: length {len(a)} != {len(b)}"
        for i, (x, y) in enumerate(zip(a, b)):
            d = first_difference(x, y, f"{path}[{i}]")
            if d:
                return d
        return ""
    return "" if a == b else f"{path}: {a!r} != {b!r}"


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--base-root", required=True, help="a tree holding the masterqc/ to compare against")
    ap.add_argument("--long", action="store_true", help="also the 10-minute programme")
    args = ap.parse_args(argv)
    print("bench_identity: caution: the signals reach 0 dBFS; turn monitors down before listening.")
    files = demo_files() + tech3341_files() + programme_files(args.long)
    this = measure_all(ROOT, files, "this")
    base = measure_all(Path(args.base_root), files, "base")
    bad = 0
    for key in sorted(this):
        if this[key] != base.get(key):
            bad += 1
            d = first_difference(json.loads(this[key]), json.loads(base[key]))
            print(f"DIFFERENT  {key}: {d}")
    print(f"{len(this) - bad} of {len(this)} results identical (measurements, series, settings), "
          f"{len(files)} files x threads 2 and 1")
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main())

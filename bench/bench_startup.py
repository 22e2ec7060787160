#!/usr/bin/env python3
"""Start-up benchmark: ``masterqc measure`` on a 1 s file, as whole processes.

Times, side by side in one run and interleaved (so a change of machine load hits
every command alike), the median of N runs of

- ``python -c pass`` (the interpreter alone),
- ``python -c "import numpy, soundfile"`` (the floor any measuring tool pays),
- ``python -m masterqc measure FILE --json --quiet`` on a 1 s stereo 48 kHz 24-bit file
  (generated in bench/out/, git-ignored),

each as wall time and as CPU time (user + sys of the child, from ``os.wait4``:
on a loaded machine the CPU time is the figure to read, wall time is stretched by
waiting for a core).  Prints the ratios of masterqc to the two floors.

Target (issue: start-up): ``masterqc measure`` on a 1 s file <= 0.35 s wall on an
idle machine.  A miss is reported, not fatal; ``--strict`` makes it exit 1.

``--base DIR`` adds a fourth row: the same measure command with ``DIR`` first on
``PYTHONPATH`` (a checkout of another version of the ``masterqc`` package, e.g. from
``git archive``), to compare two versions in one run.

Usage: ``bench/bench_startup.py [--runs 15] [--base DIR] [--strict]``.
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
OUT = HERE / "out"
ROOT = HERE.parent

TARGET_WALL_S = 0.35


def one_second_file() -> Path:
    """A 1 s stereo 48 kHz 24-bit file: a -10 dBFS 997 Hz tone with a little noise."""
    import numpy as np
    import soundfile as sf

    path = OUT / "startup_1s.wav"
    if not path.exists():
        OUT.mkdir(parents=True, exist_ok=True)
        fs_hz = 48000
        rng = np.random.default_rng(15)
        t_s = np.arange(fs_hz) / fs_hz
        x = 0.316 * np.sin(2 * np.pi * 997.0 * t_s)[:, None] + 0.003 * rng.standard_normal((fs_hz, 2))
        sf.write(path, x, fs_hz, subtype="PCM_24")
    return path


def run_once(argv: list[str], env: dict) -> tuple[float, float]:
    """(wall_s, cpu_s) of one whole process; cpu = user + sys of the child."""
    t0 = time.perf_counter()
    # cwd outside the checkout: ``python -m`` puts the working folder first on sys.path
    proc = subprocess.Popen(argv, env=env, cwd=str(OUT), stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    _, status, usage = os.wait4(proc.pid, 0)
    wall_s = time.perf_counter() - t0
    proc.returncode = os.waitstatus_to_exitcode(status)
    err = proc.stderr.read().decode(errors="replace")
    proc.stderr.close()
    if proc.returncode != 0:
        raise SystemExit(f"{' '.join(argv)} failed ({proc.returncode}):\n{err}")
    return wall_s, usage.ru_utime + usage.ru_stime


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--runs", type=int, default=15, help="runs per command (median reported)")
    ap.add_argument("--base", help="another masterqc checkout to compare (put first on PYTHONPATH)")
    ap.add_argument("--strict", action="store_true", help="exit 1 when the target is missed")
    args = ap.parse_args(argv)

    py = sys.executable
    wav = str(one_second_file())
    env = dict(os.environ)
    env.pop("PYTHONPATH", None)
    # an installed package has its .pyc files: time that, not compiling the sources every run
    env.pop("PYTHONDONTWRITEBYTECODE", None)
    env["PYTHONPATH"] = str(ROOT)
    commands = {
        "python -c pass": ([py, "-c", "pass"], env),
        "import numpy, soundfile": ([py, "-c", "import numpy, soundfile"], env),
        "masterqc measure (this)": ([py, "-m", "masterqc", "measure", wav, "--json", "--quiet"], env),
    }
    if args.base:
        base_env = dict(env, PYTHONPATH=str(Path(args.base).resolve()))
        commands["masterqc measure (--base)"] = (
            [py, "-m", "masterqc", "measure", wav, "--json", "--quiet"], base_env)

    for argv_, env_ in commands.values():  # warm the page cache and .pyc files
        run_once(argv_, env_)
    walls = {k: [] for k in commands}
    cpus = {k: [] for k in commands}
    for _ in range(args.runs):
        for name, (argv_, env_) in commands.items():  # interleaved: load changes hit every row
            w, c = run_once(argv_, env_)
            walls[name].append(w)
            cpus[name].append(c)

    med_w = {k: statistics.median(v) for k, v in walls.items()}
    med_c = {k: statistics.median(v) for k, v in cpus.items()}
    print(f"start-up, 1 s stereo 48 kHz 24-bit file, median of {args.runs} runs, load "
          f"{os.getloadavg()[0]:.1f} on {os.cpu_count()} cores")
    print(f"{'command':<28} {'wall s':>8} {'cpu s':>8}")
    for k in commands:
        print(f"{k:<28} {med_w[k]:8.3f} {med_c[k]:8.3f}")
    this = "masterqc measure (this)"
    floor = "import numpy, soundfile"
    print(f"masterqc / python -c pass:          wall {med_w[this] / med_w['python -c pass']:.2f}x, "
          f"cpu {med_c[this] / med_c['python -c pass']:.2f}x")
    print(f"masterqc / import numpy, soundfile: wall {med_w[this] / med_w[floor]:.2f}x, "
          f"cpu {med_c[this] / med_c[floor]:.2f}x")
    if args.base:
        base = "masterqc measure (--base)"
        print(f"this / --base:                      wall {med_w[this] / med_w[base]:.2f}x, "
              f"cpu {med_c[this] / med_c[base]:.2f}x")
    ok = med_w[this] <= TARGET_WALL_S
    print(f"target: measure <= {TARGET_WALL_S:.2f} s wall on an idle machine: "
          f"{'met' if ok else 'missed'} ({med_w[this]:.3f} s; cpu {med_c[this]:.3f} s; "
          "wall is stretched on a loaded machine, read the cpu column there)")
    return 1 if (args.strict and not ok) else 0


if __name__ == "__main__":
    sys.exit(main())

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

- ``python -c "import numpy, soundfile, scipy.fft, scipy.ndimage, scipy.special"``: what the
  analyzers imported until they took their FFT, running filters and ``i0`` from
  masterqc.measure.npkernels (each of the three pays SciPy's array-API layer); a ``--base``
  older than that still pays it, so the share of start-up SciPy cost is measured, not guessed,
- ``python -m masterqc check FILE --spec SPEC --format json --quiet`` on the same file (a small
  loudness and true-peak spec written beside it): the judge, spec and pydantic layers on top,

each as wall time and as CPU time (user + sys of the child, from ``os.wait4``:
on a loaded machine the CPU time is the figure to read, wall time is stretched by
waiting for a core).  Prints the ratios of masterqc to the two floors.

Target (issue: start-up): ``masterqc measure`` on a 1 s file <= 0.35 s wall on an
idle machine.  A miss is reported, not fatal; ``--strict`` makes it exit 1.

``--base DIR`` adds the same measure and check rows with ``DIR`` first on
``PYTHONPATH`` (a checkout of another version of the ``masterqc`` package, e.g.
``git archive main | tar -x -C DIR``), to compare two versions in one run.

``--split SECONDS`` then times ``check`` on a SECONDS-long file of the same kind ``--runs``
times with ``MASTERQC_STAGE_LOG`` and ``MASTERQC_ANALYZER_CPU_JSON`` set, and prints the
median per stage: start-up (interpreter, command line, check layers), spec load, importing the
engine and analyzers, measuring (and within it each analyzer's own CPU), judging, writing,
and what is left of the process (exit, interpreter tear-down).

``--imports`` then runs the measure command ``--runs`` times under ``python -X importtime`` and
prints the median import time per group, each module counted with the import masterqc asked for
(numpy.testing, loaded by SciPy's array-API layer, counts as SciPy's): Python's own modules,
numpy, soundfile, SciPy, and each masterqc module's own code.

Usage: ``bench/bench_startup.py [--runs 15] [--base DIR] [--split 30] [--imports] [--strict]``
(about ``runs x 7`` processes of under a second each; ``--split 30`` adds ``runs`` checks of a 30 s file).
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


SPEC = """\
spec_version: 1
name: Start-up bench label
loudness:
  integrated: {target_lufs: -14.0, tolerance_lu: 1.0}
peaks:
  true_peak: {max_dbtp: -1.0}
"""


def test_file(seconds: float = 1.0) -> Path:
    """A stereo 48 kHz 24-bit file of ``seconds``: a -10 dBFS 997 Hz tone with a little noise."""
    import numpy as np
    import soundfile as sf

    path = OUT / ("startup_1s.wav" if seconds == 1.0 else f"startup_{seconds:g}s.wav")
    if not path.exists():
        OUT.mkdir(parents=True, exist_ok=True)
        fs_hz = 48000
        rng = np.random.default_rng(15)
        t_s = np.arange(int(round(seconds * fs_hz))) / fs_hz
        x = 0.316 * np.sin(2 * np.pi * 997.0 * t_s)[:, None] + 0.003 * rng.standard_normal((t_s.size, 2))
        tmp = path.with_suffix(".tmp.wav")
        sf.write(tmp, x, fs_hz, subtype="PCM_24")
        os.replace(tmp, path)  # an interrupted run leaves no half-written file behind
    return path


def one_second_file() -> Path:
    return test_file(1.0)


def spec_file() -> Path:
    path = OUT / "startup_spec.yaml"
    if not path.exists() or path.read_text() != SPEC:
        path.write_text(SPEC)
    return path


def run_once(argv: list[str], env: dict, ok_codes=(0,)) -> tuple[float, float]:
    """(wall_s, cpu_s) of one whole process; cpu = user + sys of the child."""
    t0 = time.perf_counter()
    # cwd outside the checkout: ``python -m`` puts the working folder first on sys.path
    proc = subprocess.Popen(argv, env=env, cwd=str(OUT), stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    err = proc.stderr.read().decode(errors="replace")  # (read before waiting: a full pipe would block the child)
    _, status, usage = os.wait4(proc.pid, 0)
    wall_s = time.perf_counter() - t0
    proc.returncode = os.waitstatus_to_exitcode(status)
    proc.stderr.close()
    if proc.returncode not in ok_codes:
        raise SystemExit(f"{' '.join(argv)} failed ({proc.returncode}):\n{err}")
    return wall_s, usage.ru_utime + usage.ru_stime


def _group(module: str) -> str:
    top = module.split(".")[0]
    if top == "masterqc":
        return ".".join(module.split(".")[:3])
    if top in ("_soundfile", "cffi", "_cffi_backend"):
        return "soundfile"
    return top if top in ("numpy", "scipy", "soundfile") else "python and other libraries"


def _attribute(lines: list[str]) -> dict[str, int]:
    """``{group: us}`` from one ``-X importtime`` log: a module's self time goes to the group of the
    outermost import that is not masterqc's own in its chain (what masterqc asked for), or to its own
    masterqc group; so numpy.testing loaded by SciPy's array-API layer counts as SciPy's."""
    import re
    stack: list[tuple[int, str, int, list]] = []
    for line in lines:
        m = re.match(r"import time:\s+(\d+) \|\s+\d+ \|( *)(\S+)", line)
        if not m:
            continue
        level = len(m.group(2)) // 2
        kids = []
        while stack and stack[-1][0] > level:
            kids.append(stack.pop())
        stack.append((level, m.group(3), int(m.group(1)), kids))
    out: dict[str, int] = {}

    def walk(node, owner):
        _, name, self_us, kids = node
        if owner is None or owner.startswith("masterqc"):
            owner = _group(name)
        out[owner] = out.get(owner, 0) + self_us
        for k in kids:
            walk(k, owner)
    for root in stack:
        walk(root, None)
    return out


def imports(py: str, envs: dict[str, dict], runs: int) -> None:
    """Median ms per group of the measure command's imports, for each ``{label: env}``, the runs
    interleaved (see the module docstring)."""
    wav = str(one_second_file())
    per_run: dict[str, list] = {label: [] for label in envs}
    for _ in range(runs):
        for label, env in envs.items():
            proc = subprocess.run([py, "-X", "importtime", "-m", "masterqc", "measure", wav, "--json", "--quiet"],
                                  env=env, cwd=str(OUT), stdout=subprocess.DEVNULL, stderr=subprocess.PIPE,
                                  text=True, check=True)
            per_run[label].append(_attribute(proc.stderr.splitlines()))
    med = {}
    for label, rows in per_run.items():
        names = set().union(*rows)
        med[label] = {g: statistics.median(r.get(g, 0) for r in rows) / 1000.0 for g in names}
        med[label]["total"] = statistics.median(sum(r.values()) for r in rows) / 1000.0
    first = next(iter(med))
    order = sorted((g for g in set().union(*med.values()) if g != "total"), key=lambda g: -med[first].get(g, 0.0))
    print(f"\nimport time of masterqc measure, ms, median of {runs} runs, by what masterqc imported "
          f"(a module's imports count with it), load {os.getloadavg()[0]:.1f}")
    print(f"  {'group':<40}" + "".join(f"{label:>12}" for label in med))
    for g in order + ["total"]:
        if g == "total" or max(m.get(g, 0.0) for m in med.values()) >= 1.0:
            print(f"  {g:<40}" + "".join(f"{m.get(g, 0.0):12.1f}" for m in med.values()))


def split(py: str, env: dict, seconds: float, runs: int) -> None:
    """Median per stage of ``check`` on a ``seconds``-long file (see the module docstring)."""
    import json
    wav = str(test_file(seconds))
    log = OUT / "split-stages.jsonl"
    cpu_json = OUT / "split-analyzers.json"
    out_dir = OUT / "split-out"
    argv = [py, "-m", "masterqc", "check", wav, "--spec", str(spec_file()), "--out", str(out_dir),
            "--format", "json", "--quiet"]
    senv = dict(env, MASTERQC_STAGE_LOG=str(log), MASTERQC_ANALYZER_CPU_JSON=str(cpu_json))
    run_once(argv, env, ok_codes=(0, 1))  # warm the page cache
    rows: dict[str, list] = {}
    for _ in range(runs):
        log.unlink(missing_ok=True)
        wall, cpu = run_once(argv, senv, ok_codes=(0, 1))
        stages = {}
        for line in log.read_text().splitlines():
            r = json.loads(line)
            w, c = stages.get(r["stage"], (0.0, 0.0))
            stages[r["stage"]] = (w + (r["wall_s"] or 0.0), c + (r["cpu_s"] or 0.0))
        an = json.loads(cpu_json.read_text())
        named = sum(v[1] for k, v in stages.items())
        stages["rest of the process (exit, tear-down, unlogged)"] = (wall - sum(v[0] for v in stages.values()),
                                                                       cpu - named)
        stages["whole process"] = (wall, cpu)
        for name, (p, f) in an["analyzers"].items():
            stages[f"  measure: {name} (thread CPU, process + finish)"] = (float("nan"), p + f)
        stages["  measure: engine, reading, result (process CPU less the analyzers')"] = (
            float("nan"), an["process_cpu_s"] - sum(p + f for p, f in an["analyzers"].values()))
        for k, v in stages.items():
            rows.setdefault(k, []).append(v)
    order = ["startup", "spec_load", "import_measure", "measure"]
    order += sorted(k for k in rows if k.startswith("  measure: ")) + ["judge", "write_json_csv"]
    order += [k for k in rows if k not in order]
    print(f"\nper stage, masterqc check on a {seconds:g} s stereo 48 kHz 24-bit file, --format json, "
          f"median of {runs} runs, load {os.getloadavg()[0]:.1f}")
    print(f"{'stage':<64} {'wall s':>8} {'cpu s':>8}")
    for k in order:
        if k in rows:
            w = statistics.median(v[0] for v in rows[k])
            c = statistics.median(v[1] for v in rows[k])
            print(f"{k:<64} {'' if w != w else f'{w:8.3f}':>8} {c:8.3f}")
    print("(startup: since the process was created, to the command's first line; analyzers run on up to "
          "2 threads, so their CPU may exceed the measure stage's wall)")


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--runs", type=int, default=15, help="runs per command (median reported)")
    ap.add_argument("--base", help="another masterqc checkout to compare (put first on PYTHONPATH)")
    ap.add_argument("--strict", action="store_true", help="exit 1 when the target is missed")
    ap.add_argument("--imports", action="store_true", help="also print the import-time breakdown by module group")
    ap.add_argument("--split", type=float, metavar="SECONDS",
                    help="also print the per-stage split of check on a file this long (e.g. 30)")
    args = ap.parse_args(argv)

    py = sys.executable
    wav = str(one_second_file())
    spec = str(spec_file())
    check_out = str(OUT / "startup-check")
    env = dict(os.environ)
    env.pop("PYTHONPATH", None)
    # an installed package has its .pyc files: time that, not compiling the sources every run
    env.pop("PYTHONDONTWRITEBYTECODE", None)
    env["PYTHONPATH"] = str(ROOT)
    commands = {
        "python -c pass": ([py, "-c", "pass"], env),
        "import numpy, soundfile": ([py, "-c", "import numpy, soundfile"], env),
        "+ scipy.fft, ndimage, special": (
            [py, "-c", "import numpy, soundfile, scipy.fft, scipy.ndimage, scipy.special"], env),
        "masterqc measure (this)": ([py, "-m", "masterqc", "measure", wav, "--json", "--quiet"], env),
        "masterqc check (this)": ([py, "-m", "masterqc", "check", wav, "--spec", spec, "--out", check_out,
                                   "--format", "json", "--quiet"], env),
    }
    if args.base:
        base_env = dict(env, PYTHONPATH=str(Path(args.base).resolve()))
        commands["masterqc measure (--base)"] = (
            [py, "-m", "masterqc", "measure", wav, "--json", "--quiet"], base_env)
        commands["masterqc check (--base)"] = (
            [py, "-m", "masterqc", "check", wav, "--spec", spec, "--out", check_out + "-base",
             "--format", "json", "--quiet"], base_env)

    ok = (0, 1)  # check exits 1 when the file fails the spec: still a whole run
    for argv_, env_ in commands.values():  # warm the page cache and .pyc files
        run_once(argv_, env_, ok)
    walls = {k: [] for k in commands}
    cpus = {k: [] for k in commands}
    for _ in range(args.runs):
        for name, (argv_, env_) in commands.items():  # interleaved: load changes hit every row
            w, c = run_once(argv_, env_, ok)
            walls[name].append(w)
            cpus[name].append(c)

    med_w = {k: statistics.median(v) for k, v in walls.items()}
    med_c = {k: statistics.median(v) for k, v in cpus.items()}
    print(f"start-up, 1 s stereo 48 kHz 24-bit file, median of {args.runs} runs, load "
          f"{os.getloadavg()[0]:.1f} on {os.cpu_count()} cores")
    print(f"{'command':<30} {'wall s':>8} {'cpu s':>8}")
    for k in commands:
        print(f"{k:<30} {med_w[k]:8.3f} {med_c[k]:8.3f}")
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
        cb, ct = "masterqc check (--base)", "masterqc check (this)"
        print(f"check, this / --base:               wall {med_w[ct] / med_w[cb]:.2f}x, "
              f"cpu {med_c[ct] / med_c[cb]:.2f}x")
    sci = "+ scipy.fft, ndimage, special"
    print(f"SciPy's FFT, ndimage, special imports (the scipy row less the numpy, soundfile row; "
          f"a measure from before masterqc.measure.npkernels paid them): "
          f"wall {med_w[sci] - med_w[floor]:.3f} s, cpu {med_c[sci] - med_c[floor]:.3f} s")
    met = med_w[this] <= TARGET_WALL_S
    print(f"target: measure <= {TARGET_WALL_S:.2f} s wall on an idle machine: "
          f"{'met' if met else 'missed'} ({med_w[this]:.3f} s; cpu {med_c[this]:.3f} s; "
          "wall is stretched on a loaded machine, read the cpu column there)")
    if args.imports:
        imports(py, {"this": env, **({"--base": base_env} if args.base else {})}, args.runs)
    if args.split:
        split(py, env, args.split, args.runs)
    return 1 if (args.strict and not met) else 0


if __name__ == "__main__":
    sys.exit(main())

#!/usr/bin/env python3
"""Run every ``bench/bench_*.py`` in turn, each in its own subprocess.

Prints each benchmark's output as it runs and a summary at the end; exits 1 if
any benchmark failed (non-zero exit or a crash), 0 otherwise.  Extra arguments
are passed to every benchmark (e.g. ``--strict``).  ``--only NAME`` runs the
benchmarks whose file name contains NAME.
"""

from __future__ import annotations

import argparse
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
#: benchmarks that compare this tree with another one and need ``--base-root DIR`` (skipped without it)
NEEDS_BASE_TREE = {"bench_identity.py", "bench_memory_duration.py"}


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description="Run every bench/bench_*.py")
    ap.add_argument("--only", help="run only benchmarks whose file name contains this")
    args, passthrough = ap.parse_known_args(argv)
    benches = sorted(HERE.glob("bench_*.py"))
    if args.only:
        benches = [b for b in benches if args.only in b.name]
    if not benches:
        print("run_all: no benchmark matched", file=sys.stderr)
        return 1
    results = []
    for bench in benches:
        if bench.name in NEEDS_BASE_TREE and "--base-root" not in passthrough:
            print(f"\n===== {bench.name} =====\nrun_all: skipped: it compares with an older tree; "
                  f"run it alone with --base-root DIR", flush=True)
            continue
        print(f"\n===== {bench.name} =====", flush=True)
        t = time.perf_counter()
        try:
            rc = subprocess.call([sys.executable, str(bench), *passthrough], cwd=str(HERE.parent))
        except OSError as exc:
            print(f"run_all: cannot start {bench.name}: {exc}", file=sys.stderr)
            rc = -1
        results.append((bench.name, rc, time.perf_counter() - t))
    print("\n===== summary =====")
    for name, rc, el in results:
        print(f"  {name:<32} {'ok' if rc == 0 else f'FAILED (exit {rc})':<18} {el:7.1f} s")
    return 0 if all(rc == 0 for _, rc, _ in results) else 1


if __name__ == "__main__":
    sys.exit(main())

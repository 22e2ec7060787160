#!/usr/bin/env python3
"""Would a compiled-kernel library (numba) earn its place for the K-weighting?  Figures only.

masterqc does not depend on numba.  This script measures, with a Python that has numba
installed (it is looked for, never installed here), what it would give on the one recursive
kernel of the core pass, the two K-weighting biquads, against what runs now (scipy's compiled
cascade kernel, loaded by masterqc.measure.iir without importing scipy.signal):

- the CPU of ``import numba`` in a fresh process;
- the first call of a jitted kernel with an empty cache (compilation) and with a warm
  on-disk cache (``cache=True``, in a temporary NUMBA_CACHE_DIR);
- per 65536-frame stereo block: scipy's kernel (with the copy it needs, the input being
  read-only), a plain numba port of the same recursion, and a numba kernel that runs both
  sections of both channels in one pass over the interleaved block (the channels' two
  independent recursions overlap in the CPU, and the transposing copy is folded in);
- bit identity of both numba kernels with scipy's kernel on the same blocks;
- the install size of numba and llvmlite.

Usage (any interpreter with numpy and numba; scipy's kernel is taken from masterqc's venv):
``/path/to/python-with-numba bench/bench_kernel_numba.py [--site-packages .venv/lib/python3.11/site-packages]``
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent

KERNELS = r'''
import numba, numpy as np

@numba.njit(cache=True, nogil=True)
def sos_rows(sos, x, zi):
    """x (channels, n) in place, zi (channels, sections, 2): scipy's order of operations."""
    nch, n = x.shape
    for c in range(nch):
        for s in range(sos.shape[0]):
            b0 = sos[s, 0]; b1 = sos[s, 1]; b2 = sos[s, 2]; a1 = sos[s, 4]; a2 = sos[s, 5]
            z0 = zi[c, s, 0]; z1 = zi[c, s, 1]
            for i in range(n):
                xi = x[c, i]
                y = b0 * xi + z0
                z0 = b1 * xi - a1 * y + z1
                z1 = b2 * xi - a2 * y
                x[c, i] = y
            zi[c, s, 0] = z0; zi[c, s, 1] = z1

@numba.njit(cache=True, nogil=True)
def kweight_stereo(sos, xin, out, zi):
    """Both sections, both channels, one pass: xin (n, 2) read-only, out (2, n)."""
    n = xin.shape[0]
    b00 = sos[0, 0]; b01 = sos[0, 1]; b02 = sos[0, 2]; a01 = sos[0, 4]; a02 = sos[0, 5]
    b10 = sos[1, 0]; b11 = sos[1, 1]; b12 = sos[1, 2]; a11 = sos[1, 4]; a12 = sos[1, 5]
    p0 = zi[0, 0, 0]; p1 = zi[0, 0, 1]; q0 = zi[0, 1, 0]; q1 = zi[0, 1, 1]
    r0 = zi[1, 0, 0]; r1 = zi[1, 0, 1]; s0 = zi[1, 1, 0]; s1 = zi[1, 1, 1]
    for i in range(n):
        x = xin[i, 0]
        y = b00 * x + p0; p0 = b01 * x - a01 * y + p1; p1 = b02 * x - a02 * y
        u = b10 * y + q0; q0 = b11 * y - a11 * u + q1; q1 = b12 * y - a12 * u
        out[0, i] = u
        x = xin[i, 1]
        y = b00 * x + r0; r0 = b01 * x - a01 * y + r1; r1 = b02 * x - a02 * y
        v = b10 * y + s0; s0 = b11 * y - a11 * v + s1; s1 = b12 * y - a12 * v
        out[1, i] = v
    zi[0, 0, 0] = p0; zi[0, 0, 1] = p1; zi[0, 1, 0] = q0; zi[0, 1, 1] = q1
    zi[1, 0, 0] = r0; zi[1, 0, 1] = r1; zi[1, 1, 0] = s0; zi[1, 1, 1] = s1
'''

CHILD_IMPORT = "import time; t = time.process_time(); import numba; print(time.process_time() - t)"

CHILD_FIRST = r'''
import sys, time
sys.path.insert(0, sys.argv[1])
import numpy as np
t = time.process_time()
import nbkernels
x = np.zeros((2, 64)); z = np.zeros((2, 2, 2)); sos = np.array([[1.0, 0, 0, 1, 0, 0]] * 2)
nbkernels.sos_rows(sos, x, z)
nbkernels.kweight_stereo(sos, np.zeros((64, 2)), np.empty((2, 64)), z)
print(time.process_time() - t)
'''


def child(code: str, *args, env=None) -> float:
    out = subprocess.run([sys.executable, "-c", code, *args], capture_output=True, text=True, check=True,
                         env=dict(os.environ, **(env or {})))
    return float(out.stdout.strip().splitlines()[-1])


def dir_mb(path: Path) -> float:
    return sum(f.stat().st_size for f in path.rglob("*") if f.is_file()) / 1e6


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--site-packages", default=str(ROOT / ".venv/lib/python3.11/site-packages"),
                    help="where scipy (for its kernel) is found when this interpreter lacks it")
    ap.add_argument("--blocks", type=int, default=200)
    args = ap.parse_args(argv)
    try:
        import numba
    except ImportError:
        print("bench_kernel_numba: numba is not installed in this interpreter; nothing to measure")
        return 0
    import numpy as np
    sys.path.append(args.site_packages)
    sys.path.insert(0, str(ROOT))
    from masterqc.measure import iir
    from masterqc.measure.kweight import kweighting_sos
    kernel = iir.compiled_kernel()

    with tempfile.TemporaryDirectory() as tmp:
        Path(tmp, "nbkernels.py").write_text(KERNELS)
        cache = {"NUMBA_CACHE_DIR": str(Path(tmp, "cache"))}
        imp = sorted(child(CHILD_IMPORT) for _ in range(3))[1]
        cold = child(CHILD_FIRST, tmp, env=cache)
        warm = sorted(child(CHILD_FIRST, tmp, env=cache) for _ in range(3))[1]
        os.environ.update(cache)
        sys.path.insert(0, tmp)
        import nbkernels

    sos = kweighting_sos(48000)
    rng = np.random.default_rng(2026)
    block = 0.3 * rng.standard_normal((65536, 2))
    block.flags.writeable = False
    z0 = np.zeros((2, 2, 2))

    def scipy_kernel():
        y = np.array(block.T, order="C")
        z = z0.copy()
        kernel(sos, y, z)
        return y

    def numba_rows():
        y = np.array(block.T, order="C")
        z = z0.copy()
        nbkernels.sos_rows(sos, y, z)
        return y

    def numba_fused():
        out = np.empty((2, block.shape[0]))
        z = z0.copy()
        nbkernels.kweight_stereo(sos, block, out, z)
        return out

    ref = scipy_kernel()
    same = {"numba plain": np.array_equal(numba_rows(), ref), "numba fused": np.array_equal(numba_fused(), ref)}
    per = {}
    for _ in range(3):                                   # interleaved rounds, medians
        for name, fn in (("scipy kernel", scipy_kernel), ("numba plain", numba_rows), ("numba fused", numba_fused)):
            t = time.thread_time()
            for _ in range(args.blocks):
                fn()
            per.setdefault(name, []).append((time.thread_time() - t) / args.blocks)
    site = Path(numba.__file__).resolve().parent.parent
    print(f"[numba] K-weighting, stereo 48 kHz, 65536-frame blocks, {args.blocks} blocks x 3 rounds, medians; "
          f"load average {' '.join(f'{v:.2f}' for v in os.getloadavg())}")
    print(f"  import numba (fresh process, CPU):           {imp:6.3f} s")
    print(f"  first call, empty cache (compile), CPU:      {cold:6.3f} s (import included)")
    print(f"  first call, warm cache, CPU:                 {warm:6.3f} s (import included)")
    print(f"  install size: numba {dir_mb(site / 'numba'):.0f} MB, llvmlite {dir_mb(site / 'llvmlite'):.0f} MB")
    blocks_10min = 600 * 48000 / 65536
    base = sorted(per["scipy kernel"])[1]
    for name, v in per.items():
        m = sorted(v)[1]
        tag = "" if name == "scipy kernel" else f"  bit-identical to scipy's: {same[name]}"
        print(f"  {name:<14} {m * 1e3:6.3f} ms per block, {m * blocks_10min:6.3f} s per 10 min stereo "
              f"({m / base:4.2f}x){tag}")
    saved = (base - sorted(per["numba fused"])[1]) * blocks_10min
    print(f"  10 min stereo: the fused kernel saves {saved:.3f} s of CPU against {warm:.3f} s of warm-cache "
          f"start-up ({cold:.3f} s on a cold cache)")
    return 0


if __name__ == "__main__":
    sys.exit(main())

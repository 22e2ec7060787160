#!/usr/bin/env python3
"""Sampling-detector detection table: the tuning corpora and the held-back validation corpus side by side.

Scores ``bench/corpus_validation.py`` (validation set, seeds 5000-5999: soxr, sox, ffmpeg swr, FFT resample,
independent hold/linear/zero-stuff, naive synthesis and decimation) and, when they are present on the branch,
``bench/corpus_tuning_upsampling.py`` and ``bench/corpus_tuning_aliasing.py`` (tuning set, seeds 1000-1999)
through ``masterqc measure --json``, and prints found / false-alarm rates per detector, per tool family and per
group (``bench/sampling_scoring.py`` does the work).  The thresholds may be tuned on the tuning columns only.

    .venv/bin/python bench/bench_sampling_validation.py            # full sets (about 250 validation cases)
    .venv/bin/python bench/bench_sampling_validation.py --quick    # the unit-test slices only
"""

from __future__ import annotations

import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

import sampling_scoring  # noqa: E402

CORPORA = (("corpus_tuning_upsampling.py", 1000), ("corpus_tuning_aliasing.py", 1000), ("corpus_validation.py", 5000))


def main(argv=None) -> int:
    argv = list(sys.argv[1:] if argv is None else argv)
    passthrough = [a for a in argv if a in ("--quick", "--reuse")]
    args = []
    for name, seed in CORPORA:
        if (HERE / name).exists():
            args += ["--corpus", str(HERE / name), "--seed", str(seed)]
        else:
            print(f"bench_sampling_validation: {name} not on this branch; its column is left out", file=sys.stderr)
    return sampling_scoring.main(args + passthrough)


if __name__ == "__main__":
    sys.exit(main())

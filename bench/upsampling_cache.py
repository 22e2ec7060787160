#!/usr/bin/env python3
"""Fast re-scoring of the upsampling verdict while tuning the bandwidth analysis.

``build``: measures every case once (the analyzers ``masterqc measure`` runs, in process, as
:mod:`score_upsampling` does) and keeps, per case, the spectral front end's result, the stream info and the
other analyzers' measurements in a pickle.  ``score``: re-runs only :func:`masterqc.measure.bandwidth.assess`
and the provenance post-step on the kept inputs (seconds for a whole corpus) and scores them like
:mod:`score_upsampling`.  Tuning corpora only (seeds 1000-1999).

Usage: ``bench/upsampling_cache.py build --seeds 1000,1001 [--quick] [--only PREFIX] --out F.pkl``;
``bench/upsampling_cache.py score F.pkl [F2.pkl ...]``.
"""

from __future__ import annotations

import argparse
import pickle
import sys
from collections import defaultdict
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))
sys.path.insert(0, str(HERE))

import score_upsampling as su  # noqa: E402


def build(args) -> int:
    from masterqc.measure import bandwidth
    kept = {}
    orig = bandwidth.assess

    def spy(fe, info):
        kept["fe"], kept["info"] = fe, info
        return orig(fe, info)
    bandwidth.assess = spy
    rows = []
    for seed in [int(s) for s in args.seeds.split(",")]:
        if not 1000 <= seed <= 1999:
            raise SystemExit("tuning seeds only (1000-1999)")
        for case in su.cached_cases(args.corpus, seed, args.quick, None, args.only):
            kept.clear()
            m = su.measure_case(case)
            rows.append({"name": case.name, "family": case.family, "group": case.group, "expect": case.expect,
                         "fe": kept.get("fe"), "info": kept.get("info"), "m": m})
            print(".", end="", flush=True, file=sys.stderr)
    with open(args.out, "wb") as f:
        pickle.dump(rows, f)
    print(f"\n{len(rows)} cases kept in {args.out}", file=sys.stderr)
    return 0


def rescore(row) -> dict:
    from masterqc.measure import bandwidth
    from masterqc.measure.registry import post_steps
    m = dict(row["m"])
    if row["fe"] is not None:
        m.update(bandwidth.assess(row["fe"], row["info"]).measurements())
    for step in post_steps():
        m = step(m)
    return m


def score(args) -> int:
    rows = []
    for p in args.files:
        with open(p, "rb") as f:
            rows.extend(pickle.load(f))
    out = []
    for r in rows:
        m = rescore(r)

        class C:
            expect = r["expect"]
        out.append({"name": r["name"], "family": r["family"], "group": r["group"], "expect": r["expect"],
                    "outcome": su.score_case(C, m), "got": {k: m.get(k) for k in (
                        "upsampled_from_hz", "upsampled_evidence", "effective_bandwidth_hz", "bandwidth_note")}})
    by_group = defaultdict(list)
    for r in out:
        by_group[r["group"]].append(r)
    for g in sorted(by_group):
        print(su.fmt_row(g, su.tally(by_group[g])))
    scored = [r for r in out if not r["group"].startswith("ambiguous")]
    print(su.fmt_row("ALL (scored)", su.tally(scored)))
    amb = [r for r in out if r["group"].startswith("ambiguous")]
    if amb:
        print("ambiguous (not scored): called upsampled in "
              f"{sum(r['got']['upsampled_from_hz'] is not None for r in amb)}/{len(amb)}")
    for r in out:
        bad = [k for k, o in r["outcome"].items() if o in ("miss", "wrong_rate", "false_alarm")]
        if bad:
            print(f"  {r['name']}: {', '.join(r['outcome'][k] for k in bad)}; expected {r['expect']}; got {r['got']}")
    return 0


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    sub = ap.add_subparsers(dest="cmd", required=True)
    b = sub.add_parser("build")
    b.add_argument("--corpus", default="corpus_tuning_upsampling")
    b.add_argument("--seeds", default="1000")
    b.add_argument("--quick", action="store_true")
    b.add_argument("--only", default=None)
    b.add_argument("--out", required=True)
    s = sub.add_parser("score")
    s.add_argument("files", nargs="+")
    args = ap.parse_args(argv)
    return build(args) if args.cmd == "build" else score(args)


if __name__ == "__main__":
    sys.exit(main())

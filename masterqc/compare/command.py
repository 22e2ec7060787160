"""``masterqc compare MASTER DELIVERABLE``: wiring of arguments, outputs and exit codes only."""

from __future__ import annotations

import json
import os
import sys
from pathlib import Path

#: outputs ``compare`` can write, and its default
FORMATS = ("json", "html", "pdf")


def add_parser(sub) -> None:
    c = sub.add_parser("compare", help="measure a deliverable against the master it was made from")
    c.add_argument("paths", nargs="+", metavar="MASTER DELIVERABLE",
                   help="the master and the deliverable made from it (any rates and bit depths); with --pair, "
                        "folders to search for pairs")
    c.add_argument("--pair", metavar="DELIVERABLE_GLOB=MASTER_GLOB", default=None,
                   help="pair files below the folders by name, e.g. '*_44k16.wav=*_96k24.wav' (same folder, "
                        "same '*' part); writes every pair's reports and index.html")
    c.add_argument("--spec", default=None,
                   help="delivery spec whose derivation: section is judged (without it: measured only)")
    c.add_argument("--out", default=".", help="folder for the result and reports (default: the current folder)")
    c.add_argument("--format", dest="formats", default=None,
                   help="comma-separated outputs from json,html,pdf (default: all three)")
    c.add_argument("--json", action="store_true", help="print the comparison result to standard output as well")
    c.add_argument("--quiet", action="store_true", help="no progress and no summary lines")
    c.set_defaults(func=cmd_compare)


def output_stem(master, deliverable) -> str:
    """``<deliverable stem>.from.<master stem>``, made of safe characters only."""
    from masterqc.batch.names import safe_component
    return safe_component(f"{Path(deliverable).stem}.from.{Path(master).stem}")


def run_compare(master, deliverable, spec_path=None, out_dir=".", formats=FORMATS, progress=None,
                loaded=None) -> dict:
    """Measure, judge (when a spec is given: its path, or ``loaded``, a spec loaded already) and write;
    returns the result dict (with ``outputs``)."""
    from masterqc.compare.measure import compare_files
    from masterqc.fileio import write_atomic
    from masterqc.jsonutil import jsonable

    section = None
    if loaded is None and spec_path is not None:
        from masterqc.spec.loader import load_spec
        loaded = load_spec(spec_path)  # SpecError -> exit 2, before any audio is read
    if loaded is not None:
        spec_path = getattr(loaded, "path", None) or spec_path
        section = getattr(loaded.spec, "derivation", None)
    ceiling = 0.0
    if section is not None and section.true_peak_after is not None:
        ceiling = section.true_peak_after.max_dbtp
    comparison = compare_files(master, deliverable, true_peak_ceiling_dbtp=ceiling, progress=progress)
    result = jsonable(comparison.model_dump(mode="json"))
    if loaded is not None:
        result["spec"] = {"name": loaded.name, "path": os.fspath(spec_path) if spec_path is not None else None,
                          "files": [dict(f) for f in loaded.files]}
        if section is None:
            result["findings"], result["verdict"] = [], None
            result["spec"]["note"] = "the spec has no derivation: section; nothing was judged"
        else:
            from masterqc.compare.judge import judge
            findings, verdict = judge(section, result)
            result["findings"] = [f.to_dict() for f in findings]
            result["verdict"] = verdict
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    stem = output_stem(master, deliverable)
    outputs = {fmt: f"{stem}.{fmt}" for fmt in formats}
    result["outputs"] = outputs
    payloads = []
    if "html" in formats or "pdf" in formats:
        from masterqc.compare.render import render_html, render_pdf
        html = render_html(result)
        if "html" in formats:
            payloads.append((out / outputs["html"], html.encode("utf-8")))
        if "pdf" in formats:
            payloads.append((out / outputs["pdf"], render_pdf(result, html=html)))
    if "json" in formats:
        payloads.insert(0, (out / outputs["json"], (json.dumps(result, indent=2) + "\n").encode("utf-8")))
    for path, data in payloads:
        write_atomic(path, data)
    return result


def cmd_compare(args) -> int:
    from masterqc.compare.render import summary_sentences
    from masterqc.errors import UsageError

    if args.formats is None:
        formats = FORMATS
    else:
        wanted = {x.strip().lower() for x in args.formats.split(",") if x.strip()}
        unknown = sorted(wanted - set(FORMATS))
        if unknown or not wanted:
            raise UsageError(f"--format {args.formats}: use a comma-separated list of {', '.join(FORMATS)}")
        formats = tuple(f for f in FORMATS if f in wanted)
    if args.pair is not None:
        from masterqc.compare.pairs import run_pairs
        return run_pairs(args.paths, args.pair, args.spec, args.out, formats, args.quiet, sys.stdout)
    if len(args.paths) != 2:
        raise UsageError(f"compare takes MASTER DELIVERABLE (two files), got {len(args.paths)} path(s); "
                         "to pair files in folders, use --pair")
    args.master, args.deliverable = args.paths
    progress = None
    if not args.quiet and sys.stderr.isatty():
        def progress(step):
            sys.stderr.write(f"\rcomparing: {step:<20s}")
            sys.stderr.flush()
    result = run_compare(args.master, args.deliverable, args.spec, args.out, formats, progress)
    if progress is not None:
        sys.stderr.write("\r" + " " * 32 + "\r")
    if args.json:
        json.dump(result, sys.stdout, indent=2)
        sys.stdout.write("\n")
    elif not args.quiet:
        verdict = result.get("verdict")
        head = (verdict or "measured").upper()
        sys.stdout.write(f"{head:8s} {args.deliverable} against {args.master}\n")
        for line in summary_sentences(result):
            sys.stdout.write(f"  - {line}\n")
        for f in result.get("findings", []):
            if f["status"] in ("fail", "warn", "error"):
                sys.stdout.write(f"  {f['status'].upper()} {f['check']}: {f['message']}\n")
        outs = ", ".join(os.path.join(args.out, v) for v in result["outputs"].values())
        sys.stdout.write(f"  -> {outs}\n")
    return 1 if result.get("verdict") in ("fail", "error") else 0

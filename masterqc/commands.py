"""Sub-commands beyond ``measure`` and ``schema``: each adds its parser here.

Each command's function lives in the layer that owns the work (spec, pipeline,
report, batch); this module only wires arguments to them.
"""

from __future__ import annotations

import json
import sys


def add_parsers(sub, only: str | None = None) -> None:
    """Add the sub-parsers of check, judge, spec, report, demo, runs and compare, in that order
    (the order of ``masterqc --help``); with ``only``, just that command's (nothing when it is not one
    of them)."""
    for name, add in ADDERS.items():
        if only is None or only == name:
            add(sub)


def _add_compare(sub) -> None:
    from masterqc.compare.command import add_parser
    add_parser(sub)


# ---------------------------------------------------------------- check

def _add_check(sub) -> None:
    from masterqc.formats import ALL_FORMATS, DEFAULT_FORMATS
    c = sub.add_parser("check", help="check masters against a delivery spec and write a result per file")
    c.add_argument("paths", nargs="+", metavar="PATH",
                   help="master files, checked in the order given, or folders (searched recursively; see below)")
    c.add_argument("--spec", required=True, help="delivery spec (YAML); with folders also a spec map")
    c.add_argument("--spec-library", action="append", metavar="DIR",
                   help="a folder whose specs extends: may name besides the spec's own folder (repeatable)")
    c.add_argument("--out", default=".", help="folder for the results (default: the current folder)")
    c.add_argument("--format", dest="formats", default=None,
                   help=f"comma-separated outputs from {','.join(ALL_FORMATS)} "
                        f"(default: {','.join(DEFAULT_FORMATS)}; json only while reports cannot be rendered)")
    c.add_argument("--layout", help="channel labels overriding the files', e.g. L,R,C,LFE,Ls,Rs")
    c.add_argument("--quiet", action="store_true", help="no progress display and no per-file lines")
    from masterqc.report.command import add_report_arguments
    add_report_arguments(c)
    from masterqc.batch.cli import add_batch_arguments
    add_batch_arguments(c)
    c.set_defaults(func=cmd_check)


def cmd_check(args) -> int:
    from masterqc.formats import formats_for
    from masterqc.measure.options import MeasureOptions
    from masterqc.pipeline import check_file, exit_code_for, unique_stems
    from masterqc.progress import Progress
    from masterqc.spec.loader import load_spec

    formats = formats_for(args.formats, warn=lambda text: sys.stderr.write(f"masterqc: note: {text}\n"))
    from masterqc.batch.cli import cmd_check_batch, wants_batch
    from masterqc.report.fields import parse_fields
    fields = parse_fields(getattr(args, "fields", None))  # UsageError -> exit 2
    pages = getattr(args, "pages", "all")
    if wants_batch(args):
        if fields or pages != "all":
            from masterqc.errors import UsageError
            raise UsageError("--field and --pages apply to single files; for a folder, set the certificate's "
                             "fields in the spec's report: section, and re-render with masterqc report --pages")
        return cmd_check_batch(args, formats)
    from masterqc import stagelog
    stagelog.note_startup()  # interpreter, command line and the check layers, for bench/bench_startup.py --split
    with stagelog.stage("spec_load"):
        loaded = load_spec(args.spec, libraries=args.spec_library or ())  # SpecError -> exit 2 (before any file is touched)
    loaded.report_fields.update(fields)
    if len(args.paths) == 1:
        from masterqc.cli import start_one_file
        start_one_file(args.paths[0])
    _print_spec_warnings(loaded, quiet=args.quiet)
    from masterqc.cli import parse_layout
    layout = parse_layout(args.layout)
    base = MeasureOptions(channel_layout=layout)
    outcomes = []
    for path, stem in zip(args.paths, unique_stems(args.paths)):
        from masterqc.fileio import shown
        progress = Progress(f"checking {shown(path)}", enabled=False if args.quiet else None)
        try:
            result = check_file(path, loaded, args.out, formats, stem=stem, base_options=base,
                                progress=progress.update, pages=pages)
        finally:
            progress.close()
        outcomes.append({k: result[k] for k in ("verdict", "error") if k in result})
        if not args.quiet:
            sys.stdout.write(_summary_line(path, result, args.out) + "\n")
            sys.stdout.flush()
    return exit_code_for(outcomes)


def _summary_line(path, result: dict, out_dir: str) -> str:
    """``VERDICT path (n fail, n warn) -> outputs``, then one indented line per problem, worst first."""
    import os
    from masterqc.fileio import shown
    from masterqc.problems import problem_lines, ranked_problems
    counts = {}
    for f in result["findings"]:
        counts[f["status"]] = counts.get(f["status"], 0) + 1
    parts = [f"{counts[s]} {s}" for s in ("error", "fail", "warn") if counts.get(s)]
    detail = f" ({', '.join(parts)})" if parts else ""
    outs = ", ".join(os.path.join(out_dir, v) for v in result.get("outputs", {}).values())
    line = f"{result['verdict'].upper():5s} {shown(path)}{detail}"
    line += f" -> {shown(outs)}" if outs else ""
    for text in problem_lines(ranked_problems(result["findings"]), path=str(path)):
        line += "\n" + shown(text)
    n = result.get("normalisation") or {}
    if n.get("gain_db") is not None:
        line += f"\n      normalised to {n['target_lufs']:.1f} LUFS: gain {n['gain_db']:+.1f} dB"
        if n.get("true_peak_after_gain_dbtp") is not None:
            line += f", true peak {n['true_peak_after_gain_dbtp']:.1f} dBTP"
        if n.get("limiting_needed_db") is not None:
            line += f", peak limiting needed {n['limiting_needed_db']:.1f} dB (ceiling {n['ceiling_dbtp']:.1f} dBTP)"
    return line


# ---------------------------------------------------------------- judge

def _add_judge(sub) -> None:
    from masterqc.formats import ALL_FORMATS
    j = sub.add_parser("judge", help="judge saved results against a spec again, from their stored measurements "
                                     "(no audio is read)")
    j.add_argument("results", nargs="+", metavar="RESULT.json", help="results written by check or measure --json")
    j.add_argument("--spec", required=True, help="delivery spec (YAML) to judge against")
    j.add_argument("--spec-library", action="append", metavar="DIR",
                   help="a folder whose specs extends: may name besides the spec's own folder (repeatable)")
    j.add_argument("--out", default=".", help="folder for the new results (default: the current folder)")
    j.add_argument("--format", dest="formats", default="json",
                   help=f"comma-separated outputs from {','.join(ALL_FORMATS)} (default: json)")
    j.add_argument("--quiet", action="store_true", help="no per-file lines")
    j.set_defaults(func=cmd_judge)


def cmd_judge(args) -> int:
    """Re-judge every named result; exit 2 before anything is written when a result file is missing,
    invalid, or needs other measurement settings than the spec asks for."""
    from pathlib import Path

    from masterqc.formats import formats_for
    from masterqc.pipeline import exit_code_for, rejudge, unique_stems, write_outputs
    from masterqc.report.render import load_result
    from masterqc.spec.loader import load_spec

    formats = formats_for(args.formats)
    loaded = load_spec(args.spec, libraries=args.spec_library or ())  # SpecError -> exit 2
    judged = [rejudge(load_result(p), loaded, source=str(p)) for p in args.results]  # UsageError -> exit 2
    stems = unique_stems([Path(p).name for p in args.results])
    outcomes = []
    for path, stem, result in zip(args.results, stems, judged):
        result = write_outputs(result, args.out, stem, formats)
        outcomes.append({k: result[k] for k in ("verdict", "error") if k in result})
        if not args.quiet:
            sys.stdout.write(_summary_line(path, result, args.out) + "\n")
    return exit_code_for(outcomes)


# ---------------------------------------------------------------- spec

def _add_spec(sub) -> None:
    s = sub.add_parser("spec", help="validate delivery specs or print the spec format's JSON Schema")
    ssub = s.add_subparsers(dest="spec_command", metavar="SPEC_COMMAND", parser_class=sub._parser_class)
    ssub.required = True
    v = ssub.add_parser("validate", help="validate spec files (with their extends: bases)")
    v.add_argument("specs", nargs="+", metavar="SPEC")
    v.add_argument("--spec-library", action="append", metavar="DIR",
                   help="a folder whose specs extends: may name besides the spec's own folder (repeatable)")
    v.add_argument("--print", dest="print_resolved", action="store_true",
                   help="print each spec as resolved (bases merged, defaults filled) in JSON")
    v.set_defaults(func=cmd_spec_validate)
    sc = ssub.add_parser("schema", help="deprecated spelling of 'masterqc schema spec'")
    sc.set_defaults(func=cmd_spec_schema)


def cmd_spec_validate(args) -> int:
    from masterqc.errors import SpecError
    from masterqc.spec.loader import load_spec

    problems = []
    for path in args.specs:
        try:
            loaded = load_spec(path, libraries=args.spec_library or ())
        except SpecError as exc:
            problems.extend(exc.problems)
            continue
        _print_spec_warnings(loaded)
        n = _count_requirements(loaded.spec)
        bases = f", extends {', '.join(f['path'] for f in loaded.files[1:])}" if len(loaded.files) > 1 else ""
        from masterqc.fileio import shown
        sys.stdout.write(shown(f"ok  {path}: {loaded.name!r}, {n} requirement{'s' if n != 1 else ''}{bases}") + "\n")
        if args.print_resolved:
            json.dump(loaded.spec.model_dump(mode="json", exclude_none=True), sys.stdout, indent=2)
            sys.stdout.write("\n")
    if problems:
        raise SpecError(problems)
    return 0


def _print_spec_warnings(loaded, quiet: bool = False) -> None:
    """Likely typos in a spec (a positive LUFS target, a ceiling above 0 dBTP), one line each on standard error."""
    from masterqc.errors import SpecError
    if loaded.warnings and not quiet:
        for line in str(SpecError(loaded.warnings)).splitlines():
            sys.stderr.write(f"masterqc: warning: {line}\n")


def _count_requirements(spec) -> int:
    from masterqc.spec.types import Allowed, Requirement
    n = 0
    for name in type(spec).model_fields:
        section = getattr(spec, name)
        if hasattr(type(section), "model_fields"):
            n += sum(isinstance(getattr(section, k), (Allowed, Requirement)) for k in type(section).model_fields)
    return n


def cmd_spec_schema(args) -> int:
    sys.stderr.write("masterqc: note: 'masterqc spec schema' is deprecated; use 'masterqc schema spec' "
                     "(see CHANGELOG.md)\n")
    from masterqc.cli import schema_for
    json.dump(schema_for("spec"), sys.stdout, indent=2)
    sys.stdout.write("\n")
    return 0


# ---------------------------------------------------------------- report

def _add_report(sub) -> None:
    from masterqc.report.command import add_parser
    add_parser(sub)


# ---------------------------------------------------------------- runs

def _add_runs(sub) -> None:
    from masterqc.batch.cli import add_runs_parser
    add_runs_parser(sub)


# ---------------------------------------------------------------- demo

def _add_demo(sub) -> None:
    d = sub.add_parser("demo", help="make invented example masters, check them against the demo specs")
    d.add_argument("--out", default="demo-output", help="folder for the masters and reports (default: demo-output)")
    d.add_argument("--format", dest="formats", default=None, help="comma-separated outputs (default as for check)")
    d.add_argument("--jobs", type=int, default=None, metavar="N",
                   help="worker processes (default: up to 2; 1 runs everything in this process)")
    d.set_defaults(func=cmd_demo)


def cmd_demo(args) -> int:
    from masterqc.demo import run_demo
    return run_demo(args.out, args.formats, jobs=args.jobs)


#: each command this module wires, in the order ``masterqc --help`` lists them
ADDERS = {"check": _add_check, "judge": _add_judge, "spec": _add_spec, "report": _add_report,
          "demo": _add_demo, "runs": _add_runs, "compare": _add_compare}

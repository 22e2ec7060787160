"""Command-line wiring of the batch: folder arguments of ``check`` and the ``runs`` command."""

from __future__ import annotations

import json
import os
import sys


def add_batch_arguments(c) -> None:
    """Options of ``masterqc check`` that apply when a PATH is a folder."""
    g = c.add_argument_group("folders (when a PATH is a folder)")
    g.add_argument("--jobs", type=int, default=None, metavar="N",
                   help="files checked at once (default: the number of cores)")
    g.add_argument("--scheduler", metavar="ADDRESS",
                   help="run on an existing dask.distributed cluster, e.g. tcp://qc-head:8786 "
                        "(pip install 'masterqc[cluster]'; masters and --out at the same paths on every worker)")
    g.add_argument("--ledger", metavar="PATH",
                   help="SQLite run ledger to share across runs (default: OUT/masterqc-ledger.sqlite)")
    g.add_argument("--releases", metavar="MODE",
                   help="which folders form a release: top (default: the top folder holding audio, "
                        "its sub-folders such as bonus/ counted in), folder (each folder holding audio), "
                        "root, depth:N, none")
    g.add_argument("--recheck", action="store_true",
                   help="analyse every file again even when the ledger holds its result")


def wants_batch(args) -> bool:
    """True when ``check`` must run as a batch (a folder among the PATHs, or a batch-only option)."""
    if any(os.path.isdir(p) for p in args.paths):
        return True
    return bool(getattr(args, "scheduler", None) or getattr(args, "ledger", None) or getattr(args, "releases", None)
                or (getattr(args, "jobs", None) or 1) > 1)


def cmd_check_batch(args, formats) -> int:
    from masterqc.batch.releases import parse_release_mode
    from masterqc.batch.runner import BatchConfig, run_batch
    from masterqc.errors import UsageError

    if args.jobs is not None and args.jobs < 1:
        raise UsageError(f"--jobs {args.jobs}: give a whole number of 1 or more")
    if args.releases is not None:
        try:
            parse_release_mode(args.releases)
        except ValueError as exc:
            raise UsageError(f"--releases: {exc}") from None
    from masterqc.cli import parse_layout
    layout = parse_layout(args.layout)
    from masterqc.batch.ledger import LedgerError
    try:
        outcome = run_batch(BatchConfig(roots=list(args.paths), spec_path=args.spec, out_dir=args.out,
                                        spec_libraries=tuple(getattr(args, "spec_library", None) or ()),
                                        formats=tuple(formats), jobs=args.jobs, scheduler=args.scheduler,
                                        ledger_path=args.ledger, releases=args.releases, layout=layout,
                                        quiet=args.quiet, reuse=not args.recheck))
    except LedgerError as exc:
        raise UsageError(str(exc)) from None
    s = outcome.summary
    if not args.quiet:
        c = s["counts"]
        ch = s["changes"]
        sys.stdout.write(
            f"{c['files']} files: {c['fail']} fail, {c['error']} error, {c['warn']} warn, {c['pass']} pass "
            f"({c['measured']} measured, {c['rejudged']} re-judged from stored measurements); "
            f"{c['releases']} releases, {c['releases_failed']} failing\n")
        if s["previous_run"] is not None:
            sys.stdout.write(f"since run {s['previous_run']['run_id']}: {len(ch['newly_failing'])} newly failing, "
                             f"{len(ch['fixed'])} fixed, {len(ch['new'])} new, {len(ch['gone'])} gone\n")
        sys.stdout.write(f"index: {os.path.join(s['run']['out_dir'], 'index.html')}\n")
    return outcome.exit_code


# ---------------------------------------------------------------- runs

def add_runs_parser(sub) -> None:
    r = sub.add_parser("runs", help="list past batch runs, show one run, or one file's history (from the run ledger)")
    r.add_argument("--ledger", metavar="PATH", help="run ledger (default: OUT/masterqc-ledger.sqlite with --out)")
    r.add_argument("--out", default=".", help="output folder of the runs (default: the current folder)")
    r.add_argument("--json", action="store_true", help="print JSON instead of a table")
    rs = r.add_subparsers(dest="runs_command", metavar="RUNS_COMMAND", parser_class=sub._parser_class)
    rs.required = True
    def common(sp):  # the same options also after the sub-command: "runs list --out DIR"
        import argparse
        sp.add_argument("--ledger", metavar="PATH", default=argparse.SUPPRESS, help=argparse.SUPPRESS)
        sp.add_argument("--out", default=argparse.SUPPRESS, help=argparse.SUPPRESS)
        sp.add_argument("--json", action="store_true", default=argparse.SUPPRESS, help=argparse.SUPPRESS)
        return sp

    ls = common(rs.add_parser("list", help="past runs, newest first"))
    ls.add_argument("--limit", type=int, default=20)
    ls.set_defaults(func=cmd_runs_list)
    sh = common(rs.add_parser("show", help="the files of one run"))
    sh.add_argument("run_id", type=int)
    sh.set_defaults(func=cmd_runs_show)
    hi = common(rs.add_parser("history", help="every check of one file (by path, or by content SHA-256 or "
                                              "its first 8 or more hex digits)"))
    hi.add_argument("file")
    hi.set_defaults(func=cmd_runs_history)
    sc = rs.add_parser("schema", help="deprecated spelling of 'masterqc schema runs'")
    sc.set_defaults(func=cmd_runs_schema)


def cmd_runs_schema(args) -> int:
    sys.stderr.write("masterqc: note: 'masterqc runs schema' is deprecated; use 'masterqc schema runs'\n")
    from masterqc.batch.summary_schema import summary_schema
    json.dump(summary_schema(), sys.stdout, indent=2)
    sys.stdout.write("\n")
    return 0


def _open(args):
    from masterqc.batch.ledger import Ledger
    from masterqc.batch.runner import LEDGER_NAME
    from masterqc.errors import UsageError
    path = args.ledger or os.path.join(args.out, LEDGER_NAME)
    if not os.path.isfile(path):
        raise UsageError(f"{path}: no run ledger there (give --ledger PATH or --out DIR of a batch run)")
    from masterqc.batch.ledger import LedgerError
    try:
        return Ledger(path)
    except LedgerError as exc:
        raise UsageError(str(exc)) from None


def _print(args, rows, columns) -> None:
    if args.json:
        json.dump(rows, sys.stdout, indent=2)
        sys.stdout.write("\n")
        return
    from masterqc.fileio import shown
    rows = [{k: shown(v) if isinstance(v, str) else v for k, v in r.items()} for r in rows]  # names escaped
    widths = [max(len(c), *(len(str(r.get(c, "") if r.get(c) is not None else "")) for r in rows)) if rows else len(c)
              for c in columns]
    sys.stdout.write("  ".join(c.ljust(w) for c, w in zip(columns, widths)).rstrip() + "\n")
    for r in rows:
        sys.stdout.write("  ".join(str(r.get(c) if r.get(c) is not None else "").ljust(w)
                                   for c, w in zip(columns, widths)).rstrip() + "\n")


def cmd_runs_list(args) -> int:
    with _open(args) as led:
        rows = led.runs(args.limit)
    _print(args, rows, ["run_id", "started_utc", "status", "files", "analysed", "reused",
                        "n_pass", "n_warn", "n_fail", "n_error", "elapsed_s"])
    return 0


def cmd_runs_show(args) -> int:
    from masterqc.errors import UsageError
    with _open(args) as led:
        run = led.run(args.run_id)
        if run is None:
            raise UsageError(f"no run {args.run_id} in {led.path}")
        rows = led.run_files(args.run_id)
    if args.json:
        json.dump({"run": run, "files": rows}, sys.stdout, indent=2)
        sys.stdout.write("\n")
        return 0
    sys.stdout.write(f"run {run['run_id']}  {run['started_utc']} .. {run['finished_utc'] or '-'}  {run['status']}\n")
    _print(args, rows, ["verdict", "rel", "analysed", "message"])
    return 0


def cmd_runs_history(args) -> int:
    from masterqc.errors import UsageError
    with _open(args) as led:
        f = args.file
        if 8 <= len(f) <= 64 and all(c in "0123456789abcdef" for c in f.lower()) and not os.path.exists(f):
            rows = led.history_by_hash(f.lower())
        else:
            rows = led.history(os.path.abspath(f))
    if not rows:
        raise UsageError(f"{args.file}: no check of this file is recorded in the ledger")
    for r in rows:
        r["content_sha256"] = (r.get("content_sha256") or "")[:12]
    _print(args, rows, ["run_id", "started_utc", "verdict", "analysed", "rel", "content_sha256", "message"])
    return 0

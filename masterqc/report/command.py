"""``masterqc report RESULT.json``: re-render HTML/PDF from a saved result, without re-measuring."""

from __future__ import annotations

import os
import sys
from pathlib import Path


def add_parser(sub) -> None:
    """Add the ``report`` sub-command to an argparse sub-parsers object."""
    r = sub.add_parser("report", help="re-render the HTML/PDF report of a saved result JSON (no re-measuring)")
    r.add_argument("results", nargs="+", metavar="RESULT.json", help="result files written by check or measure --json")
    r.add_argument("--out", default=None, help="folder for the reports (default: beside each result file)")
    r.add_argument("--format", dest="formats", default="html,pdf",
                   help="comma-separated report formats from html,pdf (default: html,pdf)")
    r.add_argument("--paper", choices=("a4", "letter"), default="a4", help="PDF page size (default: a4)")
    add_report_arguments(r)
    r.add_argument("--spec", default=None,
                   help="judge the stored measurements against this spec first (no audio is read; "
                        "see masterqc judge)")
    r.add_argument("--spec-library", action="append", metavar="DIR",
                   help="with --spec: a folder whose specs extends: may name besides the spec's own folder "
                        "(repeatable)")
    r.set_defaults(func=cmd_report)


def add_report_arguments(p) -> None:
    """``--pages`` and ``--field``, shared by check and report."""
    p.add_argument("--pages", choices=("all", "summary"), default="all",
                   help="all: the certificate (page one) and its appendix; summary: the certificate alone "
                        "(default: all)")
    p.add_argument("--field", dest="fields", action="append", default=[], metavar="NAME=VALUE",
                   help="a field printed on the certificate: client, job, operator or date, e.g. "
                        "--field client=\"Ferrowby Post\" (repeatable; overrides the spec's report: section)")


def cmd_report(args) -> int:
    """Render every named result; exit 2 (UsageError) when any result file is missing or invalid.

    Every file is validated before anything is written, so a typo in the
    second name does not leave the first re-rendered alone and unnoticed.
    """
    from masterqc.formats import RENDER_FORMATS, parse_formats
    from masterqc.report.fields import parse_fields, with_fields
    from masterqc.report.render import load_result, write_reports

    fields = parse_fields(getattr(args, "fields", None))
    formats = parse_formats(args.formats, allowed=RENDER_FORMATS)
    loaded = [(Path(p), load_result(p)) for p in args.results]  # UsageError -> exit 2
    if args.spec_library and not args.spec:
        from masterqc.errors import UsageError
        raise UsageError("--spec-library is used with --spec (the spec whose extends: it lets reach)")
    if args.spec:
        from masterqc.pipeline import rejudge
        from masterqc.spec.loader import load_spec
        spec = load_spec(args.spec, libraries=args.spec_library or ())  # SpecError -> exit 2
        loaded = [(path, rejudge(result, spec, source=str(path))) for path, result in loaded]
    for path, result in loaded:
        out_dir = Path(args.out) if args.out else (path.parent if str(path.parent) else Path("."))
        stem = path.stem
        written = write_reports(with_fields(result, fields), out_dir, stem, formats, paper=args.paper,
                                pages=args.pages)
        sys.stdout.write(f"{str(result.get('verdict') or 'measured').upper():8s} {path} -> "
                         + ", ".join(os.fspath(w) for w in written) + "\n")
    return 0

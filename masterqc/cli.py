"""Command line: argument parsing, exit codes and progress display only.

Exit codes (house choice, listed in the README): 0 every file passed (warnings allowed),
1 at least one file failed, 2 bad invocation or invalid spec, 3 at least one
file could not be read (the rest are still judged and reported).  A file that
was read but ends in verdict ``error`` (e.g. NaN samples) counts as failed (1);
the rule lives in :func:`masterqc.pipeline.exit_code_for`.
"""

from __future__ import annotations

import argparse
import json
import sys

from masterqc import __version__
from masterqc.errors import AudioReadError, SpecError, UsageError

EXIT_PASS = 0
EXIT_FAIL = 1
EXIT_USAGE = 2
EXIT_UNREADABLE = 3


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # exit code 2 with one line, as argparse does, but named
        self.print_usage(sys.stderr)
        sys.stderr.write(f"masterqc: error: {message}\n")
        raise SystemExit(EXIT_USAGE)


def build_parser() -> argparse.ArgumentParser:
    p = _Parser(prog="masterqc", description="Prove that an audio master meets its delivery spec.")
    p.add_argument("--version", action="version", version=f"masterqc {__version__}")
    sub = p.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    sub.required = True

    m = sub.add_parser("measure", help="measure one master and print a table or the JSON result")
    m.add_argument("file")
    m.add_argument("--json", action="store_true", help="print the JSON result object")
    m.add_argument("--true-peak-oversample", type=int, choices=(4, 8, 16), default=4,
                   help="true-peak oversampling factor (default 4; never below ITU-R BS.1770 Annex 2's "
                        "minimum for the file's rate)")
    m.add_argument("--true-peak-filter", choices=("kaiser", "annex2"), default="kaiser",
                   help="interpolation filter: masterqc's Kaiser-windowed sinc (default) or the "
                        "BS.1770-5 Annex 2 example filter (4x only)")
    m.add_argument("--layout", help="channel labels overriding the file's, e.g. L,R,C,LFE,Ls,Rs")
    m.add_argument("--threads", type=int, default=None, metavar="N",
                   help="threads for the one-pass measurement (default: up to 2; results are identical)")
    m.add_argument("--block-frames", type=int, default=65536, help=argparse.SUPPRESS)
    m.add_argument("--quiet", action="store_true", help="no progress display")
    m.set_defaults(func=cmd_measure)

    s = sub.add_parser("schema", help="print the JSON Schema of the result object")
    s.set_defaults(func=cmd_result_schema)

    from masterqc import commands  # each later command adds its own sub-parser there
    commands.add_parsers(sub)
    return p


def cmd_measure(args) -> int:
    from masterqc.measure import MeasureOptions, measure_file
    from masterqc.progress import Progress
    from masterqc.report.text import measurement_table

    if args.true_peak_filter == "annex2" and args.true_peak_oversample != 4:
        raise UsageError("--true-peak-filter annex2 is defined for 4x only; "
                         "use --true-peak-oversample 4 or the kaiser filter")
    if args.threads is not None and args.threads < 1:
        raise UsageError("--threads must be at least 1")
    layout = tuple(x.strip() for x in args.layout.split(",")) if args.layout else None
    extra = {"threads": args.threads} if args.threads else {}
    options = MeasureOptions(**extra, block_frames=args.block_frames, channel_layout=layout,
                             true_peak_oversample=args.true_peak_oversample,
                             true_peak_filter=args.true_peak_filter)
    progress = Progress(f"measuring {args.file}", enabled=False if args.quiet else None)
    try:
        result = measure_file(args.file, options, progress=progress.update)
    finally:
        progress.close()
    if args.json:
        json.dump(result, sys.stdout, indent=2)
        sys.stdout.write("\n")
    else:
        sys.stdout.write(measurement_table(result))
    return EXIT_PASS


def cmd_result_schema(args) -> int:
    from masterqc.schema import result_schema
    json.dump(result_schema(), sys.stdout, indent=2)
    sys.stdout.write("\n")
    return EXIT_PASS


def main(argv=None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return int(args.func(args) or 0)
    except AudioReadError as exc:
        sys.stderr.write(f"masterqc: {exc}\n")
        return EXIT_UNREADABLE
    except SpecError as exc:
        sys.stderr.write(f"masterqc: invalid spec\n{exc}\n")
        return EXIT_USAGE
    except UsageError as exc:
        sys.stderr.write(f"masterqc: {exc}\n")
        return EXIT_USAGE
    except KeyboardInterrupt:
        sys.stderr.write("masterqc: interrupted\n")
        return 130
    except BrokenPipeError:
        return EXIT_PASS


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())

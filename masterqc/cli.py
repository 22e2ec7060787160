"""Command line: argument parsing, exit codes and progress display only.

Exit codes (a contract of the command line, house choice): 0 every file passed (warnings allowed),
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


class _Deprecated(argparse.Action):
    """Stores the value; an old spelling of the option (``old=``) also prints a deprecation note."""

    def __init__(self, *args, old: str = "", **kwargs):
        self.old = old
        super().__init__(*args, **kwargs)

    def __call__(self, parser, namespace, values, option_string=None):
        if option_string == self.old:
            sys.stderr.write(f"masterqc: note: {self.old} is deprecated; use {self.option_strings[0]} "
                             "(see CHANGELOG.md)\n")
        setattr(namespace, self.dest, values)


def build_parser(only: str | None = None) -> argparse.ArgumentParser:
    """The whole command line; with ``only`` (a command name), a parser holding just that sub-command,
    which parses that command's arguments exactly as the whole one does (see :func:`main`)."""
    p = _Parser(prog="masterqc", description="Prove that an audio master meets its delivery spec.")
    p.add_argument("--version", action="version", version=f"masterqc {__version__}")
    sub = p.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    sub.required = True

    if only not in (None, "measure"):
        _add_more(sub, only)
        return p
    m = sub.add_parser("measure", help="measure one master and print a table or the JSON result")
    m.add_argument("file")
    m.add_argument("--json", action="store_true", help="print the JSON result object")
    m.add_argument("--true-peak-oversampling", "--true-peak-oversample", type=int, choices=(4, 8, 16), default=4,
                   action=_Deprecated, old="--true-peak-oversample",
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
    if only is not None:
        return p
    _add_more(sub, None)
    return p


def _add_more(sub, only: str | None) -> None:
    """The sub-parsers after ``measure``: ``schema``, then those of :mod:`masterqc.commands`."""
    if only in (None, "schema"):
        s = sub.add_parser("schema", help="print a JSON Schema: result (default), spec or runs (summary.json)")
        s.add_argument("what", nargs="?", choices=SCHEMAS, default="result",
                       help="result: the result object; spec: the delivery-spec format; runs: a run's summary.json")
        s.set_defaults(func=cmd_schema)
    if only != "schema":
        from masterqc import commands  # each later command adds its own sub-parser there
        commands.add_parsers(sub, only)


def cmd_measure(args) -> int:
    from masterqc import stagelog
    stagelog.note_startup()  # interpreter and command line, for bench/bench_startup.py --split
    start_one_file(args.file, args.threads)
    with stagelog.stage("import_measure"):
        from masterqc.measure import MeasureOptions, measure_file
    from masterqc.progress import Progress

    if args.true_peak_filter == "annex2" and args.true_peak_oversampling != 4:
        raise UsageError("--true-peak-filter annex2 is defined for 4x only; "
                         "use --true-peak-oversampling 4 or the kaiser filter")
    if args.threads is not None and args.threads < 1:
        raise UsageError("--threads must be at least 1")
    layout = parse_layout(args.layout)
    extra = {"threads": args.threads} if args.threads else {}
    options = MeasureOptions(**extra, block_frames=args.block_frames, channel_layout=layout,
                             true_peak_oversampling=args.true_peak_oversampling,
                             true_peak_filter=args.true_peak_filter)
    from masterqc.fileio import shown
    progress = Progress(f"measuring {shown(args.file)}", enabled=False if args.quiet else None)
    try:
        with stagelog.stage("measure"):
            result = measure_file(args.file, options, progress=progress.update)
    finally:
        progress.close()
    with stagelog.stage("write_json" if args.json else "write_table"):
        if args.json:
            # the layout of check's result files (one top-level key per line): the C encoder, where
            # json.dump(indent=2) takes Python's (about 50 ms for a 30 s master)
            from masterqc.jsonutil import result_json_text
            sys.stdout.write(result_json_text(result, ascii_only=True))
        else:
            from masterqc.report.text import measurement_table
            sys.stdout.write(measurement_table(result))
    return EXIT_PASS


def start_one_file(path, threads: int | None = None) -> None:
    """Before the measuring layers load, for a command that measures one file: start BLAS with one
    thread through its environment (no threadpoolctl inspection per process), and when the
    measurement will run threaded (``threads``, else the default count), hash the file on a thread
    of its own while the layers are imported (one core at most is busy then); the engine takes the
    result (:mod:`masterqc.filehash`)."""
    from masterqc.measure.options import pin_blas_to_one_thread
    pin_blas_to_one_thread()
    if (threads or _default_threads()) > 1:
        from masterqc import filehash
        filehash.prefetch(path)


def _default_threads() -> int:
    """:func:`masterqc.measure.options.default_thread_count`, or 1 when it refuses the environment
    (the measurement then reports that error itself)."""
    from masterqc.measure.options import default_thread_count
    try:
        return default_thread_count()
    except UsageError:
        return 1


def parse_layout(text):
    """``--layout L,R,C`` -> ``("L", "R", "C")``; None when not given; UsageError naming the problem.

    The labels are validated by the one layout parser, :func:`masterqc.audio.layout.parse_layout`
    (the channel count is checked against each file when it is read).
    """
    if not text:
        return None
    from masterqc.audio.layout import parse_layout as _parse
    try:
        return _parse(text)
    except ValueError as exc:
        raise UsageError(f"--layout {text!r}: {exc}") from None


#: the schema family of ``masterqc schema WHAT``
SCHEMAS = ("result", "spec", "runs")


def schema_for(what: str) -> dict:
    """The JSON Schema ``masterqc schema WHAT`` prints."""
    if what == "spec":
        from masterqc.spec import spec_schema
        return spec_schema()
    if what == "runs":
        from masterqc.batch.summary_schema import summary_schema
        return summary_schema()
    from masterqc.schema import result_schema
    return result_schema()


def cmd_schema(args) -> int:
    json.dump(schema_for(getattr(args, "what", "result")), sys.stdout, indent=2)
    sys.stdout.write("\n")
    return EXIT_PASS


def cmd_result_schema(args) -> int:  # kept for callers of the old name
    return cmd_schema(args)


def _printable(exc) -> str:
    """An error message line by line with control sequences escaped: nothing raw reaches the terminal."""
    from masterqc.fileio import shown
    return "\n".join(shown(line) for line in str(exc).split("\n"))


#: the commands :func:`build_parser` knows by name (``masterqc.commands.ADDERS`` adds the rest)
_OWN_COMMANDS = ("measure", "schema")


def _named_command(argv: list[str]) -> str | None:
    """The command when it is the first argument and spelled in full, else None (options first, an
    abbreviation, a typo, ``--help``: those take the whole parser, whose messages list every command)."""
    if not argv or argv[0] in _OWN_COMMANDS:
        return argv[0] if argv else None
    from masterqc.commands import ADDERS
    return argv[0] if argv[0] in ADDERS else None


def main(argv=None) -> int:
    argv = sys.argv[1:] if argv is None else list(argv)
    # Start-up: a command named first builds its own sub-parser only (the others import their layers'
    # argument helpers); its arguments parse exactly as in the whole parser.
    parser = build_parser(only=_named_command(argv))
    args = parser.parse_args(argv)
    try:
        return int(args.func(args) or 0)
    except AudioReadError as exc:
        sys.stderr.write(f"masterqc: {_printable(exc)}\n")
        return EXIT_UNREADABLE
    except SpecError as exc:
        sys.stderr.write(f"masterqc: invalid spec\n{_printable(exc)}\n")
        return EXIT_USAGE
    except UsageError as exc:
        sys.stderr.write(f"masterqc: {_printable(exc)}\n")
        return EXIT_USAGE
    except KeyboardInterrupt:
        sys.stderr.write("masterqc: interrupted\n")
        return 130
    except BrokenPipeError:
        return EXIT_PASS


def run(argv=None) -> int:
    """The ``masterqc`` program (console script and ``python -m masterqc``): :func:`main`, then a
    cheap exit.

    Python's shutdown collects every object the run left (SciPy, numpy and the measurement
    leave several hundred thousand): 0.1-0.25 s of CPU after the work is done.  Freezing the
    collector (:func:`gc.freeze`) leaves those objects to the process's end; atexit handlers
    still run and files are still closed.  Not in :func:`main`, which tests call in-process.
    """
    code = main(argv)
    for stream in (sys.stdout, sys.stderr):
        try:
            stream.flush()
        except (OSError, ValueError):
            pass
    import gc
    gc.freeze()
    return code


if __name__ == "__main__":  # pragma: no cover
    sys.exit(run())

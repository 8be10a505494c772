"""The command line: a thin shell over :func:`sitebuild.build` and :func:`sitebuild.check`."""

from __future__ import annotations

import argparse
import json
import os
import re
import signal
import sys
import threading

from . import __version__, stopping
from .errors import SitebuildError

# Control characters (C0 but line end and tab, DEL, C1) from untrusted text (column names,
# labels, dataset names) would reach the terminal as escape sequences: shown escaped instead.
_CONTROL = re.compile(r"[\x00-\x08\x0b-\x1f\x7f-\x9f]")
_CONTROL_OR_LINE_END = re.compile(r"[\x00-\x08\x0a-\x1f\x7f-\x9f]")


def terminal_text(text: str, one_line: bool = False) -> str:
    """Return ``text`` safe to print: control characters (ESC, CR, BEL... and, with
    ``one_line``, line ends) shown as ``\\x1b``-style escapes, never sent raw.

    Examples
    --------
    >>> print(terminal_text("a\x1b[2Jb"))
    a\\x1b[2Jb
    """
    pattern = _CONTROL_OR_LINE_END if one_line else _CONTROL
    return pattern.sub(lambda m: f"\\x{ord(m[0]):02x}", text)


def say_line(text: str, **kwargs) -> None:
    """Print one line of output with untrusted text made safe (see :func:`terminal_text`)."""
    print(terminal_text(text), **kwargs)


def say_error(error) -> None:
    """Print an error as one ``error:`` line on standard error, control characters escaped."""
    print(f"error: {terminal_text(str(error), one_line=True)}", file=sys.stderr)


def _size(n: int) -> str:
    if n < 1024:
        return f"{n} B"
    for unit in ("KB", "MB"):
        n /= 1024
        if n < 1024:
            return f"{n:.1f} {unit}"
    return f"{n / 1024:.1f} GB"


def _dataset_lines(reports) -> list[str]:
    lines = []
    for d in reports:
        dropped = ""
        if d.rows_dropped:
            why = ", ".join(f"{n:,} {reason}" for reason, n in sorted(d.drop_reasons.items()))
            dropped = f", {d.rows_dropped:,} dropped ({why})"
        reused = " (unchanged, reused)" if d.reused else ""
        lines.append(
            f"  {d.name}: {d.rows_read:,} rows read, {d.rows_used:,} used{dropped}; "
            f"{d.groups} group{'s' if d.groups != 1 else ''}, "
            f"{d.measures} measure{'s' if d.measures != 1 else ''}{reused}"
        )
        for column, problem in sorted(d.unparsed.items()):
            examples = ", ".join(repr(e) for e in problem["examples"])
            one = problem["count"] == 1
            lines.append(
                f"    {problem['count']:,} {'value' if one else 'values'} in '{column}' "
                f"{'is not a number' if one else 'are not numbers'} (e.g. {examples}); "
                "counted as missing"
            )
        for note in getattr(d, "notes", ()):
            lines.append(f"    note: {note}")
        for warning in d.warnings:
            lines.append(f"    warning: {warning}")
    return lines


def format_build(report, quiet: bool = False) -> str:
    """Return the few lines the CLI prints after a build (one line when ``quiet``)."""
    reused = len(report.reused)
    if not report.written:
        head = f"Nothing changed: {report.out} already holds this site; nothing was written."
    else:
        n = len(report.datasets)
        head = f"Built {report.pages} pages from {n} dataset{'' if n == 1 else 's'}"
        head += f" ({reused} reused unchanged):" if reused else ":"
    if quiet:
        return head.rstrip(":") + f" ({report.elapsed:.1f} s)"
    lines = [head]
    lines += _dataset_lines(report.datasets)
    lines.append("What moved since the last build:")
    lines += [f"  {line}" for line in report.changes]
    lines += [f"  note: {n}" for n in report.notices]
    largest = (
        f"; largest page {report.largest_page} {_size(report.largest_page_bytes)}"
        if report.largest_page
        else ""
    )
    verb = "Wrote" if report.written else "Kept"
    lines.append(
        f"{verb} {report.files} files, {_size(report.total_bytes)} ({report.pages} pages, "
        f"{report.assets} assets {_size(report.asset_bytes)}{largest}), in {report.elapsed:.1f} s."
    )
    if report.zip_path is not None:
        lines.append(f"Zip: {report.zip_path} ({_size(report.zip_bytes)})")
    if report.single_file_path is not None:
        lines.append(f"Single file: {report.single_file_path} ({_size(report.single_file_bytes)})")
    lines.append(f"Open {report.index}")
    return "\n".join(lines)


def format_check(report) -> str:
    """Return the lines the CLI prints after a check."""
    n = len(report.datasets)
    lines = [f"{report.manifest} is valid; {n} dataset{'' if n == 1 else 's'} would be built:"]
    lines += _dataset_lines(report.datasets)
    lines += [f"  note: {n}" for n in report.notices]
    lines.append(f"A build would write the site to {report.out} (nothing was written).")
    return "\n".join(lines)


EXAMPLES = """\
commands, in the order a newcomer uses them:
  new       sitebuild new trial --from measurements.xlsx
            (writes trial/manifest.toml proposing groups and measures, then builds)
  check     sitebuild check trial        (reads everything, writes nothing)
  build     sitebuild build trial        (writes trial/site/index.html)
  manifest  sitebuild manifest           (every manifest key, its meaning and default)
"""


def _debug_flag(command) -> None:
    command.add_argument(
        "--debug", action="store_true", default=argparse.SUPPRESS, help=argparse.SUPPRESS
    )


def parser() -> argparse.ArgumentParser:
    """Return the argument parser for ``sitebuild``."""
    top = argparse.ArgumentParser(
        prog="sitebuild",
        description="Turn a folder of datasets and a manifest into an offline site comparing groups.",
        epilog=EXAMPLES,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    top.add_argument("--version", action="version", version=f"sitebuild {__version__}")
    top.add_argument("--debug", action="store_true", help="show the full traceback on errors")
    commands = top.add_subparsers(dest="command", metavar="COMMAND", required=True)

    new = commands.add_parser(
        "new",
        help="start a project: from your data file (--from), or with a small invented dataset",
    )
    new.add_argument(
        "folder", help="the folder to create, or a folder of yours (nothing is overwritten)"
    )
    new.add_argument(
        "--from",
        dest="source",
        metavar="DATA",
        help="your data file (.csv, .xlsx, ...): propose a manifest for it and build at once",
    )
    _debug_flag(new)
    check = commands.add_parser("check", help="validate the manifest and data; write nothing")
    check.add_argument("project", help="the project folder (holding manifest.toml)")
    check.add_argument("--out", help="the output folder a build would use")
    check.add_argument("--json", action="store_true", help="print the check report as JSON")
    _debug_flag(check)

    build = commands.add_parser("build", help="build the site of a project folder")
    build.add_argument("project", help="the project folder (holding manifest.toml)")
    build.add_argument(
        "--out", help="output folder (default: the manifest's output, inside the project)"
    )
    build.add_argument(
        "--fresh", action="store_true", help="recompute every dataset, ignoring the build cache"
    )
    build.add_argument("--zip", metavar="PATH", help="also write the site as a zip file here")
    build.add_argument(
        "--single-file",
        metavar="PATH",
        help="also write the whole site as one HTML file here (for people who cannot unzip)",
    )
    build.add_argument(
        "--watch",
        action="store_true",
        help="keep running: rebuild whenever the manifest, a data file or a note changes",
    )
    build.add_argument(
        "--quiet", action="store_true", help="no progress lines; print one line when done"
    )
    build.add_argument(
        "--json", action="store_true", help="print the build report as JSON on standard output"
    )
    _debug_flag(build)

    commands.add_parser(
        "manifest", help="list every manifest.toml key with its meaning and default"
    )
    return top


def _print_build(report, args) -> None:
    if args.json:
        # JSON escapes every control character itself.
        print(json.dumps(report.to_json(), sort_keys=True, indent=1, allow_nan=False))
    else:
        say_line(format_build(report, quiet=args.quiet))


def _build(args) -> int:
    from . import build

    options = {
        "out": args.out,
        "fresh": args.fresh,
        "zip": args.zip,
        "single_file": args.single_file,
        "progress": not args.quiet,
        "quiet": args.quiet,
    }
    if not args.watch:
        _print_build(build(args.project, **options), args)
        return 0
    from .watch import watch

    def once(first: bool):
        # --fresh applies to the first build only; later ones reuse what it computed.
        report = build(args.project, **{**options, "fresh": args.fresh and first})
        _print_build(report, args)

    def failed(error: SitebuildError) -> None:
        say_error(error)

    print("Watching for changes; press Ctrl-C to stop.", file=sys.stderr)
    watch(args.project, once, on_error=failed)
    return 0


def _new(args) -> int:
    from .scaffold import new_from_data, new_project

    if args.source is None:
        made = new_project(args.folder)
        print(f"Created {made.root} with {', '.join(made.files)}.")
        print(f"Build it with: sitebuild build {args.folder}")
        return 0
    from . import build

    made = new_from_data(args.folder, args.source)
    print(f"Wrote {made.root / 'manifest.toml'}: {made.proposal}")
    print(format_build(build(made.root, progress=False, quiet=True), quiet=True))
    print(
        f"Open {made.root / 'site' / 'index.html'}; edit manifest.toml and run: "
        f"sitebuild build {args.folder}"
    )
    return 0


def _stop(signum, frame):
    # Ctrl-C (SIGINT) or a service manager / `kill` (SIGTERM): unwind so the staging folder and
    # the lock are removed and the previous site stays as it was. The request is also recorded
    # (see sitebuild.stopping): a signal landing inside an import surfaces as ImportError,
    # which a library may catch.
    stopping.request(signum)
    raise KeyboardInterrupt


def main(argv: list[str] | None = None) -> int:
    """Run the command line; return the exit code."""
    if threading.current_thread() is not threading.main_thread():
        return _main(argv)
    stopping.clear()
    previous = {sig: signal.signal(sig, _stop) for sig in (signal.SIGINT, signal.SIGTERM)}
    try:
        return _main(argv)
    finally:
        for sig, handler in previous.items():
            signal.signal(sig, handler)
        stopping.clear()  # the request belonged to this command


def _interrupted(args) -> int:
    if args.command == "build" and getattr(args, "watch", False):
        print("Stopped watching.", file=sys.stderr)
        return 0
    print("error: interrupted; the previous site is unchanged.", file=sys.stderr)
    return 128 + (stopping.requested() or signal.SIGINT)


def _main(argv: list[str] | None) -> int:
    args = parser().parse_args(argv)
    debug = getattr(args, "debug", False) or os.environ.get("SITEBUILD_DEBUG") == "1"
    try:
        for option in ("project", "folder", "out", "zip", "single_file"):
            value = getattr(args, option, None)
            if isinstance(value, str) and "\0" in value:
                name = (
                    option if option in ("project", "folder") else "--" + option.replace("_", "-")
                )
                raise SitebuildError(
                    f"the path given as {name} holds a NUL character; paths cannot contain one, "
                    "so remove it."
                )
        if args.command == "build":
            return _build(args)
        if args.command == "check":
            from . import check

            report = check(args.project, out=args.out)
            if args.json:
                print(json.dumps(report.to_json(), sort_keys=True, indent=1, allow_nan=False))
            else:
                say_line(format_check(report))
        elif args.command == "manifest":
            from .manifest import DATASET_KEYS, SITE_KEYS
            from .manifest_keys import describe

            print(describe({"site": SITE_KEYS, "datasets": DATASET_KEYS}), end="")
        elif args.command == "new":
            return _new(args)
        return 0
    except SitebuildError as error:
        if debug:  # the traceback, and still the exit code of bad input
            import traceback

            traceback.print_exc()
        say_error(error)
        return error.exit_code
    except KeyboardInterrupt:
        return _interrupted(args)
    except Exception as error:  # noqa: BLE001 - one line for users; --debug shows the rest
        if stopping.requested():
            return _interrupted(args)
        if debug:
            raise
        say_error(
            f"unexpected failure ({type(error).__name__}: {error}); the previous site is "
            "unchanged — run again with --debug to see where, and report it."
        )
        return 1


if __name__ == "__main__":
    sys.exit(main())

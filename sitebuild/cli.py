"""The command line: a thin shell over :func:`sitebuild.build` and :func:`sitebuild.check`."""

from __future__ import annotations

import argparse
import os
import sys

from . import __version__
from .errors import SitebuildError


def _size(n: int) -> str:
    for unit in ("B", "KB", "MB", "GB"):
        if n < 1024 or unit == "GB":
            return f"{n:.0f} {unit}" if unit == "B" else f"{n:.1f} {unit}"
        n /= 1024
    raise AssertionError("unreachable")


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
            f"{d.groups} groups, {d.measures} measures{reused}"
        )
        for column, problem in sorted(d.unparsed.items()):
            examples = ", ".join(repr(e) for e in problem["examples"])
            lines.append(
                f"    {problem['count']:,} values in '{column}' not numbers (e.g. {examples}); counted as missing"
            )
        for warning in d.warnings:
            lines.append(f"    warning: {warning}")
    return lines


def format_build(report) -> str:
    """Return the few lines the CLI prints after a build."""
    lines = [f"Built {report.pages} pages from {len(report.datasets)} datasets:"]
    lines += _dataset_lines(report.datasets)
    lines += [f"  note: {n}" for n in report.notices]
    lines.append(
        f"Wrote {report.files} files, {_size(report.total_bytes)}, in {report.elapsed:.1f} s."
    )
    lines.append(f"Open {report.index}")
    return "\n".join(lines)


def format_check(report) -> str:
    """Return the lines the CLI prints after a check."""
    lines = [f"{report.manifest} is valid; {len(report.datasets)} datasets would be built:"]
    lines += _dataset_lines(report.datasets)
    lines += [f"  note: {n}" for n in report.notices]
    lines.append(f"A build would write the site to {report.out} (nothing was written).")
    return "\n".join(lines)


def parser() -> argparse.ArgumentParser:
    """Return the argument parser for ``sitebuild``."""
    top = argparse.ArgumentParser(
        prog="sitebuild",
        description="Turn a folder of datasets and a manifest into an offline site comparing groups.",
    )
    top.add_argument("--version", action="version", version=f"sitebuild {__version__}")
    top.add_argument("--debug", action="store_true", help="show the full traceback on errors")
    commands = top.add_subparsers(dest="command", metavar="COMMAND", required=True)

    build = commands.add_parser("build", help="build the site of a project folder")
    build.add_argument("project", help="the project folder (holding manifest.toml)")
    build.add_argument(
        "--out", help="output folder (default: the manifest's output, inside the project)"
    )
    build.add_argument(
        "--debug", action="store_true", default=argparse.SUPPRESS, help=argparse.SUPPRESS
    )

    check = commands.add_parser("check", help="validate the manifest and data; write nothing")
    check.add_argument("project", help="the project folder (holding manifest.toml)")
    check.add_argument("--out", help="the output folder a build would use")
    check.add_argument(
        "--debug", action="store_true", default=argparse.SUPPRESS, help=argparse.SUPPRESS
    )
    return top


def main(argv: list[str] | None = None) -> int:
    """Run the command line; return the exit code."""
    args = parser().parse_args(argv)
    debug = getattr(args, "debug", False) or os.environ.get("SITEBUILD_DEBUG") == "1"
    try:
        if args.command == "build":
            from . import build

            report = build(args.project, out=args.out)
            print(format_build(report))
        elif args.command == "check":
            from . import check

            report = check(args.project, out=args.out)
            print(format_check(report))
        return 0
    except SitebuildError as error:
        if debug:
            raise
        print(f"error: {error}", file=sys.stderr)
        return error.exit_code
    except KeyboardInterrupt:
        print("error: interrupted; the previous site is unchanged.", file=sys.stderr)
        return 130


if __name__ == "__main__":
    sys.exit(main())

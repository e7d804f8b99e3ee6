"""The ``sleepfuse`` command line: check, score, batch, explore and open a study.

Data go to files, progress and diagnostics to stderr. Exit status: 0 on
success, 1 when nothing could be processed, 2 when the command line or the
configuration is wrong.
"""

from __future__ import annotations

import argparse
import sys

from sleepfuse import RESEARCH_CAUTION, __version__
from sleepfuse.cli.args import EXIT_NOTHING, EXIT_OK, EXIT_USAGE, study_dir
from sleepfuse.model.errors import ConfigError, OutputFolderError

def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="sleepfuse",
        description=(
            "Sleep parameters from PSG hypnograms (EDF+), actigraphy counts and sleep diaries under one set of "
            "definitions; agreement between the instruments; one participant x feature matrix with a codebook."
        ),
        epilog=RESEARCH_CAUTION,
    )
    parser.add_argument("--version", action="version", version=f"sleepfuse {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")

    p = sub.add_parser(
        "check",
        help="read and score every file of a study and print the QC log and the nights per instrument",
        description="Read and score every file of STUDY as 'batch' does (without writing anything), print the "
        "QC log (the same entries and counts as batch's qc table) and, per participant, the nights each "
        "instrument has.",
    )
    p.add_argument("study", type=study_dir, metavar="STUDY", help="study folder (psg/, actigraphy/, diary/, study.toml)")
    p.add_argument("--quiet", action="store_true", help="print only warnings and errors of the QC log (no notes)")
    p.set_defaults(func=_run_check)

    _add_later_commands(sub)
    return parser


def _add_later_commands(sub) -> None:
    """Commands whose modules import heavier dependencies register themselves here."""
    from sleepfuse.cli import commands
    commands.register(sub)


def _run_check(args: argparse.Namespace) -> int:
    """Read and score every participant as batch does, and print everything the QC log holds."""
    from sleepfuse.cli.console import print_check
    from sleepfuse.cli.progress import participant_progress
    from sleepfuse.model.config import load_config
    from sleepfuse.run.engine import run_study_jobs

    try:
        config = load_config(args.study)
    except ConfigError as exc:
        print(f"sleepfuse: configuration error: {exc}", file=sys.stderr)
        return EXIT_USAGE
    with participant_progress() as update:
        outcomes, qc, files = run_study_jobs(config, progress=update)
    nights: dict[str, dict[str, list[str]]] = {o.participant: {} for o in outcomes}
    for o in outcomes:
        for row in o.rows:
            nights[o.participant].setdefault(row["source"], []).append(str(row["night"]))
    print_check(config, qc, nights, len(files), quiet=args.quiet, out=sys.stdout)
    readable = any(o.rows for o in outcomes)
    return EXIT_OK if readable else EXIT_NOTHING


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "func", None):
        parser.print_help(sys.stderr)
        return EXIT_USAGE
    try:
        return int(args.func(args))
    except ConfigError as exc:
        print(f"sleepfuse: configuration error: {exc}", file=sys.stderr)
        return EXIT_USAGE
    except OutputFolderError as exc:
        print(f"sleepfuse: {exc}", file=sys.stderr)
        return EXIT_USAGE
    except KeyboardInterrupt as exc:
        said = str(exc)  # batch says exactly what it left (sleepfuse.run.batch.BatchInterrupted)
        print(f"sleepfuse: {said or 'interrupted; files finished before stay in place, no half-written file is left'}",
              file=sys.stderr)
        return 130


if __name__ == "__main__":
    sys.exit(main())

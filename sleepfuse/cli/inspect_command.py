"""``sleepfuse inspect STUDY``: per file, what was detected; and a proposed study.toml."""

from __future__ import annotations

import argparse
import sys

from sleepfuse.cli.args import EXIT_NOTHING, EXIT_OK, study_dir


def add_inspect_parser(subparsers) -> argparse.ArgumentParser:
    p = subparsers.add_parser(
        "inspect",
        help="show how each file of a study is read and propose a study.toml",
        description="Read every file of STUDY as batch would and print, per file, what was detected: encoding, "
        "delimiter, decimal mark, header row, columns and their roles, time-stamp format, epoch length, time "
        "span and nights; then the nights per instrument. Writes a proposed STUDY/study.toml when there is "
        "none (an existing one is never replaced without --force).",
    )
    p.add_argument("study", type=study_dir, metavar="STUDY", help="study folder")
    p.add_argument("--force", action="store_true", help="replace an existing study.toml with the proposal")
    p.add_argument("--no-write", dest="write", action="store_false",
                   help="print the proposed study.toml instead of writing it")
    p.set_defaults(func=run_inspect)
    return p


def run_inspect(args: argparse.Namespace) -> int:
    from sleepfuse.output.files import write_text
    from sleepfuse.study.inspect import describe, propose_toml, survey

    result = survey(args.study)
    sys.stdout.write(describe(result))
    proposal = propose_toml(result)
    target = args.study / "study.toml"
    if args.write and (args.force or not target.exists()):
        write_text(target, proposal)
        print(f"\nwrote {target} (read it and check the time zone)", file=sys.stderr)
    else:
        why = ("not written (--no-write)" if not args.write
               else f"{target} exists and is kept; --force replaces it")
        sys.stdout.write(f"\nproposed study.toml ({why}):\n{proposal}")
    read = sum(1 for f in result.files if not f.error)
    return EXIT_OK if read else EXIT_NOTHING

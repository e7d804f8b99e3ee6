"""Sub-commands beyond ``check``: each registers its parser and its runner."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path


def _study_dir(value: str) -> Path:
    from .cli import _study_dir as check

    return check(value)


def register(sub) -> None:
    """Add the score, batch, explore and open commands to the ``sleepfuse`` parser."""
    p = sub.add_parser(
        "score",
        help="score every participant, night and instrument and write the night table (CSV)",
        description="Score STUDY and write the night table: one row per participant, night and source "
        "(psg, actigraphy, diary) with every parameter of the definitions, 'included' and 'qc'.",
    )
    p.add_argument("study", type=_study_dir, metavar="STUDY", help="study folder")
    p.add_argument("--out", type=Path, metavar="FILE", help="CSV file to write (default: standard output)")
    p.set_defaults(func=run_score)


def run_score(args: argparse.Namespace) -> int:
    from .atomic import write_text
    from .pipeline import run_study
    from .progress import participant_progress

    with participant_progress() as update:
        result = run_study(args.study, progress=update, keep_detail=False)
    if result.nights.empty:
        print("sleepfuse: no night could be scored; see the QC log with 'sleepfuse check'", file=sys.stderr)
        return 1
    text = result.nights.to_csv(index=False, lineterminator="\n")
    if args.out is None:
        sys.stdout.write(text)
    else:
        write_text(args.out, text)
        print(f"wrote {len(result.nights)} rows to {args.out}", file=sys.stderr)
    problems = sum(1 for e in result.qc if e.severity != "info")
    if problems:
        print(f"{problems} QC warnings/errors; see 'sleepfuse check {args.study}'", file=sys.stderr)
    return 0

"""``sleepfuse open STUDY``: the terminal app, or a clear message when there is no terminal."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from sleepfuse.cli.args import EXIT_USAGE, study_dir

NO_TTY_MESSAGE = (
    "sleepfuse open needs an interactive terminal; for headless use run: sleepfuse batch STUDY --out DIR"
)
STDERR_REDIRECTED_MESSAGE = (
    "sleepfuse open draws the app on standard error, which is redirected here (for example '2>log'), "
    "so the screen would stay blank. Run it without redirecting standard error; for a log of a run, "
    "use 'sleepfuse batch STUDY --out DIR 2>log'."
)


def study_or_matrix(value: str) -> Path:
    """argparse type of open's argument: a study folder, or a participant x feature matrix CSV."""
    path = Path(value)
    if path.is_file() and path.suffix.lower() == ".csv":
        return path
    if path.is_file():
        raise argparse.ArgumentTypeError(f"{value!r} is a file but not a .csv; give the study folder, "
                                         "or a participant x feature matrix (.csv) to open on the clusters screen")
    return study_dir(value)


def add_open_parser(subparsers) -> argparse.ArgumentParser:
    """Register ``open`` on the ``sleepfuse`` sub-command parser."""
    p = subparsers.add_parser(
        "open",
        help="open a study in the terminal app (overview, nights, disagreements, agreement, review, export)",
        description="Open STUDY in the terminal app: a study overview, each night's instruments on one time axis, "
        "the nights where instruments disagree, Bland–Altman agreement, review decisions and export. "
        "Needs an interactive terminal; headless, use 'sleepfuse batch'. "
        "Given a participant x feature matrix (a .csv such as matrix.csv) instead of a folder, it opens "
        "straight on the clusters screen.",
    )
    p.add_argument("study", type=study_or_matrix, metavar="STUDY",
                   help="study folder, or a matrix .csv to open on the clusters screen")
    p.add_argument("--outcomes", type=Path, metavar="TABLE.csv", default=None,
                   help="participants table (a 'participant' column and a-priori labels or outcomes) shown on the "
                        "clusters screen (default: participants.csv in the study folder, or beside the matrix)")
    p.add_argument("--export-dir", type=Path, metavar="DIR", default=None,
                   help="default folder offered by the export dialog (default: STUDY-sleepfuse-out beside the study)")
    p.add_argument("--reviewer", metavar="NAME", default=None,
                   help="name recorded with each review decision in STUDY/sleepfuse-review.csv "
                        "(default: the system user)")
    p.set_defaults(func=run_open)
    return p


def run_open(args: argparse.Namespace) -> int:
    """Start the app; without a terminal to read keys from and draw on, say so and exit 2 (never start the driver).

    The app reads stdin and draws on stderr (Textual's driver writes to the
    process's standard error), so both must be a terminal; stdout too, as
    people expect of an interactive program.
    """
    if not (sys.stdin.isatty() and sys.stdout.isatty()):
        print(NO_TTY_MESSAGE, file=sys.stderr)
        return EXIT_USAGE
    if not sys.__stderr__.isatty():
        print(STDERR_REDIRECTED_MESSAGE, file=sys.stdout)  # the one stream still on the screen
        return EXIT_USAGE
    from sleepfuse.model.config import load_config
    from sleepfuse.model.errors import ConfigError

    if Path(args.study).is_file():
        from sleepfuse.tui.app import create_clusters_app

        try:
            app = create_clusters_app(args.study, outcomes=getattr(args, "outcomes", None))
        except ConfigError as exc:
            print(f"sleepfuse: {exc}", file=sys.stderr)
            return EXIT_USAGE
        app.run()
        return int(app.return_code or 0)
    try:
        load_config(args.study)
    except ConfigError as exc:
        print(f"sleepfuse: configuration error: {exc}", file=sys.stderr)
        return EXIT_USAGE
    from sleepfuse.tui.app import create_app

    app = create_app(args.study, export_dir=getattr(args, "export_dir", None), reviewer=getattr(args, "reviewer", None))
    app.outcomes_path = getattr(args, "outcomes", None)
    app.run()
    return int(app.return_code or 0)

"""Sub-commands beyond ``check``: each registers its parser and its runner."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from sleepfuse.cli.args import study_dir

CONSOLE_WARNINGS = 30  # batch prints every QC error and this many warnings; qc.csv holds them all


def register(sub) -> None:
    """Add the score, batch, explore and open commands to the ``sleepfuse`` parser."""
    p = sub.add_parser(
        "score",
        help="score every participant, night and instrument and write the night table (CSV)",
        description="Score STUDY and write the night table: one row per participant, night and source "
        "(psg, actigraphy, diary) with every parameter of the definitions, 'included' and 'qc'.",
    )
    p.add_argument("study", type=study_dir, metavar="STUDY", help="study folder")
    p.add_argument("--out", type=Path, metavar="FILE", help="CSV file to write (default: standard output)")
    p.set_defaults(func=run_score)
    register_batch(sub)

    from sleepfuse.explore.cli import add_explore_parser
    from sleepfuse.cli.inspect_command import add_inspect_parser
    from sleepfuse.cli.open_command import add_open_parser

    add_inspect_parser(sub)
    add_explore_parser(sub)
    add_open_parser(sub)


def run_score(args: argparse.Namespace) -> int:
    from sleepfuse.cli.progress import participant_progress
    from sleepfuse.model.config import load_config
    from sleepfuse.model.qc import qc_summary
    from sleepfuse.output.files import write_text
    from sleepfuse.run.engine import run_study_jobs
    from sleepfuse.run.tables import night_table_of
    from sleepfuse.study.review import load_decisions

    config = load_config(args.study)
    with participant_progress() as update:
        outcomes, qc, _ = run_study_jobs(config, progress=update)
    nights = night_table_of(outcomes, load_decisions(config.root))
    if nights.empty:
        print("sleepfuse: no night could be scored; see the QC log with 'sleepfuse check'", file=sys.stderr)
        return 1
    text = nights.to_csv(index=False, lineterminator="\n")
    if args.out is None:
        sys.stdout.write(text)
    else:
        write_text(args.out, text)
        print(f"wrote {len(nights)} rows to {args.out}", file=sys.stderr)
    print(f"QC log: {qc_summary(qc)}; see 'sleepfuse check {args.study}'", file=sys.stderr)
    return 0


def register_batch(sub) -> None:
    p = sub.add_parser(
        "batch",
        help="write every output table (nights, agreement, epochs_agreement, matrix, codebook, qc, provenance)",
        description="Score STUDY and write nights, agreement, epochs_agreement, matrix, codebook and qc tables "
        "and provenance.json into DIR. A bad file never stops the run; it is reported in qc and on the console. "
        "Exit status is non-zero only when nothing could be processed or the command line is wrong.",
    )
    p.add_argument("study", type=study_dir, metavar="STUDY", help="study folder")
    p.add_argument("--out", type=Path, required=True, metavar="DIR", help="output folder (created if missing)")
    p.add_argument("--format", choices=("csv", "parquet"), default="csv", help="table format (default: csv)")
    p.add_argument("--plots", action="store_true", help="also write Bland–Altman figures (PNG and SVG) into DIR/plots/")
    p.add_argument("--report", action="store_true",
                   help="also write DIR/report.html: one self-contained study report (summary, completeness, QC, "
                        "parameters, agreement with figures, nights to look at, review, methods, codebook)")
    p.add_argument("--workers", type=_positive_int, default=1, metavar="N",
                   help="process participants in N parallel worker processes (default: 1)")
    p.add_argument("--zscore", action="store_true", help="standardise every matrix feature over participants")
    p.add_argument("--min-nights", type=_positive_int, default=1, metavar="N",
                   help="fewest included nights for a source's mean and SD in the matrix (default: 1)")
    p.add_argument("--no-cache", dest="cache", action="store_false",
                   help="score every participant afresh; neither read nor update STUDY/.sleepfuse-cache/ "
                        "(by default only participants whose files or settings changed are recomputed)")
    p.add_argument("--scheduler", metavar="ADDRESS", default=None,
                   help="run the per-participant work on a Dask cluster: a scheduler address such as "
                        "tcp://head:8786, or 'local' to start a local cluster of --workers processes "
                        "(needs: pip install 'sleepfuse[cluster]')")
    p.set_defaults(func=run_batch_command)
    p = sub.add_parser(
        "report",
        help="rebuild report.html from an existing batch output folder (no scoring)",
        description="Write OUTDIR/report.html from the tables and provenance.json of a finished "
        "'sleepfuse batch' run, without reading or scoring the study again. The report is one self-contained "
        "HTML file: it opens offline and prints.",
    )
    p.add_argument("outdir", type=Path, metavar="OUTDIR", help="output folder of 'sleepfuse batch' (with provenance.json)")
    p.set_defaults(func=run_report_command)


def _positive_int(value: str) -> int:
    try:
        n = int(value)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{value!r} is not a whole number") from None
    if n < 1:
        raise argparse.ArgumentTypeError(f"{value!r} must be 1 or more")
    return n


def run_batch_command(args: argparse.Namespace) -> int:
    import pandas as pd

    from sleepfuse.cli.progress import progress_bars
    from sleepfuse.model.definitions import instrument_nights
    from sleepfuse.model.qc import qc_summary
    from sleepfuse.run.batch import BatchOptions, run_batch
    from sleepfuse.run.distributed import DaskUnavailable

    options = BatchOptions(out=args.out, format=args.format, plots=args.plots, workers=args.workers,
                           zscore=args.zscore, min_nights=args.min_nights, cache=args.cache,
                           scheduler=args.scheduler, report=args.report)
    try:
        with progress_bars() as bar:
            result = run_batch(args.study, options, progress=bar("participants"), argv=sys.argv,
                               step_progress=bar)
    except DaskUnavailable as exc:
        print(f"sleepfuse: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt as exc:
        if str(exc):  # interrupted while writing: the message says what is left
            raise
        raise KeyboardInterrupt(f"interrupted before writing; nothing of this run was written to {args.out}") from None
    qc = result.tables["qc"]
    errors, warnings = qc[qc["severity"] == "error"], qc[qc["severity"] == "warning"]
    shown = pd.concat([errors, warnings.head(CONSOLE_WARNINGS)])
    for _, e in shown.iterrows():  # every error; the first warnings (all are in qc)
        where = " ".join(str(x) for x in (e["participant"], e["night"], e["file"]) if x)
        print(f"{e['severity'].upper():7s} {where}: {e['message']}", file=sys.stderr)
    if len(warnings) > CONSOLE_WARNINGS:
        print(f"... and {len(warnings) - CONSOLE_WARNINGS} more warnings: see qc.{args.format} in {args.out}",
              file=sys.stderr)
    for note in result.notes:  # temporary, stale and foreign files in the output folder
        print(f"note: {note}", file=sys.stderr)
    print(f"QC log: {qc_summary(result.tables['qc']['severity'])}", file=sys.stderr)
    print(f"{result.n_participants} participants ({result.n_recomputed} computed, {result.n_from_cache} from cache), "
          f"{instrument_nights(result.tables['nights'])} included; wrote {len(result.written)} files to {args.out}",
          file=sys.stderr)
    if result.n_scored_nights == 0:
        print("sleepfuse: nothing could be processed; see qc in the output folder", file=sys.stderr)
        return 1
    return 0


def run_report_command(args: argparse.Namespace) -> int:
    from sleepfuse.cli.progress import participant_progress
    from sleepfuse.model.errors import ReadError
    from sleepfuse.output.report import rebuild_report

    try:
        with participant_progress("figures") as update:
            path = rebuild_report(args.outdir, progress=update)
    except ReadError as exc:
        print(f"sleepfuse: {exc}", file=sys.stderr)
        return 1
    print(f"wrote {path}", file=sys.stderr)
    return 0

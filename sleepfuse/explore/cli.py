"""``sleepfuse explore``: the clustering preview of a participant × feature matrix, headless.

Writes models.csv, membership.csv, standardisation.csv, agreement_between_blocks.csv (when
several blocks), holdout.csv (with --holdout), selected_columns.csv and selection_steps.csv
(with --select), outcomes.csv, profiles.csv and participants_without_outcomes.csv (with
--outcomes), bootstrap.csv and bootstrap_summary.csv (with --bootstrap) and the bic/solution figures (PNG + SVG) into --out, atomically.

Messages: progress and the summary go to stdout, once each; only errors go to stderr.
Exit status: 0 a model was fitted and every output written; 1 nothing could be fitted (the
tables saying why are written, no figures); 2 bad command line or unreadable input, or the
output folder cannot be written.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import TYPE_CHECKING

import pandas as pd

from sleepfuse.model.errors import ConfigError
from sleepfuse.explore.columns import BLOCKS, PARTICIPANT, read_participant_csv
from sleepfuse.explore.names import (DEFAULT_KMAX, DEFAULT_MAX_ITER, DEFAULT_STARTS, EXPLORATORY_CAUTION,
                                      DEFAULT_FAMILIES, FAMILIES)
from sleepfuse.output.files import write_csv as write_csv_atomic

if TYPE_CHECKING:
    from sleepfuse.explore.selection import ExploreResult

DESCRIPTION = (
    "Look for subgroups of participants in a participant x feature matrix with Gaussian, "
    "skew-normal and t mixtures (and skew-t on request) for K = 1..kmax, chosen by BIC. " + EXPLORATORY_CAUTION
)


def add_explore_parser(subparsers) -> argparse.ArgumentParser:
    """Register the ``explore`` command on an argparse subparsers object (sets func=run_explore)."""
    p = subparsers.add_parser("explore", help="clustering preview of matrix.csv (exploratory)",
                              description=DESCRIPTION)
    p.add_argument("matrix", metavar="MATRIX", help="participant x feature CSV (first column 'participant')")
    p.add_argument("--columns", help="comma-separated column names or glob patterns, e.g. 'psg_*_mean,diary_sol_min_mean'")
    p.add_argument("--blocks", help=f"comma-separated instrument blocks: {', '.join(BLOCKS)} (default: all); "
                                    "a block takes its _mean columns (and the actigraphy rhythm measures)")
    p.add_argument("--log", metavar="COLUMNS",
                   help="names or glob patterns of columns fitted as ln(1 + x), for strongly right-skewed "
                        "minutes such as '*_sol_min_mean,*_waso_min_mean'")
    p.add_argument("--kmax", type=int, default=DEFAULT_KMAX,
                   help=f"largest number of clusters tried (default {DEFAULT_KMAX})")
    p.add_argument("--starts", type=int, default=DEFAULT_STARTS,
                   help=f"seeded EM starts per model (default {DEFAULT_STARTS})")
    p.add_argument("--seed", type=int, default=0, help="seed of the starts and of the holdout split (default 0)")
    p.add_argument("--holdout", type=float, metavar="FRACTION",
                   help="keep this fraction of participants as a validation sample, e.g. 0.3")
    p.add_argument("--families", default=",".join(DEFAULT_FAMILIES),
                   help=f"comma-separated mixture families of {','.join(FAMILIES)} "
                        f"(default {','.join(DEFAULT_FAMILIES)}; skewt is slower)")
    p.add_argument("--max-iter", type=int, default=DEFAULT_MAX_ITER, dest="max_iter",
                   help=f"EM iterations per start before giving up on convergence (default {DEFAULT_MAX_ITER})")
    p.add_argument("--select", action="store_true",
                   help="choose the columns first by stepwise BIC (Raftery & Dean 2006), within each block")
    p.add_argument("--keep", metavar="COLUMNS", help="names or glob patterns of columns --select always keeps")
    p.add_argument("--select-family", dest="select_family", choices=[f for f in FAMILIES if f != "skewt"],
                   help="mixture family of the --select search (default skewnormal when among --families, "
                        "else the first of --families)")
    p.add_argument("--bootstrap", type=int, default=0, metavar="B",
                   help="stability check: refit the preferred model on B resamples of the participants "
                        "(seeded by --seed) and report the adjusted Rand index against it (default 0 = off)")
    p.add_argument("--outcomes", metavar="TABLE.csv",
                   help="CSV with a 'participant' column and a-priori labels or outcomes to relate to the clusters")
    p.add_argument("--out", required=True, metavar="DIR", help="folder for the outputs (created if needed)")
    p.set_defaults(func=run_explore)
    return p


def _say(message: str) -> None:
    print(f"sleepfuse explore: {message}", flush=True)


def _error(message: str) -> None:
    print(f"sleepfuse explore: error: {message}", file=sys.stderr, flush=True)


def _check_options(args) -> tuple[str, ...]:
    families = tuple(f.strip() for f in str(args.families).split(",") if f.strip())
    for f in families:
        if f not in FAMILIES:
            raise ConfigError("--families", f, ", ".join(FAMILIES))
    if not families:
        raise ConfigError("--families", args.families, ", ".join(FAMILIES))
    if args.kmax < 1:
        raise ConfigError("--kmax", args.kmax, "a whole number of at least 1")
    if args.starts < 1:
        raise ConfigError("--starts", args.starts, "a whole number of at least 1")
    if getattr(args, "max_iter", DEFAULT_MAX_ITER) < 1:
        raise ConfigError("--max-iter", args.max_iter, "a whole number of at least 1")
    if getattr(args, "select_family", None) and not getattr(args, "select", False):
        raise ConfigError("--select-family", args.select_family, "use it together with --select")
    if getattr(args, "bootstrap", 0) < 0:
        raise ConfigError("--bootstrap", args.bootstrap, "a whole number of resamples, 0 (off) or more, e.g. 50")
    if args.holdout is not None and not 0.0 < args.holdout < 1.0:
        raise ConfigError("--holdout", args.holdout, "a fraction strictly between 0 and 1, e.g. 0.3")
    return families


def read_matrix(path: str | Path) -> pd.DataFrame:
    """The matrix CSV with participant IDs kept as text; ConfigError when it cannot be used."""
    path = Path(path)
    matrix = read_participant_csv(path, "MATRIX", f"a CSV whose first column is '{PARTICIPANT}'")
    duplicated = matrix[PARTICIPANT][matrix[PARTICIPANT].duplicated()].unique()
    if len(duplicated):
        raise ConfigError("MATRIX", str(path), "one row per participant (repeated: "
                          + ", ".join(map(str, duplicated[:5])) + ")")
    return matrix


def write_outputs(result: ExploreResult, out: str | Path, outcomes: pd.DataFrame | None = None) -> list[Path]:
    """All tables of a run into ``out``, and its figures when a model was fitted, each written atomically."""
    out = Path(out)
    written = [
        write_csv_atomic(result.models, out / "models.csv"),
        write_csv_atomic(result.membership, out / "membership.csv"),
        write_csv_atomic(pd.concat([b.data.standardisation() for b in result.blocks], ignore_index=True),
                         out / "standardisation.csv"),
    ]
    if len(result.blocks) > 1:
        written.append(write_csv_atomic(result.agreement, out / "agreement_between_blocks.csv"))
    holdouts = [b.holdout.summary(b.name) for b in result.blocks if b.holdout is not None]
    if holdouts:
        written.append(write_csv_atomic(pd.DataFrame(holdouts), out / "holdout.csv"))
    selections = [b.selection for b in result.blocks if b.selection is not None]
    if selections:
        written.append(write_csv_atomic(pd.concat([s.columns_table() for s in selections], ignore_index=True),
                                        out / "selected_columns.csv"))
        written.append(write_csv_atomic(pd.concat([s.steps_table() for s in selections], ignore_index=True),
                                        out / "selection_steps.csv"))
    boots = [b for b in result.blocks if b.bootstrap is not None]
    if boots:
        written.append(write_csv_atomic(pd.concat([b.bootstrap.table(b.name) for b in boots], ignore_index=True),
                                        out / "bootstrap.csv"))
        written.append(write_csv_atomic(pd.DataFrame([b.bootstrap.summary(b.name) for b in boots]),
                                        out / "bootstrap_summary.csv"))
    if outcomes is not None:
        from sleepfuse.explore.outcomes import relate_blocks

        tables, profiles, missing = relate_blocks(result, outcomes)
        written.append(write_csv_atomic(tables, out / "outcomes.csv"))
        written.append(write_csv_atomic(profiles, out / "profiles.csv"))
        written.append(write_csv_atomic(missing, out / "participants_without_outcomes.csv"))
    if not result.any_fitted:
        return written
    from sleepfuse.explore.figures import plot_bic, plot_solution

    written += plot_bic(result, out / "bic")
    written += plot_solution(result, out / "solution")
    return written


def summary_lines(result: ExploreResult) -> list[str]:
    """The short plain-text summary printed to stdout."""
    lines = []
    for block in result.blocks:
        data = block.data
        n_out = len(data.excluded)
        head = f"[{block.name}] {len(data.participants)} participants"
        if block.validation is not None:
            head += f" in development, {len(block.validation.participants)} in validation"
        head += f", {len(data.columns)} column(s); {n_out} left out for missing values"
        lines.append(head)
        for note in block.notes:
            lines.append(f"  note: {note}")
        best = block.preferred
        if best is None:
            reasons = sorted({m for m in block.models["message"] if m}) or ["no usable column"]
            lines.append("  no model could be fitted: " + "; ".join(reasons[:2]))
            continue
        sizes = ", ".join(f"{int(r.n_assigned)}" for r in block.cluster_sizes.itertuples())
        lines.append(f"  preferred by BIC: {best.family}, K={best.n_components} "
                     f"(BIC {best.bic:.1f}); cluster sizes {sizes}")
        if best.dofs is not None:
            lines.append("  degrees of freedom of the t components: " + ", ".join(f"{v:.1f}" for v in best.dofs))
        if not best.converged:
            lines.append(f"  WARNING: the preferred fit did not converge ({best.message}); no fit converged, "
                         "so treat it with care (try --max-iter, fewer columns or --log)")
        table = block.models
        table = table[table["set"] != "validation"]
        for family, rows in table.groupby("family", sort=False):
            bics = "  ".join(f"K={int(r.K)}: {r.BIC:.1f}" if pd.notna(r.BIC) else f"K={int(r.K)}: failed"
                             for r in rows.itertuples())
            lines.append(f"  {family:<10} {bics}")
        if block.holdout is not None:
            h = block.holdout
            val = f"{h.validation[0]}, K={h.validation[1]}" if h.validation else "nothing fitted"
            lines.append(f"  validation sample prefers {val}: the development choice "
                         f"{'holds' if h.holds else 'does NOT hold'}")
        if block.bootstrap is not None:
            lines.append("  " + bootstrap_line(block.bootstrap))
    if len(result.blocks) > 1:
        for r in result.agreement.itertuples():
            ari = f"{r.ari:.2f}" if pd.notna(r.ari) else "not defined"
            note = f" ({r.note})" if r.note else ""
            lines.append(f"agreement {r.block_a} vs {r.block_b}: adjusted Rand index {ari} "
                         f"over {r.n_participants} participants{note}")
    if any(b.selection is not None for b in result.blocks):
        from sleepfuse.explore.varselect import SELECTION_CAUTION

        lines.append(SELECTION_CAUTION)
    lines.append(EXPLORATORY_CAUTION)
    return lines


def bootstrap_line(boot) -> str:
    """The stability summary: mean bootstrap ARI, its 2.5-97.5% range, and replicates that failed."""
    s = boot.summary("")
    if not s["fitted"]:
        return f"bootstrap: none of {s['replicates']} resamples could be fitted"
    text = (f"bootstrap stability ({s['replicates']} resamples, seed {s['seed']}): adjusted Rand index "
            f"mean {s['ari_mean']:.2f}, 2.5-97.5% range {s['ari_p2.5']:.2f} to {s['ari_p97.5']:.2f}")
    failed = s["replicates"] - s["fitted"]
    if failed or s["unconverged"]:
        text += f" ({failed} resample(s) not fitted, {s['unconverged']} not converged)"
    return text


def outcome_lines(tests: pd.DataFrame, missing: pd.DataFrame) -> list[str]:
    """One line per outcome (test, p, effect, ARI), and who is missing from the outcomes table."""
    lines = []
    for r in tests.itertuples():
        if not isinstance(r.test, str) or not r.test:     # read back from CSV, an empty test is NaN
            lines.append(f"  [{r.block}] {r.outcome}: {r.note}")
            continue
        p = "< 0.001" if r.p < 0.001 else f"{r.p:.3f}"
        ari = f", ARI {r.ari:.2f}" if pd.notna(r.ari) else ""
        lines.append(f"  [{r.block}] {r.outcome} ({r.kind}, n={r.n}): {r.test} {r.statistic:.2f}, p {p}, "
                     f"{r.effect_name} {r.effect:.2f}{ari}")
    for block, rows in missing.groupby("block", sort=False):
        who = ", ".join(rows["participant"].head(10)) + (" ..." if len(rows) > 10 else "")
        lines.append(f"  [{block}] {len(rows)} clustered participant(s) not in the outcomes table: {who}")
    return lines


def run_explore(args) -> int:
    """Run the explore command from parsed arguments; returns the exit status."""
    from sleepfuse.explore.selection import explore

    from sleepfuse.explore.outcomes import read_outcomes

    try:
        families = _check_options(args)
        matrix = read_matrix(args.matrix)
        outcomes = read_outcomes(args.outcomes) if getattr(args, "outcomes", None) else None
        result = explore(matrix, args.columns, args.blocks, families=families, kmax=args.kmax,
                         starts=args.starts, seed=args.seed, holdout=args.holdout, progress=_say,
                         log=getattr(args, "log", None), max_iter=getattr(args, "max_iter", DEFAULT_MAX_ITER),
                         select=getattr(args, "select", False), keep=getattr(args, "keep", None),
                         select_family=getattr(args, "select_family", None),
                         bootstrap=getattr(args, "bootstrap", 0))
    except ConfigError as exc:
        _error(str(exc))
        return 2
    try:
        written = write_outputs(result, args.out, outcomes)
    except OSError as exc:
        _error(f"cannot write to {args.out}: {exc}")
        return 2
    for line in summary_lines(result):
        print(line)
    if outcomes is not None and result.any_fitted:
        tests = pd.read_csv(Path(args.out) / "outcomes.csv", keep_default_na=False, na_values=[""])
        missing = pd.read_csv(Path(args.out) / "participants_without_outcomes.csv", dtype=str)
        print("clusters against the outcomes table:")
        for line in outcome_lines(tests, missing):
            print(line)
    if not result.any_fitted:
        _say(f"nothing could be fitted; wrote {len(written)} tables saying why (no figures) to {args.out}")
        return 1
    _say(f"wrote {len(written)} files to {args.out}")
    return 0


def main(argv: list[str] | None = None) -> int:
    """Stand-alone entry (``python -m sleepfuse.explore.cli``) until the main CLI registers the command."""
    parser = argparse.ArgumentParser(prog="sleepfuse")
    sub = parser.add_subparsers(dest="command", required=True)
    add_explore_parser(sub)
    args = parser.parse_args(argv)
    return args.func(args)


if __name__ == "__main__":
    raise SystemExit(main())

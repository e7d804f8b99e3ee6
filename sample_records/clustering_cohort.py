"""Write an invented 200-participant clustering cohort: matrix.csv and participants.csv.

Every participant and value is invented by a seeded simulation
(sleepfuse.explore.simulate.hidden_subgroup_cohort); no real person's data. A subgroup
of about a third of the participants has long sleep-onset latency in the diary, the
actigraphy and the PSG; the nine other columns (WASO, TST, sleep efficiency) are skewed
but carry no subgroup. participants.csv holds an invented a-priori label
(``reported_group``, agreeing with the subgroup for about 90 %) and two unrelated columns
(``site``, ``age``). Run from the repo root:

    python sample_records/clustering_cohort.py [OUT_DIR]      # default: clustering_cohort/

The output is deterministic (seed 17). The committed demo study stays small; this cohort
is written on demand and is not committed.
"""

from __future__ import annotations

import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from sleepfuse.explore.simulate import hidden_subgroup_cohort  # noqa: E402
from sleepfuse.output.files import write_csv  # noqa: E402


def main(argv: list[str]) -> int:
    out = Path(argv[0] if argv else "clustering_cohort")
    out.mkdir(parents=True, exist_ok=True)
    matrix, participants = hidden_subgroup_cohort(n=200, n_noise=9, seed=17)
    write_csv(matrix, out / "matrix.csv")
    write_csv(participants.drop(columns=["truth"]), out / "participants.csv")
    print(f"wrote {out / 'matrix.csv'} ({len(matrix)} participants x {matrix.shape[1] - 1} columns) "
          f"and {out / 'participants.csv'} (invented)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main(sys.argv[1:]))

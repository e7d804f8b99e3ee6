"""Write the invented demo study "Harbour Lane pilot" into this folder.

Every participant, night and value here is invented by a seeded simulation
(sleepfuse.synthetic.cohort); no real person's data. Run from the repo root:

    python sample_records/generate.py [OUT_DIR]

OUT_DIR defaults to this folder. The output is deterministic: the same files,
byte for byte, on every run (tests/test_sample_records.py checks it).
"""

from __future__ import annotations

import datetime as dt
import shutil
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

from sleepfuse.synthetic.cohort import ParticipantPlan, simulate_participant, write_diary  # noqa: E402

TZ = "America/Chicago"  # clocks fall back on 2026-11-01 at 02:00
D = dt.date
STUDY_TOML = f'''# Invented demo study: no real participants.
[study]
name = "Harbour Lane pilot (invented demo data)"
timezone = "{TZ}"

[actigraphy]
algorithm = "cole-kripke"
coefficients = "1min-p0.001"
# The invented wrist device reports counts about 100 times the scale of the
# Cole–Kripke (1992) paper, so they are scaled down before scoring.
count_scale = 0.01
webster = true
'''

PLANS = [
    # a PSG night across the autumn daylight-saving change; 30-s counts
    ParticipantPlan("P01", D(2026, 10, 27), 9, psg_nights=[D(2026, 10, 31)], actigraphy_epoch_s=30,
                    patient_field="X F 02-FEB-1981 Nobody_Demo"),
    # diary entry after midnight; a daytime stretch without the watch (no off-wrist column: Choi rule)
    ParticipantPlan("P02", D(2026, 10, 27), 8, psg_nights=[D(2026, 10, 28), D(2026, 11, 2)],
                    after_midnight_nights=[D(2026, 10, 29)], daytime_nonwear_days=[D(2026, 10, 30)]),
    # one PSG night stored as an integer hypnogram signal
    ParticipantPlan("P03", D(2026, 10, 28), 8, psg_nights=[D(2026, 10, 29), D(2026, 10, 31)],
                    signal_hypnogram_nights=[D(2026, 10, 31)]),
    # watch off the wrist inside a night, flagged in an off_wrist column; ISO diary times
    ParticipantPlan("P04", D(2026, 10, 27), 9, psg_nights=[D(2026, 10, 30)], off_wrist_column=True,
                    off_wrist_nights=[D(2026, 11, 1)], iso_diary=True),
    # R&K labels (stages 3 and 4, movement time); 30-s counts
    ParticipantPlan("P05", D(2026, 10, 29), 7, psg_nights=[D(2026, 10, 30), D(2026, 11, 1)], label_style="rk",
                    actigraphy_epoch_s=30),
    # loose label spellings and "Lights Out"; the actigraph clock runs 6 min fast
    ParticipantPlan("P06", D(2026, 10, 27), 8, psg_nights=[D(2026, 10, 29)], label_style="loose",
                    clock_offset_min=6.0, bedtime_h=23.6),
    # no PSG at all (missing instrument); diary in the shared diary.csv
    ParticipantPlan("P07", D(2026, 10, 28), 8, psg_nights=[]),
    # no lights markers on one night, an unknown stage label, a diary row typed wrongly
    ParticipantPlan("P08", D(2026, 10, 27), 8, psg_nights=[D(2026, 10, 28), D(2026, 10, 31)],
                    no_lights_nights=[D(2026, 10, 28)], unknown_label_nights=[D(2026, 10, 31)],
                    bad_diary_nights=[D(2026, 10, 30)], bedtime_h=22.5),
]
SHARED_DIARY = {"P07", "P08"}


def generate(out: Path) -> None:
    """Write the demo study into ``out`` (its psg/, actigraphy/, diary/ are replaced)."""
    for sub in ("psg", "actigraphy", "diary"):
        shutil.rmtree(out / sub, ignore_errors=True)
    out.mkdir(parents=True, exist_ok=True)
    (out / "study.toml").write_text(STUDY_TOML, encoding="utf-8")
    shared: list[dict[str, str]] = []
    for i, plan in enumerate(PLANS):
        simulate_participant(out, plan, TZ, seed=20261027 + i,
                             diary_rows_out=shared if plan.participant in SHARED_DIARY else None)
    write_diary(out / "diary" / "diary.csv", shared, with_participant=True)


def main() -> None:
    out = Path(sys.argv[1]) if len(sys.argv) > 1 else HERE
    generate(out)
    total = sum(p.stat().st_size for p in out.rglob("*") if p.is_file() and p.parent != HERE)
    print(f"wrote {len(PLANS)} invented participants to {out} ({total / 1e6:.1f} MB)")


if __name__ == "__main__":
    main()

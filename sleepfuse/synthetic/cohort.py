"""Invented participants for the demo study and the benchmarks (never real people).

One hidden "true" sleep timeline per night is drawn from a simple
semi-Markov model of sleep cycles; the three instruments are then made from
it the way each sees the night: the PSG as a scored hypnogram between lights
off and lights on, the actigraph as activity counts (with its own clock,
which may run off), the diary as the participant's recollection (with the
usual over-estimated latency). Deterministic for a given seed.
"""

from __future__ import annotations

import csv
import datetime as dt
import io
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from sleepfuse.output.files import write_text
from .edf_writer import Signal, write_edf_plus

# internal stage codes of the simulation
W, N1, N2, N3, R = 0, 1, 2, 3, 4
MT, UNKNOWN = 6, 7  # movement time, a label no map knows (PSG files only)
AASM_LABELS = {W: "Sleep stage W", N1: "Sleep stage N1", N2: "Sleep stage N2", N3: "Sleep stage N3", R: "Sleep stage R"}
RK_LABELS = {W: "Sleep stage W", N1: "Sleep stage 1", N2: "Sleep stage 2", N3: "Sleep stage 3", R: "Sleep stage R"}
LOOSE_LABELS = {W: "Wake", N1: "NREM 1", N2: "stage 2 sleep", N3: "NREM3", R: "REM"}
SIGNAL_CODES = {W: 0, N1: 1, N2: 2, N3: 3, R: 5}  # W,1,2,3,4,R,M = 0..6, unscored 9 (common practice)


@dataclass
class TrueNight:
    """The hidden truth of one night, in elapsed seconds from ``tried_to_sleep``."""

    night: dt.date
    bedtime: pd.Timestamp
    tried_to_sleep: pd.Timestamp
    out_of_bed: pd.Timestamp
    stages: np.ndarray  # 30-s epochs from tried_to_sleep to out_of_bed

    @property
    def final_awakening(self) -> pd.Timestamp:
        sleep = np.flatnonzero(self.stages != W)
        last = sleep[-1] + 1 if sleep.size else 0
        return self.tried_to_sleep + pd.Timedelta(seconds=30 * last)

    @property
    def sol_min(self) -> float:
        sleep = np.flatnonzero(self.stages != W)
        return float(sleep[0]) * 0.5 if sleep.size else float("nan")


@dataclass
class ParticipantPlan:
    """What to make for one invented participant."""

    participant: str
    first_night: dt.date
    n_days: int
    psg_nights: list[dt.date] = field(default_factory=list)
    actigraphy_epoch_s: int = 60
    has_actigraphy: bool = True
    has_diary: bool = True
    label_style: str = "aasm"  # aasm | rk | loose | signal
    signal_hypnogram_nights: list[dt.date] = field(default_factory=list)
    no_lights_nights: list[dt.date] = field(default_factory=list)
    unknown_label_nights: list[dt.date] = field(default_factory=list)
    off_wrist_column: bool = False
    off_wrist_nights: list[dt.date] = field(default_factory=list)  # watch off for ~2 h inside the night
    daytime_nonwear_days: list[dt.date] = field(default_factory=list)  # ~2 h of zero counts at midday
    clock_offset_min: float = 0.0  # actigraph clock minus true time
    after_midnight_nights: list[dt.date] = field(default_factory=list)  # diary tried_to_sleep after 00:00
    iso_diary: bool = False
    bad_diary_nights: list[dt.date] = field(default_factory=list)  # out of bed typed before tried to sleep
    bedtime_h: float = 23.0
    patient_field: str = "X X X X"


def simulate_night(rng: np.random.Generator, night: dt.date, tz: str, bedtime_h: float, *, late: bool = False) -> TrueNight:
    """One night's true timeline: sleep-onset latency, ~90-min cycles with brief wakes, final wake."""
    h = bedtime_h + rng.normal(0, 0.4) + (1.5 if late else 0.0)
    base = pd.Timestamp(dt.datetime.combine(night, dt.time(0, 0))).tz_localize(tz)
    # wall-clock placement, then elapsed arithmetic from there on
    wall = dt.datetime.combine(night, dt.time(0, 0)) + dt.timedelta(hours=h)
    tried = pd.Timestamp(wall).tz_localize(tz, ambiguous=True, nonexistent="shift_forward")
    del base
    bedtime = tried - pd.Timedelta(minutes=float(rng.uniform(5, 25)))
    sol = max(1.0, rng.lognormal(np.log(14), 0.6))
    tst_target = rng.normal(420, 35) - (60 if late else 0)
    epochs: list[int] = [W] * int(round(sol * 2))
    cycle = 0
    asleep_min = 0.0
    while asleep_min < tst_target:
        n3 = max(0.0, 28 - 9 * cycle + rng.normal(0, 5))
        rem = max(2.0, 6 + 7 * cycle + rng.normal(0, 4))
        parts = [(N1, rng.uniform(1, 6)), (N2, rng.uniform(12, 28)), (N3, n3), (N2, rng.uniform(5, 18)), (R, rem)]
        for stage, minutes in parts:
            n = int(round(minutes * 2))
            epochs += [stage] * n
            asleep_min += n / 2
            if rng.random() < 0.35:
                epochs += [W] * int(rng.integers(1, 8))
        cycle += 1
    terminal = rng.uniform(3, 25)
    epochs += [W] * int(round(terminal * 2))
    stages = np.asarray(epochs, dtype=np.int8)
    out = tried + pd.Timedelta(seconds=30 * stages.size)
    return TrueNight(night, bedtime, tried, out, stages)


def write_psg(path: Path, truth: TrueNight, plan: ParticipantPlan, rng: np.random.Generator) -> None:
    """The PSG of one night: lights off/on around the true opportunity, stages as scored."""
    lights_off = truth.tried_to_sleep + pd.Timedelta(seconds=30 * int(rng.integers(-4, 3)))
    rec_start = lights_off - pd.Timedelta(minutes=float(rng.uniform(8, 20)))
    rec_start = rec_start.floor("s")
    lights_on = truth.out_of_bed + pd.Timedelta(seconds=30 * int(rng.integers(-4, 2)))
    off_s = (lights_off - rec_start).total_seconds()
    on_s = (lights_on - rec_start).total_seconds()
    # scored epochs run from recording start on a 30-s grid; before/after the truth: wake
    n_before = int(round((truth.tried_to_sleep - rec_start).total_seconds() / 30))
    tail = int(round(rng.uniform(5, 15) * 2))
    stages = np.concatenate([np.full(n_before, W, np.int8), truth.stages, np.full(tail, W, np.int8)])
    scorer_noise = rng.random(stages.size) < 0.03
    stages = np.where(scorer_noise & (stages == N2), N1, stages).astype(np.int8)
    night = truth.night
    style = "signal" if night in plan.signal_hypnogram_nights else plan.label_style
    naive_start = rec_start.tz_localize(None).to_pydatetime()
    anns: list[tuple[float, float | None, str]] = []
    if night not in plan.no_lights_nights:
        anns += [(off_s, None, "Lights Out" if style == "loose" else "Lights off"), (on_s, None, "Lights on")]
    if style == "signal":
        codes = np.vectorize(SIGNAL_CODES.get)(stages).astype(float)
        write_edf_plus(
            path, start=naive_start, annotations=anns, duration_s=30.0 * stages.size, record_duration_s=30.0,
            signals=[Signal("Hypnogram", codes, 1, 0.0, 9.0)], patient=plan.patient_field,
        )
        return
    labels = {"aasm": AASM_LABELS, "rk": RK_LABELS, "loose": LOOSE_LABELS}[style]
    labels = {**labels, MT: "Movement time", UNKNOWN: "Sleep stage X"}
    stages = stages.copy()
    if style == "rk":  # one epoch scored as movement time (R&K)
        stages[int(rng.integers(stages.size // 3, 2 * stages.size // 3))] = MT
    if night in plan.unknown_label_nights:  # a label no map knows, on two epochs
        k = int(rng.integers(stages.size // 4, stages.size // 2))
        stages[k:k + 2] = UNKNOWN
    # run-length annotations: one annotation per run of a stage (spans many epochs)
    change = np.flatnonzero(np.diff(stages)) + 1
    starts = np.concatenate([[0], change])
    ends = np.concatenate([change, [stages.size]])
    for s, e in zip(starts, ends):
        label = labels[int(stages[s])]
        if style == "rk" and stages[s] == N3:
            # R&K splits slow-wave sleep into stages 3 and 4
            half = s + (e - s) // 2
            anns.append((30.0 * s, 30.0 * (half - s), "Sleep stage 3"))
            if e > half:
                anns.append((30.0 * half, 30.0 * (e - half), "Sleep stage 4"))
            continue
        anns.append((30.0 * s, 30.0 * (e - s), label))
    anns.sort(key=lambda a: a[0])
    write_edf_plus(path, start=naive_start, annotations=anns, duration_s=30.0 * stages.size, patient=plan.patient_field)


def minute_counts(rng: np.random.Generator, n_min: int, state: np.ndarray) -> np.ndarray:
    """Activity counts per minute (the invented device's scale, ~100x Cole–Kripke's) by state.

    state: 0 = awake and up, 1 = awake in bed, 2 = light sleep, 3 = deep sleep, 4 = REM.
    """
    counts = np.zeros(n_min)
    up = state == 0
    counts[up] = rng.gamma(1.4, 260.0, up.sum())
    bed = state == 1
    counts[bed] = rng.gamma(1.5, 180.0, bed.sum()) * (rng.random(bed.sum()) < 0.9)
    light = state == 2
    counts[light] = rng.gamma(1.0, 25.0, light.sum()) * (rng.random(light.sum()) < 0.22)
    deep = state == 3
    counts[deep] = rng.gamma(1.0, 8.0, deep.sum()) * (rng.random(deep.sum()) < 0.05)
    rem = state == 4
    counts[rem] = rng.gamma(1.0, 20.0, rem.sum()) * (rng.random(rem.sum()) < 0.25)
    return np.round(counts)


def write_actigraphy(path: Path, truths: list[TrueNight], plan: ParticipantPlan, tz: str, rng: np.random.Generator) -> None:
    """Counts from noon of the first night for n_days, on the device's (possibly offset) clock."""
    start = pd.Timestamp(dt.datetime.combine(plan.first_night, dt.time(12, 0))).tz_localize(tz)
    n_min = plan.n_days * 24 * 60
    state = np.zeros(n_min, dtype=np.int8)
    minute_of = lambda ts: int((ts - start).total_seconds() // 60)  # noqa: E731
    for t in truths:
        a, b = minute_of(t.bedtime), minute_of(t.out_of_bed)
        state[max(a, 0):max(b, 0)] = 1
        m0 = minute_of(t.tried_to_sleep)
        per_min = t.stages[: (t.stages.size // 2) * 2].reshape(-1, 2).max(axis=1)  # crude minute stage
        sim = np.select([per_min == W, per_min == N3, per_min == R], [1, 3, 4], 2)
        lo, hi = max(m0, 0), min(m0 + sim.size, n_min)
        if hi > lo:
            state[lo:hi] = sim[lo - m0: hi - m0]
    counts = minute_counts(rng, n_min, state)
    off = np.zeros(n_min, dtype=bool)
    for t in truths:
        if t.night in plan.off_wrist_nights:
            m = minute_of(t.tried_to_sleep) + 120
            off[max(m, 0):max(m + 130, 0)] = True
    for day in plan.daytime_nonwear_days:
        m = minute_of(pd.Timestamp(dt.datetime.combine(day, dt.time(13, 0))).tz_localize(tz))
        off[max(m, 0):max(m + 125, 0)] = True
    counts[off] = 0
    epoch = plan.actigraphy_epoch_s
    per = 60 // epoch
    if per > 1:
        share = rng.dirichlet(np.ones(per), n_min)
        sub = np.round(counts[:, None] * share).reshape(-1)
        off_sub = np.repeat(off, per)
    else:
        sub, off_sub = counts, off
    clock = start + pd.Timedelta(minutes=plan.clock_offset_min)
    times = clock + pd.to_timedelta(np.arange(sub.size) * epoch, unit="s")
    wall = times.tz_localize(None).strftime("%Y-%m-%dT%H:%M:%S")
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    header = ["timestamp", "counts"] + (["off_wrist"] if plan.off_wrist_column else [])
    w.writerow(header)
    sub_i = sub.astype(int)
    if plan.off_wrist_column:
        w.writerows(zip(wall, sub_i, off_sub.astype(int)))
    else:
        w.writerows(zip(wall, sub_i))
    write_text(path, buf.getvalue())


def diary_rows(truths: list[TrueNight], plan: ParticipantPlan, rng: np.random.Generator) -> list[dict[str, str]]:
    """The participant's recollection of each night, with the usual reporting bias."""
    rows = []
    for t in truths:
        def jitter(ts: pd.Timestamp, sd: float = 5.0) -> pd.Timestamp:
            return ts + pd.Timedelta(minutes=float(np.round(rng.normal(0, sd) / 5) * 5))

        def fmt(ts: pd.Timestamp) -> str:
            return ts.tz_localize(None).strftime("%Y-%m-%dT%H:%M") if plan.iso_diary else ts.strftime("%H:%M")

        sleep = np.flatnonzero(t.stages != W)
        first, last = sleep[0], sleep[-1]
        wake_in = int(((t.stages[first:last + 1]) == W).sum())
        bouts = int(np.count_nonzero(np.diff((t.stages[first:last + 1] == W).astype(int)) == 1))
        # recollected times keep their real order: bed <= tried <= final awakening <= out of bed
        bed_ts = jitter(t.bedtime)
        tried_ts = max(jitter(t.tried_to_sleep, 3.0), bed_ts)
        final_ts = max(jitter(t.final_awakening), tried_ts + pd.Timedelta(minutes=60))
        out_ts = max(jitter(t.out_of_bed, 3.0), final_ts)
        tried, out = fmt(tried_ts), fmt(out_ts)
        if t.night in plan.bad_diary_nights:
            out = (t.tried_to_sleep - pd.Timedelta(minutes=30)).strftime("%H:%M")
        rows.append(
            {
                "participant": plan.participant,
                "night": t.night.isoformat(),
                "bedtime": fmt(bed_ts),
                "tried_to_sleep": tried,
                "sol_min": f"{max(0.0, round(t.sol_min * rng.uniform(1.0, 1.8) / 5) * 5):.0f}",
                "nwak": str(max(0, int(round(bouts * rng.uniform(0.3, 0.8))))),
                "waso_min": f"{max(0.0, round(wake_in / 2 * rng.uniform(0.6, 1.5) / 5) * 5):.0f}",
                "final_awakening": fmt(final_ts),
                "out_of_bed": out,
                "quality": str(int(np.clip(round(rng.normal(3.4, 0.8)), 1, 5))),
            }
        )
    return rows


DIARY_FIELDS = ["night", "bedtime", "tried_to_sleep", "sol_min", "nwak", "waso_min", "final_awakening", "out_of_bed", "quality"]


def write_diary(path: Path, rows: list[dict[str, str]], *, with_participant: bool = False) -> None:
    fields = (["participant"] if with_participant else []) + DIARY_FIELDS
    buf = io.StringIO()
    w = csv.DictWriter(buf, fieldnames=fields, extrasaction="ignore", lineterminator="\n")
    w.writeheader()
    w.writerows(rows)
    write_text(path, buf.getvalue())


def simulate_participant(root: Path, plan: ParticipantPlan, tz: str, seed: int, *, diary_rows_out: list | None = None) -> None:
    """Write one invented participant's files under ``root`` (psg/, actigraphy/, diary/)."""
    rng = np.random.default_rng(seed)
    nights = [plan.first_night + dt.timedelta(days=i) for i in range(plan.n_days)]
    truths = [simulate_night(rng, n, tz, plan.bedtime_h, late=n in plan.after_midnight_nights) for n in nights]
    by_night = {t.night: t for t in truths}
    for n in plan.psg_nights:
        write_psg(root / "psg" / f"{plan.participant}_{n:%Y%m%d}.edf", by_night[n], plan, rng)
    if plan.has_actigraphy:
        write_actigraphy(root / "actigraphy" / f"{plan.participant}_wrist.csv", truths, plan, tz, rng)
    if plan.has_diary:
        rows = diary_rows(truths, plan, rng)
        if diary_rows_out is not None:
            diary_rows_out.extend(rows)
        else:
            write_diary(root / "diary" / f"{plan.participant}_diary.csv", rows)

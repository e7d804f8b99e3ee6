"""Parameter metadata: unit and definition of every column (SLEEP_PARAMETERS.md), for the codebook and the TUI."""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class ParameterInfo:
    name: str
    unit: str
    definition: str
    skewed: bool = False  # right-skewed: ratio limits on the log scale are reported


_WINDOW = (
    "The sleep opportunity is lights off to lights on (PSG), the diary's tried to sleep to out of bed "
    "(diary, and actigraphy when the diary has the night; else event markers; else the automatic rest interval)."
)

PARAMETERS: dict[str, ParameterInfo] = {
    p.name: p
    for p in [
        ParameterInfo("tib_min", "min", "Length of the sleep opportunity (AASM total recording time, lights off to lights on), exact elapsed "
                      "minutes even when the markers fall between epochs; SOL, LPS and terminal wake are measured from and to the same "
                      "exact times, so TIB = SOL + SPT + terminal wake. "
                      "The consensus sleep diary (Carney et al. 2012) takes time in bed from 'got into bed' instead: that is in_bed_min here."),
        ParameterInfo("sol_min", "min", "Start of the sleep opportunity to the first epoch of any sleep (AASM sleep latency); diary: as reported.", True),
        ParameterInfo("lps_min", "min", "Start of the sleep opportunity to the first epoch of the first run of 10 min of uninterrupted sleep "
                      "(latency to persistent sleep; common practice).", True),
        ParameterInfo("tst_min", "min", "Minutes of sleep epochs in the sleep opportunity (N1+N2+N3+R for PSG); diary: "
                      "(final awakening - tried to sleep) - SOL - WASO."),
        ParameterInfo("spt_min", "min", "Sleep period: first sleep epoch to the end of the last sleep epoch; diary: final awakening - (tried to sleep + SOL)."),
        ParameterInfo("waso_min", "min", "Wake minutes inside the sleep period, excluding the terminal wake after the final awakening (as the consensus "
                      "diary does); diary: as reported. The AASM manual's WASO runs from sleep onset to lights on, i.e. waso_min + terminal_wake_min.", True),
        ParameterInfo("terminal_wake_min", "min", "End of the last sleep epoch to the end of the sleep opportunity; diary: out of bed - final awakening.", True),
        ParameterInfo("se_pct", "%", "Sleep efficiency: 100 x TST / TIB (AASM)."),
        ParameterInfo("nwak", "count", "Number of wake bouts inside the sleep period (a bout: >= 1 consecutive wake epoch, "
                      "or the configured minimum bout length); diary: number of awakenings as reported.", True),
        ParameterInfo("n1_min", "min", "Minutes of stage N1 in the sleep opportunity (AASM; R&K stage 1)."),
        ParameterInfo("n2_min", "min", "Minutes of stage N2 in the sleep opportunity (AASM; R&K stage 2)."),
        ParameterInfo("n3_min", "min", "Minutes of stage N3 in the sleep opportunity (AASM; R&K stages 3 and 4)."),
        ParameterInfo("rem_min", "min", "Minutes of stage R in the sleep opportunity (AASM)."),
        ParameterInfo("n1_pct", "% of TST", "Share of TST in N1."),
        ParameterInfo("n2_pct", "% of TST", "Share of TST in N2."),
        ParameterInfo("n3_pct", "% of TST", "Share of TST in N3."),
        ParameterInfo("rem_pct", "% of TST", "Share of TST in R."),
        ParameterInfo("rem_latency_min", "min", "First sleep epoch to the first R epoch (AASM REM latency).", True),
        ParameterInfo("unscored_min", "min", "Unscored, movement-time and unknown-label epochs in the sleep opportunity; never counted as sleep or wake."),
        ParameterInfo("offwrist_min", "min", "Non-wear minutes in the sleep opportunity (off_wrist column, else the Choi et al. 2011 rule); neither sleep nor wake."),
        ParameterInfo("missing_min", "min", "Actigraphy: minutes of the sleep opportunity with no data (a gap in the file, counts "
                      "above the plausibility ceiling, or outside the recording); off-wrist minutes are in offwrist_min. They are "
                      "neither sleep nor wake in every parameter, as PSG's unscored epochs: not in TST or WASO, they end a wake "
                      "bout and a persistent-sleep run, and they stay in TIB (so SE = TST / TIB counts them as not asleep). A "
                      "night with more than [scoring] max_missing_pct (default 10%, common practice) of its opportunity "
                      "without data is not included."),
        ParameterInfo("in_bed_min", "min", "Diary: got into bed to out of bed (consensus sleep diary time in bed)."),
        ParameterInfo("quality", "as entered", "Self-rated sleep quality as entered in the diary (scale as in [diary] quality_scale of study.toml)."),
        ParameterInfo("is", "ratio 0-1", "Interdaily stability on hourly means in counts per minute, non-wear excluded (Van Someren et al. 1999). "
                      "With hours missing, the generalised form: IS = sum_h n_h (mean_h - mean)^2 / sum_i (x_i - mean)^2, each clock hour "
                      "weighted by its number of valid hours n_h (with complete data n_h = n/24 and this is the published formula)."),
        ParameterInfo("iv", "ratio 0-4", "Intradaily variability on hourly means in counts per minute, non-wear excluded (Van Someren et al. 1999): "
                      "about 0 for a smooth rhythm, about 2 for noise, up to 4 when every hour alternates. With hours missing, the "
                      "generalised form: the squared hour-to-hour differences are summed over the m pairs of consecutive valid hours "
                      "and divided by m (m = n - 1 with complete data)."),
        ParameterInfo("m10", "counts/min", "Mean activity (counts per minute, whatever the epoch length) of the most active 10 consecutive "
                      "hours of the average day (Van Someren et al. 1999)."),
        ParameterInfo("l5", "counts/min", "Mean activity (counts per minute, whatever the epoch length) of the least active 5 consecutive "
                      "hours of the average day (Van Someren et al. 1999)."),
        ParameterInfo("ra", "ratio 0-1", "Relative amplitude (M10 - L5) / (M10 + L5) (Van Someren et al. 1999)."),
    ]
}

WINDOW_NOTE = _WINDOW

DEFINITION_CHOICES: dict[str, str] = {
    "tib_min": "exact elapsed minutes of the sleep opportunity (markers off the epoch grid included); SOL, LPS and "
               "terminal wake measured from/to the same exact times; stage and sleep minutes count whole epochs",
    "webster_missing": "missing and non-wear minutes are neither sleep nor wake in every Webster rule",
    "rhythm_units": "hourly means, M10 and L5 in counts per minute whatever the epoch length",
    "is_iv_missing_hours": "IS weights each clock hour by its number of valid hours; IV divides by the number of "
                           "valid consecutive hour pairs; both equal Van Someren et al. 1999 with complete data",
    "iv_range": "IV lies between 0 and 4 (about 2 for noise)",
    "agreement_nested": "where a participant has several nights, every interval and test in agreement.csv accounts "
                        "for the nesting; the *_method columns name the method",
    "identical_by_construction": "a pair and parameter that share their source on a night (diary - actigraphy TIB "
                                 "when the actigraphy window is the diary's) get no agreement statistics",
}
"""The SLEEP_PARAMETERS.md-level choices of this version, for provenance.json."""
LABELS = {
    "tib_min": "TIB", "sol_min": "SOL", "lps_min": "LPS", "tst_min": "TST", "spt_min": "SPT", "waso_min": "WASO",
    "terminal_wake_min": "Terminal wake", "se_pct": "Sleep efficiency", "nwak": "Wake bouts",
}


def label_of(parameter: str) -> str:
    """Short trade name of a parameter for figures and screens (e.g. 'TST')."""
    return LABELS.get(parameter, parameter)
SOURCE_NAMES = {"psg": "PSG", "actigraphy": "actigraphy", "diary": "diary"}
PAIRS = (("actigraphy", "psg"), ("diary", "psg"), ("diary", "actigraphy"))


def instrument_nights(nights) -> str:
    """'140 instrument-nights (11 PSG, 65 actigraphy, 64 diary)': the included rows of a night table per instrument.

    ``nights`` is a night table (a pandas DataFrame with 'source' and 'included');
    a night counts once per instrument that has it.
    """
    counts = {}
    if len(nights):
        counts = nights.loc[nights["included"].astype(bool), "source"].value_counts().to_dict()
    total = sum(counts.get(s, 0) for s in SOURCE_NAMES)
    parts = ", ".join(f"{counts.get(s, 0)} {name}" for s, name in SOURCE_NAMES.items())
    return f"{total} instrument-night{'' if total == 1 else 's'} ({parts})"


def pair_name(test: str, reference: str) -> str:
    """Pair label, test − reference (SLEEP_PARAMETERS.md)."""
    return f"{test}-{reference}"

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
        ParameterInfo("tib_min", "min", "Length of the sleep opportunity (AASM total recording time, lights off to lights on). "
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
        ParameterInfo("in_bed_min", "min", "Diary: got into bed to out of bed (consensus sleep diary time in bed)."),
        ParameterInfo("quality", "as entered", "Self-rated sleep quality as entered in the diary (scale as in [diary] quality_scale of study.toml)."),
        ParameterInfo("is", "ratio 0-1", "Interdaily stability on hourly means, non-wear excluded (Van Someren et al. 1999)."),
        ParameterInfo("iv", "ratio 0-2", "Intradaily variability on hourly means, non-wear excluded (Van Someren et al. 1999)."),
        ParameterInfo("m10", "counts/epoch", "Mean activity of the most active 10 consecutive hours of the average day (Van Someren et al. 1999)."),
        ParameterInfo("l5", "counts/epoch", "Mean activity of the least active 5 consecutive hours of the average day (Van Someren et al. 1999)."),
        ParameterInfo("ra", "ratio 0-1", "Relative amplitude (M10 - L5) / (M10 + L5) (Van Someren et al. 1999)."),
    ]
}

WINDOW_NOTE = _WINDOW
LABELS = {
    "tib_min": "TIB", "sol_min": "SOL", "lps_min": "LPS", "tst_min": "TST", "spt_min": "SPT", "waso_min": "WASO",
    "terminal_wake_min": "Terminal wake", "se_pct": "Sleep efficiency", "nwak": "Wake bouts",
}


def label_of(parameter: str) -> str:
    """Short trade name of a parameter for figures and screens (e.g. 'TST')."""
    return LABELS.get(parameter, parameter)
SOURCE_NAMES = {"psg": "PSG", "actigraphy": "actigraphy", "diary": "diary"}
PAIRS = (("actigraphy", "psg"), ("diary", "psg"), ("diary", "actigraphy"))


def pair_name(test: str, reference: str) -> str:
    """Pair label, test − reference (SLEEP_PARAMETERS.md)."""
    return f"{test}-{reference}"

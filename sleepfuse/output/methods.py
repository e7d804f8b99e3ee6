"""The report's methods paragraphs, generated from a run's configuration, with full references.

Journals, volumes and pages follow SLEEP_PARAMETERS.md; author lists, issue
numbers and the pages of Webster 1982, McGraw & Wong 1996 and Cohen 1960 are
from memory.
"""

from __future__ import annotations

from sleepfuse.output.agreement_rows import number_text


REFERENCES = {
    "aasm": "American Academy of Sleep Medicine. The AASM Manual for the Scoring of Sleep and Associated "
            "Events: Rules, Terminology and Technical Specifications. Darien, IL: AASM (current version).",
    "carney2012": "Carney CE, Buysse DJ, Ancoli-Israel S, et al. The consensus sleep diary: standardizing "
                  "prospective sleep self-monitoring. Sleep. 2012;35(2):287–302.",
    "cole1992": "Cole RJ, Kripke DF, Gruen W, Mullaney DJ, Gillin JC. Automatic sleep/wake identification "
                "from wrist activity. Sleep. 1992;15(5):461–469.",
    "webster1982": "Webster JB, Kripke DF, Messin S, Mullaney DJ, Wyborney G. An activity-based sleep monitor "
                   "system for ambulatory use. Sleep. 1982;5(4):389–399.",
    "sadeh1994": "Sadeh A, Sharkey KM, Carskadon MA. Activity-based sleep-wake identification: an empirical "
                 "test of methodological issues. Sleep. 1994;17(3):201–207.",
    "choi2011": "Choi L, Liu Z, Matthews CE, Buchowski MS. Validation of accelerometer wear and nonwear time "
                "classification algorithm. Med Sci Sports Exerc. 2011;43(2):357–364.",
    "vansomeren1999": "Van Someren EJW, Swaab DF, Colenda CC, et al. Bright light therapy: improved sensitivity "
                      "to its effects on rest-activity rhythms in Alzheimer patients by application of "
                      "nonparametric methods. Chronobiol Int. 1999;16(4):505–518.",
    "bland1986": "Bland JM, Altman DG. Statistical methods for assessing agreement between two methods of "
                 "clinical measurement. Lancet. 1986;i(8476):307–310.",
    "bland1999": "Bland JM, Altman DG. Measuring agreement in method comparison studies. Stat Methods Med Res. "
                 "1999;8(2):135–160.",
    "bland2007": "Bland JM, Altman DG. Agreement between methods of measurement with multiple observations per "
                 "individual. J Biopharm Stat. 2007;17(4):571–582.",
    "carkeet2015": "Carkeet A. Exact parametric confidence intervals for Bland–Altman limits of agreement. "
                   "Optom Vis Sci. 2015;92(3):e71–e80.",
    "lin1989": "Lin LI. A concordance correlation coefficient to evaluate reproducibility. Biometrics. "
               "1989;45(1):255–268.",
    "lin2000": "Lin LI. A note on the concordance correlation coefficient. Biometrics. 2000;56(1):324–325.",
    "mcgraw1996": "McGraw KO, Wong SP. Forming inferences about some intraclass correlation coefficients. "
                  "Psychol Methods. 1996;1(1):30–46.",
    "shrout1979": "Shrout PE, Fleiss JL. Intraclass correlations: uses in assessing rater reliability. "
                  "Psychol Bull. 1979;86(2):420–428.",
    "cohen1960": "Cohen J. A coefficient of agreement for nominal scales. Educ Psychol Meas. 1960;20(1):37–46.",
}

NONWEAR_TEXT = {
    "auto": "Non-wear was taken from the file's off-wrist column where present, and otherwise detected by the "
            "rule of Choi et al. (2011): at least 90 min of zero counts, allowing up to 2 min of non-zero counts "
            "with 30 min of zeros on both sides",
    "choi": "Non-wear was detected by the rule of Choi et al. (2011): at least 90 min of zero counts, allowing up "
            "to 2 min of non-zero counts with 30 min of zeros on both sides",
    "column": "Non-wear was taken from the file's off-wrist column",
    "none": "No non-wear detection was applied",
}

METHOD_COLUMNS = {
    "bias_ci_method": "confidence interval of the bias",
    "loa_ci_method": "confidence intervals of the limits",
    "mn_loa_ci_method": "confidence intervals of the corrected limits",
    "ccc_ci_method": "confidence interval of the CCC",
    "prop_bias_method": "proportional bias",
}
"""Columns of agreement.csv that name the method of an interval or test, and what each is of."""

_METHOD_FALLBACK = {
    "bias_ci_method": "t interval over nights (Bland & Altman 1986)",
    "loa_ci_method": "approximate standard error √(3s²/n) (Bland & Altman 1986, 1999)",
    "ccc_ci_method": "Fisher's z with the asymptotic variance of Lin (1989, 2000)",
    "prop_bias_method": "least-squares regression of the difference on the pair mean (Bland & Altman 1999)",
}
"""What the intervals are when agreement.csv has no method columns (tables of earlier versions)."""


def _actigraphy(algorithm: dict, act: dict) -> tuple[str, list[str]]:
    name = algorithm.get("actigraphy_algorithm") or act.get("algorithm", "cole-kripke")
    scale = algorithm.get("count_scale", act.get("count_scale", 1.0))
    if name == "sadeh":
        cap = algorithm.get("sadeh_cap", act.get("sadeh_cap", 300))
        text = (f"Actigraphy was scored sleep or wake per 1-min epoch (shorter epochs summed to minutes) with the "
                f"algorithm of Sadeh et al. (1994), counts capped at {number_text(cap, 0)}, after multiplying "
                f"every count by a count scale of {scale:g}.")
        return text, ["sadeh1994"]
    weights = algorithm.get("weights_minus4_to_plus2") or []
    p = algorithm.get("P")
    coeff = act.get("coefficients", algorithm.get("coefficient_set", ""))
    detail = ""
    if weights and p is not None:
        detail = (f" (coefficient set {coeff}: P = {p:g}, weights "
                  f"{', '.join(f'{w:g}' for w in weights)} for the epochs −4 to +2)")
    text = (f"Actigraphy was scored sleep or wake per 1-min epoch (shorter epochs summed to minutes) with the "
            f"algorithm of Cole, Kripke et al. (1992){detail}, after multiplying every count by a count scale "
            f"of {scale:g}.")
    refs = ["cole1992"]
    if algorithm.get("webster_rescoring", act.get("webster", True)):
        order = algorithm.get("webster_order") or act.get("webster_order")
        text += (" Webster's rescoring rules (Webster et al. 1982, as applied by Cole, Kripke et al. 1992) were "
                 "applied" + (f" ({order})" if order else "") + ".")
        refs.append("webster1982")
    else:
        text += " Webster's rescoring rules were not applied."
    return text, refs


def _bouts(minimum) -> str:
    if not minimum:
        return "every wake bout of one epoch or more was counted"
    return f"wake bouts shorter than {number_text(minimum, 1)} min were not counted"


def methods_used(agreement) -> dict[str, list[str]]:
    """The distinct method labels of each method column of agreement.csv (fallback text when absent)."""
    out = {}
    for col, what in METHOD_COLUMNS.items():
        if agreement is not None and col in getattr(agreement, "columns", ()):
            values = [str(v) for v in agreement[col].dropna().unique() if str(v).strip()]
            out[col] = sorted(values)
        elif col in _METHOD_FALLBACK:
            out[col] = [_METHOD_FALLBACK[col]]
    return out


def methods(provenance: dict, agreement=None, level: str = "95%") -> dict:
    """Methods paragraphs (list of str) and the references they cite, in citation order.

    ``level``: the confidence level of the intervals and limits, as printed ("95%").
    """
    config = provenance.get("configuration", {}) or {}
    algorithm = provenance.get("algorithm", {}) or {}
    act = config.get("actigraphy", {}) or {}
    scoring = config.get("scoring", {}) or {}
    agree = config.get("agreement", {}) or {}
    psg = config.get("psg", {}) or {}
    zone = (config.get("study", {}) or {}).get("timezone", "")
    cited: list[str] = []

    def cite(*keys: str) -> None:
        cited.extend(k for k in keys if k not in cited)

    paragraphs = []
    cite("aasm", "carney2012")
    paragraphs.append(
        "Sleep parameters were computed with sleepfuse " + str(provenance.get("version", "")) + " under one set of "
        "definitions for polysomnography (PSG), actigraphy and the sleep diary, following the AASM scoring manual "
        "for PSG and the consensus sleep diary (Carney et al. 2012) for self-report. Every parameter was computed "
        "on one sleep opportunity per night and instrument: lights off to lights on for PSG (first to last scored "
        "epoch when the markers were missing, with a QC note); the diary's 'tried to sleep' to 'out of bed' for the "
        "diary, and for actigraphy on nights with a diary entry (else the event markers in the file, else an "
        "automatically found rest interval). Nights were dated by the evening on which they began (noon to noon), "
        f"in the time zone {zone or 'of the machine'}, and durations are elapsed time across daylight-saving changes. "
        f"PSG was scored in {number_text(psg.get('epoch_s', 30), 0)}-s epochs. Latency to persistent sleep "
        f"required {number_text(scoring.get('lps_run_min', 10), 0)} min of uninterrupted sleep; "
        + _bouts(scoring.get("min_wake_bout_min", 0)) + "; a night whose sleep opportunity was more than "
        f"{number_text(scoring.get('max_invalid_pct', 50), 0)}% unscored or off-wrist, or (actigraphy) more than "
        f"{number_text(scoring.get('max_missing_pct', 10), 0)}% without data, was not included. WASO "
        "excludes the terminal wake after the final awakening, as the consensus diary does; the AASM WASO is WASO "
        "plus terminal wake.")
    text, refs = _actigraphy(algorithm, act)
    cite(*refs)
    nonwear = act.get("nonwear", algorithm.get("nonwear", "auto"))
    if nonwear in ("auto", "choi"):
        cite("choi2011")
    cite("vansomeren1999")
    paragraphs.append(text + " " + NONWEAR_TEXT.get(nonwear, f"Non-wear rule: {nonwear}") + "; non-wear epochs "
                      "count as neither sleep nor wake. The rest-activity rhythm (IS, IV, M10, L5, RA) was computed "
                      "per participant on hourly means (Van Someren et al. 1999).")
    used = methods_used(agreement)
    cite("bland1986", "bland1999", "bland2007", "lin1989", "lin2000", "mcgraw1996", "shrout1979", "cohen1960")
    intervals = "; ".join(f"{METHOD_COLUMNS[c]}: {', '.join(v)}" for c, v in used.items() if v)
    if any("carkeet" in v.lower() or "exact" in v.lower() for vs in used.values() for v in vs):
        cite("carkeet2015")
    paragraphs.append(
        "Agreement was assessed as test − reference (actigraphy − PSG, diary − PSG, diary − actigraphy) on the "
        f"nights both instruments had and included. Bias and {level} limits of agreement, with {level} confidence "
        "intervals, followed Bland and Altman "
        "(1986, 1999); with several nights per participant, limits corrected for repeated nights were computed "
        "from the variance components of a one-way analysis of variance by participant (Bland & Altman 2007). "
        f"Methods of the intervals and tests: {intervals}. Proportional bias was reported at p < 0.05, with "
        "regression-based limits where the fitted spread is positive; right-skewed parameters also received "
        "limits on the log scale, back-transformed to ratios. Lin's concordance correlation coefficient "
        "(Lin 1989, 2000) and the two-way, absolute-agreement, single-measure intraclass correlation ICC(A,1) "
        "(McGraw & Wong 1996; ICC(2,1) of Shrout & Fleiss 1979) were computed. Pairs that share their value by "
        "construction (such as the diary's window used as the actigraphy sleep opportunity) were marked and not "
        "analysed. Actigraphy was compared with PSG epoch by epoch (sensitivity, specificity, accuracy and "
        "Cohen's kappa; Cohen 1960); the clock shift that best aligned the two within "
        f"±{number_text(agree.get('clock_offset_max_min', 30), 0)} min was searched, and a night was flagged "
        f"when it was at least {number_text(agree.get('clock_offset_flag_min', 5), 0)} min and raised kappa by "
        f"at least {number_text(agree.get('clock_offset_flag_kappa_gain', 0.05), 2)}.")
    return {"paragraphs": paragraphs, "references": [REFERENCES[k] for k in cited], "methods_used": used}

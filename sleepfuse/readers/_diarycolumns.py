"""The diary file's header against the columns sleepfuse reads: one warning per file naming the
unknown columns and the expected ones that are missing, with a "did you mean" hint (difflib)."""

from __future__ import annotations

import difflib

from sleepfuse.model.records import Problem

# what a missing column leaves blank on every night of the file (SLEEP_PARAMETERS.md, diary arithmetic)
_LEAVES_BLANK = {
    "bedtime": "in_bed_min",
    "tried_to_sleep": "every derived parameter (no sleep opportunity)",
    "sol_min": "sol_min, tst_min, spt_min, se_pct",
    "nwak": "nwak",
    "waso_min": "waso_min, tst_min, se_pct",
    "final_awakening": "tst_min, spt_min, terminal_wake_min, se_pct",
    "out_of_bed": "every derived parameter (no sleep opportunity)",
    "quality": "quality",
}


def column_problems(header: list[str], names: dict[str, str], col: dict[str, int | None]) -> list[Problem]:
    """One warning for a header with unknown columns or without expected ones (none when it matches).

    ``names``: our key -> the column name looked for; ``col``: our key -> the column found (None:
    missing). ``participant`` and ``night`` are not listed here (the reader handles them).
    """
    known = {j for j in col.values() if j is not None}
    unknown = [h for j, h in enumerate(header) if j not in known and h.strip()]
    missing = [k for k in _LEAVES_BLANK if col.get(k) is None]
    if not unknown and not missing:
        return []
    wanted = {names[k].strip().lower(): names[k] for k in missing}
    parts = []
    for h in unknown:
        close = difflib.get_close_matches(h.strip().lower(), list(wanted), n=1, cutoff=0.75)
        hint = f" (did you mean {wanted[close[0]]!r}?)" if close else ""
        parts.append(f"column {h!r} is not a diary column, ignored{hint}")
    for k in missing:
        mapped = " (set in study.toml)" if names[k] != k else ""
        parts.append(f"expected column {names[k]!r}{mapped} is missing, so {_LEAVES_BLANK[k]} stay blank on every night")
    return [Problem("warning", "diary columns: " + "; ".join(parts))]

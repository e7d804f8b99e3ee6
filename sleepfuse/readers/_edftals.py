"""EDF+ Time-stamped Annotation Lists (TALs): one grammar, read over a whole annotation signal at once.

An annotation signal holds TALs ``+onset[\\x15duration]\\x14text\\x14…\\x00`` (Kemp &
Olivan 2003, Clin Neurophysiol 114:1755-1761, section 2.2); the first TAL of each
data record is the time-keeping TAL (empty first text).

``_signal_annotations`` locates the TALs of every data record with numpy and reads
them with one regular-expression pass (``_TAL_IN_SIGNAL``). A TAL that does not
follow the grammar is only found and counted (``_TAL`` on each TAL, the same
grammar); it never gets a value. ``parse_tals`` reads one block the same way.
Part of the EDF+ parser; import these names from ``_edfplus``, which re-exports them.
"""

from __future__ import annotations

import re
from itertools import repeat

import numpy as np

_NUMBER = rb"[+-]?+(?:\d++(?:\.\d*+)?+|\.\d++)"  # possessive: a TAL never needs backtracking
# onset, optional duration after \x15 (may be empty), then texts each closed by \x14
_TAL_BODY = rb"(" + _NUMBER + rb")(?:\x15(" + _NUMBER + rb")?+)?+\x14((?:[^\x14\x00]*+\x14)*+)"
_TAL = re.compile(_TAL_BODY)
# A whole TAL between NULs; over "NUL TAL NUL TAL ... NUL" it matches exactly the TALs that _TAL
# fullmatches (a match starts at a NUL and no part of the body can hold one).
_TAL_IN_SIGNAL = re.compile(rb"\x00" + _TAL_BODY + rb"(?=\x00)")


def _texts(rest: bytes) -> list[str]:
    """The texts of a TAL from the bytes after its first \\x14 (each text closed by \\x14)."""
    return [p.decode("utf-8", errors="replace") for p in rest[:-1].split(b"\x14")] if rest else []


def parse_tals(block: bytes) -> tuple[list[tuple[float, float | None, list[str]]], int]:
    """TALs in one annotation-signal block: [(onset_s, duration_s, texts)] and the count of malformed TALs."""
    tals: list[tuple[float, float | None, list[str]]] = []
    bad = 0
    for chunk in block.split(b"\x00"):
        if not chunk:
            continue
        m = _TAL.fullmatch(chunk)
        if m is None:
            bad += 1
            continue
        onset, duration, rest = m.groups()
        tals.append((float(onset), float(duration) if duration else None, _texts(rest)))
    return tals, bad


def _signal_annotations(
    block: np.ndarray, keeper_onsets: np.ndarray | None
) -> tuple[list[float], list[float | None], list[str], list[int], int, int]:
    """Annotations of one annotation signal (bytes, shape n_records × n_bytes) as lists of
    onsets, durations and texts, the data record of each, the count of malformed TALs and of
    records without a time-keeping TAL. For the first annotation signal (``keeper_onsets``
    given) each record's time-keeping onset is stored."""
    n, width = block.shape
    padded = np.zeros((n, width + 1), dtype=np.uint8)  # a NUL after every record
    padded[:, :width] = block
    flat = padded.ravel()
    filled = flat != 0
    after_tal = np.zeros_like(filled)
    after_tal[1:] = filled[:-1]
    starts = np.flatnonzero(filled & ~after_tal)  # first byte of each TAL (a run of non-NUL bytes)
    owner = starts // (width + 1)
    joined = b"\x00" + flat[filled | after_tal].tobytes()  # NUL, TAL, NUL, TAL, ..., NUL
    groups = _TAL_IN_SIGNAL.findall(joined)
    bad = 0
    if len(groups) != len(starts):  # some TAL breaks the grammar: find which, to skip and count it
        matches = [_TAL.fullmatch(chunk) for chunk in joined[1:-1].split(b"\x00")] if len(starts) else []
        keep = [i for i, m in enumerate(matches) if m is not None]
        groups = [matches[i].groups() for i in keep]
        owner = owner[keep]
        bad = len(starts) - len(keep)
    count = len(groups)
    if count == 0:
        return [], [], [], [], bad, 0
    onset_raw, duration_raw, rest = zip(*groups)
    skip = np.zeros(count, dtype=np.intp)  # bytes of a TAL's texts that are no annotation
    missing = 0
    if keeper_onsets is not None:
        first = np.ones(count, dtype=bool)  # the first TAL of its record
        first[1:] = owner[1:] != owner[:-1]
        # ... whose first text is empty: the time-keeping TAL (b"" holds no text at all)
        keeper = first & np.fromiter(map(bytes.startswith, rest, repeat(b"\x14")), dtype=bool, count=count)
        kept = np.flatnonzero(keeper)
        if kept.size:
            keeper_onsets[owner[kept]] = list(map(float, map(onset_raw.__getitem__, kept.tolist())))
        skip[kept] = 1  # its empty first text; any other texts are annotations
        missing = int(np.count_nonzero(first)) - kept.size
    # Only TALs with more than b"" or b"\x14" left hold a text (most records hold just their keeper).
    carriers = np.flatnonzero(np.fromiter(map(len, rest), np.intp, count) - skip > 1).tolist()
    if not carriers:
        return [], [], [], [], bad, missing
    pick = [rest[i][skip[i]:] for i in carriers]
    return (*_tal_lists([onset_raw[i] for i in carriers], [duration_raw[i] for i in carriers], pick,
                        owner[carriers].tolist()), bad, missing)


def _tal_lists(onset_raw: list[bytes], duration_raw: list[bytes], rest: list[bytes], owners: list[int]
               ) -> tuple[list[float], list[float | None], list[str], list[int]]:
    """Onsets, durations, texts and records of every non-empty text of TALs that hold one."""
    duration_of = {d: float(d) if d else None for d in set(duration_raw)}
    if b"".join(rest).count(b"\x14") == len(rest):
        # The usual shape: each TAL holds one text, and it is not empty.
        text_of = {r: r[:-1].decode("utf-8", errors="replace") for r in set(rest)}
        return (list(map(float, onset_raw)), list(map(duration_of.__getitem__, duration_raw)),
                list(map(text_of.__getitem__, rest)), owners)
    onsets: list[float] = []
    durations: list[float | None] = []
    texts_out: list[str] = []
    owners_out: list[int] = []
    for onset_i, d, rest_i, owner in zip(onset_raw, duration_raw, rest, owners):
        onset, duration = float(onset_i), duration_of[d]
        for text in _texts(rest_i):
            if text:
                onsets.append(onset)
                durations.append(duration)
                texts_out.append(text)
                owners_out.append(owner)
    return onsets, durations, texts_out, owners_out

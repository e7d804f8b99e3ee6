"""EDF+ Time-stamped Annotation Lists (TALs): the careful parser and its bulk fast paths.

An annotation signal holds TALs ``+onset[\\x15duration]\\x14text\\x14…\\x00`` (Kemp &
Olivan 2003, Clin Neurophysiol 114:1755-1761); the first TAL of each data record
is the time-keeping TAL (empty first text).

- ``parse_tals`` reads one block TAL by TAL: the reference every fast path is held to.
- ``_signal_annotations`` reads one annotation signal over all data records at once:
  the TALs are located with numpy and, when all have the usual shape (``_PLAIN_TAL``),
  read with one regular-expression pass; any other TAL goes through ``parse_tals``.
- ``_plain_keepers`` reads the plain time-keeping TAL ``onset\\x14\\x14\\x00`` of every
  record at once and ``_tals_after_keepers`` the TALs after them in one pass; either
  returns None (the general path then reads the block) when its assumption fails.
- ``_counted_keepers`` reads those time-keeping TALs at once when they count ``+0``, ``+d``,
  ``+2d``, ... (a contiguous file), by comparing the record heads with expected bytes built
  once per study (``_counted_heads``); otherwise ``_plain_keepers`` checks and reads each one.

Each shortcut is checked against ``parse_tals`` in tests/test_readers_edf_fastpath.py
and tests/test_readers_edf_speed_equivalence.py (``_counted_keepers`` also against the
general keeper path, in tests/test_readers_edf_split_equivalence.py). Part of the EDF+
parser; import these names from ``_edfplus``, which re-exports them.
"""

from __future__ import annotations

import functools
import re
from itertools import repeat
from operator import getitem

import numpy as np

_TAL_NUMBER = re.compile(rb"^[+-]?(\d+(\.\d*)?|\.\d+)$")


def _tal_number(raw: bytes) -> float | None:
    return float(raw) if _TAL_NUMBER.match(raw) else None


def parse_tals(block: bytes) -> tuple[list[tuple[float, float | None, list[str]]], int]:
    """TALs in one annotation-signal block: [(onset_s, duration_s, texts)] and the count of malformed TALs."""
    tals: list[tuple[float, float | None, list[str]]] = []
    bad = 0
    for chunk in block.split(b"\x00"):
        if not chunk:
            continue
        parts = chunk.split(b"\x14")
        if len(parts) < 2 or parts[-1] != b"":
            bad += 1
            continue
        onset_raw, sep, duration_raw = parts[0].partition(b"\x15")
        onset = _tal_number(onset_raw)
        duration = _tal_number(duration_raw) if sep and duration_raw else None
        if onset is None or (sep and duration_raw and duration is None):
            bad += 1
            continue
        texts = [p.decode("utf-8", errors="replace") for p in parts[1:-1]]
        tals.append((onset, duration, texts))
    return tals, bad


_NUMBER = rb"[+-]?+(?:\d++(?:\.\d*+)?+|\.\d++)"  # possessive: a TAL never needs backtracking
# One whole TAL (between NULs) of the usual shape. Every TAL this matches is read by
# parse_tals to the same onset, duration and texts; any other TAL is left to parse_tals.
_PLAIN_TAL = re.compile(
    rb"\x00(" + _NUMBER + rb")(?:\x15(" + _NUMBER + rb")?+)?+\x14((?:[^\x14\x00]*+\x14)*+)(?=\x00)"
)


def _signal_annotations(
    block: np.ndarray, keeper_onsets: np.ndarray | None
) -> tuple[list[float], list[float | None], list[str], list[int], int, int]:
    """Annotations of one annotation signal (bytes, shape n_records × n_bytes) as lists of
    onsets, durations and texts, the data record of each, the count of malformed TALs and of
    records without a time-keeping TAL. For the first annotation signal (``keeper_onsets``
    given) each record's time-keeping onset is stored."""
    if keeper_onsets is not None:
        plain = _plain_keepers(block)
        if plain is not None:  # every record opens with a plain time-keeping TAL: read the rest only
            keepers, rows, cut = plain
            keeper_onsets[:] = keepers
            if rows.size == 0:
                return [], [], [], [], 0, 0
            found = _tals_after_keepers(block, rows, cut)
            if found is not None:
                return found
            tail = block[rows]  # the rest of those records, their time-keeping TAL blanked to NUL
            size = min(block.shape[1], _KEEPER_WINDOW)
            tail[:, :size] &= ~_BEFORE[cut[rows], :size]
            on, du, tx, owners, bad, _ = _signal_annotations(tail, None)
            return on, du, tx, rows[owners].tolist(), bad, 0
    n, width = block.shape
    padded = np.zeros((n, width + 1), dtype=np.uint8)  # a NUL after every record
    padded[:, :width] = block
    flat = padded.ravel()
    filled = flat != 0
    after_tal = np.zeros_like(filled)
    after_tal[1:] = filled[:-1]
    starts = np.flatnonzero(filled & ~after_tal)
    owner = starts // (width + 1)
    joined = b"\x00" + flat[filled | after_tal].tobytes()  # NUL, TAL, NUL, TAL, ..., NUL
    groups = _PLAIN_TAL.findall(joined)
    if len(groups) == len(starts):
        tals = None
    else:
        tals, keep = [], []
        for i, chunk in enumerate(joined[1:-1].split(b"\x00") if len(starts) else []):
            found, _ = parse_tals(chunk)  # one TAL at most: the chunk holds no NUL
            if found:
                tals.append(found[0])
                keep.append(i)
        bad = len(starts) - len(tals)
        owner = owner[keep]
        groups = [(None, None, None)] * len(tals)
    count = len(groups)
    if count == 0:
        return [], [], [], [], len(starts), 0
    if tals is None and keeper_onsets is None:
        return (*_plain_tal_lists(groups, owner.tolist()), 0, 0)
    kept: list[int] = []
    n_firsts = 0
    if keeper_onsets is not None:
        first = np.zeros(count, dtype=bool)
        first[0] = True
        first[1:] = owner[1:] != owner[:-1]
        firsts = np.flatnonzero(first).tolist()
        n_firsts = len(firsts)
    if tals is None:
        onset_raw, _, rest = zip(*groups)
        # A first TAL whose first text is empty is the time-keeping TAL; b"" and b"\x14" hold no text.
        keeper = first & np.fromiter(map(bytes.startswith, rest, repeat(b"\x14")), dtype=bool, count=count)
        kept = np.flatnonzero(keeper).tolist()
        if kept:
            keeper_onsets[owner[kept]] = list(map(float, map(onset_raw.__getitem__, kept)))
        bad = 0
        carriers = [i for i, r in enumerate(rest) if len(r) > 1]
    else:
        if keeper_onsets is not None:
            kept = [i for i in firsts if tals[i][2] and tals[i][2][0] == ""]
            if kept:
                keeper_onsets[owner[kept]] = [tals[i][0] for i in kept]
        carriers = range(count)
    kept_set = set(kept)
    onsets: list[float] = []
    durations: list[float | None] = []
    texts_out: list[str] = []
    owners: list[int] = []
    owner_list = owner.tolist()
    for i in carriers:
        if tals is None:
            onset_i, duration_raw, rest_i = groups[i]
            onset = float(onset_i)
            duration = float(duration_raw) if duration_raw else None
            texts = [p.decode("utf-8", errors="replace") for p in rest_i[:-1].split(b"\x14")]
        else:
            onset, duration, texts = tals[i]
        if i in kept_set:
            texts = texts[1:]
        for text in texts:
            if text != "":
                onsets.append(onset)
                durations.append(duration)
                texts_out.append(text)
                owners.append(owner_list[i])
    return onsets, durations, texts_out, owners, bad, n_firsts - len(kept)


def _plain_tal_lists(
    groups: list[tuple[bytes, bytes, bytes]], owners: list[int]
) -> tuple[list[float], list[float | None], list[str], list[int]]:
    """Onsets, durations, texts and records of TALs that ``_PLAIN_TAL`` matched (``owners``: the
    record of each), none of them a time-keeping TAL: what ``parse_tals`` reads from them."""
    onset_raw, duration_raw, rest = zip(*groups)
    if min(map(len, rest)) > 1 and b"".join(rest).count(b"\x14") == len(rest):
        # The usual shape: each TAL holds one text, and it is not empty.
        text_of = {r: r[:-1].decode("utf-8", errors="replace") for r in set(rest)}
        duration_of = {d: float(d) if d else None for d in set(duration_raw)}
        return (list(map(float, onset_raw)), list(map(duration_of.__getitem__, duration_raw)),
                list(map(text_of.__getitem__, rest)), owners)
    onsets: list[float] = []
    durations = []
    texts_out: list[str] = []
    owners_out: list[int] = []
    for onset_i, d, rest_i, owner in zip(onset_raw, duration_raw, rest, owners):
        if len(rest_i) > 1:  # b"" and b"\x14" hold no text
            onset = float(onset_i)
            duration = float(d) if d else None
            for p in rest_i[:-1].split(b"\x14"):
                if p:
                    onsets.append(onset)
                    durations.append(duration)
                    texts_out.append(p.decode("utf-8", errors="replace"))
                    owners_out.append(owner)
    return onsets, durations, texts_out, owners_out


def _tals_after_keepers(block: np.ndarray, rows: np.ndarray, cut: np.ndarray):
    """The annotations of ``rows`` of ``block`` past their time-keeping TAL (the first ``cut``
    bytes of each record) when all TALs there have the usual shape (``_PLAIN_TAL``); else None."""
    width = block.shape[1]
    records = block[rows].view(f"S{width}").ravel().tolist()  # trailing NULs dropped
    # The bytes after each time-keeping TAL, leading NULs dropped: TALs (not empty) and NULs.
    after = map(getitem, records, map(slice, cut[rows].tolist(), repeat(None)))
    rests = list(map(bytes.lstrip, after, repeat(b"\x00")))
    joined = b"\x00" + b"\x00".join(rests) + b"\x00"  # NUL, TAL, NUL, TAL, ..., NUL if no record holds a NUL run
    n_tals = joined.count(b"\x00") - 1
    if n_tals == len(rests):  # one TAL in each record
        owners = rows.tolist()
    elif b"\x00\x00" not in joined:  # TALs one NUL apart: each NUL of a record starts one more TAL
        more = np.fromiter(map(bytes.count, rests, repeat(b"\x00")), np.intp, len(rests))
        owners = np.repeat(rows, more + 1).tolist()
    else:
        tals, owners = [], []
        for rest, owner in zip(rests, rows.tolist()):
            found = [tal for tal in rest.split(b"\x00") if tal]
            tals += found
            owners += [owner] * len(found)
        joined = b"\x00" + b"\x00".join(tals) + b"\x00"
        n_tals = len(tals)
    groups = _PLAIN_TAL.findall(joined)
    if len(groups) != n_tals:
        return None
    return (*_plain_tal_lists(groups, owners), 0, 0)


_KEEPER_WINDOW = 32  # bytes at the start of a record searched for a plain time-keeping TAL
_BEFORE = np.where(np.arange(_KEEPER_WINDOW) < np.arange(_KEEPER_WINDOW + 1)[:, None], 0xFF, 0).astype(np.uint8)
_BEFORE.flags.writeable = False  # row k: 0xFF in the columns before k, 0 from k on
# Over these bytes, float() reads exactly the strings _TAL_NUMBER accepts, to the same value (no
# exponent, blank, "_", inf or nan can occur), and raises ValueError for the others.
_NUMBER_BYTES = b"0123456789+-."
_str_len = getattr(np, "strings", np.char).str_len  # bytes up to the last non-NUL one (numpy 1.26: np.char)


def _keeper_values(texts: bytes, n: int) -> np.ndarray | None:
    """float() of each of the ``n`` onsets in ``texts`` ("onset\x14\x14" n times), or None if one is not a number."""
    try:
        return np.fromiter(map(float, texts.split(b"\x14\x14")[:-1]), np.float64, n)
    except ValueError:
        return None


def _plain_keepers(block: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray] | None:
    """If every record (row of ``block``) opens with a time-keeping TAL of the plain form
    ``onset\x14\x14\x00``, the onset of each, the records that hold more than that TAL, and the
    length of each record's TAL with its NUL; else None (the general path then reads the block).

    Such a TAL is the first TAL of its record and well-formed, so ``parse_tals`` reads it as the
    time-keeping TAL (onset ``float(onset bytes)``, empty first text, no other text), and the
    rest of its record as if the TAL were not there. The onset bytes of such a TAL are digits,
    signs and dots that ``_TAL_NUMBER`` accepts: of those, exactly the ones ``float`` reads.
    """
    n, width = block.shape
    size = min(width, _KEEPER_WINDOW)
    if n == 0 or size < 4 or not block.flags.c_contiguous:
        return None
    head = block[:, :size]
    p = (head == 0x14).argmax(axis=1)  # the first \x14 of each record (0 if none)
    cut = p + 3
    if cut.max() > size:
        return None
    # Each record's bytes up to its first \x14 and the two bytes after it, NULs after them.
    masked = head & _BEFORE[cut, :size]
    onsets = _counted_keepers(masked)
    if onsets is None:  # the general check and reading of the time-keeping TALs
        prefix = masked.view(f"S{size}").ravel()  # trailing NULs dropped
        if not (_str_len(prefix) == cut - 1).all():  # a NUL at p + 2, and none at p + 1
            return None
        joined = b"".join(prefix.tolist())
        # Each text holds at most two \x14 (at p and p + 1; none comes before p), so 2 n of them
        # means each is its onset bytes (no \x14) and \x14\x14.
        if joined.count(b"\x14") != 2 * n or joined.translate(None, _NUMBER_BYTES + b"\x14"):
            return None
        onsets = _keeper_values(joined, n)
        if onsets is None:  # not a number as _TAL_NUMBER has it
            return None
    lengths = _str_len(block.view(f"S{width}").ravel())  # up to the last non-NUL byte
    rows = np.flatnonzero(lengths > cut - 1)  # records holding more than their time-keeping TAL
    return onsets, rows, cut


# --- counted time-keeping TALs: "+0", "+d", "+2d", ... ---------------------------------------------

_COUNTED_MAX = 1 << 16  # records; up to this many, the expected TALs are built once and kept
_COUNTED_STEP = re.compile(rb"\+([1-9]\d{0,8})\x14\x14\x00")  # record 1 of a counted file: "+d"


def _counted_keepers(masked: np.ndarray) -> np.ndarray | None:
    """The onsets ``_plain_keepers`` reads, at once, when record ``i`` opens with the time-keeping
    TAL ``+{i * d}\x14\x14\x00`` for one whole number ``d`` (the usual contiguous file); else None.

    ``masked`` (n × size) holds each record's bytes up to two past its first ``\x14`` (as
    ``_plain_keepers`` cuts them), zeros after. ``d`` is read from record 1 and the whole
    array compared with the expected one (``_counted_heads``). Exact: if the two are equal, each
    record's first ``\x14`` lies where the expected one does (no ``\x14`` comes before it in
    either), so every record opens with exactly ``+{i * d}\x14\x14\x00``: a NUL at p + 2, none at
    p + 1, onset bytes of "+" and digits only, and ``float`` of them is ``i * d``, a whole
    number below 2**53 (d < 10**9, i < 2**16), which ``i * float(d)`` gives exactly. So the
    general checks pass and ``_keeper_values`` returns the same values.
    """
    n, size = masked.shape
    if n < 2 or n > _COUNTED_MAX:
        return None
    step = _COUNTED_STEP.match(masked[1].tobytes())
    if step is None:
        return None
    d = int(step.group(1))
    expected = _counted_heads(d, size, max(1024, 1 << (n - 1).bit_length()))
    if not expected.startswith(masked.tobytes()):  # the first n rows, byte for byte
        return None
    return np.arange(n, dtype=np.float64) * d


@functools.lru_cache(maxsize=4)
def _counted_heads(d: int, size: int, capacity: int) -> bytes:
    """``capacity`` rows of ``size`` bytes: ``+{i * d}\x14\x14`` and NULs; a row whose TAL and
    NUL do not fit in ``size`` bytes is all 0xFF, which no masked record equals (it would need a
    \x14). Files of one study (one record duration) share it."""
    texts = [b"+%d\x14\x14" % (i * d) for i in range(capacity)]
    rows = np.array(texts, dtype=f"S{size}").view(np.uint8).reshape(capacity, size).copy()
    rows[np.fromiter(map(len, texts), np.intp, capacity) >= size] = 0xFF
    return rows.tobytes()

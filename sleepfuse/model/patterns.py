"""Checks of the patterns in study.toml, at load time, before any file is matched.

- ``[study] participant_pattern`` is a regular expression applied to file-name
  stems. A repeat inside a repeat (``(a+)+``, ``(\\w*_?)*``) or an alternation
  inside a repeat (``(a|ab)*``) can make a backtracking matcher take time
  exponential in the name's length (catastrophic backtracking, a well-known
  property of backtracking regular-expression engines; Python's ``re`` is one).
  Such patterns are refused, and a stem is matched only up to
  ``MAX_STEM`` characters (file names are at most 255 bytes on common file
  systems), so matching time is bounded.
- ``[files]`` patterns are glob patterns relative to the study folder: an
  absolute pattern, a drive or a ``..`` part (reading outside the study) is
  refused.
"""

from __future__ import annotations

import re
from pathlib import PurePosixPath, PureWindowsPath

try:  # Python 3.11+: the parser of the standard library's own regular expressions
    import re._parser as _sre_parse  # type: ignore[import-not-found]
    import re._constants as _sre_constants  # type: ignore[import-not-found]
except ImportError:  # pragma: no cover - older layouts
    import sre_constants as _sre_constants  # type: ignore[no-redef]
    import sre_parse as _sre_parse  # type: ignore[no-redef]

MAX_STEM = 255  # characters of a file-name stem given to participant_pattern

_REPEATS = {_sre_constants.MAX_REPEAT, _sre_constants.MIN_REPEAT,
            getattr(_sre_constants, "POSSESSIVE_REPEAT", None)} - {None}


def regex_problem(pattern: str) -> str | None:
    """Why ``pattern`` is refused as a participant pattern, or None when it is fine."""
    try:
        parsed = _sre_parse.parse(pattern)
    except re.error as exc:
        return f"a valid regular expression ({exc})"
    if _nested(parsed, inside_repeat=False):
        return ("a regular expression without a repeat or alternation inside a repeat (such as (a+)+, "
                "(a?){20} or (a|ab)*), "
                "which can take practically forever to match; write e.g. ^([A-Za-z]+[0-9]+)_ instead")
    return None


def _nested(items, inside_repeat: bool) -> bool:
    """True when a repeat (or an alternation) sits inside a repeat that can match more than once."""
    for op, av in items:
        if op in _REPEATS:
            low, high, body = av
            many = high is _sre_constants.MAXREPEAT or high > 1
            if inside_repeat and (low, high) != (1, 1):  # any optional or repeated part inside a repeat
                return True
            if _nested(body, inside_repeat or many):
                return True
        elif op is _sre_constants.BRANCH:
            if inside_repeat:
                return True
            if any(_nested(branch, inside_repeat) for branch in av[1]):
                return True
        elif op is _sre_constants.SUBPATTERN:
            if _nested(av[-1], inside_repeat):
                return True
        elif op in (_sre_constants.ASSERT, _sre_constants.ASSERT_NOT):
            if _nested(av[1], inside_repeat):
                return True
    return False


def glob_problem(pattern: str) -> str | None:
    """Why ``pattern`` is refused as a [files] pattern, or None when it is fine."""
    if not pattern.strip():
        return "a non-empty glob pattern relative to the study folder, such as 'psg/*.edf'"
    posix, windows = PurePosixPath(pattern), PureWindowsPath(pattern)
    if posix.is_absolute() or windows.is_absolute() or windows.drive or pattern.startswith(("/", "\\", "~")):
        return "a pattern relative to the study folder (no leading '/', '~' or drive), such as 'psg/*.edf'"
    if ".." in posix.parts or ".." in windows.parts:
        return "a pattern inside the study folder (no '..' part), such as 'psg/*.edf'"
    return None

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


MAX_STEM = 255  # characters of a file-name stem given to participant_pattern
_COUNT = re.compile(r"\{\d*(,\d*)?\}")  # {n}, {n,}, {,m}, {n,m}


def regex_problem(pattern: str) -> str | None:
    """Why ``pattern`` is refused as a participant pattern, or None when it is fine."""
    try:
        re.compile(pattern)
    except re.error as exc:
        return f"a valid regular expression ({exc})"
    if _nested_repeat(pattern):
        return ("a regular expression without a repeat or alternation inside a repeated group (such as (a+)+, "
                "(a?){20} or (a|ab)*), which can take practically forever to match; "
                "write e.g. ^([A-Za-z]+[0-9]+)_ instead")
    return None


def _quantifier_at(pattern: str, i: int) -> int:
    """Length of the quantifier starting at ``i`` (with a lazy/possessive mark), 0 if there is none."""
    if i >= len(pattern):
        return 0
    if pattern[i] in "*+?":
        n = 1
    else:
        m = _COUNT.match(pattern, i)
        if not m or m.group(0) == "{}" or m.group(0) == "{,}":
            return 0
        n = len(m.group(0))
    if i + n < len(pattern) and pattern[i + n] in "?+":
        n += 1
    return n


def _nested_repeat(pattern: str) -> bool:
    """True when a repeated group holds a repeat or an alternation (a lexical scan of a valid pattern)."""
    stack = [False]  # per open group: does it hold a repeat or an alternation?
    i = 0
    while i < len(pattern):
        c = pattern[i]
        if c == "\\":
            i += 2
        elif c == "[":  # a character class is one atom
            j = i + 1
            if j < len(pattern) and pattern[j] == "^":
                j += 1
            if j < len(pattern) and pattern[j] == "]":
                j += 1
            while j < len(pattern) and pattern[j] != "]":
                j += 2 if pattern[j] == "\\" else 1
            i = j + 1
        elif c == "(":
            i += 1
            if pattern.startswith("?", i):  # group syntax, not a quantifier
                if pattern.startswith("?P<", i):
                    i = pattern.index(">", i) + 1
                elif pattern.startswith("?P=", i):
                    i = pattern.index(")", i)
                elif pattern.startswith(("?<=", "?<!"), i):
                    i += 3
                else:
                    i += 1
                    while i < len(pattern) and pattern[i] not in ":=!)":
                        i += 1
                    if i < len(pattern) and pattern[i] in ":=!":
                        i += 1
            stack.append(False)
        elif c == ")":
            inner = stack.pop() if len(stack) > 1 else False
            i += 1
            n = _quantifier_at(pattern, i)
            if n and inner:
                return True
            stack[-1] = stack[-1] or inner or bool(n)
            i += n
        elif c == "|":
            stack[-1] = True
            i += 1
        else:
            n = _quantifier_at(pattern, i)
            if n:
                stack[-1] = True
                i += n
            else:
                i += 1
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

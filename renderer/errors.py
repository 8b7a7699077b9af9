"""Error types shared by every stage.

All input problems a user can cause raise :class:`MagretinaError` (a ``ValueError``)
with a message that names the argument, key or file, the offending value and what
is allowed.  The command line turns these into one line on stderr and exit status 2.
This module is not for programming errors: those stay ordinary exceptions.
"""

from __future__ import annotations

import difflib


class MagretinaError(ValueError):
    """A user-facing input or configuration error (exit status 2 on the CLI)."""


class ConfigError(MagretinaError):
    """One or more problems in a configuration file, reported all at once."""

    def __init__(self, problems, source=None):
        if isinstance(problems, str):
            problems = [problems]
        self.problems = list(problems)
        self.source = source
        head = f"{source}: " if source else ""
        if len(self.problems) == 1:
            msg = head + self.problems[0]
        else:
            msg = head + f"{len(self.problems)} problems:\n" + "\n".join(
                f"  - {p}" for p in self.problems)
        super().__init__(msg)


def check_range(name, value, lo=None, hi=None, *, lo_open=False, hi_open=False, unit=""):
    """Raise MagretinaError unless ``lo <= value <= hi`` (bounds optional/open).

    Returns the value as float so callers can write ``x = check_range(...)``.
    """
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise MagretinaError(f"{name} must be a number, got {value!r}") from None
    if v != v:
        raise MagretinaError(f"{name} must be a finite number, got NaN")
    bad = False
    if lo is not None and (v < lo or (lo_open and v == lo)):
        bad = True
    if hi is not None and (v > hi or (hi_open and v == hi)):
        bad = True
    if bad:
        lb = "(" if lo_open else "["
        rb = ")" if hi_open else "]"
        lo_s = "-inf" if lo is None else f"{lo:g}"
        hi_s = "inf" if hi is None else f"{hi:g}"
        u = f" {unit}" if unit else ""
        raise MagretinaError(f"{name} = {value!r} is out of range; allowed {lb}{lo_s}, {hi_s}{rb}{u}")
    return v


def did_you_mean(word, candidates, n=1) -> str:
    """`` did you mean 'x'?`` for the closest of ``candidates`` to ``word``, or ``""``.

    Uses :func:`difflib.get_close_matches` (ratio cutoff 0.6, its default) on the
    lower-cased strings, so a change of case alone always finds its match.
    """
    cands = [str(c) for c in candidates]
    low = {c.lower(): c for c in cands}
    hits = difflib.get_close_matches(str(word).lower(), list(low), n=n)
    if not hits:
        return ""
    return " did you mean " + " or ".join(repr(low[h]) for h in hits) + "?"

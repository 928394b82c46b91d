r"""TOML text to Python values: a compiled parser when it is installed, the standard one else.

``loads`` gives exactly what ``tomllib.loads`` gives, value for value and error for
error, only faster on large scenarios. ``rtoml`` (a compiled parser) reads a 20,000-node
scenario in about a fifth of the time ``tomllib`` takes; ``tomllib`` stays the
reference: whenever the compiled parser refuses a text, or the text holds something the
two could read differently, the text is parsed again by ``tomllib``, so every error
(``TOMLDecodeError`` with its line and column, ``ValueError``, ``RecursionError``) is the
standard parser's own.

The compiled parser reads a little more than TOML 1.0, which ``tomllib`` implements: the
TOML 1.1 additions (``\e`` and ``\xHH`` escapes, inline tables over several lines or
with a trailing comma, times without seconds) and a leading byte-order mark. It also
builds date-times with a time-zone class of its own. A text where any of these could
occur goes to ``tomllib`` (a cheap scan of the text, with strings and comments set
aside; when in doubt it says "could", which only costs speed).
"""

from __future__ import annotations

import re
import tomllib
from types import ModuleType
from typing import Any

__all__ = ["COMPILED", "compiled_parser", "loads"]


def compiled_parser() -> ModuleType | None:
    """The compiled parser module, or None when it is missing or cannot be loaded."""
    try:
        import rtoml
    except Exception:   # missing, or a wheel that does not load on this machine
        return None
    return rtoml


COMPILED = compiled_parser()

# Strings and comments as a TOML lexer sees them (multi-line forms first; a multi-line
# basic string may end in up to two more quotes).
_STRINGS_AND_COMMENTS = re.compile(
    r'"""(?:[^\\]|\\.)*?"""(?:"{1,2}(?!"))?'
    r"|'''.*?'''(?:'{1,2}(?!'))?"
    r'|"(?:[^"\\\n]|\\.)*"'
    r"|'[^'\n]*'"
    r"|#[^\n]*",
    re.DOTALL)
# An escape only TOML 1.1 knows (looked for in the raw text, strings included).
_NEW_ESCAPE = re.compile(r"\\[ex]")
# Outside strings and comments: a date or time (the compiled parser's own time-zone
# class; times without seconds), or a trailing comma in an inline table.
_OUTSIDE = re.compile(r"\d:\d|\d-\d\d-|,\s*\}")
# What makes a line worth a closer look: a brace, or a date or time (two simple scans
# are several times faster than one with both).
_BRACE = re.compile(r"[{}]")
_DATE_OR_TIME = re.compile(r"[:-]\d")


def _code_differs(code: str) -> bool:
    """True when TOML text with its strings and comments blanked out might differ."""
    if _OUTSIDE.search(code):
        return True
    # An inline table over several lines leaves a line with more "{" than "}".
    return any(line.count("{") != line.count("}")
               for line in code.split("\n") if "{" in line or "}" in line)


def might_differ(text: str) -> bool:
    """True when the compiled parser could read ``text`` differently from ``tomllib``.

    False means the text uses none of the constructs where the two differ; True may be
    a false alarm (e.g. a time inside a string the scan could not set aside). Only the
    lines with a brace, a date or a time are looked at closely, so the scan costs a few
    per cent of a parse.
    """
    if text.startswith("\ufeff") or _NEW_ESCAPE.search(text):
        return True
    if '"""' in text or "'''" in text:   # a string may span lines: blank them all first
        return _code_differs(_STRINGS_AND_COMMENTS.sub(" ", text))
    # Every string and comment ends on its line: look at the suspect lines one by one.
    suspects = sorted(m.start() for pattern in (_BRACE, _DATE_OR_TIME)
                      for m in pattern.finditer(text))
    end = -1
    for at in suspects:
        if at < end:
            continue   # on the line just looked at
        start = text.rfind("\n", 0, at) + 1
        end = text.find("\n", at)
        end = len(text) if end < 0 else end
        if _code_differs(_STRINGS_AND_COMMENTS.sub(" ", text[start:end])):
            return True
    return False


def loads(text: str) -> dict[str, Any]:
    """Parse TOML text exactly as ``tomllib.loads`` does (and raise what it raises)."""
    compiled = COMPILED
    if compiled is not None and not might_differ(text):
        try:
            data = compiled.loads(text)
        except Exception:
            pass   # tomllib decides, and gives its own message with line and column
        else:
            if isinstance(data, dict):
                return data
    return tomllib.loads(text)

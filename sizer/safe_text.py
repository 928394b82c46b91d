"""Text from a scenario made safe for a terminal (light: the command line imports it first).

Names are data: nothing in an id may end a line, move the cursor, restyle or reorder
what the user reads. Files keep every name exactly; only what reaches a terminal is
escaped.
"""

from __future__ import annotations

from typing import Any

__all__ = ["TerminalStream", "for_terminal"]

# Characters that must not reach a terminal raw, each shown as its escape (\x85,
# \u202e): C0 controls but newline and tab (ESC starts terminal commands), DEL, C1
# controls (NEL ends a line; CSI starts a command), the line and paragraph separators,
# and the bidirectional marks, embeddings, overrides and isolates (Unicode UAX #9),
# which reorder what the reader sees.
_UNSAFE = [*range(0x00, 0x09), *range(0x0B, 0x20), *range(0x7F, 0xA0), 0x2028, 0x2029,
           0x061C, 0x200E, 0x200F, *range(0x202A, 0x202F), *range(0x2066, 0x206A)]
_ESCAPES = {c: (f"\\x{c:02x}" if c < 0x100 else f"\\u{c:04x}") for c in _UNSAFE}


def for_terminal(text: str) -> str:
    """``text`` with every character unsafe on a terminal shown as its escape."""
    return text.translate(_ESCAPES)


class TerminalStream:
    """A text stream that escapes what ``for_terminal`` escapes on the way through."""

    def __init__(self, stream: Any) -> None:
        self._stream = stream

    def write(self, text: str) -> int:
        """Write ``text`` escaped."""
        return int(self._stream.write(for_terminal(text)))

    def __getattr__(self, name: str) -> Any:
        return getattr(self._stream, name)

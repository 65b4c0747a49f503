"""Control and bidirectional-formatting characters made visible before user text is shown.

Text from a plan or a data file (a title, a factor or level name, a hypothesis name, a path)
may hold characters that a reader cannot see but that change what is shown: C0 and C1 control
characters (U+0000-U+001F, U+007F-U+009F; a terminal obeys ESC sequences, a carriage return
overwrites a line) and the bidirectional formatting characters of Unicode Standard Annex #9,
"Unicode Bidirectional Algorithm", section 2 (LRM U+200E, RLM U+200F, ALM U+061C, the
embeddings and overrides U+202A-U+202E and the isolates U+2066-U+2069), which can make text
read in another order than it is stored.

The policy is the same in every output (HTML and PDF, Markdown, the terminal, figures): each
such character is replaced by its code point written as ``\\uXXXX`` (lower-case hex), so the
reader sees that it is there and which one it is. Tab and newline are kept only where a format
allows them (``keep``).
"""

from __future__ import annotations

import re

__all__ = ["HIDDEN_CHARACTERS", "show_controls"]

#: Every character :func:`show_controls` replaces (a regular-expression character class).
HIDDEN_CHARACTERS = "\x00-\x1f\x7f-\x9f\u061c\u200e\u200f\u202a-\u202e\u2066-\u2069"

_HIDDEN = re.compile(f"[{HIDDEN_CHARACTERS}]")


def _code(m: re.Match) -> str:
    return f"\\u{ord(m.group(0)):04x}"


def show_controls(text: str, keep: str = "") -> str:
    """``text`` with every control or bidirectional-formatting character written as ``\\uXXXX``;
    the characters in ``keep`` (say ``"\\t\\n"``) are left as they are."""
    if keep:
        return _HIDDEN.sub(lambda m: m.group(0) if m.group(0) in keep else _code(m), text)
    return _HIDDEN.sub(_code, text)

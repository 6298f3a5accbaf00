"""Text that is safe to show: control characters and bidi overrides made visible.

A circuit file's title, an include path, a file name or a token quoted in a message can hold
terminal escape sequences (ESC ...), other C0 and C1 control characters, or Unicode
direction overrides that make a line read differently from what it holds. Everything dcnet
prints for people — to the terminal, to text, Markdown, CSV, HTML and SVG outputs, and in
error messages — passes through :func:`shown`, which writes each such character as a visible
escape (``\\x1b``, ``\\u202e``). Tab and newline are kept. JSON keeps the exact strings (the
JSON encoder escapes them itself); :func:`shown_json` makes the same guarantee for JSON text.

The lowest layer: imports nothing of dcnet.
"""

from __future__ import annotations

import re

__all__ = ["shown", "shown_json", "source_lines", "UNSAFE"]

# C0 controls except tab and newline, DEL, C1 controls; the Unicode bidi controls (Arabic
# letter mark, left/right-to-left marks, embeddings, overrides, isolates) and the line and
# paragraph separators, which some terminals and editors treat as line breaks.
UNSAFE = re.compile("[\x00-\x08\x0b-\x1f\x7f-\x9f\u061c\u200e\u200f\u2028-\u202e\u2066-\u2069]")


def _visible(m: re.Match) -> str:
    code = ord(m.group())
    return f"\\x{code:02x}" if code <= 0xFF else f"\\u{code:04x}"


def shown(text: str) -> str:
    """``text`` with every control character and bidi control written as a visible escape."""
    if not UNSAFE.search(text):
        return text
    return UNSAFE.sub(_visible, text)


def shown_json(text: str) -> str:
    """JSON text with any such character written as a JSON escape (``\\u001b``): the same
    strings when read back, nothing raw on a terminal."""
    if not UNSAFE.search(text):
        return text
    return UNSAFE.sub(lambda m: f"\\u{ord(m.group()):04x}", text)


def source_lines(text: str) -> list[str]:
    """The lines of a circuit file as the grammar counts them: split at ``\\n`` only (a lone
    ``\\r``, form feed or U+2028 inside a line is not a line break, as ``str.splitlines``
    would make it), a ``\\r`` before the ``\\n`` dropped. Line N of an error is item N-1."""
    lines = text.split("\n")
    if lines and lines[-1] == "":
        lines.pop()
    return [ln[:-1] if ln.endswith("\r") else ln for ln in lines]

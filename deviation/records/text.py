"""User text shown as data on every face: control and direction-changing characters made
visible, so what is shown is what is stored.

A name, a reason or a note is typed by a person and may hold anything: a bidirectional override
(U+202E turns ``exe.txt`` around), a zero-width or other invisible character, a control
character that moves the cursor or rings the terminal. :func:`visible` writes each of them as
``⟨U+202E⟩`` (tabs and line breaks as ``⟨TAB⟩``/``⟨LF⟩`` where one line is wanted); the faces then
escape what remains for their own markup (Rich, Textual, HTML, Markdown). Nothing stored is
changed.
"""

from __future__ import annotations

import unicodedata

# Characters that change the direction of the text around them (Unicode TR 9), and invisible
# format characters a reader cannot see.
_BIDI = frozenset("\u061c\u200e\u200f\u202a\u202b\u202c\u202d\u202e\u2066\u2067\u2068\u2069")
_NAMES = {"\t": "TAB", "\n": "LF", "\r": "CR"}
# Controls, format characters, line/paragraph separators, private-use, unassigned, surrogates.
_HIDDEN = frozenset(("Cc", "Cf", "Zl", "Zp", "Co", "Cn", "Cs"))


def _shown(ch: str) -> str:
    return f"⟨{_NAMES.get(ch) or f'U+{ord(ch):04X}'}⟩"


def visible(value: object, *, one_line: bool = False) -> str:
    """``value`` as text with control, format and direction characters written visibly.

    ``one_line``: line breaks and tabs are written visibly too (for a table cell or a one-line
    summary); otherwise they are kept.
    """
    text = "" if value is None else str(value)
    if text.isprintable() and not (_BIDI & set(text)):
        return text
    out = []
    for ch in text:
        if ch in "\n\t" and not one_line:
            out.append(ch)
        elif ch in _BIDI or unicodedata.category(ch) in _HIDDEN:
            out.append(_shown(ch))
        else:
            out.append(ch)
    return "".join(out)


def one_line(value: object, limit: int | None = None) -> str:
    """:func:`visible` on one line, cut to ``limit`` characters with an ellipsis."""
    text = visible(value, one_line=True)
    if limit is not None and len(text) > limit:
        text = text[: max(0, limit - 1)] + "…"
    return text


__all__ = ["visible", "one_line"]

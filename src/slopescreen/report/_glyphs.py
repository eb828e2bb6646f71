"""Text the figures' font can draw.

A title or a rain-case name may hold characters the map font lacks (CJK, a control
character). Matplotlib would draw an empty box for each and warn "Glyph N missing from
font(s)" on stderr; instead each such character is drawn as U+FFFD (the Unicode replacement
character), and the report's HTML, which the browser draws with its own fonts, keeps the
name as written.
"""

from __future__ import annotations

import functools
import threading

REPLACEMENT = "\ufffd"
_LOCK = threading.Lock()


@functools.cache
def _font(path: str):
    from matplotlib import ft2font

    return ft2font.FT2Font(path)


@functools.lru_cache(maxsize=65536)
def _has(path: str, ch: str) -> bool:
    if ch == "\n":                       # a line break, not a glyph
        return True
    with _LOCK:                          # one FreeType face, shared by the figure threads
        return _font(path).get_char_index(ord(ch)) != 0


def drawable_text(text: str, path: str) -> str:
    """``text`` with every character the font file at ``path`` lacks replaced.

    Examples
    --------
    >>> from matplotlib import font_manager
    >>> path = font_manager.findfont("DejaVu Sans")
    >>> drawable_text("Ridge 2 \\u5c71", path) == "Ridge 2 " + REPLACEMENT
    True
    """
    if all(_has(path, ch) for ch in text):
        return text
    fallback = REPLACEMENT if _has(path, REPLACEMENT) else "?"
    return "".join(ch if _has(path, ch) else fallback for ch in text)


def replace_missing_glyphs(fig) -> int:
    """Make every text of ``fig`` drawable in its font (in place); returns how many changed."""
    from matplotlib import font_manager
    from matplotlib.text import Text

    changed = 0
    for artist in fig.findobj(Text):
        text = artist.get_text()
        if not text or text.isascii() and text.isprintable():
            continue
        path = font_manager.findfont(artist.get_fontproperties())
        new = drawable_text(text, path)
        if new != text:
            artist.set_text(new)
            changed += 1
    return changed

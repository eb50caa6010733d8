"""Text that goes into the PDF sheet and the figures: what the shipped font can show.

The sheet and its figures use DejaVu Sans, the font matplotlib ships (so a
plain ``pip install`` has it). It covers Latin, Greek, Cyrillic and many
symbols, but not CJK, Devanagari or emoji, and the PDF writer does not shape
or reorder right-to-left scripts (Arabic, Hebrew). Text is therefore
checked before use: control and format characters are stripped (with a
warning), right-to-left text and characters the font lacks are refused with a
message naming the key (:func:`check_text`) or, for names read from GIS
files, replaced by ``?`` with a warning (:func:`sheet_text`) -- never drawn as
empty boxes.
"""

from __future__ import annotations

import os
import unicodedata
from functools import lru_cache
from importlib.util import find_spec

from .errors import InputError

__all__ = ["font_path", "covered", "check_text", "sheet_text", "SHEET_FONT"]

SHEET_FONT = "DejaVu Sans"
_RTL = {"R", "AL", "RLE", "RLO", "RLI", "AN"}


def font_path(bold=False):
    """Path of the DejaVu Sans TTF inside the installed matplotlib (no import of it)."""
    spec = find_spec("matplotlib")
    base = list(spec.submodule_search_locations)[0]
    name = "DejaVuSans-Bold.ttf" if bold else "DejaVuSans.ttf"
    return os.path.join(base, "mpl-data", "fonts", "ttf", name)


@lru_cache(maxsize=1)
def _cmap():
    from fontTools.ttLib import TTFont

    with TTFont(font_path(), lazy=True) as f:
        return frozenset(f.getBestCmap())


def covered(ch):
    """Whether the sheet font has a glyph for the character (printable ASCII without
    opening the font: DejaVu Sans has all of it)."""
    return " " <= ch <= "~" or ord(ch) in _cmap()


def _strip_controls(text):
    """Text with control/format characters removed (tabs and line breaks become spaces),
    and the removed characters."""
    out, removed = [], []
    for ch in text:
        cat = unicodedata.category(ch)
        if ch in "\t\n\r":
            out.append(" ")
        elif cat in ("Cc", "Cf", "Cs", "Co", "Cn") and ch not in "\u200d":
            removed.append(ch)
        else:
            out.append(ch)
    return "".join(out), removed


def _names(chars):
    seen = []
    for ch in chars:
        label = f"U+{ord(ch):04X} {unicodedata.name(ch, 'unnamed')}"
        if label not in seen:
            seen.append(label)
    return ", ".join(seen[:3]) + (" ..." if len(seen) > 3 else "")


def check_text(text, name):
    """Text ready for the sheet, and warnings; refuse what the sheet cannot show.

    Parameters
    ----------
    text : str
    name : str
        The key the text came from (named in messages).

    Returns
    -------
    (str, list of str)
        The text with control characters removed, and warnings.

    Raises
    ------
    drainplan.errors.InputError
        Right-to-left text (Arabic, Hebrew), or characters DejaVu Sans lacks
        (CJK, Devanagari, emoji...).

    Examples
    --------
    >>> check_text("Ferme du Pré\\x07", "site.name")[0]
    'Ferme du Pré'
    """
    clean, removed = _strip_controls(str(text))
    warnings = []
    if removed:
        warnings.append(f"{name}: control characters removed ({_names(removed)})")
    rtl = [ch for ch in clean if unicodedata.bidirectional(ch) in _RTL]
    if rtl:
        raise InputError(f"{name}: right-to-left text ({_names(rtl)}) is not supported on the "
                         "design sheet (it would print reversed and unjoined); write it in a "
                         "left-to-right script", param="project")
    missing = [ch for ch in clean if not covered(ch)]
    if missing:
        raise InputError(f"{name}: the sheet font ({SHEET_FONT}: Latin, Greek, Cyrillic and "
                         f"symbols) has no glyph for {_names(missing)}; CJK, Devanagari and "
                         "emoji are not supported, write the text in a supported script",
                         param="project")
    return clean, warnings


def sheet_text(text, name, warnings):
    """Like :func:`check_text` but never refuses: characters the sheet cannot show
    become '?', and a warning is appended to ``warnings`` (for names read from files)."""
    clean, removed = _strip_controls(str(text))
    bad = [ch for ch in clean if unicodedata.bidirectional(ch) in _RTL or not covered(ch)]
    if removed or bad:
        warnings.append(f"{name} {text!r}: " + "; ".join(
            ([f"control characters removed ({_names(removed)})"] if removed else [])
            + ([f"{_names(bad)} cannot be shown by the sheet font and print as '?'"]
               if bad else [])))
        clean = "".join("?" if ch in bad else ch for ch in clean)
    return clean

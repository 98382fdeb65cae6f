"""Names in a scenario: which characters they may hold, when two are the same, and "did you mean" hints.

**The rule** (one place, used by every reader and check):

- A name (of the scenario, a product, a resource, an option; a name used in
  ``usage``, ``adds``, ``uncertainty`` or ``correlations``) and the texts
  ``currency``, ``unit`` and ``period`` hold visible characters and plain
  spaces only.  Refused, with the position and code point: control
  characters (C0, DEL, C1: a terminal escape), bidirectional controls
  (U+202A–U+202E, U+2066–U+2069, U+200E/U+200F, U+061C), and invisible or
  format characters (zero-width spaces and joiners U+200B–U+200D, U+2060,
  U+FEFF, the soft hyphen U+00AD, Unicode category Cf, line and paragraph
  separators, unassigned and private-use code points, Hangul fillers).
  Descriptions may also hold line breaks and tabs, nothing else of these.
- Two names in one section are the same name when they are equal after
  Unicode compatibility normalisation (NFKC), case folding and turning
  every run of spaces into one (leading and trailing spaces are not part of
  a name): ``Oak shelf``, ``oak  SHELF`` and ``Oak shelf`` with a decomposed
  accent cannot name two products.  A report, a chart file or a reader
  could not tell them apart.
- Lookups stay exact: ``usage: {Mill: 1}`` does not name resource ``mill``;
  it is refused with "did you mean 'mill'?".
"""

from __future__ import annotations

import difflib
import itertools
import re
import unicodedata
from functools import lru_cache

#: Bidirectional controls: embeddings, overrides, isolates and marks.
_BIDI = set(range(0x202A, 0x202F)) | set(range(0x2066, 0x206A)) | {0x200E, 0x200F, 0x061C}
#: Characters that show nothing though their category is a letter or a mark.
_BLANK_LETTERS = {0x115F, 0x1160, 0x3164, 0xFFA0, 0x034F, 0x180E}
_BLANK_RE = re.compile("[" + "".join(chr(c) for c in sorted(_BLANK_LETTERS)) + "]")


def _kind(ch: str) -> str | None:
    """What is wrong with one character in a name ('a control character' ...), or None."""
    cp = ord(ch)
    cat = unicodedata.category(ch)
    if cat == "Cc":
        return "a control character"
    if cp in _BIDI:
        return "a bidirectional control character"
    if cat in ("Cf", "Zl", "Zp") or cp in _BLANK_LETTERS:
        return "an invisible character"
    if cat in ("Cn", "Co", "Cs"):
        return "an unassigned or private-use character"
    return None


def character_kind(ch: str) -> str:
    """What a character refused in a name is ('a control character' ...), 'a character' if it is allowed."""
    return _kind(ch) or "a character"


@lru_cache(maxsize=1 << 16)  # the same few resource names are checked in every product's usage
def bad_character(text: str, line_breaks: bool = False) -> tuple[int, str, str] | None:
    """The first refused character in ``text``: (1-based position, 'U+200B', what it is); None if all are fine.

    ``line_breaks`` allows newline, carriage return and tab (for descriptions).
    """
    if text.isprintable() and _BLANK_RE.search(text) is None:  # the common case, at C speed
        return None
    for i, ch in enumerate(text):
        if ch.isprintable() and ord(ch) not in _BLANK_LETTERS:
            continue  # the common case, cheap
        if line_breaks and ch in "\n\r\t":
            continue
        kind = _kind(ch)  # None for a space other than U+0020 (no-break, thin ...): spaces are allowed
        if kind is not None:
            return i + 1, f"U+{ord(ch):04X}", kind
    return None


def character_problem(text: str, line_breaks: bool = False) -> tuple[str, str] | None:
    """(message, fix) for a text holding a refused character, or None."""
    bad = bad_character(text, line_breaks)
    if bad is None:
        return None
    pos, code, kind = bad
    return f"contains {kind} {code} at position {pos}", "remove it"


def shown(name: str) -> str:
    """A name as it may appear in a message: as written if clean, else quoted with refused characters escaped."""
    if bad_character(name) is None:
        return name
    def esc(ch: str) -> str:
        if _kind(ch) is None and ch.isprintable():
            return ch
        return f"\\x{ord(ch):02x}" if ord(ch) < 0x100 else f"\\u{ord(ch):04x}" if ord(ch) < 0x10000 else f"\\U{ord(ch):08x}"
    return "'" + "".join(map(esc, name)) + "'"


def name_key(name: str) -> str:
    """The form in which two names of one section must differ: NFKC, case folded, spaces collapsed."""
    return " ".join(unicodedata.normalize("NFKC", name).casefold().split())


def how_alike(a: str, b: str) -> str:
    """In what two spellings of one name differ: 'case', 'spacing', 'Unicode form' or several joined by 'and'."""
    steps = {"spacing": lambda x: " ".join(x.split()), "Unicode form": lambda x: unicodedata.normalize("NFKC", x),
             "case": str.casefold}
    for size in (1, 2, 3):
        for chosen in itertools.combinations(steps, size):
            x, y = a, b
            for name in steps:  # always in the same order
                if name in chosen:
                    x, y = steps[name](x), steps[name](y)
            if x == y:
                return " and ".join(chosen)
    return "case, spacing and Unicode form"


def fold(word: str) -> str:
    """A name as compared for hints: lower case, '_' and '-' as spaces, runs of spaces as one."""
    return " ".join(str(word).lower().replace("_", " ").replace("-", " ").split())


def did_you_mean(word: str, choices: list[str] | set[str]) -> str:
    """A 'did you mean ...?' hint for a near-miss name (ignoring case, spaces, '_' and '-'), or ''."""
    folded: dict[str, str] = {}
    for c in sorted(map(str, choices)):
        if bad_character(c) is None:
            folded.setdefault(fold(c), c)
    close = difflib.get_close_matches(fold(word), list(folded), n=1, cutoff=0.6)
    return f"did you mean '{folded[close[0]]}'?" if close else ""

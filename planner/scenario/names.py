"""Name matching shared by every reader and check: the "did you mean" hint for a near-miss name."""

from __future__ import annotations

import difflib


def fold(word: str) -> str:
    """A name as compared for hints: lower case, '_' and '-' as spaces, runs of spaces as one."""
    return " ".join(str(word).lower().replace("_", " ").replace("-", " ").split())


def did_you_mean(word: str, choices: list[str] | set[str]) -> str:
    """A 'did you mean ...?' hint for a near-miss name (ignoring case, spaces, '_' and '-'), or ''."""
    folded: dict[str, str] = {}
    for c in sorted(map(str, choices)):
        folded.setdefault(fold(c), c)
    close = difflib.get_close_matches(fold(word), list(folded), n=1, cutoff=0.6)
    return f"did you mean '{folded[close[0]]}'?" if close else ""

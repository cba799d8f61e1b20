"""'Did you mean ...?' for a misspelt name: a built-in scenario, a key, an option."""
from __future__ import annotations

import difflib
from typing import Iterable


def did_you_mean(word: str, choices: Iterable[str]) -> str:
    """'; did you mean 'x'?' for the closest of choices, or '' when none is close (difflib's ratio >= 0.6)."""
    close = difflib.get_close_matches(str(word), [str(c) for c in choices], n=1, cutoff=0.6)
    return f"; did you mean {close[0]!r}?" if close else ""

"""A scenario change told as the difference from the one before, when that difference is one shape.

A big sketch (30 polygons of 15,000 points) is about 19 MB of JSON; sending all of it to every tab after
each added or removed shape took seconds per change. When two documents differ only in one shape
inserted or removed (and the name and description an edit gives), the tabs are sent that shape and its
index instead (`sketch_change` in PROTOCOL.md); every other change still goes as the whole `scenario`.
"""
from __future__ import annotations

from typing import Any

#: Keys a sketch change may change besides the shapes: an edited scenario's name and description follow it.
FOLLOWING_KEYS = ("name", "description")
#: Whole-scenario text below this many bytes is still sent whole (small sketches gain nothing from a delta).
DELTA_MIN_BYTES = 256 * 1024


def _same(a: Any, b: Any) -> bool:
    return a is b or a == b  # the session shares unchanged shape dicts between documents: mostly `is`


def _first_difference(short: list, long: list) -> int:
    """The first index where the lists differ (len(short) when `long` only adds at the end)."""
    n = 0
    while n < len(short) and _same(short[n], long[n]):
        n += 1
    return n


def sketch_delta(before: dict, after: dict) -> dict | None:
    """{"insert": {"index", "shape"}} or {"remove": {"index"}} when `after` is `before` with one shape inserted
    or removed (name and description may differ too); None for any other difference."""
    if before.keys() != after.keys():
        return None
    for key in before:
        if key not in FOLLOWING_KEYS and key != "sketch" and not _same(before[key], after[key]):
            return None
    sa, sb = before.get("sketch"), after.get("sketch")
    if not isinstance(sa, dict) or not isinstance(sb, dict) or sa.keys() != sb.keys():
        return None
    if any(not _same(sa[k], sb[k]) for k in sa if k != "shapes"):
        return None
    a, b = sa.get("shapes"), sb.get("shapes")
    if not isinstance(a, list) or not isinstance(b, list):
        return None
    if len(b) == len(a) + 1:
        n = _first_difference(a, b)
        if all(_same(x, y) for x, y in zip(a[n:], b[n + 1:])):
            return {"insert": {"index": n, "shape": b[n]}}
    elif len(b) == len(a) - 1:
        n = _first_difference(b, a)
        if all(_same(x, y) for x, y in zip(b[n:], a[n + 1:])):
            return {"remove": {"index": n}}
    return None


def apply_delta(doc: dict, message: dict) -> dict:
    """The document a tab holds after a `sketch_change` message (a new dict; `doc` is not changed). The page does
    the same in web/main.js; the tests use this one to hold a tab's copy."""
    shapes = list(doc["sketch"]["shapes"])
    if "insert" in message:
        shapes.insert(message["insert"]["index"], message["insert"]["shape"])
    else:
        del shapes[message["remove"]["index"]]
    out = {**doc, "sketch": {**doc["sketch"], "shapes": shapes}}
    for key in FOLLOWING_KEYS:
        if key in message:
            out[key] = message[key]
    return out

"""Keys that appear twice in one JSON object of a request body.

RFC 8259 (section 4) says the names within an object SHOULD be unique and that
parsers differ in what they do with repeats; the validation library keeps the
last one silently. A request that sends ``bandwidth`` twice is refused instead,
so the answer never depends on a guess about which one was meant.

A body without escapes whose names are all different (a plain request) is
cleared by one regular-expression search for the ends of names. Otherwise the
scan is vectorised over the body's bytes (a few passes, no Python loop per
byte) and finds the object that holds each name. It runs on bodies that
already parsed as JSON.
"""

from __future__ import annotations

import json
import re

import numpy as np
import numpy.typing as npt

__all__ = ["repeated_keys"]

_QUOTE, _BACKSLASH, _COLON = 34, 92, 58
_OPENERS, _CLOSERS = (123, 91), (125, 93)  # { [ and } ]


#: the end of a name: its closing quote, optional white space (RFC 8259, section 2) and the colon
_NAME_END = re.compile(rb'"[ \t\r\n]*:')


def _structure(b: npt.NDArray[np.uint8]) -> npt.NDArray[np.intp]:
    """Positions of quotes, colons, backslashes and brackets (and of ``|``, which the callers ignore)."""
    # & 0xDF maps { | } onto [ \ ]: one range test covers five of the characters
    folded = (b & np.uint8(0xDF)) - np.uint8(91)
    return np.flatnonzero((folded < 3) | (b == _QUOTE) | (b == _COLON))


def _unescaped_quotes(b: npt.NDArray[np.uint8], quotes: npt.NDArray[np.intp], slashes: npt.NDArray[np.intp]) -> npt.NDArray[np.intp]:
    """Positions of the quotes that open or close a string (a quote after an odd run of backslashes is escaped)."""
    after_backslash = quotes[(quotes > 0) & (b[np.maximum(quotes - 1, 0)] == _BACKSLASH)]
    if after_backslash.size == 0:
        return quotes
    # maximal runs of consecutive backslashes: where each starts and ends
    breaks = np.flatnonzero(np.diff(slashes) != 1)
    run_start = slashes[np.r_[0, breaks + 1]]
    run_end = slashes[np.r_[breaks, slashes.size - 1]]
    run = np.searchsorted(run_end, after_backslash - 1)
    escaped = after_backslash[(after_backslash - run_start[run]) % 2 == 1]  # run length before the quote is odd
    return np.setdiff1d(quotes, escaped, assume_unique=True)


def _outside_strings(positions: npt.NDArray[np.intp], quotes: npt.NDArray[np.intp]) -> npt.NDArray[np.intp]:
    outside: npt.NDArray[np.intp] = positions[np.searchsorted(quotes, positions) % 2 == 0]
    return outside


def repeated_keys(body: bytes, limit: int = 10) -> list[str]:
    """Names that occur more than once in one object of a JSON document.

    Parameters
    ----------
    body : bytes
        A JSON text (UTF-8) that parsed without error.
    limit : int
        At most this many names are returned.

    Returns
    -------
    list of str
        The repeated names, in the order of their second occurrence; empty when every object's names are unique.
    """
    if b"\\" not in body:
        # no escapes: every string is a quote pair without quotes inside, so a quote followed by a colon closes a
        # name; names that are all different need no look at which object holds them
        ends = [m.start() for m in _NAME_END.finditer(body)]
        names = [body[body.rfind(b'"', 0, end) + 1 : end] for end in ends]
        if len(set(names)) == len(names):
            return []
    b = np.frombuffer(body, dtype=np.uint8)
    where = _structure(b)
    chars = b[where]
    quotes = _unescaped_quotes(b, where[chars == _QUOTE], where[chars == _BACKSLASH])
    if quotes.size % 2:
        return []  # not a JSON text; the parser has already said so
    colons = _outside_strings(where[chars == _COLON], quotes)
    if colons.size < 2:
        return []
    is_bracket = (chars == _OPENERS[0]) | (chars == _OPENERS[1]) | (chars == _CLOSERS[0]) | (chars == _CLOSERS[1])
    brackets = _outside_strings(where[is_bracket], quotes)
    opening = b[brackets]
    step = np.where((opening == _OPENERS[0]) | (opening == _OPENERS[1]), 1, -1)
    depth_after = np.cumsum(step)
    # the object a name belongs to: the last opener before its colon that left the depth the colon is at
    at = np.searchsorted(brackets, colons)
    depth = np.where(at > 0, depth_after[np.maximum(at - 1, 0)], 0)
    owner = np.full(colons.size, -1, dtype=np.intp)
    is_opener = step > 0
    for level in np.unique(depth).tolist():
        openers = brackets[is_opener & (depth_after == level)]
        mine = depth == level
        owner[mine] = openers[np.searchsorted(openers, colons[mine]) - 1]
    # the name before a colon is the string whose closing quote is the last quote before it
    close = quotes[np.searchsorted(quotes, colons) - 1]
    open_ = quotes[np.searchsorted(quotes, close) - 1]
    seen: set[tuple[int, bytes]] = set()
    found: list[str] = []
    for obj, start, end in zip(owner.tolist(), open_.tolist(), close.tolist(), strict=True):
        raw = body[start + 1 : end]
        name = json.loads(b'"' + raw + b'"') if _BACKSLASH in raw else raw.decode("utf-8", "replace")
        key = (obj, name.encode("utf-8", "surrogatepass"))
        if key in seen:
            if name not in found:
                found.append(name)
                if len(found) >= limit:
                    break
        else:
            seen.add(key)
    return found

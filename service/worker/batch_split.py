"""Where each series of a batch body begins and ends, without parsing the numbers.

A large batch is cut into groups of slots that run in different workers. The
HTTP process keeps the body; a worker finds the byte range of every element
of the top-level ``series`` array and sends back only those offsets, so the
HTTP process can cut the body into smaller batch bodies by slicing bytes.

Only the six structural bytes of JSON (``"``, ``\\``, ``[``, ``]``, ``{``,
``}``) are looked at: numpy finds them all in one vectorised pass, and a
short Python walk over them (a few per series) tracks strings and depth.
Anything unexpected (another top-level key, an element that is not an
object, text between elements other than a comma, too many structural bytes)
answers ``None``: the batch then runs whole in one worker, whose full parse
gives the precise error.
"""

from __future__ import annotations

import re

import numpy as np

_STRUCTURAL = np.frombuffer(b'"\\[]{}', dtype=np.uint8)
_QUOTE, _BACKSLASH, _OPEN_LIST, _CLOSE_LIST, _OPEN_OBJ, _CLOSE_OBJ = (int(c) for c in _STRUCTURAL)
_IS_STRUCTURAL = np.zeros(256, dtype=bool)
_IS_STRUCTURAL[_STRUCTURAL] = True
_HEAD = re.compile(rb'\s*\{\s*"series"\s*:\s*')
_BETWEEN = re.compile(rb"\s*,\s*")
_TAIL = re.compile(rb"\s*\}\s*")
#: structural bytes allowed per series before the scan gives up (a hostile body of brackets stays cheap)
STRUCTURAL_PER_SERIES = 256


def series_spans(body: bytes, max_series: int) -> list[tuple[int, int]] | None:
    """Byte ranges ``[start, stop)`` of the elements of ``series`` in a batch body.

    Parameters
    ----------
    body : bytes
        The raw JSON body of a batch request.
    max_series : int
        The batch's series limit; a body with more elements is not split
        (the whole-batch path answers with the limit's error).

    Returns
    -------
    list of (int, int) or None
        One range per series, in order; ``None`` when the body is not a plain
        ``{"series": [{...}, ...]}`` object this scan can vouch for.
    """
    head = _HEAD.match(body)
    if head is None or body[head.end() : head.end() + 1] != b"[":
        return None
    raw = np.frombuffer(body, dtype=np.uint8)
    where = np.flatnonzero(_IS_STRUCTURAL[raw])  # one table look-up per byte
    if where.size > STRUCTURAL_PER_SERIES * (max_series + 1):
        return None
    codes = raw[where].tolist()
    positions = where.tolist()
    list_at = head.end()
    spans: list[tuple[int, int]] = []
    depth = 0
    in_string = False
    skip_to = -1
    start = -1
    end_of_list = -1
    for code, pos in zip(codes, positions, strict=True):
        if pos < list_at or pos <= skip_to:
            continue
        if in_string:
            if code == _BACKSLASH:
                skip_to = pos + 1  # the escaped byte, whatever it is
            elif code == _QUOTE:
                in_string = False
            continue
        if code == _QUOTE:
            if depth < 2:
                return None  # a string directly in the series list
            in_string = True
        elif code in (_OPEN_LIST, _OPEN_OBJ):
            if depth == 1:
                if code != _OPEN_OBJ:
                    return None
                start = pos
            elif depth == 0 and code != _OPEN_LIST:
                return None
            depth += 1
        elif code == _BACKSLASH:
            return None
        else:
            depth -= 1
            if depth == 1:
                if code != _CLOSE_OBJ:
                    return None
                spans.append((start, pos + 1))
                if len(spans) > max_series:
                    return None
            elif depth == 0:
                if code != _CLOSE_LIST:
                    return None
                end_of_list = pos
                break
            elif depth < 0:
                return None
    if end_of_list < 0 or not spans or _TAIL.fullmatch(body, end_of_list + 1) is None:
        return None
    if not re.fullmatch(rb"\s*", body[list_at + 1 : spans[0][0]]) or not re.fullmatch(rb"\s*", body[spans[-1][1] : end_of_list]):
        return None
    for (_, stop), (begin, _) in zip(spans, spans[1:], strict=False):
        if _BETWEEN.fullmatch(body, stop, begin) is None:
            return None
    return spans

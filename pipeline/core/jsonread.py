"""Strict reading of JSON inputs (source.json, library.json).

Python's json module accepts what a curated input must not: NaN and Infinity, the same key
twice in one object (the last silently wins), and nesting deep enough to exhaust the
interpreter's recursion limit. ``loads`` refuses all three with an InputError naming the
file, and never raises anything else for any text.
"""

import json
import re

import numpy as np

from .errors import InputError
from .limits import MAX_JSON_DEPTH

_STRINGS = re.compile(r'"(?:[^"\\]|\\.)*"', re.DOTALL)


class _Duplicate(Exception):
    def __init__(self, key):
        self.key = key


def _pairs(pairs):
    out = {}
    for key, value in pairs:
        if key in out:
            raise _Duplicate(key)
        out[key] = value
    return out


def _constant(name):
    raise ValueError(f"{name} is not a JSON number")


def depth(text: str) -> int:
    """Deepest nesting of arrays and objects in ``text`` (strings skipped) [levels]. Only
    quotes and brackets are looked at: a quote after an odd run of backslashes is escaped,
    and a bracket after an odd number of real quotes lies inside a string."""
    b = np.frombuffer(text.encode("utf-8", "replace"), dtype=np.uint8)
    quotes = np.flatnonzero(b == ord('"'))
    after_slash = quotes[(quotes > 0) & (b[np.maximum(quotes - 1, 0)] == ord("\\"))]
    escaped = set()
    for q in after_slash.tolist():          # rare: count the backslashes before the quote
        k = q - 1
        while k >= 0 and b[k] == ord("\\"):
            k -= 1
        if (q - 1 - k) % 2:
            escaped.add(q)
    if escaped:
        quotes = quotes[~np.isin(quotes, list(escaped))]
    opening = (b == ord("[")) | (b == ord("{"))
    brackets = np.flatnonzero(opening | (b == ord("]")) | (b == ord("}")))
    outside = np.searchsorted(quotes, brackets) % 2 == 0
    step = np.where(opening[brackets[outside]], 1, -1)
    return int(np.cumsum(step).max(initial=0))


def loads(text: str, *, file: str, max_depth: int = MAX_JSON_DEPTH):
    """Parse JSON ``text`` strictly; InputError (with ``code``) on anything else.

    The InputError's ``code`` attribute is 'SRC-TOO-DEEP', 'SRC-DUPLICATE-KEY' or
    'SRC-UNREADABLE', for the caller's finding.
    """
    levels = depth(text)
    if levels > max_depth:
        raise _error("SRC-TOO-DEEP", f"JSON nested {levels} levels deep", file,
                     expected=f"at most {max_depth} levels")
    try:
        return json.loads(text, object_pairs_hook=_pairs, parse_constant=_constant)
    except _Duplicate as exc:
        raise _error("SRC-DUPLICATE-KEY", f"key '{exc.key}' appears twice in one object", file,
                     expected="each key once per object") from None
    except json.JSONDecodeError as exc:
        raise _error("SRC-UNREADABLE", f"not valid JSON: {exc.msg}", file, line=exc.lineno,
                     expected="a JSON object") from None
    except (ValueError, RecursionError) as exc:
        raise _error("SRC-UNREADABLE", f"not valid JSON: {exc}", file,
                     expected="a JSON object") from None


def canonical(data: bytes, max_depth: int = MAX_JSON_DEPTH):
    """The document of ``data`` when they are exactly the bytes thermoledger writes for it
    (release/document.py json_bytes: orjson, indented by two spaces, a final newline) and
    nest at most ``max_depth`` levels; None otherwise, and ``loads`` must judge them. Such
    bytes hold no NaN or infinity (orjson refuses them) and no key twice (written again,
    the bytes would lack the repeat); every line break of indented JSON lies between
    values, so a line indented 2 × ``max_depth`` spaces is the first sign of too deep a
    nesting (an empty array or object adds one level to the deepest indentation). A
    10 000-species library.json (87 MB) is read in about 0.5 s this way; ``loads`` takes
    1.6 to 2.6 s."""
    import orjson

    from .processes import collector_paused

    if b"\n" + b" " * (2 * max_depth) in data:
        return None
    try:
        with collector_paused():      # a large library is millions of new objects at once
            doc = orjson.loads(data)
    except orjson.JSONDecodeError:
        return None
    if orjson.dumps(doc, option=orjson.OPT_INDENT_2 | orjson.OPT_APPEND_NEWLINE) != data:
        return None
    return doc


def _error(code, what, file, line=None, expected=""):
    err = InputError(what, file=file, line=line, expected=expected)
    err.code = code
    return err

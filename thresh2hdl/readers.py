"""Reading the user's TOML and JSON files within the parsers' limits.

Python's TOML and JSON parsers recurse once per nesting level and convert integers of any
length, so a file nested thousands of levels deep, or holding a number thousands of digits
long, makes them raise RecursionError or a ValueError that is no syntax error. Here every such
file is one :class:`InputError` naming it, and a parsed document is walked once (without
recursion) for nesting and numbers that no field of ours can hold, so later code never meets
them.
"""

import json
import math
import tomllib
from pathlib import Path

from .errors import InputError

__all__ = ["read_text", "load_toml", "load_json", "check_document", "shorten", "MAX_DEPTH",
           "MAX_INTEGER"]

MAX_DEPTH = 32            # no file of ours nests deeper than 7 levels
MAX_INTEGER = 1 << 128    # beyond every field: the widest, a bias, is 128-bit signed


def shorten(value, limit=40):
    """``value`` as text for a message, cut in the middle when long (a number of 5,000 digits)."""
    text = value if isinstance(value, str) else repr(value)
    return text if len(text) <= limit else f"{text[:limit // 2]}...({len(text)} characters)"


def read_text(path, what):
    """The UTF-8 text of a file; missing, unreadable or undecodable is one InputError."""
    path = Path(path)
    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        raise InputError("no such file", source=path) from None
    except IsADirectoryError:
        raise InputError(f"is a folder, not a {what}", source=path) from None
    except OSError as error:
        raise InputError(f"cannot read: {error.strerror}", source=path) from None
    except MemoryError:
        raise InputError(f"is too large to read as a {what}", source=path) from None
    try:
        return raw.decode("utf-8")
    except UnicodeDecodeError as error:
        raise InputError(f"not UTF-8 text (byte {error.start})", source=path) from None


def _parser_limit(error, source, what):
    """The InputError for a parser's own limit, or None for an ordinary syntax error."""
    if isinstance(error, RecursionError):
        return InputError(f"nests arrays or tables too deeply to read (no {what} nests more "
                          f"than a few levels)", source=source)
    if isinstance(error, MemoryError):
        return InputError(f"is too large to read as a {what}", source=source)
    if "integer string conversion" in str(error):
        return InputError("holds a number of more than 4300 digits, larger than any field "
                          "allows", source=source)
    return None


def load_toml(path, what="model file"):
    """Read a TOML file and check it with :func:`check_document`."""
    return _parsed(path, what, tomllib.loads, "TOML")


def _finite(text):
    value = float(text)
    if not math.isfinite(value):
        raise ValueError(f"number {shorten(text)} is out of range")
    return value


def _no_constant(name):
    raise ValueError(f"{name} is not a number JSON allows")


def load_json(path, what="report"):
    """Read a JSON file (no NaN or infinity) and check it with :func:`check_document`."""
    return _parsed(path, what, lambda text: json.loads(text, parse_float=_finite,
                                                       parse_constant=_no_constant), "JSON")


def _parsed(path, what, parse, language):
    """``parse`` of the file's text, checked; every failure one InputError naming the file."""
    path = Path(path)
    text = read_text(path, what)
    try:
        data = parse(text)
    except (ValueError, RecursionError, MemoryError) as error:
        limit = _parser_limit(error, path, what)
        if limit is not None:
            raise limit from None
        raise InputError(f"not valid {language}: {error}", source=path) from None
    check_document(data, path)
    return data


def check_document(data, source):
    """Refuse nesting deeper than :data:`MAX_DEPTH` and integers of :data:`MAX_INTEGER` or
    more in magnitude, naming the first such field (walked with a stack, not recursion)."""
    stack = [(data, "", 0)] if isinstance(data, (dict, list)) else []
    while stack:
        container, where, depth = stack.pop()
        if depth >= MAX_DEPTH:
            raise InputError(f"nests more than {MAX_DEPTH} levels deep; no field of this file "
                             f"nests more than a few", source=source,
                             field=shorten(where, 60) or None)
        items = container.items() if isinstance(container, dict) else enumerate(container)
        for key, value in items:
            if isinstance(value, (dict, list)):
                stack.append((value, _field(where, key), depth + 1))
            elif isinstance(value, int) and not isinstance(value, bool) and \
                    abs(value) >= MAX_INTEGER:
                raise InputError(f"an integer of {value.bit_length()} bits is larger than any "
                                 f"field allows (at most 128-bit integers)", source=source,
                                 field=_field(where, key))


def _field(where, key):
    if isinstance(key, int):
        return f"{where}[{key}]"
    return f"{where}.{key}" if where else str(key)

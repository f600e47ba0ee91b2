"""The report record's JSON form, key by key: reading a loaded report.json, and the two
helpers that write it (optional keys, plain JSON values).

A report.json is the user's file once written: it may come from an older version (without the
keys added since) or be edited. Every value the record takes is checked here, so a value no
writer can show is one InputError naming its field (``tree.nodes[3].bits``), never a traceback
from deep inside a writer.
"""

from ..errors import InputError
from ..readers import shorten

__all__ = ["Table", "ABSENT", "present", "plain"]

ABSENT = object()       # a key the report does not have (unlike null, which it may hold)
SMALL = 1 << 16         # counts, widths, levels and stages: far below this in any design


def present(pairs):
    """The ``(key, value)`` pairs whose value is not None, as a table: a record's optional
    keys, written only when it holds them."""
    return {key: value for key, value in pairs if value is not None}


def plain(value):
    """``value`` in JSON's own types: tuples as lists, numpy scalars as Python numbers."""
    if isinstance(value, dict):
        return {str(k): plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [plain(v) for v in value]
    if hasattr(value, "item"):       # numpy scalars
        return value.item()
    return value


def _is_int(value):
    return type(value) is int


def _is_number(value):
    return isinstance(value, (int, float)) and not isinstance(value, bool)


class Table:
    """One JSON object of the report and where it is (``tree.nodes[3]``), read by type."""

    def __init__(self, value, where="", source=None):
        self.where, self.source = where, source
        if not isinstance(value, dict):
            self._refuse(None, "a table", value)
        self.value = value

    def __contains__(self, key):
        return key in self.value

    def _name(self, key):
        if key is None:
            return self.where or None
        return f"{self.where}.{key}" if self.where else str(key)

    def _refuse(self, key, wanted, value):
        got = "missing" if value is ABSENT else shorten(value)
        raise InputError(f"cannot show this report: must be {wanted}, not {got}; rebuild the "
                         f"folder", source=self.source, field=self._name(key))

    def _read(self, key, wanted, test, default, null):
        value = self.value.get(key, ABSENT)
        if value is ABSENT and default is not ABSENT:
            return default
        if (value is None and null) or (value is not ABSENT and test(value)):
            return value
        self._refuse(key, wanted + (" or null" if null else ""), value)

    def integer(self, key, default=ABSENT, *, null=False, low=None, high=None):
        """An integer (within ``low`` .. ``high`` where given)."""
        wanted = "an integer" if low is None else f"an integer from {low} to {high}"
        return self._read(key, wanted, lambda v: _is_int(v) and (
            low is None or low <= v <= high), default, null)

    def count(self, key, default=ABSENT, *, null=False):
        """A small non-negative integer: a width, a count, a level or a stage."""
        return self.integer(key, default, null=null, low=0, high=SMALL)

    def natural(self, key, default=ABSENT):
        """A non-negative integer of any size: rows, vectors, cycles."""
        return self._read(key, "a non-negative integer", lambda v: _is_int(v) and v >= 0,
                          default, False)

    def number(self, key, default=ABSENT, *, null=False):
        return self._read(key, "a number", _is_number, default, null)

    def text(self, key, default=ABSENT, *, null=False):
        return self._read(key, "a text", lambda v: isinstance(v, str), default, null)

    def flag(self, key, default=ABSENT):
        return self._read(key, "true or false", lambda v: isinstance(v, bool), default, False)

    def label(self, key, default=ABSENT):
        """A class label: an integer or a text."""
        return self._read(key, "a class label", lambda v: _is_int(v) or isinstance(v, str),
                          default, False)

    def _list(self, key, wanted, test, default, size=None):
        value = self._read(key, wanted, lambda v: isinstance(v, list) and all(map(test, v))
                           and (size is None or len(v) == size), default, False)
        return value if value is default else tuple(value)

    def integers(self, key, default=ABSENT):
        return self._list(key, "a list of integers", _is_int, default)

    def numbers(self, key, default=ABSENT, *, at_least=0):
        value = self._list(key, "a list of numbers", _is_number, default)
        if value is not default and len(value) < at_least:
            self._refuse(key, f"a list of at least {at_least} numbers", list(value))
        return value

    def texts(self, key, default=ABSENT):
        return self._list(key, "a list of texts", lambda v: isinstance(v, str), default)

    def labels(self, key, default=ABSENT):
        return self._list(key, "a list of class labels",
                          lambda v: _is_int(v) or isinstance(v, str), default)

    def pair(self, key, default=ABSENT, *, number=False):
        """``[low, high]``: two integers (or numbers)."""
        return self._list(key, "two numbers" if number else "two integers",
                          _is_number if number else _is_int, default, size=2)

    def pairs(self, key, default=ABSENT):
        """A list of ``[low, high]`` integer pairs."""
        value = self._list(key, "a list of [low, high] integer pairs", lambda v: isinstance(
            v, list) and len(v) == 2 and all(map(_is_int, v)), default)
        return value if value is default else tuple(tuple(v) for v in value)

    def table(self, key, default=ABSENT, *, null=False):
        """A nested table, as a Table (or ``default``/None where absent or null)."""
        value = self._read(key, "a table", lambda v: isinstance(v, dict), default, null)
        return value if value is default or value is None else Table(value, self._name(key),
                                                                     self.source)

    def tables(self, key, default=ABSENT):
        """A list of tables, each a Table named by its index."""
        value = self._read(key, "a list of tables", lambda v: isinstance(v, list), default,
                           False)
        if value is default:
            return value
        return tuple(Table(item, f"{self._name(key)}[{k}]", self.source)
                     for k, item in enumerate(value))

    def named_tables(self, key, default=ABSENT):
        """A table of tables, as ``(name, Table)`` pairs in the file's order."""
        outer = self.table(key, default, null=True)
        if outer is default or outer is None:
            return outer
        return tuple((name, outer.table(name)) for name in outer.value)

    def mapping(self, key, test, wanted, default=ABSENT):
        """A table whose values all pass ``test``, as a dict in the file's order."""
        value = self._read(key, f"a table of {wanted}", lambda v: isinstance(v, dict) and all(
            map(test, v.values())), default, False)
        return value if value is default else dict(value)

    def refuse(self, key, wanted, value=ABSENT):
        """Refuse this table's ``key`` (a check across keys), naming it."""
        self._refuse(key, wanted, self.value.get(key, ABSENT) if value is ABSENT else value)

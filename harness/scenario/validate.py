"""Checked reading of one TOML table: typed values, ranges and unknown keys, as InputError."""

import math

from harness.errors import InputError

REQUIRED = object()


def show(value):
    """A value the way a scenario file would spell it (strings quoted)."""
    if isinstance(value, str):
        return f'"{value}"'
    if isinstance(value, bool):
        return "true" if value else "false"
    return str(value)


def interval(lo, hi, lo_open=False, hi_open=False, names=(None, None)):
    """Interval text such as ``(0, 10000]``; a bound with a name reads ``(at_s = 0.5, 3600]``."""
    lo_t, hi_t = (f"{v:g}" if n is None else f"{n} = {v:g}" for v, n in zip((lo, hi), names))
    return f"{'(' if lo_open else '['}{lo_t}, {hi_t}{')' if hi_open else ']'}"


def _name(bound):
    return bound if isinstance(bound, str) else None


class Section:
    """Reads keys of one table of a scenario file; every failure is a one-line InputError.

    Parameters
    ----------
    source : str
        File name used in messages.
    prefix : str
        Dotted name of the table in messages, e.g. ``"cable"`` or ``"fault[2]"``.
    table : dict
        The parsed table.
    keys : dict
        Every key the section allows and its rule (harness.scenario.keys: a Range, a Choice
        or FREE); ranges and choices are read from it.
    """

    def __init__(self, source, prefix, table, keys):
        self.source, self.prefix, self.keys = source, prefix, keys
        if not isinstance(table, dict):
            raise InputError(f"{source}: {prefix} = {show(table)}: must be a table [{prefix}]")
        self.table = table

    def key(self, name):
        """Dotted key name for messages."""
        return f"{self.prefix}.{name}"

    def fail(self, name, rule, value=REQUIRED):
        """Raise InputError for key ``name``: ``file: key = value: rule``."""
        shown = "" if value is REQUIRED else f" = {show(value)}"
        raise InputError(f"{self.source}: {self.key(name)}{shown}: {rule}")

    def has(self, name):
        """Whether key ``name`` is present."""
        return name in self.table

    def _bounds(self, name, lo, hi):
        """The range of ``name`` from the section's rules; ``lo`` / ``hi`` give a bound named by a key."""
        r = self.keys[name]
        lo, hi = (r.lo if lo is None else lo), (r.hi if hi is None else hi)
        if isinstance(lo, str) or isinstance(hi, str):
            raise TypeError(f"{self.key(name)}: the reader must pass the value of bound {lo!r} / {hi!r}")
        return r, lo, hi

    def _get(self, name, default, rule):
        if name not in self.table:
            if default is REQUIRED:
                self.fail(name, f"missing; required, {rule}")
            return False, default
        return True, self.table[name]

    def number(self, name, default=REQUIRED, lo=None, hi=None):
        """Float in the key's interval (``lo`` / ``hi``: a bound the rules name by a key); ints are
        accepted; NaN, infinities and booleans are not."""
        r, lo, hi = self._bounds(name, lo, hi)
        lo_open, hi_open = r.lo_open, r.hi_open
        shown = interval(lo, hi, lo_open, hi_open, (_name(r.lo), _name(r.hi)))
        rule = f"must be in {shown}"
        present, v = self._get(name, default, rule)
        if not present:
            return v
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
            self.fail(name, f"must be a number in {shown}", v)
        if v < lo or v > hi or (lo_open and v == lo) or (hi_open and v == hi):
            self.fail(name, rule, v)
        return float(v)

    def integer(self, name, default=REQUIRED, lo=None, hi=None):
        """Integer in the key's closed interval (``lo`` / ``hi`` as for :meth:`number`)."""
        r, lo, hi = self._bounds(name, lo, hi)
        lo_t, hi_t = (f"{v}" if n is None else f"{n} = {v}" for v, n in ((lo, _name(r.lo)), (hi, _name(r.hi))))
        rule = f"must be an integer in [{lo_t}, {hi_t}]"
        present, v = self._get(name, default, rule)
        if not present:
            return v
        if isinstance(v, bool) or not isinstance(v, int) or v < lo or v > hi:
            self.fail(name, rule, v)
        return v

    def choice(self, name, default=REQUIRED):
        """One of the key's option strings."""
        options = self.keys[name].options
        rule = "must be one of " + ", ".join(show(o) for o in options)
        present, v = self._get(name, default, rule)
        if present and v not in options:
            self.fail(name, rule, v)
        return v

    def string(self, name, default=REQUIRED):
        """A non-empty string."""
        present, v = self._get(name, default, "must be a non-empty string")
        if present and (not isinstance(v, str) or not v):
            self.fail(name, "must be a non-empty string", v)
        return v

    def finish(self, allowed=None, why=""):
        """Reject keys not in ``allowed`` (default: every key of the section), naming all of them."""
        allowed = set(self.keys if allowed is None else allowed)
        for name in self.table:
            if name not in allowed:
                self.fail(name, f"unknown key{why}; allowed: {', '.join(sorted(allowed))}")

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


def interval(lo, hi, lo_open=False, hi_open=False):
    """Interval text such as ``(0, 10000]``."""
    return f"{'(' if lo_open else '['}{lo:g}, {hi:g}{')' if hi_open else ']'}"


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
    """

    def __init__(self, source, prefix, table):
        self.source, self.prefix = source, prefix
        if not isinstance(table, dict):
            raise InputError(f"{source}: {prefix} = {show(table)}: must be a table [{prefix}]")
        self.table = table
        self.used = set()

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

    def _get(self, name, default, rule):
        self.used.add(name)
        if name not in self.table:
            if default is REQUIRED:
                self.fail(name, f"missing; required, {rule}")
            return False, default
        return True, self.table[name]

    def number(self, name, lo, hi, lo_open=False, hi_open=False, default=REQUIRED):
        """Float in the interval; ints are accepted; NaN, infinities and booleans are not."""
        rule = f"must be in {interval(lo, hi, lo_open, hi_open)}"
        present, v = self._get(name, default, rule)
        if not present:
            return v
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
            self.fail(name, f"must be a number in {interval(lo, hi, lo_open, hi_open)}", v)
        if v < lo or v > hi or (lo_open and v == lo) or (hi_open and v == hi):
            self.fail(name, rule, v)
        return float(v)

    def integer(self, name, lo, hi, default=REQUIRED):
        """Integer in [lo, hi]."""
        rule = f"must be an integer in [{lo}, {hi}]"
        present, v = self._get(name, default, rule)
        if not present:
            return v
        if isinstance(v, bool) or not isinstance(v, int) or v < lo or v > hi:
            self.fail(name, rule, v)
        return v

    def choice(self, name, options, default=REQUIRED):
        """One of the strings ``options``."""
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
        """Reject keys not read (or not in ``allowed``), naming the allowed keys."""
        allowed = set(self.used if allowed is None else allowed)
        for name in self.table:
            if name not in allowed:
                self.fail(name, f"unknown key{why}; allowed: {', '.join(sorted(allowed))}")

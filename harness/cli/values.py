"""Command-line value types with a range: a bad value ends in one line naming the option and the range.

argparse reports the ArgumentTypeError as ``argument --option: must be ..., got 'text'``.
"""
import argparse
import math


def integer(lo, hi):
    """Type for an integer option in [lo, hi]."""
    def parse(text):
        try:
            value = int(text)
        except ValueError:
            value = None
        if value is None or not lo <= value <= hi:
            raise argparse.ArgumentTypeError(f"must be an integer in [{lo}, {hi}], got {text!r}")
        return value
    return parse


def number(lo, hi, unit, lo_open=False, note=""):
    """Type for a finite number option in [lo, hi] (``lo_open``: (lo, hi]); ``hi`` may be math.inf."""
    shown = f"{'(' if lo_open else '['}{lo:g}, {hi:g}{')' if math.isinf(hi) else ']'} {unit}".rstrip()

    def parse(text):
        try:
            value = float(text)
        except ValueError:
            value = math.nan
        if not (math.isfinite(value) and (lo < value if lo_open else lo <= value) and value <= hi):
            raise argparse.ArgumentTypeError(f"must be a number in {shown}{note}, got {text!r}")
        return value
    return parse

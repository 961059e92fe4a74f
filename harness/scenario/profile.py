"""Load-current profile from a CSV file with header ``t_s,current_a``."""

import csv
import math

from harness.errors import InputError, reading

HEADER = ["t_s", "current_a"]
#: Allowed current range in a profile, A.
CURRENT_MAX_A = 1000.0
#: Allowed time range in a profile, s.
TIME_MAX_S = 3600.0


def read_profile(path, shown=None):
    """Read a current profile.

    The file has the header ``t_s,current_a`` and one sample per row: time in s (from 0,
    strictly increasing, at most 3600) and current in A (0 .. 1000). A byte-order mark
    and CRLF line ends are accepted. Between rows the current
    is interpolated linearly; before the first row it is the first value, after the last row
    the last. Row numbers in messages count the header as row 1.

    Parameters
    ----------
    path : str or pathlib.Path
        File to read.
    shown : str, optional
        Name used in messages (defaults to ``path``).

    Returns
    -------
    tuple of (float, float)
        (t_s, current_a) pairs.
    """
    name = shown or str(path)
    try:
        with reading(name, "profile"), open(path, newline="", encoding="utf-8-sig") as fh:
            rows = list(csv.reader(fh, strict=True))
    except csv.Error as exc:
        raise InputError(f"{name}: not valid CSV ({exc})") from None
    if not rows or [c.strip() for c in rows[0]] != HEADER:
        raise InputError(f"{name}: row 1: header must be exactly t_s,current_a")
    out = []
    for n, row in enumerate(rows[1:], start=2):
        if not row or all(not c.strip() for c in row):
            continue
        if len(row) != 2:
            raise InputError(f"{name}: row {n}: must have 2 columns (t_s,current_a), has {len(row)}")
        vals = []
        for col, text, hi in zip(HEADER, row, (TIME_MAX_S, CURRENT_MAX_A)):
            try:
                v = float(text)
            except ValueError:
                v = math.nan
            if not (0.0 <= v <= hi):
                raise InputError(f"{name}: row {n}, column {col} = {text.strip()!r}: must be a number in [0, {hi:g}]")
            vals.append(v)
        if out and vals[0] <= out[-1][0]:
            raise InputError(f"{name}: row {n}, column t_s = {row[0].strip()!r}: must be greater than the previous row's {out[-1][0]:g}")
        out.append(tuple(vals))
    if not out:
        raise InputError(f"{name}: no data rows after the header t_s,current_a")
    return tuple(out)

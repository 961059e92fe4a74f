"""Read integer-code CSV files (ADC codes, device logs) with one-line errors naming file, row and column.

Rows are numbered as a text editor numbers the file's lines: the header is row 1, the
first sample row 2. Every message of ``replay`` and ``check-port`` uses this numbering.
A byte-order mark and CRLF line ends are read as any editor reads them; a header column
that is not allowed is refused, never ignored.
"""
import csv
import re

import numpy as np

from harness.errors import InputError, reading

COLUMNS = ("adc_v", "adc_i")
#: A decimal integer as a device or a spreadsheet writes it (Python's int() would also take
#: ``1_000`` and other digit forms no logger writes).
_INTEGER = re.compile(r"\s*[+-]?[0-9]+\s*")


def check_columns(path, header, allowed, required, what="file"):
    """One-line InputError unless ``header`` holds only ``allowed`` names, each once, and all of ``required``."""
    unknown = [h for h in header if h not in allowed]
    if unknown:
        raise InputError(f"{path}: row 1: unknown column {unknown[0]!r}; allowed: {','.join(allowed)}")
    twice = [h for n, h in enumerate(header) if h in header[:n]]
    if twice:
        raise InputError(f"{path}: row 1: column {twice[0]!r} given twice")
    missing = [c for c in required if c not in header]
    if missing:
        raise InputError(f"{path}: row 1: missing column {missing[0]!r}; a {what} holds at least "
                         f"{','.join(required)}")


def read_rows(path, what, allowed, required):
    """Header (names stripped) and data rows ``[(row number, cells), ...]`` of a CSV file.

    The header may hold only ``allowed`` column names, each once, and must hold all of
    ``required`` (checked before any row is read). Blank rows are skipped; every other row
    must have as many fields as the header.
    """
    rows = []
    try:
        with reading(path, what), open(path, newline="", encoding="utf-8-sig") as f:
            reader = csv.reader(f, strict=True)
            header = next(reader, None)
            if header is None:
                raise InputError(f"{path}: empty file; expected a header row holding {','.join(required)}")
            header = [h.strip() for h in header]
            check_columns(path, header, allowed, required, what)
            for row in reader:
                if not row or all(not c.strip() for c in row):
                    continue
                if len(row) != len(header):
                    raise InputError(f"{path}: row {reader.line_num}: {len(row)} fields, the header has "
                                     f"{len(header)} ({','.join(header)})")
                rows.append((reader.line_num, row))
    except csv.Error as exc:
        raise InputError(f"{path}: row {reader.line_num}: not valid CSV ({exc})") from None
    if not rows:
        raise InputError(f"{path}: no data rows after the header")
    return header, rows


def int_cells(path, header, rows, cols, rule):
    """The columns ``cols`` (header indices) of ``rows`` as an int64 array (T, len(cols)).

    A cell that is not an integer is an error naming its row and column; ``rule`` says what
    is allowed (e.g. ``"an integer code in [0, 4095]"``).
    """
    def cell(text):
        if not _INTEGER.fullmatch(text):
            raise ValueError(text)
        return int(text)
    try:
        return np.array([[cell(r[c]) for c in cols] for _, r in rows], dtype=np.int64).reshape(len(rows), len(cols))
    except (ValueError, OverflowError):
        pass
    for row_no, r in rows:      # slow path, only to name the bad cell
        for c in cols:
            try:
                np.int64(cell(r[c]))
            except (ValueError, OverflowError):
                raise InputError(f"{path}: row {row_no}, column {header[c]}: {r[c].strip()!r} is not "
                                 f"{rule}") from None
    raise AssertionError("unreachable: every cell converted")


def read_adc_csv(path, adc_bits):
    """Return (adc_v, adc_i) as uint16 arrays, validating every cell.

    Parameters
    ----------
    path : str
        CSV file with the header ``adc_v,adc_i`` (either order; no other column).
    adc_bits : int
        ADC resolution; codes must be in [0, 2**adc_bits - 1].
    """
    hi = (1 << adc_bits) - 1
    header, rows = read_rows(path, "ADC file", COLUMNS, COLUMNS)
    cols = [header.index(c) for c in COLUMNS]
    codes = int_cells(path, header, rows, cols, f"an integer code in [0, {hi}]")
    bad = np.flatnonzero(((codes < 0) | (codes > hi)).any(axis=1))
    if bad.size:
        k = int(bad[0])
        c = int(np.flatnonzero((codes[k] < 0) | (codes[k] > hi))[0])
        raise InputError(f"{path}: row {rows[k][0]}, column {COLUMNS[c]}: {codes[k, c]} is outside "
                         f"[0, {hi}] for a {adc_bits}-bit ADC")
    arr = codes.astype(np.uint16)
    return arr[:, 0], arr[:, 1]

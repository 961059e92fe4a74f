"""Read ADC-code CSV files (header ``adc_v,adc_i``) with one-line errors naming row and column."""
import csv

import numpy as np

from harness.errors import InputError

COLUMNS = ("adc_v", "adc_i")


def read_adc_csv(path, adc_bits):
    """Return (adc_v, adc_i) as uint16 arrays, validating every cell.

    Parameters
    ----------
    path : str
        CSV file with a header holding at least ``adc_v`` and ``adc_i``.
    adc_bits : int
        ADC resolution; codes must be in [0, 2**adc_bits - 1].
    """
    hi = (1 << adc_bits) - 1
    try:
        f = open(path, newline="")
    except OSError as exc:
        raise InputError(f"{path}: cannot read: {exc.strerror}") from exc
    with f:
        reader = csv.reader(f)
        header = next(reader, None)
        if header is None:
            raise InputError(f"{path}: empty file; expected a header line 'adc_v,adc_i'")
        header = [h.strip() for h in header]
        for col in COLUMNS:
            if col not in header:
                raise InputError(f"{path}: row 1: missing column '{col}' (header must hold adc_v,adc_i)")
        cols = [header.index(c) for c in COLUMNS]
        values = []
        for row_no, row in enumerate(reader, start=2):
            if not row or all(not c.strip() for c in row):
                continue
            if len(row) != len(header):
                raise InputError(f"{path}: row {row_no}: {len(row)} fields, the header has "
                                 f"{len(header)} ({','.join(header)})")
            pair = []
            for col, name in zip(cols, COLUMNS):
                cell = row[col].strip() if col < len(row) else ""
                try:
                    code = int(cell)
                except ValueError:
                    raise InputError(f"{path}: row {row_no}, column {name}: {cell!r} is not an "
                                     f"integer code in [0, {hi}]") from None
                if not 0 <= code <= hi:
                    raise InputError(f"{path}: row {row_no}, column {name}: {code} is outside "
                                     f"[0, {hi}] for a {adc_bits}-bit ADC")
                pair.append(code)
            values.append(pair)
    if not values:
        raise InputError(f"{path}: no data rows after the header")
    arr = np.array(values, dtype=np.uint16)
    return arr[:, 0], arr[:, 1]

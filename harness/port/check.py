"""Check a firmware port against golden vectors bit for bit: its C sources, or a log from the device.

A port check compares, after every sample, the command ld_step returned and
every state field; a log check compares the columns the log holds (at least
``adc_v,adc_i,cmd``). Both use no tolerance and stop at the first sample where
anything differs; it is reported by its CSV row (the header is row 1).
"""
from dataclasses import dataclass

import numpy as np

from algo.state import STATE_FIELDS, STATUS_NAMES
from harness.errors import InputError
from harness.loop.adc_csv import int_cells, read_rows
from harness.port.vector_files import COLUMNS, find_sets, params_from_note, read_note, read_set
from harness.loop.replay import model_trace

#: Samples shown before a divergence.
CONTEXT = 3
#: Labels of the compared columns (``cmd`` is both the return value and a state field).
LABELS = ["command"] + list(STATE_FIELDS)
U16_MAX = 0xFFFF
#: Columns a device log must hold; it may add any other of COLUMNS (``command`` is ld_step's
#: return value, ``cmd`` the state field: the same number).
LOG_REQUIRED = ("adc_v", "adc_i", "cmd")


@dataclass
class Divergence:
    """First sample of ``file`` where ``got`` differs from ``rows`` (expected, COLUMNS layout).

    ``got`` holds the compared columns ``compared`` (indices into LABELS; all of them for a
    port); ``row_numbers`` the CSV row of every sample.
    """
    file: str
    index: int
    rows: np.ndarray
    got: np.ndarray
    row_numbers: np.ndarray
    compared: tuple = tuple(range(len(LABELS)))


@dataclass
class Result:
    """Outcome of a check: samples and files compared, the first divergence if any, and the
    compared columns (names; None: the command and every state field)."""
    samples: int
    files: int
    divergence: object = None
    compared: tuple = None


def first_divergence(expected, got):
    """Index of the first row where ``got`` differs from ``expected`` (both (T, K)), or None."""
    bad = (expected != got).any(axis=1)
    return int(np.argmax(bad)) if bad.any() else None


def vector_rows(n):
    """CSV row numbers of the ``n`` samples of a vector file (header row 1, no blank rows)."""
    return np.arange(2, n + 2)


def _check_inputs(path, rows, row_numbers):
    bad = np.flatnonzero((rows[:, :2] < 0).any(axis=1) | (rows[:, :2] > U16_MAX).any(axis=1))
    if bad.size:
        k = int(bad[0])
        raise InputError(f"{path}: row {row_numbers[k]}: ADC codes must be in [0, {U16_MAX}], got "
                         f"adc_v={rows[k, 0]} adc_i={rows[k, 1]}")


def check_port(vec_dir, c_dir):
    """Build the port in ``c_dir`` and replay every vector set of ``vec_dir`` through it."""
    from c_ref.port_build import PortError, build_port
    sets = [(note, read_set(note)) for note in find_sets(vec_dir)]
    try:
        port = build_port(c_dir)
    except PortError as exc:
        raise InputError(str(exc)) from None
    samples = files = 0
    for note, (params, vectors) in sets:
        for name, rows in vectors:
            _check_inputs(name, rows, vector_rows(len(rows)))
            got = port.trace(params, rows[:, 0], rows[:, 1], STATE_FIELDS)
            k = first_divergence(rows[:, 2:], got)
            if k is not None:
                return Result(samples + k, files, Divergence(name, k, rows, got, vector_rows(len(rows))))
            samples, files = samples + len(rows), files + 1
    return Result(samples, files)


def log_params(vec_dir=None, config=None):
    """Params for a log check: from an algorithm config, else from the one vector set in ``vec_dir``."""
    if config is not None:
        from algo.params import derive
        from harness.scenario.algo_toml import load_algo_config
        return derive(load_algo_config(config))
    if vec_dir is None:
        raise InputError("--log needs the params: give VECTORS_DIR or --config ALGO.toml")
    notes = find_sets(vec_dir)
    found = {}
    for path in notes:
        p = params_from_note(read_note(path), path)
        found.setdefault(p.fingerprint(), p)
    if len(found) > 1:
        raise InputError(f"{vec_dir}: vector sets with {len(found)} different params; "
                         f"give --config ALGO.toml for the log")
    return found.popitem()[1]


def read_log(log_path):
    """A device log: (names of its compared columns, ADC codes (T, 2), compared values (T, K), row numbers).

    The header must hold adc_v, adc_i and cmd and may add any other vector column, in any order.
    """
    header, rows = read_rows(log_path, "log", COLUMNS, LOG_REQUIRED)
    names = [h for h in header if h not in ("adc_v", "adc_i")]
    cols = [header.index("adc_v"), header.index("adc_i")] + [header.index(h) for h in names]
    values = int_cells(log_path, header, rows, cols, "an integer")
    return names, values[:, :2], values[:, 2:], np.array([n for n, _ in rows])


def check_log(log_path, params):
    """Replay a device log's ADC codes through the model and compare the columns the log holds."""
    names, adc, got, row_numbers = read_log(log_path)
    _check_inputs(log_path, adc, row_numbers)
    want = model_trace(params, adc[:, 0], adc[:, 1])
    compared = tuple(LABELS.index(n) for n in names)
    k = first_divergence(want[:, compared], got)
    if k is not None:
        # For a log the model is the reference and the device what was "got".
        expected = np.column_stack([adc, want])
        return Result(k, 0, Divergence(log_path, k, expected, got, row_numbers, compared), tuple(names))
    return Result(len(adc), 1, compared=tuple(names))


def format_divergence(d, got_label="got"):
    """Human-readable report: the CSV row, the inputs, every compared value, the samples before it."""
    k, exp = d.index, d.rows[d.index, 2:]
    got = dict(zip(d.compared, d.got[k]))
    differ = [LABELS[c] for c in d.compared if exp[c] != got[c]]
    col = {f: 3 + n for n, f in enumerate(STATE_FIELDS)}
    window = int(d.rows[k - 1, col["windows"]]) if k else 0
    pos = int(d.rows[k - 1, col["count"]]) if k else 0
    where = f"sample {pos} of window {window}" + (", the window end" if d.rows[k, col["count"]] == 0 else "")
    lines = [f"first divergence in {d.file} at row {d.row_numbers[k]} ({where}; {k} samples bit-exact "
             f"before it)",
             f"  inputs: adc_v={d.rows[k, 0]} adc_i={d.rows[k, 1]}",
             f"  differs: {', '.join(differ)}",
             f"    {'field':<16}{'expected':>14}{got_label:>14}"]
    for c in d.compared:
        mark = "*" if exp[c] != got[c] else " "
        note = "   <-- differs" if exp[c] != got[c] else ""
        lines.append(f"  {mark} {LABELS[c]:<16}{exp[c]:>14}{got[c]:>14}{note}")
    if len(d.compared) < len(LABELS):
        lines.append(f"  ({len(LABELS) - len(d.compared)} of the {len(LABELS)} columns are not in the "
                     f"{got_label} and were not compared)")
    status = exp[1 + STATE_FIELDS.index("status")]
    lines.append(f"  (expected status after this sample: {STATUS_NAMES.get(int(status), status)})")
    if k:
        lines.append(f"  the {min(k, CONTEXT)} samples before it (bit-exact; expected values):")
        lines.append(f"    {'row':>8}{'adc_v':>8}{'adc_i':>8}{'cmd':>8}{'count':>8}{'status':>8}")
        for j in range(max(0, k - CONTEXT), k):
            r = d.rows[j]
            lines.append(f"    {d.row_numbers[j]:>8}{r[0]:>8}{r[1]:>8}{r[2]:>8}"
                         f"{r[col['count']]:>8}{r[col['status']]:>8}")
    return "\n".join(lines)
